//! Finding the signals in a spectrum: runs of bins standing clear of the noise floor, split into
//! one signal per resolvable peak.
//!
//! **Runs.** A run of bins above an *edge* threshold (the 99 % point of the noise-only χ²
//! distribution, and at least 3 dB) gathers one or more signals; small gaps are bridged so one FM
//! emission with its sidebands is one run. The spectrum is treated as a circle (bin 0 follows the
//! last bin, as in the DFT itself), so a tone at either end of the span leaks into the other end
//! without making a phantom there.
//!
//! **Detection.** A peak counts if its bin exceeds the *detection* threshold: an averaged PSD bin of
//! noise alone with density μ and ν = `spec.dof` degrees of freedom is distributed as `μ·χ²_ν/ν`
//! (Gamma with shape ν/2, see [`super::stats`]), and the threshold is its `1 − p_fa` quantile, so
//! each bin of noise crosses it with probability `p_fa` ([`Detection::false_alarm_per_bin`],
//! 10⁻⁶ by default: about one false signal per 250 spectra of 4096 bins). The threshold falls as
//! averages pile up: after 2000 averages a tone 3 dB above the noise in one RBW is found.
//!
//! **Resolution.** Inside a run, every local maximum above the detection threshold is a candidate;
//! the strongest is a signal, and each weaker candidate becomes a signal of its own when, against
//! every signal already kept in the run,
//! - the lowest bin between them (the valley) is at least [`VALLEY_DB`] below both maxima, and
//!   deeper than noise alone can dig (the ratio of the 1 − 10⁻⁴ and 10⁻⁴ points of the bin's χ²
//!   distribution), and
//! - it stands [`VALLEY_DB`] above the stronger signal's leakage at that distance (the envelope of
//!   the window's own response), so a side lobe is never a signal.
//!
//! The run is then cut at the valleys. Two equal tones resolve once they are further apart than the
//! window's 6-dB bandwidth (Harris 1978); at three RBW apart they are split by every window we
//! offer, given enough averages for the valley test.
//!
//! **Measurements.** For each signal we report the level of a sinusoid at its peak
//! (scalloping-corrected with the window's own response) and its SNR against the noise in one RBW,
//! both *noise-corrected*: the expected noise in the peak bins (floor·RBW) is subtracted first, so a
//! true 6 dB SNR reads 6 dB and not 7 dB. Total power is integrated over the signal's bins
//! (widened by the window's main lobe where no neighbour is) less the noise in that band, and the
//! occupied bandwidth is ITU-R SM.328's 99 % of those bins less the noise floor. A signal wider than [`WIDE_RBW`] RBW reports as its
//! frequency the middle of its occupied band rather than its highest bin.

use super::band::{occupied_bandwidth_of, BinRun, Edges};
use super::stats::gamma_quantile_unit_mean;
use crate::dsp::{Spectrum, Window};
use crate::units::db;

/// How far (dB) a valley must lie below both neighbouring maxima, and a weaker peak above the
/// stronger one's leakage, for the two to be separate signals.
///
/// Chosen from the window response: two equal tones `s` bins apart add (in power, their phases
/// wandering over the average) to `2·|W(s/2)|²` at the midpoint, so a 6 dB valley means
/// `|W(s/2)| ≤ 0.35` (−9 dB): each main lobe has fallen past its 6-dB point (half amplitude) before
/// it reaches the other tone, i.e. the tones are further apart than the window's 6-dB bandwidth,
/// Harris's (1978) criterion for resolving two equal tones. Any less and a flat top of one wide
/// signal, or one tone's main lobe, would be split.
pub const VALLEY_DB: f64 = 6.0;

/// A signal whose occupied bandwidth exceeds this many RBW is *wideband*: its frequency is the
/// middle of its occupied band (the highest bin of band-limited noise is wherever the noise put it).
pub const WIDE_RBW: f64 = 4.0;

/// Default false-alarm probability per bin of noise alone.
pub const DEFAULT_FALSE_ALARM: f64 = 1e-6;

