//! OFDM: the cyclic prefix repeats the end of each symbol, so the emission correlates with itself
//! at a lag of the useful symbol length N_u (van de Beek, Sandell & Börjesson, "ML estimation of
//! time and frequency offset in OFDM systems", IEEE Trans. Signal Process. 45(7):1800-1805,
//! 1997). The subcarrier spacing is 1 / (useful symbol duration).

use super::spectrum::{above, fft};
use num_complex::Complex64;

/// The correlation peak the cyclic prefix makes.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CpPeak {
    /// Useful symbol duration, s (interpolated between lags).
    pub lag_s: f64,
    /// |correlation| at that lag over the signal power: the prefix's share of a symbol,
    /// N_cp / (N_u + N_cp), for OFDM.
    pub strength: f64,
    /// Peak over the median correlation of the lags searched.
    pub prominence: f64,
}

/// Smallest strength taken as a cyclic prefix (a prefix of 1/16 of the symbol gives 0.06).
pub const MIN_STRENGTH: f64 = 0.05;
/// Smallest prominence: without a prefix the largest of a few thousand Rayleigh-like lag
/// correlations is about 3 times their median.
pub const MIN_PROMINENCE: f64 = 6.0;

/// The strongest self-correlation of `x` between 8 / OBW (inside which any band-limited signal
/// correlates with itself) and a third of the record (so at least two symbols overlap).
pub fn cp_peak(x: &[Complex64], rate_hz: f64, obw_hz: f64, noise_power: f64) -> Option<CpPeak> {
    let n = x.len();
    let lo = (8.0 * rate_hz / obw_hz).ceil() as usize;
    let hi = n / 3;
    if n < 64 || lo + 3 >= hi {
        return None;
    }
    // Zero-padded far enough that no lag searched wraps round: n + hi points, rounded up to a
    // power of two or three times one (half the transform twice the length would be, at most).
    let size = smooth_size(n + hi);
    let mut buf = vec![Complex64::new(0.0, 0.0); size];
    buf[..n].copy_from_slice(x);
    fft(&mut buf, false);
    for v in buf.iter_mut() {
        *v = Complex64::new(v.norm_sqr(), 0.0);
    }
    fft(&mut buf, true);
    let power = x.iter().map(|v| v.norm_sqr()).sum::<f64>() / n as f64 - noise_power.max(0.0);
    if !above(power, 0.0) {
        return None;
    }
    // buf[L] / size = Σ x[i + L] x*[i] (no wrap for L < hi: zero-padded to n + hi at least).
    let corr: Vec<f64> =
        (lo..hi).map(|l| buf[l].norm() / size as f64 / ((n - l) as f64 * power)).collect();
    let (i, &peak) = corr.iter().enumerate().max_by(|a, b| a.1.total_cmp(b.1))?;
    let mut sorted = corr.clone();
    let mid = sorted.len() / 2;
    let median = *sorted.select_nth_unstable_by(mid, f64::total_cmp).1;
    let prominence = if median > 0.0 { peak / median } else { f64::INFINITY };
    let delta = if i > 0 && i + 1 < corr.len() {
        let (a, b, c) = (corr[i - 1], corr[i], corr[i + 1]);
        let den = a - 2.0 * b + c;
        if den.abs() > 0.0 {
            (0.5 * (a - c) / den).clamp(-0.5, 0.5)
        } else {
            0.0
        }
    } else {
        0.0
    };
    Some(CpPeak { lag_s: ((lo + i) as f64 + delta) / rate_hz, strength: peak, prominence })
}

/// The smallest 2^k or 3·2^k at or above `n`.
fn smooth_size(n: usize) -> usize {
    let p = n.next_power_of_two();
    if p / 4 * 3 >= n {
        p / 4 * 3
    } else {
        p
    }
}
