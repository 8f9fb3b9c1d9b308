//! Combines consecutive spectra into one, as if a single engine had averaged all their frames.
//!
//! `measure` with channels needs both the short rows (for occupancy) and the average of the whole
//! input (for power and occupied bandwidth); summing the rows gives the latter without running
//! the FFTs twice.

use super::spectrum::Spectrum;
use super::stft::welch_dof;
use super::window::Window;

/// A running frame-weighted sum of spectra from one engine.
#[derive(Clone, Debug, Default)]
pub struct SpectrumSum {
    /// `Σ psd · frames`.
    weighted: Vec<f64>,
    frames: u64,
    first: Option<Spectrum>,
    end_sample: u64,
}

impl SpectrumSum {
    pub fn new() -> SpectrumSum {
        SpectrumSum::default()
    }

    /// Adds a spectrum; all must come from the same engine, in order.
    pub fn add(&mut self, s: &Spectrum) {
        if self.first.is_none() {
            self.weighted = vec![0.0; s.psd.len()];
            let mut shape = s.clone();
            shape.psd.clear();
            self.first = Some(shape);
        }
        let w = s.frames as f64;
        for (acc, p) in self.weighted.iter_mut().zip(&s.psd) {
            *acc += p * w;
        }
        self.frames += s.frames;
        self.end_sample = s.end_sample;
    }

    /// The average over every frame added, with the degrees of freedom of that many frames taken
    /// `hop` samples apart; `None` before the first spectrum.
    pub fn average(&self, hop: usize) -> Option<Spectrum> {
        let shape = self.first.as_ref()?;
        let n = self.frames.max(1) as f64;
        let window = Window::new(shape.window, shape.fft_size);
        Some(Spectrum {
            psd: self.weighted.iter().map(|p| p / n).collect(),
            frames: self.frames,
            dof: welch_dof(&window, hop, self.frames),
            end_sample: self.end_sample,
            ..shape.clone()
        })
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
}
