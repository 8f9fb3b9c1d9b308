//! Gamma-distribution helpers for PSD statistics.
//!
//! An averaged periodogram bin of Gaussian noise with true density μ is distributed as
//! `μ · χ²_ν / ν`, i.e. Gamma(shape a = ν/2, scale μ/a). Noise-floor corrections and detection
//! thresholds come from this distribution rather than from rules of thumb.

use std::cell::Cell;

/// ln Γ(x) for x > 0 (Lanczos approximation, g = 7, nine coefficients; accurate to ~1e-15).
pub fn ln_gamma(x: f64) -> f64 {
    const G: f64 = 7.0;
    const C: [f64; 9] = [
        0.999_999_999_999_809_9,
        676.520_368_121_885_1,
        -1_259.139_216_722_402_8,
        771.323_428_777_653_1,
        -176.615_029_162_140_6,
        12.507_343_278_686_905,
        -0.138_571_095_265_720_12,
        9.984_369_578_019_572e-6,
        1.505_632_735_149_311_6e-7,
    ];
    if x < 0.5 {
        // Reflection: Γ(x)Γ(1−x) = π / sin(πx).
        let pi = std::f64::consts::PI;
        return (pi / (pi * x).sin()).ln() - ln_gamma(1.0 - x);
    }
    let x = x - 1.0;
    let mut a = C[0];
    for (i, c) in C.iter().enumerate().skip(1) {
        a += c / (x + i as f64);
    }
    let t = x + G + 0.5;
    0.5 * (2.0 * std::f64::consts::PI).ln() + (x + 0.5) * t.ln() - t + a.ln()
}

/// Regularised lower incomplete gamma function P(a, x), by its series below a + 1 and by a
/// continued fraction for the upper function above (the standard split; Abramowitz & Stegun 6.5).
pub fn gamma_p(a: f64, x: f64) -> f64 {
    if x <= 0.0 {
        return 0.0;
    }
    let log_prefix = -x + a * x.ln() - ln_gamma(a);
    if x < a + 1.0 {
        let (mut ap, mut del, mut sum) = (a, 1.0 / a, 1.0 / a);
        for _ in 0..100_000 {
            ap += 1.0;
            del *= x / ap;
            sum += del;
            if del.abs() < sum.abs() * 1e-15 {
                break;
            }
        }
        (sum * log_prefix.exp()).clamp(0.0, 1.0)
    } else {
        const TINY: f64 = 1e-300;
        let mut b = x + 1.0 - a;
        let mut c = 1.0 / TINY;
        let mut d = 1.0 / b;
        let mut h = d;
        for i in 1..100_000 {
            let an = -(i as f64) * (i as f64 - a);
            b += 2.0;
            d = an * d + b;
            if d.abs() < TINY {
                d = TINY;
            }
            c = b + an / c;
            if c.abs() < TINY {
                c = TINY;
            }
            d = 1.0 / d;
            let del = d * c;
            h *= del;
            if (del - 1.0).abs() < 1e-15 {
                break;
            }
        }
        (1.0 - log_prefix.exp() * h).clamp(0.0, 1.0)
    }
}

/// Quantile `q` of a Gamma distribution with shape `a` and mean 1 (scale 1/a), by bisection.
///
/// A bisection costs a few hundred [`gamma_p`] evaluations, and the per-row measurements (the
/// noise floor, the detector) ask for the same few quantiles row after row, so the last
/// answers are remembered per thread: a remembered answer is the computed one, to the bit.
pub fn gamma_quantile_unit_mean(q: f64, a: f64) -> f64 {
    remembered(&QUANTILES, (q, a), || bisect_quantile(q, a))
}

/// Answers remembered by [`remembered`]: a few `(key, value)` pairs, the newest first.
type Memory = Cell<[Option<((u64, u64), f64)>; MEMORY]>;

/// Distinct arguments remembered per function: a command asks for at most a handful.
const MEMORY: usize = 8;

thread_local! {
    static QUANTILES: Memory = const { Cell::new([None; MEMORY]) };
    static TRUNCATED: Memory = const { Cell::new([None; MEMORY]) };
}

/// `compute()` for the arguments `(x, y)`, taken from `memory` when they were seen lately.
/// The key is the arguments' bits, so only the very same arguments share an answer; the memory
/// is a fixed array (no allocation), the newest answer in front.
fn remembered(
    memory: &'static std::thread::LocalKey<Memory>,
    (x, y): (f64, f64),
    compute: impl FnOnce() -> f64,
) -> f64 {
    let key = (x.to_bits(), y.to_bits());
    memory.with(|cell| {
        let mut seen = cell.get();
        let value = match seen.iter().position(|e| matches!(e, Some((k, _)) if *k == key)) {
            Some(i) => {
                let value = seen[i].expect("found").1;
                seen[..=i].rotate_right(1);
                value
            }
            None => {
                let value = compute();
                seen.rotate_right(1);
                seen[0] = Some((key, value));
                value
            }
        };
        cell.set(seen);
        value
    })
}

