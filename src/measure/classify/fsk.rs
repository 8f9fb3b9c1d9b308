//! Frequency-shift keying: the instantaneous frequency of FSK dwells on M equally spaced tones
//! and jumps between them at the symbol instants. The jumps make a spectral line at the symbol
//! rate in |d f/dt| (its phase marks them); averaged over the middle half of each symbol the
//! frequency clusters tightly around the tones, while an analog FM message spreads continuously.

use super::features::{instantaneous_frequency, lowpass_real, moving_average};
use super::rate::LINE_PROMINENCE;
use super::spectrum::{above, dft_at, find_line, quantile};
use num_complex::Complex64;
use std::f64::consts::PI;

/// What the FSK analysis found.
#[derive(Clone, Debug, PartialEq)]
pub struct Fsk {
    pub symbol_rate_hz: f64,
    pub tones: u32,
    /// Spacing of adjacent tones, Hz.
    pub shift_hz: f64,
    /// Smallest spacing of adjacent tone clusters over their pooled standard deviation.
    pub separation: f64,
    /// Share of all samples whose (smoothed) frequency lies within a quarter shift of a tone.
    pub dwell: f64,
    /// Symbols in the record.
    pub symbols: usize,
    /// How abruptly the frequency moves between tones: over the transitions between symbols on
    /// different tones, the mean share of the change that happens within a third of a symbol
    /// around the boundary (median). FSK jumps (near 1, less the channel filter's smoothing); an analog
    /// FM tone at half the apparent symbol rate moves as a cosine and gets only
    /// cos(π/3) − cos(2π/3) over 2 = 0.5.
    pub sharpness: f64,
    /// Share of neighbouring symbols on the same tone: near 1/M for random data; near 0 for an
    /// analog FM tone read as "symbols" at twice its frequency (it alternates high, low, high).
    pub repeats: f64,
    /// Tone spacing from the phase advance over whole symbols (the frequency averaged over each
    /// symbol), Hz: for continuous-phase FSK the phase moves by 2π · tone · T over a symbol
    /// whatever smooths the jumps between tones, where the half-symbol averages of `shift_hz`
    /// fall short once the transitions take most of a symbol (low modulation index, MSK).
    pub symbol_shift_hz: f64,
}

/// Adjacent clusters must lie at least this many pooled standard deviations apart: a
/// continuous (analog FM) spread split into clusters gives about 2.7 for a Gaussian and 4.1 for
/// the arcsine law of a single modulating tone; FSK at 10 dB SNR gives 8 or more.
pub const MIN_SEPARATION: f64 = 5.0;
/// FSK keeps most of its time on the tones (a single-tone FM spends 59 % of it within a
/// quarter spacing of its 2-means centres; 4-FSK at 10 dB SNR about 69 %).
pub const MIN_DWELL: f64 = 0.65;

/// Sharpness from which the transitions are taken as keyed jumps, and below which the frequency
/// is taken to move like an analog message (not FSK); in between, `unknown`. Between the 0.5 of
/// an FM tone (above) and the 0.8 to 1.1 that unshaped FSK with modulation index 0.8 to 2 reads
/// after the channel filter at 10 to 30 dB SNR in the scenes of tests/classify.rs.
pub const MIN_SHARPNESS: f64 = 0.7;
pub const ANALOG_SHARPNESS: f64 = 0.65;
/// Continuous-phase FSK of low modulation index (MSK and GMSK: index ½) changes frequency
/// over most of a symbol, so it is not sharp; it is told from an analog tone by its data: a
/// share of neighbouring symbols on the same tone of at least half the 1/M of random data.
pub const MIN_REPEATS_TIMES_M: f64 = 0.5;

/// Symbol-rate line search ranges of |d f/dt|, as fractions of the OBW: first where FSK of
/// index 1 or more puts it (its OBW is 2 to 4 symbol rates), then, when that finds no tones,
/// where low-index CPFSK puts it (MSK's 99 % OBW is about 1.2 bit rates, Pasupathy, IEEE
/// Commun. Mag. 17(4), 1979; a GMSK's less).
/// Each with the cut-off of the smoothing before |d f/dt| (also OBW fractions): half the OBW
/// below, where FSK's rate lies; the whole OBW for the upper range, whose line needs the rate
/// itself passed.
const RATE_RANGES: [(f64, f64, f64); 2] = [(0.05, 0.7, 0.5), (0.7, 1.4, 1.0)];

