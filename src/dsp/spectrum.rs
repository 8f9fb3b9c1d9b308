//! The calibrated spectrum every consumer shares: the TUI, the logger and `measure`.

use super::window::{Window, WindowKind};
use std::ops::Deref;
use std::sync::Arc;

/// What every row of one analysis shares: where its bins lie and how wide they are. Built once
/// per engine and shared by reference count, so a row carries its calibration without copying it
/// and a measurement can be made on any PSD of the same shape (an emission's average, a trace)
/// without building a spectrum around it.
#[derive(Clone, Debug, PartialEq)]
pub struct Geometry {
    pub center_hz: f64,
    pub sample_rate_hz: f64,
    pub fft_size: usize,
    pub window: WindowKind,
    /// Equivalent noise bandwidth of the window, in bins.
    pub enbw_bins: f64,
    /// Resolution bandwidth: `ENBW_bins · fs / N`.
    pub rbw_hz: f64,
    /// `S2 = Σw²` of the window, for the PSD's normalisation.
    s2: f64,
}

impl Geometry {
    pub fn new(window: &Window, sample_rate_hz: f64, center_hz: f64) -> Geometry {
        let n = window.len();
        let enbw_bins = window.enbw_bins();
        Geometry {
            center_hz,
            sample_rate_hz,
            fft_size: n,
            window: window.kind,
            enbw_bins,
            rbw_hz: enbw_bins * sample_rate_hz / n as f64,
            s2: window.s2,
        }
    }

    /// The geometry of a panorama of `bins` bins of this width, centred on `center_hz` (see
    /// `measure::panorama`): `fft_size` is then the bin count and `sample_rate_hz` the span it
    /// covers, so every reading of bins and span holds; window, ENBW and RBW stay the step's.
    pub fn widened(&self, center_hz: f64, bins: usize) -> Geometry {
        Geometry {
            center_hz,
            sample_rate_hz: self.bin_hz() * bins as f64,
            fft_size: bins,
            ..self.clone()
        }
    }

    /// Width of one FFT bin in hertz.
    pub fn bin_hz(&self) -> f64 {
        self.sample_rate_hz / self.fft_size as f64
    }

    /// Absolute frequency of the centre of bin `i` (fftshift order).
    pub fn freq_of_bin(&self, i: f64) -> f64 {
        self.center_hz + (i - (self.fft_size / 2) as f64) * self.bin_hz()
    }

    /// Fractional bin index of an absolute frequency.
    pub fn bin_of_freq(&self, freq_hz: f64) -> f64 {
        (freq_hz - self.center_hz) / self.bin_hz() + (self.fft_size / 2) as f64
    }

    /// Lowest and highest frequency covered (edges of the outer bins).
    pub fn span_hz(&self) -> (f64, f64) {
        let lo = self.freq_of_bin(-0.5);
        (lo, lo + self.sample_rate_hz)
    }
}

/// An averaged power spectral density with everything needed to read it in absolute units.
///
/// `psd[i]` is in FS²/Hz (linear, full scale squared per hertz), in fftshift order: index `i`
/// lies at `center_hz + (i − ⌊N/2⌋)·fs/N`. Levels are Welch / modified-periodogram estimates,
/// `P[k] = |X[k]|² / (fs·S2)`, averaged in linear power (Heinzel et al. 2002, eq. 24).
///
/// The geometry's fields read as the spectrum's own (`spec.rbw_hz`) through `Deref`.
#[derive(Clone, Debug)]
pub struct Spectrum {
    pub geometry: Arc<Geometry>,
    pub psd: Vec<f64>,
    /// How many periodograms were averaged.
    pub frames: u64,
    /// Equivalent degrees of freedom of each bin's χ² estimate (2 per independent periodogram,
    /// fewer when overlapping frames are correlated; Welch 1967).
    pub dof: f64,
    /// Index (from the first sample of the input) of the first sample that contributed.
    pub first_sample: u64,
    /// One past the last sample that contributed.
    pub end_sample: u64,
    /// Of a panorama's row: per bin, one past the last sample of the dwell that last saw it
    /// (0: never yet), so a screen can tell a bin not refreshed in this sweep; `None` for a
    /// receiver that stays put (every bin is as new as the row).
    pub last_seen: Option<Arc<Vec<u64>>>,
}

