//! The spectrum traces: the newest row, a running average, and the peak and minimum holds
//! (per-bin maximum and minimum over the rows since the last reset).
//!
//! The average is the shared [`ExpAverage`] (weight `α` per row, started as a plain mean so the
//! first rows are not biased towards zero). Its χ² degrees of freedom grow with the rows it holds,
//! up to `ν·(2 − α)/α` for rows of `ν` each (the equivalent number of averages of an exponential
//! average of independent estimates, common practice); measurements on it use that figure.
//! A change of FFT size, window or rate restarts all three, since their bins no longer line up.

use crate::dsp::average::ExpAverage;
use crate::dsp::{Spectrum, WindowKind};

/// Weight of the newest row in the average: about the last ten rows count.
pub const AVERAGE_WEIGHT: f64 = 0.1;

/// What must match for rows to be combined.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Geometry {
    fft_size: usize,
    window: WindowKind,
    sample_rate_hz: f64,
    center_hz: f64,
}

impl Geometry {
    fn of(s: &Spectrum) -> Geometry {
        Geometry {
            fft_size: s.fft_size,
            window: s.window,
            sample_rate_hz: s.sample_rate_hz,
            center_hz: s.center_hz,
        }
    }
}

#[derive(Clone, Debug)]
pub struct Traces {
    geometry: Option<Geometry>,
    /// The newest row as received (its PSD is the current trace).
    current: Option<Spectrum>,
    average: ExpAverage,
    hold: Vec<f64>,
    min_hold: Vec<f64>,
}

impl Default for Traces {
    fn default() -> Traces {
        Traces {
            geometry: None,
            current: None,
            average: ExpAverage::new(AVERAGE_WEIGHT),
            hold: Vec::new(),
            min_hold: Vec::new(),
        }
    }
}

impl Traces {
    /// Adds a row; returns true when the traces restarted (new geometry).
    pub fn push(&mut self, spec: Spectrum) -> bool {
        let g = Geometry::of(&spec);
        let restarted = self.geometry != Some(g);
        if restarted {
            self.geometry = Some(g);
            self.average.restart();
            self.hold = spec.psd.clone();
            self.min_hold = spec.psd.clone();
        } else {
            for ((h, m), p) in self.hold.iter_mut().zip(self.min_hold.iter_mut()).zip(&spec.psd) {
                *h = h.max(*p);
                *m = m.min(*p);
            }
        }
        self.average.push(&spec.psd);
        self.current = Some(spec);
        restarted
    }

    /// Starts both hold traces again from the newest row.
    pub fn reset_hold(&mut self) {
        if let Some(c) = &self.current {
            self.hold = c.psd.clone();
            self.min_hold = c.psd.clone();
        }
    }

    pub fn min_hold_psd(&self) -> &[f64] {
        &self.min_hold
    }

    pub fn current(&self) -> Option<&Spectrum> {
        self.current.as_ref()
    }

    pub fn average_psd(&self) -> &[f64] {
        self.average.psd()
    }

    pub fn hold_psd(&self) -> &[f64] {
        &self.hold
    }

    /// The average as a spectrum of its own, with its equivalent degrees of freedom, for
    /// measurements.
    pub fn average_spectrum(&self) -> Option<Spectrum> {
        let cur = self.current.as_ref()?;
        let equivalent = self.average.equivalent_averages();
        let mut s = cur.clone();
        s.psd.clear();
        s.psd.extend_from_slice(self.average.psd());
        s.dof = cur.dof * equivalent;
        s.frames = cur.frames * equivalent.round() as u64;
        Some(s)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::Window;

    fn row(level: f64, n: usize, window: WindowKind) -> Spectrum {
        let w = Window::new(window, n);
        let power = vec![level; n];
        Spectrum::from_power_sum(&power, 1, 2.0, &w, 1e6, 0.0, 0, n as u64)
    }

    #[test]
    fn average_starts_as_a_mean_then_weights_the_newest() {
        let mut t = Traces::default();
        assert!(t.push(row(1.0, 64, WindowKind::Hann)));
        assert!(!t.push(row(3.0, 64, WindowKind::Hann)));
        let unit = row(1.0, 64, WindowKind::Hann).psd[0];
        // Two rows: plain mean (1 + 3)/2.
        assert!((t.average_psd()[0] / unit - 2.0).abs() < 1e-12);
        for _ in 0..100 {
            t.push(row(3.0, 64, WindowKind::Hann));
        }
        assert!((t.average_psd()[0] / unit - 3.0).abs() < 1e-3);
        // Hold keeps the largest; reset brings it back to the newest row.
        t.push(row(0.5, 64, WindowKind::Hann));
        assert!((t.hold_psd()[0] / unit - 3.0).abs() < 1e-12);
        t.reset_hold();
        assert!((t.hold_psd()[0] / unit - 0.5).abs() < 1e-12);
    }

    #[test]
    fn min_hold_keeps_the_lowest_until_reset() {
        let mut t = Traces::default();
        t.push(row(2.0, 64, WindowKind::Hann));
        t.push(row(0.25, 64, WindowKind::Hann));
        t.push(row(5.0, 64, WindowKind::Hann));
        let unit = row(1.0, 64, WindowKind::Hann).psd[0];
        assert!((t.min_hold_psd()[0] / unit - 0.25).abs() < 1e-12);
        assert!((t.hold_psd()[0] / unit - 5.0).abs() < 1e-12);
        t.reset_hold();
        assert!((t.min_hold_psd()[0] / unit - 5.0).abs() < 1e-12);
    }

    #[test]
    fn a_new_window_restarts_the_traces() {
        let mut t = Traces::default();
        t.push(row(1.0, 64, WindowKind::Hann));
        t.push(row(1.0, 64, WindowKind::Hann));
        assert!(t.push(row(9.0, 64, WindowKind::Blackman)));
        let unit = row(1.0, 64, WindowKind::Blackman).psd[0];
        assert!((t.average_psd()[0] / unit - 9.0).abs() < 1e-12);
        assert!(t.push(row(1.0, 128, WindowKind::Blackman)));
        assert_eq!(t.average_psd().len(), 128);
    }

    #[test]
    fn average_spectrum_counts_its_degrees_of_freedom() {
        let mut t = Traces::default();
        for _ in 0..5 {
            t.push(row(1.0, 64, WindowKind::Hann));
        }
        assert_eq!(t.average_spectrum().unwrap().dof, 10.0);
        for _ in 0..100 {
            t.push(row(1.0, 64, WindowKind::Hann));
        }
        // (2 − 0.1)/0.1 = 19 equivalent rows of 2 dof each.
        assert!((t.average_spectrum().unwrap().dof - 38.0).abs() < 1e-9);
    }
}