/// Candidate FSK parameters of a baseband emission, or None when no symbol-rate line shows in
/// the frequency's derivative or the frequency does not cluster on equally spaced tones.
pub fn analyse(x: &[Complex64], rate_hz: f64, obw_hz: f64) -> Option<Fsk> {
    let f = instantaneous_frequency(x, rate_hz);
    if f.len() < 64 {
        return None;
    }
    RATE_RANGES.iter().find_map(|&(lo, hi, cut)| analyse_in(&f, rate_hz, obw_hz, (lo, hi), cut))
}

/// [`analyse`] with the symbol-rate line searched between `range` times the OBW, after
/// smoothing the frequency to `cut` times the OBW.
fn analyse_in(f: &[f64], rate_hz: f64, obw_hz: f64, range: (f64, f64), cut: f64) -> Option<Fsk> {
    let (lo, hi) = range;
    let smooth = lowpass_real(f, rate_hz, cut * obw_hz);
    let d: Vec<f64> = smooth.windows(2).map(|w| (w[1] - w[0]).abs()).collect();
    let line = find_line(&d, rate_hz, lo * obw_hz, (hi * obw_hz).min(0.45 * rate_hz))?;
    if line.prominence < LINE_PROMINENCE {
        return None;
    }
    let symbol_rate = line.freq_hz;
    let sps = rate_hz / symbol_rate;
    // d[n] sits at sample time n + 1 of x, f[n] at n + ½: transitions at d-index τ + k·sps.
    let tau = (-dft_at(&d, rate_hz, symbol_rate).arg() / (2.0 * PI)).rem_euclid(1.0) * sps;
    let centre_first = tau + 0.5 + sps / 2.0;
    let at_centres = |len: f64| {
        let avg = moving_average(f, (len.round() as usize).max(1));
        let mut values = Vec::new();
        let mut centres_at = Vec::new();
        let mut t = centre_first % sps;
        while t < (avg.len() - 1) as f64 {
            let i = t.floor() as usize;
            let u = t - i as f64;
            values.push(avg[i] * (1.0 - u) + avg[i + 1] * u);
            centres_at.push(t);
            t += sps;
        }
        (values, centres_at)
    };
    let (values, centres_at) = at_centres(sps / 2.0);
    let mut best: Option<(usize, Vec<f64>, f64)> = None;
    for m in [2usize, 4, 8] {
        if values.len() < 8 * m {
            break;
        }
        let (centres, pooled, shares) = kmeans_1d(&values, m);
        let gaps: Vec<f64> = centres.windows(2).map(|w| w[1] - w[0]).collect();
        let min_gap = gaps.iter().copied().fold(f64::INFINITY, f64::min);
        let max_gap = gaps.iter().copied().fold(0.0, f64::max);
        let sep = if pooled > 0.0 { min_gap / pooled } else { f64::INFINITY };
        let even = max_gap <= 1.5 * min_gap;
        let populated = shares.iter().all(|&s| s >= 0.25 / m as f64);
        if sep >= MIN_SEPARATION && even && populated {
            best = Some((m, centres, sep));
        }
    }
    let (m, centres, separation) = best?;
    let shift = (centres[m - 1] - centres[0]) / (m - 1) as f64;
    let near =
        smooth.iter().filter(|&&v| centres.iter().any(|c| (v - c).abs() <= shift / 4.0)).count();
    let sharpness = sharpness(f, &centres_at, &values, sps, shift);
    let nearest =
        |v: f64| (0..m).min_by(|&i, &j| (v - centres[i]).abs().total_cmp(&(v - centres[j]).abs()));
    let tone: Vec<Option<usize>> = values.iter().map(|&v| nearest(v)).collect();
    let repeats = tone.windows(2).filter(|w| w[0] == w[1]).count() as f64
        / (tone.len().saturating_sub(1)).max(1) as f64;
    let (whole, _) = at_centres(sps);
    let symbol_shift = run_shift(&whole, &tone, m);
    Some(Fsk {
        sharpness,
        repeats,
        symbol_shift_hz: symbol_shift,
        symbol_rate_hz: symbol_rate,
        tones: m as u32,
        shift_hz: shift,
        separation,
        dwell: near as f64 / smooth.len() as f64,
        symbols: values.len(),
    })
}