/// One detected signal.
#[derive(Clone, Debug, PartialEq)]
pub struct Signal {
    /// Frequency, absolute Hz: the interpolated peak of a narrow signal, the middle of the occupied
    /// band of a wideband one (wider than [`WIDE_RBW`] RBW).
    pub freq_hz: f64,
    /// Power of a sinusoid at the peak, dBFS (scalloping- and noise-corrected).
    pub level_dbfs: f64,
    /// `level` over the noise power in one RBW, dB (noise-corrected).
    pub snr_db: f64,
    /// Integrated power of the signal's bins less the noise in them, dBFS.
    pub power_dbfs: f64,
    /// 99 % occupied bandwidth of the signal's bins, less the noise floor.
    pub obw: Edges,
    /// Bin of the peak (fftshift order).
    pub peak_bin: usize,
}

/// Settings for [`find_signals`].
#[derive(Clone, Copy, Debug)]
pub struct Detection {
    /// SNR (dB over the noise density at a bin) at which a cursor reading is called clear of the
    /// noise. The detector's own threshold comes from `false_alarm_per_bin`.
    pub min_snr_db: f64,
    /// Percentage for the occupied bandwidth.
    pub obw_percent: f64,
    /// Probability that one bin of noise alone crosses the detection threshold.
    pub false_alarm_per_bin: f64,
}

impl Default for Detection {
    fn default() -> Self {
        Detection { min_snr_db: 6.0, obw_percent: 99.0, false_alarm_per_bin: DEFAULT_FALSE_ALARM }
    }
}

/// Finds up to `max` signals, strongest (most integrated power) first. `floor` is the noise density (FS²/Hz) and `window`
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
    let p_fa = det.false_alarm_per_bin.clamp(1e-12, 0.5);
    let detect = floor * gamma_quantile_unit_mean(1.0 - p_fa, a);
    // Noise alone: a bin this many times below a neighbour happens about once in 10⁸ pairs.
    let noise_dip = gamma_quantile_unit_mean(1.0 - 1e-4, a) / gamma_quantile_unit_mean(1e-4, a);
    let split = Split { valley: 10f64.powf(VALLEY_DB / 10.0).max(noise_dip), lobe: VALLEY_DB };
    let gap = (2.0 * spec.enbw_bins).ceil() as usize;
    let widen = spec.enbw_bins.ceil() as i64;
    let psd = |i: i64| spec.psd[wrap(i, n)];

    // Start the circular scan where `gap + 1` bins lie below the edge (or at least one does), so
    // that no run is cut by the start of the scan.
    let origin = quiet_start(&spec.psd, gap, edge)
        .or_else(|| (0..n).find(|&i| spec.psd[i] <= edge))
        .unwrap_or(0) as i64;
    let stop = origin + n as i64;

    let mut found = Vec::new();
    let mut i = origin;
    while i < stop {
        i = next_above(&spec.psd, i, stop, edge);
        if i == stop {
            break;
        }
        // Extend the run, bridging gaps of up to `gap` bins.
        let start = i;
        let mut end = i;
        let mut j = i + 1;
        while j < stop && j <= end + gap as i64 + 1 {
            if psd(j) > edge {
                end = j;
            }
            j += 1;
        }
        i = end + 1;
        let peaks = resolve(&psd, window, start, end, detect, split);
        for (k, &peak) in peaks.iter().enumerate() {
            // Cut at the lowest bin between neighbouring peaks (the valley goes to the left one);
            // widen by the main lobe only at the run's own ends.
            let valley = |x: i64, y: i64| (x..=y).min_by(|&p, &q| psd(p).total_cmp(&psd(q)));
            let lo = match k {
                0 => start - widen,
                _ => valley(peaks[k - 1], peak).unwrap() + 1,
            };
            let hi = match peaks.get(k + 1) {
                None => end + widen,
                Some(&next) => valley(peak, next).unwrap(),
            };
            let hi = hi.min(lo + n as i64 - 1);
            found.push(describe(spec, window, floor, (lo, hi), peak, det.obw_percent));
        }
    }
    // Strongest by total power, so a wideband link (low in any one RBW) ranks with a tone of
    // the same power; the peak level breaks ties.
    found.sort_by(|a, b| {
        b.power_dbfs.total_cmp(&a.power_dbfs).then(b.level_dbfs.total_cmp(&a.level_dbfs))
    });
    found.truncate(max);
    found
}

