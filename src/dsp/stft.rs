//! Windowed FFT of one frame, planned once and run without allocation.

use super::window::{Window, WindowKind};
use crate::kernels::Kernels;
use num_complex::Complex32;
use rustfft::{Fft, FftPlanner};
use std::sync::Arc;

/// Smallest and largest FFT size accepted (any length in between; rustfft handles primes too).
pub const MIN_FFT: usize = 16;
pub const MAX_FFT: usize = 1 << 20;

/// Frames `0, 1, 2, …` of `n` samples starting every `hop` samples of a stream held in two
/// slices: frames `0 .. split` lie in `head` (at `k·hop`), the rest in `body` (at
/// `k·hop − body_at`). This lets the engine transform frames straight out of the block the
/// reader delivered, copying only the few that straddle two blocks into `head`.
#[derive(Clone, Copy, Debug)]
pub struct FrameSet<'a> {
    pub head: &'a [Complex32],
    pub split: usize,
    pub body: &'a [Complex32],
    pub body_at: usize,
    pub hop: usize,
    pub n: usize,
}

impl<'a> FrameSet<'a> {
    /// Frames of one contiguous slice.
    pub fn contiguous(data: &'a [Complex32], n: usize, hop: usize) -> FrameSet<'a> {
        FrameSet { head: data, split: usize::MAX, body: &[], body_at: 0, hop, n }
    }

    /// The samples of frame `k`.
    #[inline]
    pub fn frame(&self, k: usize) -> &'a [Complex32] {
        let at = k * self.hop;
        if k < self.split {
            &self.head[at..at + self.n]
        } else {
            let at = at - self.body_at;
            &self.body[at..at + self.n]
        }
    }
}

/// One planned transform with its window and scratch space. Per-frame calls allocate nothing.
pub struct Stft {
    window: Window,
    fft: Arc<dyn Fft<f32>>,
    buf: Vec<Complex32>,
    scratch: Vec<Complex32>,
    kernels: Kernels,
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
            kernels: Kernels::detect(),
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

    /// Sets `out` to the summed power `Σ |X[k]|²` (f32, FFT order) of frames `first .. end` of
    /// `frames`. Sums of a few frames in f32 vectorise better than per-bin f64 sums and lose
    /// under 1e-6 relative; the engine folds each group into its f64 total.
    pub fn sum_frames(&mut self, frames: &FrameSet<'_>, first: usize, end: usize, out: &mut [f32]) {
        out.iter_mut().for_each(|p| *p = 0.0);
        for k in first..end {
            self.transform(frames.frame(k));
            self.kernels.add_power(out, &self.buf);
        }
    }

    fn transform(&mut self, frame: &[Complex32]) {
        debug_assert_eq!(frame.len(), self.buf.len());
        self.kernels.window(&mut self.buf, frame, &self.window.coeffs);
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

    /// Some reproducible signal (unit-power white noise from the test kit) for checks that hold
    /// for any input: FFT against DFT, one engine against another.
    pub(crate) fn seeded(n: usize, seed: u64) -> Vec<Complex32> {
        crate::testkit::noise(n, 1.0, seed)
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
