//! Windowed FFT of one frame, planned once and run without allocation.

use super::window::{Window, WindowKind};
use num_complex::Complex32;
use rustfft::{Fft, FftPlanner};
use std::sync::Arc;

/// Smallest and largest FFT size accepted (any length in between; rustfft handles primes too).
pub const MIN_FFT: usize = 16;
pub const MAX_FFT: usize = 1 << 20;

/// One planned transform with its window and scratch space. Per-frame calls allocate nothing.
pub struct Stft {
    window: Window,
    fft: Arc<dyn Fft<f32>>,
    buf: Vec<Complex32>,
    scratch: Vec<Complex32>,
}

impl Stft {
    pub fn new(fft_size: usize, kind: WindowKind) -> Stft {
        let mut planner = FftPlanner::new();
        let fft = planner.plan_fft_forward(fft_size);
        let scratch = vec![Complex32::default(); fft.get_inplace_scratch_len()];
        Stft {
            window: Window::new(kind, fft_size),
            fft,
            buf: vec![Complex32::default(); fft_size],
            scratch,
        }
    }

    pub fn window(&self) -> &Window {
        &self.window
    }

    pub fn fft_size(&self) -> usize {
        self.buf.len()
    }

    /// Windows `frame` (exactly `fft_size` samples), transforms it and adds `|X[k]|²` to `acc`
    /// (FFT order).
    pub fn accumulate_power(&mut self, frame: &[Complex32], acc: &mut [f64]) {
        self.transform(frame);
        for (a, x) in acc.iter_mut().zip(&self.buf) {
            *a += x.norm_sqr() as f64;
        }
    }

    /// Adds the power of frames `first .. end` of `data` (starting every `hop` samples) into
    /// `acc`. The frames are summed in f32 in `partial` (as long as `acc`), which vectorises
    /// better than a per-bin f64 sum, and folded into the f64 total once per call; a few dozen
    /// f32 additions lose under 1e-5 relative, far below the statistical scatter of any average.
    pub fn accumulate_frames(
        &mut self,
        data: &[Complex32],
        first: usize,
        end: usize,
        hop: usize,
        partial: &mut [f32],
        acc: &mut [f64],
    ) {
        let n = self.fft_size();
        partial.iter_mut().for_each(|p| *p = 0.0);
        for f in first..end {
            self.transform(&data[f * hop..f * hop + n]);
            for (p, x) in partial.iter_mut().zip(&self.buf) {
                *p += x.norm_sqr();
            }
        }
        for (a, p) in acc.iter_mut().zip(partial.iter()) {
            *a += *p as f64;
        }
    }

    /// Like [`accumulate_power`](Self::accumulate_power) but also keeps the frame's own power
    /// (FFT order) in `frame_power`, for waterfall rows and hold traces.
    pub fn frame_power(&mut self, frame: &[Complex32], frame_power: &mut [f32]) {
        self.transform(frame);
        for (p, x) in frame_power.iter_mut().zip(&self.buf) {
            *p = x.norm_sqr();
        }
    }

    fn transform(&mut self, frame: &[Complex32]) {
        debug_assert_eq!(frame.len(), self.buf.len());
        for ((b, s), w) in self.buf.iter_mut().zip(frame).zip(&self.window.coeffs) {
            *b = s * *w;
        }
        self.fft.process_with_scratch(&mut self.buf, &mut self.scratch);
    }
}

/// Equivalent degrees of freedom of a Welch average of `frames` periodograms taken `hop` samples
/// apart with this window, for Gaussian noise:
/// `ν = 2K / (1 + 2 Σ_{m=1}^{K−1} (1 − m/K) ρ²(m·hop))`, `ρ(l) = Σ w[n]w[n+l] / Σ w²`
/// (Welch 1967; Percival & Walden 1993, eq. 292b — from memory).
pub fn welch_dof(window: &Window, hop: usize, frames: u64) -> f64 {
    let k = frames.max(1) as f64;
    let n = window.len();
    let mut corr = 0.0;
    let mut m = 1u64;
    while m < frames && (m as usize) * hop < n {
        let lag = m as usize * hop;
        let c: f64 = window.coeffs[..n - lag]
            .iter()
            .zip(&window.coeffs[lag..])
            .map(|(a, b)| *a as f64 * *b as f64)
            .sum::<f64>()
            / window.s2;
        corr += (1.0 - m as f64 / k) * c * c;
        m += 1;
    }
    2.0 * k / (1.0 + 2.0 * corr)
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use std::f64::consts::PI;

    /// Plain O(N²) DFT: the reference every FFT result is checked against.
    pub(crate) fn naive_dft(x: &[Complex32]) -> Vec<num_complex::Complex64> {
        let n = x.len();
        (0..n)
            .map(|k| {
                x.iter()
                    .enumerate()
                    .map(|(i, s)| {
                        let ph = -2.0 * PI * (k * i % n) as f64 / n as f64;
                        num_complex::Complex64::new(s.re as f64, s.im as f64)
                            * num_complex::Complex64::from_polar(1.0, ph)
                    })
                    .sum()
            })
            .collect()
    }

    /// Small deterministic generator so tests need no RNG crate.
    pub(crate) fn seeded(n: usize, seed: u64) -> Vec<Complex32> {
        let mut s = seed;
        let mut next = || {
            s = s.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
            ((s >> 33) as f64 / (1u64 << 31) as f64 - 0.5) as f32
        };
        (0..n).map(|_| Complex32::new(next(), next())).collect()
    }

    #[test]
    fn power_matches_a_plain_dft_for_every_window_and_awkward_sizes() {
        for &n in &[16usize, 17, 60, 97, 256, 1000] {
            for kind in WindowKind::ALL {
                let x = seeded(n, n as u64);
                let mut stft = Stft::new(n, kind);
                let mut acc = vec![0.0; n];
                stft.accumulate_power(&x, &mut acc);
                let w = Window::new(kind, n);
                let windowed: Vec<Complex32> =
                    x.iter().zip(&w.coeffs).map(|(s, w)| s * *w).collect();
                let reference = naive_dft(&windowed);
                for (k, (a, r)) in acc.iter().zip(&reference).enumerate() {
                    let r = r.norm_sqr();
                    assert!(
                        (a - r).abs() <= 1e-4 * r.max(1.0),
                        "n={n} {kind}: first differing bin {k}: fft {a} vs dft {r}"
                    );
                }
            }
        }
    }

    #[test]
    fn welch_dof_limits() {
        // No overlap: frames are independent, ν = 2K exactly.
        let w = Window::new(WindowKind::Hann, 256);
        assert!((welch_dof(&w, 256, 10) - 20.0).abs() < 1e-9);
        // A single periodogram has 2 degrees of freedom (complex Gaussian: exponential power).
        assert!((welch_dof(&w, 128, 1) - 2.0).abs() < 1e-9);
        // Hann at 50% overlap: ρ(N/2) = 1/6 for the periodic window, so for large K
        // ν ≈ 2K / (1 + 2/36) (Welch 1967; Harris 1978 table lists the 50%-overlap correlation
        // of Hann as 16.7%).
        let nu = welch_dof(&w, 128, 1000);
        let expect = 2000.0 / (1.0 + 2.0 * (1.0 - 1.0 / 1000.0) / 36.0);
        assert!((nu - expect).abs() / expect < 1e-3, "{nu} vs {expect}");
    }
}