/// The first bin `i` such that bins `i ..= i + gap` (around the circle) all lie at or below
/// `edge`: one pass counting the quiet bins in a row, instead of `gap + 1` looks at every start.
fn quiet_start(psd: &[f64], gap: usize, edge: f64) -> Option<usize> {
    let n = psd.len();
    let mut quiet = 0;
    for j in 0..n + gap {
        if psd[wrap(j as i64, n)] <= edge {
            quiet += 1;
            if quiet > gap {
                return Some(j - gap);
            }
        } else {
            quiet = 0;
        }
    }
    None
}

/// The bin of an unwrapped index `i` on the circle of `n` bins. Scans stay within one turn either
/// side of the span, where a comparison or two replace the division of `rem_euclid`.
fn wrap(i: i64, n: usize) -> usize {
    let m = n as i64;
    if (0..m).contains(&i) {
        i as usize
    } else if (m..2 * m).contains(&i) {
        (i - m) as usize
    } else {
        i.rem_euclid(m) as usize
    }
}

/// The first unwrapped index in `from..stop` whose bin is above `edge` (or is not a number), or
/// `stop`: a plain scan of at most two slices of `psd`, since most bins of most rows are noise
/// below the edge.
fn next_above(psd: &[f64], from: i64, stop: i64, edge: f64) -> i64 {
    let n = psd.len() as i64;
    let mut i = from;
    while i < stop {
        let at = wrap(i, psd.len());
        let len = (stop - i).min(n - at as i64) as usize;
        match first_not_below(&psd[at..at + len], edge) {
            Some(k) => return i + k as i64,
            None => i += len as i64,
        }
    }
    stop
}

/// The index of the first value of `v` that is not at or below `edge` (above it, or not a
/// number). Eight at a time, without a branch per value, since nearly all are below: the scan
/// of every row's noise bins had been a third of the detector's own time.
fn first_not_below(v: &[f64], edge: f64) -> Option<usize> {
    const LANES: usize = 8;
    let chunks = v.chunks_exact(LANES);
    let tail = chunks.remainder();
    for (c, chunk) in chunks.enumerate() {
        if chunk.iter().fold(false, |any, &p| any | (p > edge) | p.is_nan()) {
            return chunk.iter().position(|&p| p > edge || p.is_nan()).map(|k| c * LANES + k);
        }
    }
    let base = v.len() - tail.len();
    tail.iter().position(|&p| p > edge || p.is_nan()).map(|k| base + k)
}

/// Power ratios for splitting a run: `valley` (linear) below both maxima, `lobe` dB above leakage.
#[derive(Clone, Copy)]
struct Split {
    valley: f64,
    lobe: f64,
}

/// The resolvable peaks of the run `start..=end` (unwrapped bin indices), in bin order.
fn resolve(
    psd: &impl Fn(i64) -> f64,
    window: &Window,
    start: i64,
    end: i64,
    detect: f64,
    split: Split,
) -> Vec<i64> {
    // The run and one bin either side, read once off the circle: `seg[j]` is bin `start + j − 1`.
    let seg: Vec<f64> = (start - 1..=end + 1).map(psd).collect();
    let at = |i: i64| seg[(i - start + 1) as usize];
    // Local maxima above the detection threshold, strongest first (the lower bin first among
    // equals, as a stable sort of the bins in order would leave them).
    let mut candidates: Vec<(f64, i64)> = seg
        .windows(3)
        .zip(start..)
        .filter(|(w, _)| w[1] > detect && w[1] >= w[0] && w[1] > w[2])
        .map(|(w, i)| (w[1], i))
        .collect();
    let order = |x: &(f64, i64), y: &(f64, i64)| y.0.total_cmp(&x.0).then(x.1.cmp(&y.1));
    // The strongest is always kept, and every other must stand beside it: those that cannot are
    // dropped before the sort (in a wide noise-like run, nearly all of them).
    let Some(&top) = candidates.iter().min_by(|x, y| order(x, y)) else { return Vec::new() };
    let len = (end - start + 1) as usize;
    let mut kept: Vec<i64> = vec![top.1];
    // For the m-th kept peak, `dips[m·len + j]` is the lowest bin between it and bin `start + j`
    // (both included): each candidate then reads its valley to every kept peak at once, where a
    // scan per pair cost a wide noise-like run (hundreds of candidates) most of the row's time.
    let mut dips: Vec<f64> = Vec::new();
    lowest_towards(&seg[1..=len], (top.1 - start) as usize, &mut dips);
    let stands = |(p, c): (f64, i64), kept: &[i64], dips: &[f64]| {
        kept.iter().enumerate().all(|(m, &k)| {
            let dip = dips[m * len + (c - start) as usize];
            p >= split.valley * dip
                && db(p / at(k)) >= window.leakage_db(c.abs_diff(k) as usize) + split.lobe
        })
    };
    candidates.retain(|&c| c.1 != top.1 && stands(c, &kept, &dips));
    candidates.sort_unstable_by(order);
    for c in candidates {
        if stands(c, &kept, &dips) {
            kept.push(c.1);
            lowest_towards(&seg[1..=len], (c.1 - start) as usize, &mut dips);
        }
    }
    kept.sort_unstable();
    kept
}

