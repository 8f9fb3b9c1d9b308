//! Symbol rate and symbol timing of linearly modulated emissions (PSK, QAM), and their samples
//! at one per symbol.
//!
//! The squared envelope |x|² of a pulse-shaped linear modulation is cyclostationary: its
//! spectrum has a line at the symbol rate, whose phase marks the symbol instants (Oerder & Meyr,
//! "Digital filter and square timing recovery", IEEE Trans. Commun. 36(5), 1988). The samples
//! are taken after a root-raised-cosine matched filter with roll-off 0.35 (common practice for
//! such links; another roll-off leaves a little inter-symbol interference, which pulls the
//! cumulants slightly towards zero).

use super::spectrum::{above, bin_hz, fft, find_line, phasors, Line};
use num_complex::Complex64;
use std::f64::consts::PI;

/// Roll-off assumed for the matched filter.
pub const ROLL_OFF: f64 = 0.35;
/// The symbol-rate line must stand this far above the median of its search range (power ratio).
/// Without a line the largest of K exponential bins over their median is about ln K / ln 2,
/// about 12 for the 4000 or so bins searched in a short record, and exceeds 40 with odds near
/// K · 2^−40: none.
pub const LINE_PROMINENCE: f64 = 40.0;

/// The symbol-rate line of |x|² between `lo` and `hi` times the OBW.
pub fn envelope_line(x: &[Complex64], rate_hz: f64, obw_hz: f64) -> Option<Line> {
    let p: Vec<f64> = x.iter().map(|v| v.norm_sqr()).collect();
    find_line(&p, rate_hz, 0.4 * obw_hz, 1.05 * obw_hz).filter(|l| l.prominence >= LINE_PROMINENCE)
}

/// Symbol rate of a constant-envelope (unfiltered) PSK: the energy of the sample-to-sample
/// change |x[n] − x[n−1]|² spikes at each symbol boundary where the phase steps, a train on the
/// symbol clock whose spectrum has a comb of lines at every multiple of the rate (common
/// practice for rectangular-pulse PSK), often of nearly equal strength, so the strongest may
/// be a harmonic. The rate is the lowest sub-multiple of the strongest line (down to an
/// eighth) with lines at once and twice it, each line judged against the floor of the whole
/// searched range in a window of two bins: a local floor between the teeth of a comb can be
/// low enough to make a gap look like a line (a rate read 1.5 times too high).
pub fn transition_rate(x: &[Complex64], rate_hz: f64, obw_hz: f64) -> Option<f64> {
    let d: Vec<f64> = x.windows(2).map(|w| (w[1] - w[0]).norm_sqr()).collect();
    let lo = obw_hz / 40.0;
    let hi = (1.05 * obw_hz).min(0.45 * rate_hz);
    let strongest = find_line(&d, rate_hz, lo, hi).filter(|l| l.prominence >= LINE_PROMINENCE)?;
    let n = d.len();
    let mean = d.iter().sum::<f64>() / n.max(1) as f64;
    let len = (4 * n).next_power_of_two();
    let mut spec = vec![Complex64::new(0.0, 0.0); len];
    for (s, v) in spec.iter_mut().zip(&d) {
        s.re = v - mean;
    }
    fft(&mut spec, false);
    let power: Vec<f64> = spec.iter().map(|v| v.norm_sqr()).collect();
    let bin = |f: f64| (f / rate_hz * len as f64).round() as usize;
    let in_range: Vec<f64> = (bin(lo)..=bin(hi).min(len / 2)).map(|k| power[k]).collect();
    let floor = super::spectrum::quantile(&in_range, 0.5);
    // Two unpadded bins each side of f (the padded grid is 4 × finer, or more).
    let reach = (2.0 * len as f64 / n as f64).ceil() as usize;
    let line_at = |f: f64| {
        let k = bin(f);
        let top = (k.saturating_sub(reach)..=(k + reach).min(len / 2))
            .map(|i| power[i])
            .fold(0.0, f64::max);
        above(floor, 0.0) && top >= LINE_PROMINENCE / 2.0 * floor
    };
    for k in (2..=8).rev() {
        let f = strongest.freq_hz / k as f64;
        if f < lo {
            continue;
        }
        if line_at(f) && line_at(2.0 * f) {
            let fine = find_line(&d, rate_hz, 0.97 * f, 1.03 * f);
            return Some(fine.map_or(f, |l| l.freq_hz));
        }
    }
    Some(strongest.freq_hz)
}