impl Deref for Spectrum {
    type Target = Geometry;

    fn deref(&self) -> &Geometry {
        &self.geometry
    }
}

impl Spectrum {
    /// Per bin, whether it was ever in view: `None` for a receiver that stays put (every bin
    /// is); of a panorama's row, false for the bins of a hole between its steps (their PSD is 0,
    /// no level), which measurements leave out and pictures draw as a gap.
    pub fn seen(&self) -> Option<impl Iterator<Item = bool> + '_> {
        self.last_seen.as_ref().map(|l| l.iter().map(|&s| s > 0))
    }

    /// Whether some part of the band `[low_hz, high_hz]` was never in view: beyond the span,
    /// or over a bin of a panorama's hole (its bins whose centres lie in the band, or the bin
    /// nearest its centre when it is narrower than a bin).
    pub fn never_saw(&self, low_hz: f64, high_hz: f64) -> bool {
        let (lo, hi) = self.span_hz();
        // A millihertz of rounding is forgiven, as the plan check does.
        if low_hz < lo - 1e-3 || high_hz > hi + 1e-3 {
            return true;
        }
        let Some(seen) = self.last_seen.as_ref() else { return false };
        let top = seen.len().saturating_sub(1);
        let mut first = (self.bin_of_freq(low_hz).ceil().max(0.0) as usize).min(top);
        let mut last = (self.bin_of_freq(high_hz).floor().max(0.0) as usize).min(top);
        if first > last {
            first = (self.bin_of_freq(0.5 * (low_hz + high_hz)).round().max(0.0) as usize).min(top);
            last = first;
        }
        seen.get(first..=last).is_some_and(|b| b.contains(&0))
    }

    /// A spectrum of this geometry with no frames yet; its PSD is allocated once here.
    pub fn empty(geometry: Arc<Geometry>) -> Spectrum {
        let n = geometry.fft_size;
        Spectrum {
            geometry,
            psd: vec![0.0; n],
            frames: 0,
            dof: 0.0,
            first_sample: 0,
            end_sample: 0,
            last_seen: None,
        }
    }

    /// Builds a spectrum from accumulated `|X[k]|²` in FFT order (not shifted).
    #[allow(clippy::too_many_arguments)]
    pub fn from_power_sum(
        power_sum: &[f64],
        frames: u64,
        dof: f64,
        window: &Window,
        sample_rate_hz: f64,
        center_hz: f64,
        first_sample: u64,
        end_sample: u64,
    ) -> Spectrum {
        let mut s = Spectrum::empty(Arc::new(Geometry::new(window, sample_rate_hz, center_hz)));
        s.fill_from_power_sum(power_sum, frames, dof, first_sample, end_sample);
        s
    }

    /// Refills this spectrum from accumulated `|X[k]|²` in FFT order, without allocating.
    pub fn fill_from_power_sum(
        &mut self,
        power_sum: &[f64],
        frames: u64,
        dof: f64,
        first_sample: u64,
        end_sample: u64,
    ) {
        let n = power_sum.len();
        debug_assert_eq!(n, self.geometry.fft_size);
        let g = &*self.geometry;
        let scale = 1.0 / (frames.max(1) as f64 * g.sample_rate_hz * g.s2);
        let half = n / 2;
        self.psd.resize(n, 0.0);
        let (low, high) = power_sum.split_at(n - half);
        let (first, second) = self.psd.split_at_mut(half);
        for (out, p) in first.iter_mut().zip(high).chain(second.iter_mut().zip(low)) {
            *out = p * scale;
        }
        self.frames = frames;
        self.dof = dof;
        self.first_sample = first_sample;
        self.end_sample = end_sample;
    }

    /// Power of a sinusoid whose peak falls in bin `i`: `PSD·RBW`, i.e. `|X|²/S1²`
    /// (Heinzel et al. 2002: the power spectrum and the PSD differ by the ENBW).
    pub fn tone_power(&self, i: usize) -> f64 {
        self.psd[i] * self.rbw_hz
    }

    /// Total power in the captured band (the integral of the PSD), in FS².
    pub fn total_power(&self) -> f64 {
        self.psd.iter().sum::<f64>() * self.bin_hz()
    }
}