/// Tone spacing from whole-symbol frequency averages `whole`, taken only at symbols whose two
/// neighbours are on the same tone (`tone`): there the filters' smoothing of the jumps
/// does not reach, so the average is the tone itself. The median per tone; the spacing is
/// the span of the extreme tones over M − 1. NaN when a tone has no such symbol.
fn run_shift(whole: &[f64], tone: &[Option<usize>], m: usize) -> f64 {
    let mut per_tone = vec![Vec::new(); m];
    for k in 1..tone.len().min(whole.len()).saturating_sub(1) {
        if let (Some(t), true) = (tone[k], tone[k - 1] == tone[k] && tone[k + 1] == tone[k]) {
            per_tone[t].push(whole[k]);
        }
    }
    if per_tone.iter().any(Vec::is_empty) {
        return f64::NAN;
    }
    let levels: Vec<f64> = per_tone.iter().map(|v| quantile(v, 0.5)).collect();
    let (lo, hi) =
        levels.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| (a.min(v), b.max(v)));
    (hi - lo) / (m - 1) as f64
}

/// See [`Fsk::sharpness`]: for neighbouring symbol centres whose values differ by half a shift
/// or more, (f(m + T/6) − f(m − T/6)) / (v[k+1] − v[k]) at their midpoint m, on the raw
/// instantaneous frequency (only the channel filter, 2.4 symbol rates wide or more for FSK,
/// smooths the jump); the median over the transitions, so the clicks of noise do not count.
fn sharpness(f: &[f64], centres: &[f64], values: &[f64], sps: f64, shift: f64) -> f64 {
    let at = |t: f64| -> Option<f64> {
        if t < 0.0 || t >= (f.len() - 1) as f64 {
            return None;
        }
        let i = t.floor() as usize;
        let u = t - i as f64;
        Some(f[i] * (1.0 - u) + f[i + 1] * u)
    };
    let mut ratios = Vec::new();
    for k in 0..centres.len().saturating_sub(1) {
        let step = values[k + 1] - values[k];
        if step.abs() < shift / 2.0 {
            continue;
        }
        let m = 0.5 * (centres[k] + centres[k + 1]);
        if let (Some(a), Some(b)) = (at(m - sps / 6.0), at(m + sps / 6.0)) {
            ratios.push((b - a) / step);
        }
    }
    quantile(&ratios, 0.5)
}

/// Least share of the squared signal's power in each of MSK's two lines (in theory a quarter
/// each: x² of MSK is continuous-phase FSK of index 1, whose two tones hold half the power;
/// GMSK keeps less, about 0.08 to 0.15 at BT 0.3 over 10 to 30 dB SNR in a numpy check).
pub const MSK_LINE: f64 = 0.07;
/// Most share of the signal's own power in one line for MSK (none in theory, but a continuous
/// spectrum's largest bin of a short record reads up to about 0.06). An FM tone keeps all of its
/// power in lines J_k(β)², and where its square's pair is as far apart as MSK's (β ≤ 1, as the
/// spacing must be half the OBW or more) its carrier alone keeps J0(1)² = 0.59 or more.
pub const MSK_OWN_LINE: f64 = 0.12;

