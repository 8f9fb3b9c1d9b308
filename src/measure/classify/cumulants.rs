//! Normalised higher-order cumulants of a complex sequence, with the power of additive circular
//! Gaussian noise taken off (Swami & Sadler, "Hierarchical digital modulation classification
//! using cumulants", IEEE Trans. Commun. 48(3):416-429, 2000).
//!
//! With moments Mpq = E[x^(p−q) x*^q]: C20 = M20, C21 = M21, C40 = M40 − 3 M20²,
//! C42 = M42 − |M20|² − 2 M21². Gaussian noise adds to C21 only (its higher cumulants are zero),
//! and for x = s + n with circular n of power N: M42(x) = M42(s) + 4 M21(s) N + 2 N².
//! Each is normalised by C21^(p/2) of the signal alone. At one sample per symbol, noiseless:
//! BPSK |C20| 1, |C40| 2, C42 −2; QPSK 0, 1, −1; 8PSK 0, 0, −1; 16QAM 0, 0.68, −0.68;
//! 64QAM 0, 0.619, −0.619; Gaussian noise 0, 0, 0 (the paper's table).

use super::spectrum::above;
use num_complex::Complex64;

/// Normalised cumulants of the signal part of a sequence.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Cumulants {
    /// |C20| / C21: 1 for real-valued constellations (BPSK), 0 for circular ones.
    pub c20: f64,
    /// |C40| / C21² (its phase follows the carrier phase, so only the magnitude is kept).
    pub c40: f64,
    /// C42 / C21².
    pub c42: f64,
    /// C21 of the signal alone (mean power with the noise taken off).
    pub power: f64,
}

/// The cumulants of `z` with `noise_power` (per sample, circular Gaussian) taken off; None when
/// the sequence is empty or no signal power is left.
pub fn normalised(z: &[Complex64], noise_power: f64) -> Option<Cumulants> {
    if z.is_empty() {
        return None;
    }
    let n = z.len() as f64;
    let (mut m20, mut m21, mut m40, mut m42) =
        (Complex64::new(0.0, 0.0), 0.0, Complex64::new(0.0, 0.0), 0.0);
    for &v in z {
        let v2 = v * v;
        let p = v.norm_sqr();
        m20 += v2;
        m21 += p;
        m40 += v2 * v2;
        m42 += p * p;
    }
    let (m20, m21, m40, m42) = (m20 / n, m21 / n, m40 / n, m42 / n);
    let noise = if noise_power.is_finite() { noise_power.max(0.0) } else { 0.0 };
    let c21 = m21 - noise;
    if !above(c21, 0.0) || !c21.is_finite() {
        return None;
    }
    let m42s = m42 - 4.0 * c21 * noise - 2.0 * noise * noise;
    let c40 = m40 - 3.0 * m20 * m20;
    let c42 = m42s - m20.norm_sqr() - 2.0 * c21 * c21;
    Some(Cumulants {
        c20: m20.norm() / c21,
        c40: c40.norm() / (c21 * c21),
        c42: c42 / (c21 * c21),
        power: c21,
    })
}

