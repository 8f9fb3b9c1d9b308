//! Keyed emissions: a burst taken with some of the silence around it (an emission's span is cut
//! from the spectrum's rows, so it starts and ends up to a row early or late) has an on/off
//! envelope that is not its modulation: it raises the power variance of a constant-envelope
//! emission (unfiltered PSK, FSK, MSK) into the amplitude-varying classes, and its edges put
//! lines of their own into the timing spectra. Before any feature is computed the analysis is
//! confined to the longest stretch where the emission is on, less a guard at each end.

use super::features::moving_average;
use super::spectrum::{above, quantile};
use num_complex::Complex64;

/// Smoothed power under the geometric mean of the on level and the noise is "off" (half-way
/// between them in dB), and at most this share of the on level. Amplitude-varying modulations
/// stay well above it once smoothed over a few symbol times: 16QAM's symbol power falls to 0.2
/// of its mean only at the innermost points, full AM's envelope touches 0 only briefly.
const OFF_SHARE: f64 = 0.1;
/// Off stretches must sit at the noise: their median smoothed power under this many times the
/// noise power (smoothed over [`SMOOTH`] samples, noise alone scatters by about 18 %), so a
/// deep but brief fade is not a key-up.
const OFF_MEDIAN: f64 = 2.0;
/// The on level must stand this far above the noise (6 dB) for on and off to be told apart.
const MIN_ON_OVER_NOISE: f64 = 4.0;
/// Samples of smoothing: 32 at 4 × OBW is eight times 1 / OBW, a few symbol times of any
/// linear modulation of that width.
const SMOOTH: usize = 32;
/// Off stretches shorter than this many smoothing lengths are bridged (a deep dip inside a burst).
const BRIDGE: usize = 2;
/// Least share of the record that is off before it is trimmed at all.
const MIN_OFF: f64 = 0.02;

/// The sample range `[start, end)` of `x` to analyse: the longest on stretch, less one smoothing
/// length at each end, when `x` is keyed (off at the noise for at least [`MIN_OFF`] of it);
/// None when it is on throughout or never clearly on.
pub fn on_stretch(x: &[Complex64], noise_power: f64) -> Option<(usize, usize)> {
    let n = x.len();
    if n < 8 * SMOOTH {
        return None;
    }
    let p: Vec<f64> = x.iter().map(|v| v.norm_sqr()).collect();
    let s = moving_average(&p, SMOOTH);
    let on_level = quantile(&s, 0.9);
    let noise = noise_power.max(0.0);
    if !above(on_level, MIN_ON_OVER_NOISE * noise) || !above(on_level, 0.0) {
        return None;
    }
    let limit = (on_level * noise).sqrt().max(OFF_SHARE * on_level);
    let off: Vec<f64> = s.iter().copied().filter(|&v| v < limit).collect();
    let at_noise = quantile(&off, 0.5) < OFF_MEDIAN * noise.max(1e-3 * on_level);
    if (off.len() as f64) < MIN_OFF * n as f64 || !at_noise {
        return None;
    }
    // Runs of "on", with short off gaps bridged.
    let mut best = (0usize, 0usize);
    let mut run: Option<usize> = None;
    let mut gap = 0usize;
    for (i, &v) in s.iter().enumerate() {
        if v >= limit {
            run.get_or_insert(i);
            gap = 0;
        } else if let Some(a) = run {
            gap += 1;
            if gap > BRIDGE * SMOOTH {
                let b = i + 1 - gap;
                if b - a > best.1 - best.0 {
                    best = (a, b);
                }
                run = None;
                gap = 0;
            }
        }
    }
    if let Some(a) = run {
        let b = n - gap;
        if b - a > best.1 - best.0 {
            best = (a, b);
        }
    }
    let (a, b) = (best.0 + SMOOTH, best.1.saturating_sub(SMOOTH));
    (b > a).then_some((a, b))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn burst(n: usize, on: std::ops::Range<usize>) -> Vec<Complex64> {
        // Unit-power QPSK-like phase steps every 7 samples while on, a little noise-like
        // ripple while off (deterministic).
        (0..n)
            .map(|i| {
                if on.contains(&i) {
                    Complex64::from_polar(
                        1.0,
                        std::f64::consts::FRAC_PI_2 * ((i / 7 * 5) % 4) as f64,
                    )
                } else {
                    Complex64::new(1e-3 * ((i * 7919) % 13) as f64, 0.0)
                }
            })
            .collect()
    }

    #[test]
    fn a_burst_is_cut_to_its_keyed_stretch_and_a_steady_emission_is_left_whole() {
        let x = burst(4000, 500..3500);
        let (a, b) = on_stretch(&x, 1e-6).unwrap();
        assert!(
            (500..=500 + 2 * SMOOTH).contains(&a) && (3500 - 2 * SMOOTH..=3500).contains(&b),
            "{a} {b}"
        );
        assert_eq!(on_stretch(&burst(4000, 0..4000), 1e-6), None);
        // Two bursts: the longer is kept.
        let mut two = burst(4000, 200..1000);
        two[1500..3800].copy_from_slice(&burst(4000, 0..4000)[1500..3800]);
        let (a, b) = on_stretch(&two, 1e-6).unwrap();
        assert!(a >= 1500 && b <= 3800 && b - a > 2000, "{a} {b}");
    }
}