fn bisect_quantile(q: f64, a: f64) -> f64 {
    let (mut lo, mut hi) = (0.0f64, 1.0f64);
    while gamma_p(a, a * hi) < q {
        hi *= 2.0;
        if hi > 1e6 {
            break;
        }
    }
    for _ in 0..100 {
        let mid = 0.5 * (lo + hi);
        let before = (lo, hi);
        if gamma_p(a, a * mid) < q {
            lo = mid;
        } else {
            hi = mid;
        }
        // Once the bounds are neighbouring floats a step changes nothing, and every later step
        // would repeat it: stop (some sixty steps in, where the loop used to run all hundred;
        // the answer is the same to the bit). The noise tracker asks for new quantiles on each
        // of its first rows, while its average grows.
        if (lo, hi) == before {
            break;
        }
    }
    0.5 * (lo + hi)
}

/// Mean of a unit-mean Gamma(a) variable given that it is below `t`: `P(a+1, a·t) / P(a, a·t)`.
/// Remembered like [`gamma_quantile_unit_mean`].
pub fn truncated_mean_unit(a: f64, t: f64) -> f64 {
    remembered(&TRUNCATED, (a, t), || truncated_mean(a, t))
}

fn truncated_mean(a: f64, t: f64) -> f64 {
    let p = gamma_p(a, a * t);
    if p <= 0.0 {
        return t * 0.5;
    }
    gamma_p(a + 1.0, a * t) / p
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ln_gamma_at_known_points() {
        // Γ(n) = (n−1)!, Γ(1/2) = √π (common practice / A&S 6.1).
        assert!((ln_gamma(5.0) - 24f64.ln()).abs() < 1e-12);
        assert!((ln_gamma(0.5) - std::f64::consts::PI.sqrt().ln()).abs() < 1e-12);
        assert!((ln_gamma(101.0) - 363.739_375_555_563_5).abs() < 1e-9);
    }

    #[test]
    fn incomplete_gamma_closed_forms() {
        // P(1, x) = 1 − e^{−x} (exponential distribution): the single-periodogram case.
        for x in [0.01f64, 0.5, 1.0, 3.0, 10.0] {
            assert!((gamma_p(1.0, x) - (1.0 - (-x).exp())).abs() < 1e-13, "x={x}");
        }
        // P(2, x) = 1 − (1 + x) e^{−x}.
        for x in [0.3f64, 2.0, 7.5] {
            assert!((gamma_p(2.0, x) - (1.0 - (1.0 + x) * (-x).exp())).abs() < 1e-13);
        }
    }

    #[test]
    fn remembered_answers_are_the_computed_ones() {
        // More distinct arguments than the memory holds, asked twice over in turn: every answer,
        // fresh or remembered, equals a bisection done now, to the bit.
        let args: Vec<(f64, f64)> =
            (0..2 * MEMORY).map(|i| (0.1 + 0.05 * i as f64, 1.0 + i as f64)).collect();
        for _ in 0..2 {
            for &(q, a) in args.iter().chain(args.iter().rev()) {
                assert_eq!(
                    gamma_quantile_unit_mean(q, a).to_bits(),
                    bisect_quantile(q, a).to_bits()
                );
                assert_eq!(truncated_mean_unit(a, q).to_bits(), truncated_mean(a, q).to_bits());
            }
        }
    }

    #[test]
    fn median_of_exponential_is_ln2() {
        // Design notes §3: a single-frame median reads ln 2 of the mean (1.59 dB low).
        let m = gamma_quantile_unit_mean(0.5, 1.0);
        assert!((m - std::f64::consts::LN_2).abs() < 1e-9);
    }

    #[test]
    fn truncated_mean_of_exponential() {
        // E[x | x < t] for Exp(1) = 1 − t e^{−t}/(1 − e^{−t}) (elementary integral).
        let t: f64 = 3.0;
        let expect = 1.0 - t * (-t).exp() / (1.0 - (-t).exp());
        assert!((truncated_mean_unit(1.0, t) - expect).abs() < 1e-12);
    }

    #[test]
    fn chi2_upper_points_used_for_detection() {
        // χ²₂/2 is Exp(1): its 1 − 10⁻⁶ point is ln 10⁶ (closed form). χ²₈'s upper 0.1 % point is
        // 26.12 (standard χ² tables, e.g. scipy.stats.chi2.isf(1e-3, 8); from memory).
        assert!((gamma_quantile_unit_mean(1.0 - 1e-6, 1.0) - 1e6f64.ln()).abs() < 1e-6);
        let q = gamma_quantile_unit_mean(1.0 - 1e-3, 4.0) * 8.0;
        assert!((q - 26.12).abs() < 0.01, "{q}");
    }
}
