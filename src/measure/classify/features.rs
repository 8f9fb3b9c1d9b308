//! Envelope, instantaneous phase and frequency statistics of a baseband emission (after Azzouz &
//! Nandi, Automatic Modulation Recognition of Communication Signals, Kluwer 1996, and IEE
//! Proc.-Commun. 143(5), 1996), and the share of power in the strongest spectral line.

use super::spectrum::{above, fft};
use num_complex::Complex64;
use std::f64::consts::PI;

/// The key features, as the classifier reports them (for notes and tuning).
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct EnvelopeFeatures {
    /// γmax: the largest spectral power of the normalised centred envelope, over its length.
    pub gamma_max: f64,
    /// σaa: standard deviation of the normalised centred envelope |a/ā − 1|.
    pub sigma_aa: f64,
    /// σdp: standard deviation of the non-linear phase (linear trend removed), radians, over the
    /// samples whose envelope is above the mean·`WEAK` (the weak ones carry mostly noise phase).
    pub sigma_dp: f64,
    /// σaf: standard deviation of the instantaneous frequency over the sample rate, same samples.
    pub sigma_af: f64,
}

/// Samples below this fraction of the mean envelope are left out of the phase features
/// (Azzouz & Nandi's amplitude threshold a_t = 1 is on the normalised envelope; lower here so
/// noise-like envelopes keep enough samples).
const WEAK: f64 = 0.5;

pub fn envelope_features(x: &[Complex64], rate_hz: f64) -> EnvelopeFeatures {
    let n = x.len();
    if n < 4 || !above(rate_hz, 0.0) {
        return EnvelopeFeatures::default();
    }
    let a: Vec<f64> = x.iter().map(|v| v.norm()).collect();
    let mean = a.iter().sum::<f64>() / n as f64;
    if !above(mean, 0.0) {
        return EnvelopeFeatures::default();
    }
    let acn: Vec<f64> = a.iter().map(|v| v / mean - 1.0).collect();
    let sigma_aa = (acn.iter().map(|v| v * v).sum::<f64>() / n as f64).sqrt();
    let mut spec: Vec<Complex64> = acn.iter().map(|&v| Complex64::new(v, 0.0)).collect();
    fft(&mut spec, false);
    let gamma_max = spec.iter().map(|v| v.norm_sqr()).fold(0.0, f64::max) / n as f64;

    let phase = unwrapped_phase(x);
    let strong: Vec<usize> = (0..n).filter(|&i| a[i] > WEAK * mean).collect();
    let sigma_dp = std_of(&detrended(&phase, &strong));
    let freq = instantaneous_frequency(x, rate_hz);
    let f_strong: Vec<f64> =
        strong.iter().filter(|&&i| i < freq.len()).map(|&i| freq[i] / rate_hz).collect();
    EnvelopeFeatures { gamma_max, sigma_aa, sigma_dp, sigma_af: std_of(&f_strong) }
}

/// Phase of each sample, unwrapped (no jumps over π).
pub fn unwrapped_phase(x: &[Complex64]) -> Vec<f64> {
    let mut out = Vec::with_capacity(x.len());
    let mut acc = 0.0;
    let mut prev = Complex64::new(1.0, 0.0);
    for (i, v) in x.iter().enumerate() {
        if i == 0 {
            acc = v.arg();
        } else {
            acc += (v * prev.conj()).arg();
        }
        prev = *v;
        out.push(acc);
    }
    out
}

/// Instantaneous frequency between neighbouring samples, Hz: arg(x[n+1] x*[n]) · rate / 2π.
/// One fewer value than samples.
pub fn instantaneous_frequency(x: &[Complex64], rate_hz: f64) -> Vec<f64> {
    x.windows(2).map(|w| (w[1] * w[0].conj()).arg() * rate_hz / (2.0 * PI)).collect()
}

/// The values `v[i]` for the kept indices, with their least-squares line over `i` removed.
fn detrended(v: &[f64], keep: &[usize]) -> Vec<f64> {
    let m = keep.len() as f64;
    if keep.len() < 2 {
        return Vec::new();
    }
    let mx = keep.iter().map(|&i| i as f64).sum::<f64>() / m;
    let my = keep.iter().map(|&i| v[i]).sum::<f64>() / m;
    let sxx: f64 = keep.iter().map(|&i| (i as f64 - mx).powi(2)).sum();
    let sxy: f64 = keep.iter().map(|&i| (i as f64 - mx) * (v[i] - my)).sum();
    let slope = if sxx > 0.0 { sxy / sxx } else { 0.0 };
    keep.iter().map(|&i| v[i] - my - slope * (i as f64 - mx)).collect()
}

/// Population standard deviation; 0 for fewer than two values.
pub fn std_of(v: &[f64]) -> f64 {
    if v.len() < 2 {
        return 0.0;
    }
    let m = v.iter().sum::<f64>() / v.len() as f64;
    (v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / v.len() as f64).sqrt()
}

