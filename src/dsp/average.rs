//! Longer averages built from the engine's short rows, so that no consumer runs the FFTs twice.
//!
//! - [`SpectrumSum`]: `measure` with channels needs both the short rows (for occupancy) and the
//!   average of the whole input (for power and occupied bandwidth); summing the rows gives the
//!   latter as if a single engine had averaged all their frames.
//! - [`ExpAverage`]: the live monitor's average trace and the noise tracker both want a PSD that
//!   follows slow changes but not each row's noise. They share one exponential average so that
//!   its start-up and its degrees of freedom are worked out, and tested, once.

use super::spectrum::{Geometry, Spectrum};
use super::stft::welch_dof;
use super::window::Window;
use std::sync::Arc;

/// A running frame-weighted sum of spectra from one engine.
#[derive(Clone, Debug, Default)]
pub struct SpectrumSum {
    /// `Σ psd · frames`.
    weighted: Vec<f64>,
    frames: u64,
    /// Where the bins of the first spectrum lie, and where it began.
    geometry: Option<Arc<Geometry>>,
    first_sample: u64,
    end_sample: u64,
    /// Of a panorama's rows, the last one's `last_seen` (bins never in view stay 0 in every one).
    last_seen: Option<Arc<Vec<u64>>>,
}

impl SpectrumSum {
    pub fn new() -> SpectrumSum {
        SpectrumSum::default()
    }

    /// Adds a spectrum; all must come from the same engine, in order.
    pub fn add(&mut self, s: &Spectrum) {
        if self.geometry.is_none() {
            self.weighted = vec![0.0; s.psd.len()];
            self.geometry = Some(s.geometry.clone());
            self.first_sample = s.first_sample;
        }
        let w = s.frames as f64;
        for (acc, p) in self.weighted.iter_mut().zip(&s.psd) {
            *acc += p * w;
        }
        self.frames += s.frames;
        self.end_sample = s.end_sample;
        self.last_seen.clone_from(&s.last_seen);
    }

    /// The average over every frame added, with the degrees of freedom of that many frames taken
    /// `hop` samples apart; `None` before the first spectrum.
    pub fn average(&self, hop: usize) -> Option<Spectrum> {
        let geometry = self.geometry.as_ref()?;
        let n = self.frames.max(1) as f64;
        let window = Window::new(geometry.window, geometry.fft_size);
        Some(Spectrum {
            psd: self.weighted.iter().map(|p| p / n).collect(),
            frames: self.frames,
            dof: welch_dof(&window, hop, self.frames),
            end_sample: self.end_sample,
            first_sample: self.first_sample,
            geometry: geometry.clone(),
            last_seen: self.last_seen.clone(),
        })
    }
}

/// An exponential average of PSD rows in linear power, started as a plain mean.
///
/// Row `r` (counting from 1) enters with weight `max(α, 1/r)`: the first `1/α` rows make a
/// cumulative mean, so the start is not biased towards zero, and later rows an exponential average
/// that forgets with time constant `1/α` rows.
#[derive(Clone, Debug)]
pub struct ExpAverage {
    alpha: f64,
    psd: Vec<f64>,
    rows: u64,
}

impl ExpAverage {
    /// `alpha` is the weight of a new row once the start-up mean is over (kept in `[1e-6, 1]`).
    pub fn new(alpha: f64) -> ExpAverage {
        ExpAverage { alpha: alpha.clamp(1e-6, 1.0), psd: Vec::new(), rows: 0 }
    }

    /// Adds a row. A row of another length (new FFT size) starts the average again from it.
    pub fn push(&mut self, row: &[f64]) {
        if self.rows == 0 || self.psd.len() != row.len() {
            self.psd.clear();
            self.psd.extend_from_slice(row);
            self.rows = 1;
            return;
        }
        self.rows += 1;
        let w = self.alpha.max(1.0 / self.rows as f64);
        for (a, p) in self.psd.iter_mut().zip(row) {
            *a += w * (p - *a);
        }
    }