/// MSK (continuous-phase binary FSK of index ½) by its squaring lines: x² has a line at each
/// of its two tones, ±R/4 doubled to ±R/2 about twice the carrier (the lines an MSK receiver's
/// squaring loop locks to; Pasupathy, IEEE Commun. Mag. 17(4), 1979), while x itself has none.
/// Found even where the noise hides the tones' clusters. Returns the bit rate (the lines'
/// spacing) and the weaker line's share of the power of x².
pub fn msk_lines(x: &[Complex64], rate_hz: f64, obw_hz: f64) -> Option<(f64, f64)> {
    let n = x.len();
    if n < 64 {
        return None;
    }
    let unit = |v: &Complex64| if v.norm() > 0.0 { v / v.norm() } else { Complex64::new(0.0, 0.0) };
    let own = line_shares(&x.iter().map(unit).collect::<Vec<_>>());
    if own.first().is_some_and(|l| l.1 > MSK_OWN_LINE) {
        return None;
    }
    let sq = line_shares(&x.iter().map(|v| unit(v).powi(2)).collect::<Vec<_>>());
    let (a, b) = (sq.first()?, sq.get(1)?);
    let spacing = (a.0 - b.0).abs() * rate_hz;
    let plausible = spacing >= 0.5 * obw_hz && spacing <= 1.5 * obw_hz;
    (b.1 >= MSK_LINE && plausible).then_some((spacing, b.1))
}

/// The two strongest lines of a unit-power sequence: (frequency / rate, share of power), each
/// the peak of a Hann-windowed spectrum with two bins either side (as
/// [`super::features::carrier_fraction`]), the second at least eight bins from the first.
fn line_shares(y: &[Complex64]) -> Vec<(f64, f64)> {
    let n = y.len();
    let w: Vec<f64> = (0..n).map(|i| 0.5 - 0.5 * (2.0 * PI * i as f64 / n as f64).cos()).collect();
    let mut spec: Vec<Complex64> = y.iter().zip(&w).map(|(v, w)| v * w).collect();
    super::spectrum::fft(&mut spec, false);
    let p: Vec<f64> = spec.iter().map(|v| v.norm_sqr()).collect();
    let total: f64 = p.iter().sum();
    if !above(total, 0.0) {
        return Vec::new();
    }
    let around = |k: usize| (0..5).map(|d| p[(k + n + d - 2) % n]).sum::<f64>() / total;
    let first = (0..n).max_by(|&a, &b| p[a].total_cmp(&p[b])).unwrap_or(0);
    let far = |k: usize| {
        let d = (k + n - first) % n;
        d.min(n - d) >= 8
    };
    let second = (0..n).filter(|&k| far(k)).max_by(|&a, &b| p[a].total_cmp(&p[b]));
    let freq = |k: usize| super::spectrum::bin_hz(k, n, 1.0);
    let mut out = vec![(freq(first), around(first))];
    if let Some(k) = second {
        out.push((freq(k), around(k)));
    }
    out
}

/// Lloyd's k-means in one dimension, started at the quantiles: sorted centres, pooled
/// within-cluster standard deviation and each cluster's share of the values.
fn kmeans_1d(v: &[f64], k: usize) -> (Vec<f64>, f64, Vec<f64>) {
    let mut sorted = v.to_vec();
    sorted.sort_by(f64::total_cmp);
    let mut centres: Vec<f64> = (0..k)
        .map(|i| sorted[((i as f64 + 0.5) / k as f64 * sorted.len() as f64) as usize])
        .collect();
    let mut assign = vec![0usize; v.len()];
    for _ in 0..30 {
        for (a, &x) in assign.iter_mut().zip(v) {
            *a = (0..k)
                .min_by(|&i, &j| (x - centres[i]).abs().total_cmp(&(x - centres[j]).abs()))
                .unwrap_or(0);
        }
        let mut sum = vec![0.0; k];
        let mut count = vec![0usize; k];
        for (&a, &x) in assign.iter().zip(v) {
            sum[a] += x;
            count[a] += 1;
        }
        for i in 0..k {
            if count[i] > 0 {
                centres[i] = sum[i] / count[i] as f64;
            }
        }
    }
    let ss: f64 = assign.iter().zip(v).map(|(&a, &x)| (x - centres[a]).powi(2)).sum();
    let mut shares = vec![0.0; k];
    for &a in &assign {
        shares[a] += 1.0 / v.len() as f64;
    }
    let mut order: Vec<usize> = (0..k).collect();
    order.sort_by(|&i, &j| centres[i].total_cmp(&centres[j]));
    let pooled = (ss / v.len() as f64).sqrt();
    (
        order.iter().map(|&i| centres[i]).collect(),
        pooled,
        order.iter().map(|&i| shares[i]).collect(),
    )
}
