//! Analog modulation parameters: AM depth and FM peak deviation.

use super::features::{instantaneous_frequency, lowpass_real};
use super::spectrum::{above, quantile};
use num_complex::Complex64;

/// Normalised power variance E|s|⁴/(E|s|²)² − 1 of s = 1 + m cos θ (θ uniform):
/// (1 + 3m² + 3m⁴/8) / (1 + m²/2)² − 1.
fn tone_am_power_variance(m: f64) -> f64 {
    let m2 = m * m;
    (1.0 + 3.0 * m2 + 0.375 * m2 * m2) / (1.0 + 0.5 * m2).powi(2) - 1.0
}

/// AM depth: the depth m of a sinusoidal message that gives the measured (noise-corrected)
/// power variance. For a tone this is the depth (Amax − Amin)/(Amax + Amin); for another message
/// it is the depth of the tone with the same envelope variance. Monotonic for m up to 1.5, the
/// range searched.
pub fn am_depth(power_variance: f64) -> f64 {
    let (mut lo, mut hi) = (0.0, 1.5);
    if !above(power_variance, 0.0) {
        return 0.0;
    }
    if power_variance >= tone_am_power_variance(hi) {
        return hi;
    }
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if tone_am_power_variance(mid) < power_variance {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
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

    #[test]
    fn am_depth_inverts_the_tone_formula() {
        for m in [0.1, 0.3, 0.5, 0.9, 1.2] {
            assert!((am_depth(tone_am_power_variance(m)) - m).abs() < 1e-9, "{m}");
        }
        assert_eq!(am_depth(f64::NAN), 0.0);
        assert_eq!(am_depth(-1.0), 0.0);
    }
}