    /// Forgets every row: the next one starts the average (its buffer is kept).
    pub fn restart(&mut self) {
        self.rows = 0;
    }

    /// The average so far (empty before the first row).
    pub fn psd(&self) -> &[f64] {
        &self.psd
    }

    /// How many independent rows the average is worth: the rows so far, at most `(2 − α)/α`, the
    /// steady-state variance ratio of an exponential average of independent values (common
    /// practice). Multiply by a row's degrees of freedom to get the average's.
    pub fn equivalent_averages(&self) -> f64 {
        (self.rows as f64).min((2.0 - self.alpha) / self.alpha)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::stft::tests::seeded;
    use crate::dsp::{Engine, EngineConfig, WindowKind};

    #[test]
    fn summed_rows_equal_one_average_of_everything() {
        let x = seeded(50_000, 8);
        let cfg = |k| EngineConfig {
            fft_size: 512,
            window: WindowKind::Hann,
            overlap: 0.5,
            frames_per_output: k,
        };
        let mut whole = Vec::new();
        let mut e = Engine::new(cfg(None), 1e6, 5e6);
        e.push(0, &x, &mut |s| whole.push(s.clone()));
        e.finish(&mut |s| whole.push(s.clone()));
        let mut sum = SpectrumSum::new();
        let mut e = Engine::new(cfg(Some(7)), 1e6, 5e6);
        e.push(0, &x, &mut |s| sum.add(s));
        e.finish(&mut |s| sum.add(s));
        let (a, b) = (&whole[0], sum.average(256).unwrap());
        assert_eq!(
            (a.frames, a.first_sample, a.end_sample),
            (b.frames, b.first_sample, b.end_sample)
        );
        assert!((a.dof - b.dof).abs() < 1e-9 * a.dof);
        // The engine sums frames in f32 batches (see `Stft::sum_frames`), so the two
        // groupings agree to f32 rounding.
        for (p, q) in a.psd.iter().zip(&b.psd) {
            assert!((p - q).abs() <= 1e-5 * p.abs().max(1e-30), "{p} vs {q}");
        }
        assert!(SpectrumSum::new().average(256).is_none());
    }

    #[test]
    fn the_exponential_average_keeps_the_variance_its_equivalent_count_predicts() {
        // Rows of independent unit-mean exponential values (one periodogram bin of noise each):
        // in the steady state an exponential average of weight α has variance α/(2 − α) times a
        // single value's (the equivalent number of averages; common practice, from the sum of the
        // geometric series of squared weights). Checked over 4000 bins, i.e. 4000 trials.
        let alpha = 0.1;
        let mut avg = ExpAverage::new(alpha);
        let mut rng = crate::testkit::Rng::new(3);
        let mut row = vec![0.0; 4000];
        for _ in 0..300 {
            row.iter_mut().for_each(|v| *v = rng.exponential(1.0));
            avg.push(&row);
        }
        let psd = avg.psd();
        let mean = psd.iter().sum::<f64>() / psd.len() as f64;
        let var = psd.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (psd.len() - 1) as f64;
        assert!((avg.equivalent_averages() - 19.0).abs() < 1e-12);
        eprintln!("variance × equivalent averages: {:.4} (1 expected)", var * 19.0);
        // The sample variance of 4000 values has a relative standard error of about
        // √((2 + κ)/4000) ≈ 2.4 %, κ = 6/19 the excess kurtosis of a Gamma(19); allow 10 %.
        assert!((var * avg.equivalent_averages() - 1.0).abs() < 0.10, "{var}");
        assert!((mean - 1.0).abs() < 0.02, "{mean}");
        // A row of another length starts again from that row.
        avg.push(&[2.0, 4.0]);
        assert_eq!((avg.psd(), avg.equivalent_averages()), (&[2.0, 4.0][..], 1.0));
    }
}
