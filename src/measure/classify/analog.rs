//! Analog modulation parameters: AM depth and FM peak deviation.

use super::features::{instantaneous_frequency, lowpass_gain, lowpass_real};
use super::spectrum::bin_hz;
use super::spectrum::{above, quantile};
use num_complex::Complex64;

/// AM depth as the *peak* depth of the envelope: the largest excursion of the envelope from the
/// carrier level over the carrier level, max(Amax − A, A − Amin) / A, A the mean envelope (the
/// carrier, the message having zero mean). For a symmetric message such as one tone this is
/// the textbook (Amax − Amin) / (Amax + Amin); for a voice-like message of several tones it is
/// the depth of its peaks, not that of a tone of the same power, which would read about half as
/// much for five tones.
///
/// Two estimates are made and the smaller kept:
/// - from the moments with the noise (its in-phase part, half of `noise_power`, which is what
///   moves the envelope at useful SNR) taken off exactly (the variance and fourth central
///   moment of a sum of independent terms): the message's RMS times the crest factor
///   √(3 / (3 − κ)) of equal tones in phase with the same kurtosis κ (one tone: κ = 1.5, crest
///   √2; common practice). Exact for one tone, a little high (about 10 % for five tones) when
///   many tones never all peak together, and far too high for a noise-like message (κ near 3);
/// - the 0.1 % and 99.9 % points of the envelope as measured: the noise only widens them, so
///   they bound the depth from above, close to it at high SNR, and hold the first in check.
pub fn am_depth(x: &[Complex64], noise_power: f64) -> Option<f64> {
    let a: Vec<f64> = x.iter().map(|v| v.norm()).collect();
    envelope_depth(&a, 0.5 * noise_power.max(0.0))
}

/// [`am_depth`] with the envelope first low-passed to `cutoff_hz`, where the message lies: the
/// envelope's noise (the in-phase part of the channel's, spread over the channel filter's
/// band, `response` on the FFT grid of `x`) is then cut in proportion, and the moments and
/// extremes scatter less. At 20 dB SNR in the OBW a message of several tones peaking at
/// depth 0.4 holds about as much envelope variance as the noise does over the whole channel.
pub fn am_depth_lowpassed(
    x: &[Complex64],
    rate_hz: f64,
    noise_power: f64,
    response: &[f64],
    cutoff_hz: f64,
) -> Option<f64> {
    let a: Vec<f64> = x.iter().map(|v| v.norm()).collect();
    let n = a.len();
    if n < 16 || response.len() != n {
        return am_depth(x, noise_power);
    }
    let total: f64 = response.iter().sum();
    let kept: f64 = response
        .iter()
        .enumerate()
        .map(|(k, r)| r * lowpass_gain(bin_hz(k, n, rate_hz), rate_hz, n, cutoff_hz).powi(2))
        .sum();
    let share = if total > 0.0 { kept / total } else { 1.0 };
    envelope_depth(&lowpass_real(&a, rate_hz, cutoff_hz), 0.5 * noise_power.max(0.0) * share)
}

/// The peak depth of an envelope `a` whose additive noise has variance `vn` (see [`am_depth`]).
fn envelope_depth(a: &[f64], vn: f64) -> Option<f64> {
    if a.len() < 16 {
        return None;
    }
    let n = a.len() as f64;
    let mean = a.iter().sum::<f64>() / n;
    if !above(mean, 0.0) {
        return None;
    }
    let c2 = a.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n;
    let c4 = a.iter().map(|v| (v - mean).powi(4)).sum::<f64>() / n;
    let var = c2 - vn;
    if !above(var, 0.0) {
        return Some(0.0);
    }
    // E(s + w)⁴ = E s⁴ + 6 E s² σ² + 3 σ⁴ for zero-mean s and Gaussian w of variance σ².
    // At least a tone's kurtosis (crest √2): where the noise holds most of the variance the
    // estimate scatters, and an AM message (voice, tones) is no flatter than one tone.
    let kurtosis = ((c4 - 6.0 * vn * var - 3.0 * vn * vn) / (var * var)).clamp(1.5, 2.9);
    let by_moments = (3.0 / (3.0 - kurtosis)).sqrt() * var.sqrt() / mean;
    let excursion = |q: f64| (q - mean).abs();
    let by_extremes = excursion(quantile(a, 0.999)).max(excursion(quantile(a, 0.001))) / mean;
    Some(by_moments.min(by_extremes))
}

