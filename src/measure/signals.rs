//! Finding the signals in a spectrum: runs of bins standing clear of the noise floor.
//!
//! A run of bins above an *edge* threshold is one signal (small gaps are bridged so one FM
//! emission with its sidebands is not split); it is reported if its strongest bin clears a
//! *detection* threshold. Both thresholds come from the χ² statistics of the PSD (see
//! [`super::stats`]): the detection threshold makes a false detection in a noise-only spectrum
//! unlikely (1 % per spectrum), and neither is lower than a few dB, so ripple is not a signal.
//!
//! For each signal we report the level of a sinusoid at its peak (scalloping-corrected with the
//! window's own response), its SNR against the noise in one RBW, its total power, and its occupied
//! bandwidth (ITU-R SM.328, 99 %) over the run widened by the window's main lobe.

use super::band::{band_power, occupied_bandwidth, Edges};
use super::stats::gamma_quantile_unit_mean;
use crate::dsp::{Spectrum, Window};
use crate::units::db;

/// One detected signal.
#[derive(Clone, Debug, PartialEq)]
pub struct Signal {
    /// Interpolated frequency of the peak, absolute Hz.
    pub freq_hz: f64,
    /// Power of a sinusoid at the peak, dBFS (scalloping-corrected).
    pub level_dbfs: f64,
    /// `level` over the noise power in one RBW, dB.
    pub snr_db: f64,
    /// Total power of the run of bins, dBFS.
    pub power_dbfs: f64,
    /// 99 % occupied bandwidth of the run.
    pub obw: Edges,
    /// Bin of the peak (fftshift order).
    pub peak_bin: usize,
}

/// Settings for [`find_signals`].
#[derive(Clone, Copy, Debug)]
pub struct Detection {
    /// Lowest peak SNR (dB over the noise density at the peak bin) that counts.
    pub min_snr_db: f64,
    /// Percentage for the occupied bandwidth.
    pub obw_percent: f64,
}

impl Default for Detection {
    fn default() -> Self {
        Detection { min_snr_db: 6.0, obw_percent: 99.0 }
    }
}

/// Finds up to `max` signals, strongest first. `floor` is the noise density (FS²/Hz) and `window`
/// must be the spectrum's own window at its size.
pub fn find_signals(
    spec: &Spectrum,
    window: &Window,
    floor: f64,
    max: usize,
    det: Detection,
) -> Vec<Signal> {
    let n = spec.fft_size;
    if n < 3 || floor <= 0.0 || max == 0 {
        return Vec::new();
    }
    let a = (spec.dof / 2.0).max(0.5);
    let edge = floor * gamma_quantile_unit_mean(0.99, a).max(2.0);
    let detect = floor
        * gamma_quantile_unit_mean(1.0 - 0.01 / n as f64, a).max(10f64.powf(det.min_snr_db / 10.0));
    let gap = (2.0 * spec.enbw_bins).ceil() as usize;
    let widen = spec.enbw_bins.ceil();

    let mut found = Vec::new();
    let mut i = 0;
    while i < n {
        if spec.psd[i] <= edge {
            i += 1;
            continue;
        }
        // Extend the run, bridging gaps of up to `gap` bins.
        let start = i;
        let mut end = i;
        let mut j = i + 1;
        while j < n && j <= end + gap + 1 {
            if spec.psd[j] > edge {
                end = j;
            }
            j += 1;
        }
        i = end + 1;
        let peak = (start..=end).max_by(|&x, &y| spec.psd[x].total_cmp(&spec.psd[y])).unwrap();
        if spec.psd[peak] <= detect {
            continue;
        }
        found.push(describe(spec, window, floor, start, end, peak, widen, det.obw_percent));
    }
    found.sort_by(|a, b| b.level_dbfs.total_cmp(&a.level_dbfs));
    found.truncate(max);
    found
}