/// Power response of a root-raised-cosine filter (unit gain in the pass band) at `f` Hz.
fn rrc_power(f: f64, symbol_rate: f64, alpha: f64) -> f64 {
    let a = f.abs();
    let lo = (1.0 - alpha) * symbol_rate / 2.0;
    let hi = (1.0 + alpha) * symbol_rate / 2.0;
    if a <= lo {
        1.0
    } else if a >= hi {
        0.0
    } else {
        0.5 * (1.0 + (PI / (alpha * symbol_rate) * (a - lo)).cos())
    }
}

/// Symbols of a linear modulation: the matched-filtered sequence sampled once per symbol, and
/// the noise power per symbol sample.
pub struct Symbols {
    pub z: Vec<Complex64>,
    pub noise_power: f64,
}

/// Matched filter (RRC at `symbol_rate`) in the frequency domain, symbol timing from the phase
/// of the |y|² line, and cubic interpolation at the symbol instants. `response` is the channel
/// filter's power response on the same bins and `noise_psd` the input's noise PSD, so the noise
/// power of the samples is known exactly.
pub fn symbols(
    x: &[Complex64],
    rate_hz: f64,
    symbol_rate: f64,
    noise_psd: f64,
    response: &[f64],
) -> Symbols {
    let n = x.len();
    let mut spec = x.to_vec();
    fft(&mut spec, false);
    let mut gain = 0.0;
    for (k, v) in spec.iter_mut().enumerate() {
        let h2 = rrc_power(bin_hz(k, n, rate_hz), symbol_rate, ROLL_OFF);
        *v *= h2.sqrt() / n as f64;
        gain += h2 * response.get(k).copied().unwrap_or(1.0);
    }
    fft(&mut spec, true);
    let noise_power = noise_psd * gain * rate_hz / n as f64;
    let p: Vec<f64> = spec.iter().map(|v| v.norm_sqr()).collect();
    let line = super::spectrum::dft_at(&p, rate_hz, symbol_rate);
    let sps = rate_hz / symbol_rate;
    // |y(t)|² ≈ c0 + 2|c1| cos(2π R (t − τ)): the line's phase is −2π R τ.
    let mut t = (-line.arg() / (2.0 * PI)).rem_euclid(1.0) * sps;
    let mut z = Vec::with_capacity((n as f64 / sps) as usize + 1);
    while t < (n - 2) as f64 {
        if t >= 1.0 {
            z.push(cubic(&spec, t));
        }
        t += sps;
    }
    Symbols { z, noise_power }
}

/// Cubic (Lagrange, four points) interpolation of `x` at fractional index `t` (1 ≤ t < n − 2).
fn cubic(x: &[Complex64], t: f64) -> Complex64 {
    let i = t.floor() as usize;
    let u = t - i as f64;
    let (p0, p1, p2, p3) = (x[i - 1], x[i], x[i + 1], x[i + 2]);
    let w0 = -u * (u - 1.0) * (u - 2.0) / 6.0;
    let w1 = (u + 1.0) * (u - 1.0) * (u - 2.0) / 2.0;
    let w2 = -(u + 1.0) * u * (u - 2.0) / 2.0;
    let w3 = (u + 1.0) * u * (u - 1.0) / 6.0;
    p0 * w0 + p1 * w1 + p2 * w2 + p3 * w3
}

/// The strongest line of z^M over the whole symbol-rate band, as a share of mean |z|^M: near 1
/// for M-PSK at one sample per symbol (z^M is constant) and for BPSK at every even M; its
/// frequency is M times the residual carrier offset.
pub fn power_line(z: &[Complex64], symbol_rate: f64, m: i32) -> Option<(f64, f64)> {
    let zm: Vec<Complex64> = z.iter().map(|v| v.powi(m)).collect();
    let scale = z.iter().map(|v| v.norm().powi(m)).sum::<f64>() / z.len().max(1) as f64;
    if !above(scale, 0.0) {
        return None;
    }
    // Search the whole band without removing the mean (the line may sit at 0 Hz).
    let n = zm.len();
    let len = (4 * n).next_power_of_two();
    let mut buf = vec![Complex64::new(0.0, 0.0); len];
    buf[..n].copy_from_slice(&zm);
    fft(&mut buf, false);
    let peak = (0..len).max_by(|&a, &b| buf[a].norm_sqr().total_cmp(&buf[b].norm_sqr()))?;
    let freq = bin_hz(peak, len, symbol_rate);
    Some((buf[peak].norm() / n as f64 / scale, freq))
}

/// `z` with a carrier offset of `freq_hz` (at `symbol_rate` samples per second) removed.
pub fn derotate(z: &[Complex64], symbol_rate: f64, freq_hz: f64) -> Vec<Complex64> {
    z.iter().zip(phasors(-freq_hz / symbol_rate)).map(|(v, p)| v * p).collect()
}