/// Peak deviation of an FM emission, Hz: the instantaneous frequency low-passed to half the OBW
/// (Carson's rule puts the message bandwidth below it), its median removed, then the 99.9th
/// percentile of its magnitude (the peak, without the rare noise clicks).
pub fn fm_deviation(x: &[Complex64], rate_hz: f64, obw_hz: f64) -> Option<f64> {
    let f = instantaneous_frequency(x, rate_hz);
    if f.len() < 16 {
        return None;
    }
    let lp = lowpass_real(&f, rate_hz, 0.5 * obw_hz);
    let centre = quantile(&lp, 0.5);
    let dev: Vec<f64> = lp.iter().map(|v| (v - centre).abs()).collect();
    Some(quantile(&dev, 0.999))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn envelope(m: impl Fn(f64) -> f64) -> Vec<Complex64> {
        (0..20_000).map(|i| Complex64::new(1.0 + m(i as f64 / 20_000.0), 0.0)).collect()
    }

    #[test]
    fn am_depth_is_the_peak_depth_for_one_tone_and_for_several() {
        use std::f64::consts::TAU;
        for d in [0.3, 0.6, 0.9] {
            // One tone: (Amax − Amin) / (Amax + Amin) = d (common practice).
            let tone = envelope(|t| d * (TAU * 137.0 * t).cos());
            let got = am_depth(&tone, 0.0).unwrap();
            assert!((got - d).abs() < 0.01, "tone {d}: {got}");
            // Five tones scaled so their peak is d (as scripts/make-census-scenes.py builds
            // voice-band AM): a tone of the same power would read about d / 2.
            let sum = |t: f64| {
                [31.0, 73.0, 119.0, 187.0, 265.0]
                    .iter()
                    .zip([0.3, 2.0, 4.1, 1.0, 5.5])
                    .map(|(f, p)| (TAU * f * t + p).sin())
                    .sum::<f64>()
            };
            let peak = (0..20_000).map(|i| sum(i as f64 / 20_000.0).abs()).fold(0.0, f64::max);
            let five = envelope(|t| d * sum(t) / peak);
            let got = am_depth(&five, 0.0).unwrap();
            assert!((got - d).abs() < 0.05, "five tones {d}: {got}");
        }
        assert_eq!(am_depth(&[], 0.0), None);
    }

    /// Three tones peaking at depth 0.4 in noise that, over the whole channel, moves the
    /// envelope about as much as the message does: low-passed to the message band first,
    /// the depth reads within 0.1; and a flat channel's noise is cut in proportion to the band
    /// kept (with no noise the two estimates agree).
    #[test]
    fn low_passing_the_envelope_first_reads_a_noisy_message_closer() {
        use std::f64::consts::TAU;
        let (rate, n, d) = (20_000.0, 20_000, 0.4);
        let m = |t: f64| {
            [310.0, 520.0, 830.0]
                .iter()
                .zip([0.7, 2.9, 5.1])
                .map(|(f, p)| (TAU * f * t + p).sin())
                .sum::<f64>()
        };
        let peak = (0..n).map(|i| m(i as f64 / rate).abs()).fold(0.0, f64::max);
        let clean: Vec<Complex64> =
            (0..n).map(|i| Complex64::new(1.0 + d * m(i as f64 / rate) / peak, 0.0)).collect();
        let flat = vec![1.0; n];
        let quiet = am_depth_lowpassed(&clean, rate, 0.0, &flat, 1500.0).unwrap();
        assert!((quiet - am_depth(&clean, 0.0).unwrap()).abs() < 0.02, "{quiet}");
        // Message variance about (0.4 / 2.2)² / 2 ≈ 0.017; noise power 0.04 puts 0.02 on the
        // envelope.
        let noise_power = 0.04;
        let noise = crate::testkit::noise64(&mut crate::testkit::Rng::new(3), n, noise_power);
        let noisy: Vec<Complex64> = clean.iter().zip(&noise).map(|(a, b)| a + b).collect();
        let got = am_depth_lowpassed(&noisy, rate, noise_power, &flat, 1500.0).unwrap();
        assert!((got - d).abs() < 0.1, "{got}");
    }
}