/// Share of the signal's power (noise power per sample `noise_power` taken off the total) in
/// its strongest spectral line: the peak of a Hann-windowed spectrum and two bins each side
/// (where a Hann window keeps all but a fraction of a percent of a tone's power, Harris 1978).
/// Near 1 for an unmodulated carrier, 1/(1 + m²/2) for tone AM of depth m, near 0 for
/// suppressed-carrier emissions.
pub fn carrier_fraction(x: &[Complex64], noise_power: f64) -> f64 {
    let n = x.len();
    if n < 8 {
        return 0.0;
    }
    let w: Vec<f64> = (0..n).map(|i| 0.5 - 0.5 * (2.0 * PI * i as f64 / n as f64).cos()).collect();
    let mut spec: Vec<Complex64> = x.iter().zip(&w).map(|(v, w)| v * w).collect();
    fft(&mut spec, false);
    let p: Vec<f64> = spec.iter().map(|v| v.norm_sqr()).collect();
    let peak = (0..n).max_by(|&a, &b| p[a].total_cmp(&p[b])).unwrap_or(0);
    let line: f64 = (0..5).map(|d| p[(peak + n + d - 2) % n]).sum();
    let s2: f64 = w.iter().map(|v| v * v).sum();
    let total: f64 = p.iter().sum::<f64>() - noise_power.max(0.0) * s2 * n as f64;
    if total > 0.0 {
        (line / total).min(1.0)
    } else {
        0.0
    }
}

/// `x` low-passed to `cutoff_hz` in the frequency domain (a raised-cosine edge one tenth of the
/// cut-off wide, so the result rings little).
///
/// The transform is as long as `x` when that length is a product of 2, 3, 5 and 7; otherwise
/// `x` is extended to the next such length by holding its last value, and the extension is
/// dropped again. The instantaneous frequency of a baseband of such a length is one sample
/// shorter, a length rustfft can only transform by Bluestein's algorithm (two transforms of
/// twice the length, and a chirp to plan, a sine and cosine per point, new for each emission):
/// that had been a tenth of a census's classification. The held samples (under 2 % of the
/// length past a few thousand) only add to the wrap-around the circular filter already has at
/// the ends.
pub fn lowpass_real(x: &[f64], rate_hz: f64, cutoff_hz: f64) -> Vec<f64> {
    let n = x.len();
    let Some(&last) = x.last() else { return Vec::new() };
    let m = super::baseband::smooth_above(n);
    let mut spec: Vec<Complex64> = x.iter().map(|&v| Complex64::new(v, 0.0)).collect();
    spec.resize(m, Complex64::new(last, 0.0));
    fft(&mut spec, false);
    for (k, v) in spec.iter_mut().enumerate() {
        *v *= lowpass_gain(super::spectrum::bin_hz(k, m, rate_hz), rate_hz, m, cutoff_hz);
    }
    fft(&mut spec, true);
    spec[..n].iter().map(|v| v.re / m as f64).collect()
}

/// Amplitude response of [`lowpass_real`] on `n` samples at `rate_hz` at `f` Hz.
pub fn lowpass_gain(f: f64, rate_hz: f64, n: usize, cutoff_hz: f64) -> f64 {
    let edge = (cutoff_hz * 0.1).max(rate_hz / n as f64);
    let f = f.abs();
    if f <= cutoff_hz - edge {
        1.0
    } else if f >= cutoff_hz + edge {
        0.0
    } else {
        0.5 + 0.5 * (PI * (f - cutoff_hz + edge) / (2.0 * edge)).cos()
    }
}

/// Centred moving average of length `len` (shorter at the ends).
pub fn moving_average(x: &[f64], len: usize) -> Vec<f64> {
    let n = x.len();
    let len = len.max(1);
    let mut prefix = vec![0.0; n + 1];
    for i in 0..n {
        prefix[i + 1] = prefix[i] + x[i];
    }
    (0..n)
        .map(|i| {
            let lo = i.saturating_sub(len / 2);
            let hi = (lo + len).min(n);
            (prefix[hi] - prefix[lo]) / (hi - lo) as f64
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    use std::f64::consts::TAU;

    /// A tone well inside the pass band comes through, one well above the stop band is gone,
    /// whether the length is one transformed as it is (4096) or one extended first (4095, 1259
    /// = 1260 − 1; 4801 is prime). Away from the ends, where the circular filter wraps: a
    /// linear filter passes a sinusoid scaled by its response there (common practice).
    #[test]
    fn the_low_pass_keeps_the_pass_band_and_removes_the_stop_band_at_any_length() {
        let rate = 8000.0;
        for n in [4096, 4095, 1259, 4801] {
            let x: Vec<f64> = (0..n)
                .map(|i| {
                    let t = i as f64 / rate;
                    (TAU * 150.0 * t).sin() + 0.5 * (TAU * 2000.0 * t).sin()
                })
                .collect();
            let y = lowpass_real(&x, rate, 500.0);
            assert_eq!(y.len(), n);
            let worst = (n / 8..7 * n / 8)
                .map(|i| (y[i] - (TAU * 150.0 * i as f64 / rate).sin()).abs())
                .fold(0.0, f64::max);
            assert!(worst < 0.02, "length {n}: {worst}");
        }
    }

    #[test]
    fn carrier_and_constant_envelope() {
        let n = 4096;
        // A carrier off the bin grid: nearly all its power in five Hann bins (Harris 1978:
        // Hann's side lobes fall at 18 dB per octave).
        let cw: Vec<Complex64> =
            (0..n).map(|i| Complex64::from_polar(1.0, 0.0123 * i as f64)).collect();
        assert!(carrier_fraction(&cw, 0.0) > 0.99);
        let f = envelope_features(&cw, 1000.0);
        assert!(f.sigma_aa < 1e-9 && f.sigma_dp < 1e-6, "{f:?}");
        // Tone AM of depth 0.5: the carrier holds 1 / (1 + m²/2) = 0.889 of the power
        // (common practice).
        let am: Vec<Complex64> =
            (0..n).map(|i| Complex64::new(1.0 + 0.5 * (0.2 * i as f64).cos(), 0.0)).collect();
        let share = carrier_fraction(&am, 0.0);
        assert!((share - 1.0 / 1.125).abs() < 0.01, "{share}");
    }
}