/// Normalised variance of the instantaneous power of the signal part,
/// E|s|⁴ / (E|s|²)² − 1, with the noise taken off as above: 0 for a constant envelope, 1 for a
/// Gaussian (noise-like, OFDM) envelope, about 2m² for AM of small depth m.
pub fn power_variance(x: &[Complex64], noise_power: f64) -> Option<f64> {
    if x.is_empty() {
        return None;
    }
    let n = x.len() as f64;
    let m21 = x.iter().map(|v| v.norm_sqr()).sum::<f64>() / n;
    let m42 = x.iter().map(|v| v.norm_sqr().powi(2)).sum::<f64>() / n;
    let noise = if noise_power.is_finite() { noise_power.max(0.0) } else { 0.0 };
    let c21 = m21 - noise;
    if !above(c21, 0.0) || !c21.is_finite() {
        return None;
    }
    Some((m42 - 4.0 * c21 * noise - 2.0 * noise * noise) / (c21 * c21) - 1.0)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::testkit::Rng;

    fn symbols(rng: &mut Rng, n: usize, pick: impl Fn(&mut Rng) -> Complex64) -> Vec<Complex64> {
        (0..n).map(|_| pick(rng)).collect()
    }

    fn psk(order: usize) -> impl Fn(&mut Rng) -> Complex64 {
        move |r: &mut Rng| {
            let k = r.below(order) as f64;
            Complex64::from_polar(1.0, 2.0 * std::f64::consts::PI * k / order as f64 + 0.3)
        }
    }

    fn qam(side: usize) -> impl Fn(&mut Rng) -> Complex64 {
        move |r: &mut Rng| {
            let level = |r: &mut Rng| 2.0 * r.below(side) as f64 - (side as f64 - 1.0);
            Complex64::new(level(r), level(r))
        }
    }

    /// Swami & Sadler 2000, table of theoretical cumulants (one sample per symbol, unit power,
    /// no noise), against the estimators on 200 000 seeded symbols. The sample cumulants of a
    /// bounded constellation scatter by about sqrt(var/n) ≈ 0.005 at this length, so 0.02 is
    /// four standard deviations and more.
    #[test]
    fn cumulants_match_swami_sadler_table() {
        let n = 200_000;
        let mut rng = Rng::new(0x5eed_c0de);
        let cases: Vec<(&str, Vec<Complex64>, [f64; 3])> = vec![
            ("BPSK", symbols(&mut rng, n, psk(2)), [1.0, 2.0, -2.0]),
            ("QPSK", symbols(&mut rng, n, psk(4)), [0.0, 1.0, -1.0]),
            ("8PSK", symbols(&mut rng, n, psk(8)), [0.0, 0.0, -1.0]),
            ("16QAM", symbols(&mut rng, n, qam(4)), [0.0, 0.68, -0.68]),
            ("64QAM", symbols(&mut rng, n, qam(8)), [0.0, 0.619, -0.619]),
            (
                "Gaussian",
                (0..n)
                    .map(|_| {
                        let c = rng.complex_gauss(1.0);
                        Complex64::new(c.re, c.im)
                    })
                    .collect(),
                [0.0, 0.0, 0.0],
            ),
        ];
        for (name, z, [c20, c40, c42]) in cases {
            let c = normalised(&z, 0.0).unwrap();
            assert!((c.c20 - c20).abs() < 0.02, "{name}: |C20| {} vs {c20}", c.c20);
            assert!((c.c40 - c40).abs() < 0.02, "{name}: |C40| {} vs {c40}", c.c40);
            assert!((c.c42 - c42).abs() < 0.02, "{name}: C42 {} vs {c42}", c.c42);
        }
    }

    /// The same table with noise at 10 dB SNR added and its known power taken off: the noise
    /// terms cancel in expectation (Gaussian cumulants above order 2 vanish, Swami & Sadler
    /// 2000 §II), so the estimates stay near the noiseless values; the tolerance is wider (0.05)
    /// because the noise raises the estimator's variance.
    #[test]
    fn noise_power_is_taken_off() {
        let n = 200_000;
        let mut rng = Rng::new(77);
        let noise = 0.1;
        for (name, z, c42) in [
            ("QPSK", symbols(&mut rng, n, psk(4)), -1.0),
            ("16QAM", symbols(&mut rng, n, qam(4)), -0.68),
        ] {
            let scale = 1.0 / (z.iter().map(|v| v.norm_sqr()).sum::<f64>() / n as f64).sqrt();
            let noisy: Vec<Complex64> = z
                .iter()
                .map(|&v| {
                    let g = rng.complex_gauss(noise);
                    v * scale + Complex64::new(g.re, g.im)
                })
                .collect();
            let c = normalised(&noisy, noise).unwrap();
            assert!((c.c42 - c42).abs() < 0.05, "{name}: C42 {} vs {c42}", c.c42);
            let raw = normalised(&noisy, 0.0).unwrap();
            assert!((raw.c42 - c42).abs() > 0.1, "{name}: ignoring the noise must show");
        }
    }

    #[test]
    fn power_variance_of_constant_and_gaussian_envelopes() {
        let mut rng = Rng::new(5);
        let ce: Vec<Complex64> =
            (0..10_000).map(|i| Complex64::from_polar(2.0, i as f64 * 0.37)).collect();
        assert!(power_variance(&ce, 0.0).unwrap().abs() < 1e-9);
        let g: Vec<Complex64> = (0..200_000)
            .map(|_| {
                let c = rng.complex_gauss(1.0);
                Complex64::new(c.re, c.im)
            })
            .collect();
        // E|n|⁴ = 2 (E|n|²)² for circular Gaussian noise (common practice): variance 1.
        assert!((power_variance(&g, 0.0).unwrap() - 1.0).abs() < 0.03);
        assert!(normalised(&[], 0.0).is_none());
        assert!(power_variance(&g, 5.0).is_none());
    }
}