/// Appends, for every bin `j` of the run `run`, the lowest bin between `peak` and `j` (both
/// included; indices into `run`). A minimum involves no rounding, so this is the scan of each
/// range, exactly.
fn lowest_towards(run: &[f64], peak: usize, out: &mut Vec<f64>) {
    let base = out.len();
    out.resize(base + run.len(), 0.0);
    let row = &mut out[base..];
    let mut low = f64::INFINITY;
    for j in (0..=peak).rev() {
        low = low.min(run[j]);
        row[j] = low;
    }
    low = f64::INFINITY;
    for j in peak..run.len() {
        low = low.min(run[j]);
        row[j] = low;
    }
}

/// Measures the signal on the unwrapped bins `lo..=hi` with its peak at `peak`.
fn describe(
    spec: &Spectrum,
    window: &Window,
    floor: f64,
    (lo, hi): (i64, i64),
    peak: i64,
    obw_percent: f64,
) -> Signal {
    let n = spec.fft_size as i64;
    // Shift the whole segment so that its peak lies inside the span.
    let shift = peak - peak.rem_euclid(n);
    let (lo, hi, peak) = (lo - shift, hi - shift, peak - shift);
    let psd = |i: i64| spec.psd[wrap(i, spec.fft_size)];
    let clean = |i: i64| (psd(i) - floor).max(0.0);
    let (delta, gain) = window.tone_offset(clean(peak - 1), clean(peak), clean(peak + 1));
    let tone = (clean(peak) * spec.rbw_hz / gain.max(1e-12)).max(f64::MIN_POSITIVE);
    let (lo_hz, hi_hz) = (spec.freq_of_bin(lo as f64 - 0.5), spec.freq_of_bin(hi as f64 + 0.5));
    let raw: f64 = (lo..=hi).map(psd).sum::<f64>() * spec.bin_hz();
    let power = (raw - floor * (hi_hz - lo_hz)).max(raw * 1e-6);
    // The occupied bandwidth is that of the signal, not of the noise around it.
    let bins: Vec<f64> = (lo..=hi).map(clean).collect();
    let run =
        BinRun { psd: &bins, center_hz: spec.center_hz, first: lo - n / 2, bin_hz: spec.bin_hz() };
    let centre = spec.freq_of_bin(peak as f64 + delta);
    let obw = occupied_bandwidth_of(run, lo_hz, hi_hz, obw_percent)
        .unwrap_or(Edges { low_hz: centre, high_hz: centre });
    let wide = obw.width_hz() > WIDE_RBW * spec.rbw_hz;
    Signal {
        freq_hz: if wide { 0.5 * (obw.low_hz + obw.high_hz) } else { centre },
        level_dbfs: db(tone),
        snr_db: db(tone / (floor * spec.rbw_hz)),
        power_dbfs: db(power),
        obw,
        peak_bin: peak as usize,
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
    fn the_eight_at_a_time_scan_finds_what_a_plain_scan_finds() {
        let mut rng = crate::testkit::Rng::new(17);
        for len in [0, 1, 7, 8, 9, 63, 64, 65, 4096] {
            for _ in 0..50 {
                let mut v: Vec<f64> = (0..len).map(|_| rng.uniform()).collect();
                if len > 0 && rng.below(3) == 0 {
                    let at = rng.below(len);
                    v[at] = f64::NAN;
                }
                let edge = 0.9 + 0.1 * rng.uniform();
                let plain = v.iter().position(|&p| p > edge || p.is_nan());
                assert_eq!(first_not_below(&v, edge), plain, "{len} {edge}");
            }
        }
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