#[allow(clippy::too_many_arguments)]
fn describe(
    spec: &Spectrum,
    window: &Window,
    floor: f64,
    start: usize,
    end: usize,
    peak: usize,
    widen: f64,
    obw_percent: f64,
) -> Signal {
    let n = spec.fft_size;
    let (pm, pp) = (
        if peak > 0 { spec.psd[peak - 1] } else { 0.0 },
        if peak + 1 < n { spec.psd[peak + 1] } else { 0.0 },
    );
    let (delta, gain) = window.tone_offset(pm, spec.psd[peak], pp);
    let tone = spec.tone_power(peak) / gain.max(1e-12);
    let lo = spec.freq_of_bin(start as f64 - 0.5 - widen);
    let hi = spec.freq_of_bin(end as f64 + 0.5 + widen);
    let centre = spec.freq_of_bin(peak as f64 + delta);
    Signal {
        freq_hz: centre,
        level_dbfs: db(tone),
        snr_db: db(tone / (floor * spec.rbw_hz)),
        power_dbfs: db(band_power(spec, lo, hi)),
        obw: occupied_bandwidth(spec, lo, hi, obw_percent)
            .unwrap_or(Edges { low_hz: centre, high_hz: centre }),
        peak_bin: peak,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::{Engine, EngineConfig, WindowKind};
    use crate::measure::noise::noise_floor;
    use crate::testkit::{keyed_band, Keyed};
    use crate::units::undb;
    use num_complex::Complex32;

    /// Steady tones `(offset Hz, level dBFS)` in complex white noise of `noise_dbfs` total power.
    fn tone_in_noise(n: usize, rate: f64, tones: &[(f64, f64)], noise_dbfs: f64) -> Vec<Complex32> {
        let tones: Vec<Keyed> = tones.iter().map(|&(f, lvl)| Keyed::steady(f, lvl)).collect();
        keyed_band(n, rate, undb(noise_dbfs), &tones, 99)
    }

    #[test]
    fn two_tones_found_strongest_first_with_levels() {
        let rate = 1e6;
        let x = tone_in_noise(1 << 16, rate, &[(100_123.0, -20.0), (-250_321.0, -40.0)], -60.0);
        let cfg = EngineConfig {
            fft_size: 1024,
            window: WindowKind::Hann,
            overlap: 0.5,
            frames_per_output: None,
        };
        let mut out = Vec::new();
        let mut e = Engine::new(cfg, rate, 0.0);
        e.push(0, &x, &mut |s| out.push(s.clone()));
        e.finish(&mut |s| out.push(s.clone()));
        let spec = &out[0];
        let floor = noise_floor(&spec.psd, spec.dof);
        let w = Window::new(WindowKind::Hann, 1024);
        let sigs = find_signals(spec, &w, floor, 10, Detection::default());
        assert_eq!(sigs.len(), 2, "{sigs:?}");
        assert!((sigs[0].freq_hz - 100_123.0).abs() < 50.0);
        assert!((sigs[0].level_dbfs + 20.0).abs() < 0.2, "{}", sigs[0].level_dbfs);
        assert!((sigs[1].freq_hz + 250_321.0).abs() < 50.0);
        assert!((sigs[1].level_dbfs + 40.0).abs() < 0.2);
        // Noise density is −60 dBFS spread over 1 MHz: −120 dBFS/Hz; RBW = 1.5·1e6/1024 Hz.
        let expect_snr = -20.0 - (-120.0 + 10.0 * (1.5 * 1e6 / 1024.0f64).log10());
        assert!((sigs[0].snr_db - expect_snr).abs() < 0.5, "{} vs {expect_snr}", sigs[0].snr_db);
    }

    #[test]
    fn noise_alone_gives_no_signals() {
        let x = tone_in_noise(1 << 16, 1e6, &[], -50.0);
        let cfg = EngineConfig {
            fft_size: 4096,
            window: WindowKind::Hann,
            overlap: 0.0,
            frames_per_output: Some(1),
        };
        let mut specs = Vec::new();
        let mut e = Engine::new(cfg, 1e6, 0.0);
        e.push(0, &x, &mut |s| specs.push(s.clone()));
        let w = Window::new(WindowKind::Hann, 4096);
        let found: usize = specs
            .iter()
            .map(|s| {
                find_signals(s, &w, noise_floor(&s.psd, s.dof), 10, Detection::default()).len()
            })
            .sum();
        assert!(found <= 1, "{found} false detections in {} spectra", specs.len());
    }
}
