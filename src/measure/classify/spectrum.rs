//! The few FFT helpers the classifier shares: a complex transform in place, the power spectrum of
//! a real sequence, and the search for a spectral line with sub-bin interpolation.

use num_complex::{Complex, Complex32, Complex64};
use rustfft::num_traits::Zero;
use rustfft::{FftNum, FftPlanner};
use std::cell::RefCell;
use std::collections::HashSet;
use std::sync::{Arc, LazyLock, Mutex, PoisonError};
use std::thread::LocalKey;

/// `a > b`, false when either is NaN: the guard for values that must be positive (or exceed
/// a limit) before they divide or scale anything.
pub(super) fn above(a: f64, b: f64) -> bool {
    a > b
}

/// Forward (or inverse, unnormalised) FFT of `x` in place, any length (rustfft plans primes too).
/// Plans are kept for the whole process ([`Plans`], shared by every thread that classifies):
/// one classification transforms the same few lengths many times, the emissions of one run
/// often share them, and planning a long transform (its twiddle factors) costs more than
/// running it. Measured on the 16M-sample bench file: planning took 9 % of `measure`'s
/// classification and 15 % of `census`'s while each worker thread planned for itself.
pub(super) fn fft(x: &mut [Complex64], inverse: bool) {
    run(&PLANS, &SCRATCH, x, inverse);
}

/// As [`fft`] in single precision: for the channeliser's one long transform of the raw input
/// (which is single precision itself), at about half the cost of double precision.
pub(super) fn fft_f32(x: &mut [Complex32], inverse: bool) {
    run(&PLANS_F32, &SCRATCH_F32, x, inverse);
}

/// Plans `x`'s length (only the look-up or the planning holds the lock, not the transform) and
/// transforms it with this thread's scratch buffer (kept, not allocated per call).
fn run<T: FftNum>(
    plans: &Mutex<Plans<T>>,
    scratch: &'static LocalKey<RefCell<Vec<Complex<T>>>>,
    x: &mut [Complex<T>],
    inverse: bool,
) {
    if x.is_empty() {
        return;
    }
    let plan = plans.lock().unwrap_or_else(PoisonError::into_inner).plan(x.len(), inverse);
    scratch.with(|s| {
        let mut s = s.borrow_mut();
        let need = plan.get_inplace_scratch_len();
        if s.len() < need {
            s.resize(need, Complex::zero());
        }
        plan.process_with_scratch(x, &mut s[..need]);
    });
}

/// Most points of all the plans kept (of one precision) before they are dropped and planning
/// starts afresh: twiddles of 2^22 complex f64 are 64 MiB at most, while the lengths of one
/// emission's analysis (a few of them, up to 2^20) fit several times over.
const PLANNED_POINTS_MAX: usize = 1 << 22;

/// rustfft's planner (which keeps every plan it made) with a bound on what it keeps: the lengths
/// differ from emission to emission, so a long run would otherwise keep plans without end.
/// A plan handed out stays valid after the planner is dropped (it is reference counted).
struct Plans<T: FftNum> {
    planner: FftPlanner<T>,
    points: usize,
    lengths: HashSet<(usize, bool)>,
}

impl<T: FftNum> Plans<T> {
    fn new() -> Plans<T> {
        Plans { planner: FftPlanner::new(), points: 0, lengths: HashSet::new() }
    }

    fn plan(&mut self, len: usize, inverse: bool) -> Arc<dyn rustfft::Fft<T>> {
        if self.lengths.insert((len, inverse)) {
            self.points += len;
            if self.points > PLANNED_POINTS_MAX {
                self.planner = FftPlanner::new();
                self.lengths.clear();
                self.lengths.insert((len, inverse));
                self.points = len;
            }
        }
        if inverse {
            self.planner.plan_fft_inverse(len)
        } else {
            self.planner.plan_fft_forward(len)
        }
    }
}

static PLANS: LazyLock<Mutex<Plans<f64>>> = LazyLock::new(|| Mutex::new(Plans::new()));
static PLANS_F32: LazyLock<Mutex<Plans<f32>>> = LazyLock::new(|| Mutex::new(Plans::new()));

thread_local! {
    static SCRATCH: RefCell<Vec<Complex64>> = const { RefCell::new(Vec::new()) };
    static SCRATCH_F32: RefCell<Vec<Complex32>> = const { RefCell::new(Vec::new()) };
}

/// Signed frequency of bin `k` of an `n`-point FFT at `rate_hz`.
pub(super) fn bin_hz(k: usize, n: usize, rate_hz: f64) -> f64 {
    let k = if k >= n.div_ceil(2) { k as f64 - n as f64 } else { k as f64 };
    k * rate_hz / n as f64
}

/// A spectral line found in a sequence.
#[derive(Clone, Copy, Debug)]
pub(super) struct Line {
    /// Its frequency, Hz (interpolated between bins).
    pub freq_hz: f64,
    /// Peak power over the median power of the searched bins around it (64 bins of the
    /// unpadded spectrum each side, the peak's main lobe left out): how far it stands out. For a
    /// sequence with no line the bins are about exponential, and the largest of K bins over the
    /// median is near ln K / ln 2 (about 10 for K = 1000).
    pub prominence: f64,
}

/// The strongest line of the real sequence `x` (its mean removed) between `lo_hz` and `hi_hz`,
/// at sample rate `rate_hz`. As if zero-padded four times and interpolated with a parabola
/// through the top three magnitudes, so the frequency is good to a small fraction of
/// 1 / duration.
pub(super) fn find_line(x: &[f64], rate_hz: f64, lo_hz: f64, hi_hz: f64) -> Option<Line> {
    let z: Vec<Complex64> = x.iter().map(|&v| Complex64::new(v, 0.0)).collect();
    find_line_complex(&z, rate_hz, lo_hz, hi_hz)
}

/// Zero padding of the spectrum [`find_line`] searches, as a factor of the next power of two
/// at or above the length.
const PAD: usize = 4;
/// Coarse lobes refined on the padded grid: the strongest few, so that two lines of nearly
/// equal strength are told apart as the padded spectrum would.
const REFINED_LOBES: usize = 3;

/// As [`find_line`] for a complex sequence (signed frequencies; the range may be negative).
///
/// The padded spectrum is not made whole: it is the unpadded one (length `n` rounded up to a
/// power of two, whose bins are every [`PAD`]th bin of the padded one) with the padded bins
/// around its strongest lobes computed directly ([`dft_sum`]). The answer is the one the whole
/// padded transform gives, save that the background's median is taken over the unpadded bins
/// (a quarter of the same bins, the same distribution), at a quarter of the transform's length
/// and without planning a transform four times as long.
pub(super) fn find_line_complex(
    x: &[Complex64],
    rate_hz: f64,
    lo_hz: f64,
    hi_hz: f64,
) -> Option<Line> {
    let n = x.len();
    if n < 8 || !above(hi_hz, lo_hz) || !above(rate_hz, 0.0) {
        return None;
    }
    let mean = x.iter().sum::<Complex64>() / n as f64;
    let centred: Vec<Complex64> = x.iter().map(|v| v - mean).collect();
    let m1 = n.next_power_of_two();
    let m = PAD * m1;
    let mut buf = vec![Complex64::new(0.0, 0.0); m1];
    buf[..n].copy_from_slice(&centred);
    fft(&mut buf, false);
    // Bins of the padded grid in the range, and the coarse (unpadded) ones among them.
    let in_range = |j: usize| {
        let f = bin_hz(j, m, rate_hz);
        f >= lo_hz && f <= hi_hz
    };
    let bins: Vec<usize> = (0..m1).filter(|&k| in_range(PAD * k)).collect();
    if bins.len() < MIN_COARSE {
        // A range only a few bins wide: the whole padded transform, as it costs little here.
        return find_line_padded(&centred, m, rate_hz, lo_hz, hi_hz);
    }
    let coarse = |k: usize| buf[k].norm_sqr();
    // The strongest coarse lobes (local maxima), refined on the padded grid around each.
    let mut tops: Vec<usize> = bins
        .iter()
        .copied()
        .filter(|&k| coarse(k) >= coarse((k + m1 - 1) % m1) && coarse(k) >= coarse((k + 1) % m1))
        .collect();
    if tops.is_empty() {
        tops = bins.clone();
    }
    tops.sort_by(|&a, &b| coarse(b).total_cmp(&coarse(a)));
    tops.truncate(REFINED_LOBES);
    // A lobe whose strongest unpadded bin is more than the greatest scalloping loss (3.92 dB
    // for a rectangular window, half a bin off, Harris 1978) below the strongest cannot hold
    // the padded spectrum's peak.
    let strongest = coarse(tops[0]);
    tops.retain(|&k| coarse(k) * SCALLOP_MAX >= strongest);
    let mut fine: Vec<(usize, f64)> = Vec::new();
    let value = |j: usize, fine: &mut Vec<(usize, f64)>| -> f64 {
        if let Some(&(_, v)) = fine.iter().find(|e| e.0 == j) {
            return v;
        }
        let v = if j % PAD == 0 {
            buf[j / PAD].norm()
        } else {
            dft_sum(centred.iter().copied(), j as f64 / m as f64).norm()
        };
        fine.push((j, v));
        v
    };
    let mut peak: Option<(usize, f64)> = None;
    for &k in &tops {
        for d in 0..=2 * PAD {
            let j = (PAD * k + m + d - PAD) % m;
            if !in_range(j) {
                continue;
            }
            let v = value(j, &mut fine);
            if peak.map_or(true, |p| v > p.1) {
                peak = Some((j, v));
            }
        }
    }
    let (peak, peak_mag) = peak?;
    // Background: the median of the searched bins near the peak (its own main lobe left out),
    // so a sloping continuous spectrum does not pass for a line: within 256 padded bins of it,
    // more than 12 away, read on the unpadded grid.
    let median = background(&bins, peak / PAD, (REACH / PAD, LOBE / PAD), coarse);
    let prominence = prominence(peak_mag * peak_mag, median);
    let a = value((peak + m - 1) % m, &mut fine);
    let c = value((peak + 1) % m, &mut fine);
    let freq_hz = bin_hz(peak, m, rate_hz) + parabola(a, peak_mag, c) * rate_hz / m as f64;
    Some(Line { freq_hz, prominence })
}

/// Reach and main lobe of [`background`] in padded bins.
const REACH: usize = 256;
const LOBE: usize = 12;

/// The median power (`power(k)`) of the searched `bins` (sorted) within `reach` of `centre`,
/// more than `lobe` from it: the background a line stands out of. All of them when fewer
/// than 8 qualify.
fn background(
    bins: &[usize],
    centre: usize,
    (reach, lobe): (usize, usize),
    power: impl Fn(usize) -> f64,
) -> f64 {
    let pos = bins.partition_point(|&k| k < centre);
    let mut local: Vec<f64> = bins[pos.saturating_sub(reach)..(pos + reach + 1).min(bins.len())]
        .iter()
        .filter(|&&k| k.abs_diff(centre) > lobe)
        .map(|&k| power(k))
        .collect();
    if local.len() < 8 {
        local = bins.iter().map(|&k| power(k)).collect();
    }
    let mid = local.len() / 2;
    *local.select_nth_unstable_by(mid, f64::total_cmp).1
}

/// How far a line of `power` stands out of a `background`: infinitely when that is zero.
fn prominence(power: f64, background: f64) -> f64 {
    if background > 0.0 {
        power / background
    } else {
        f64::INFINITY
    }
}

/// The offset (−½..½ of a bin) of the vertex of the parabola through three magnitudes.
fn parabola(a: f64, b: f64, c: f64) -> f64 {
    let den = a - 2.0 * b + c;
    if den.abs() > 0.0 {
        (0.5 * (a - c) / den).clamp(-0.5, 0.5)
    } else {
        0.0
    }
}

/// Fewest unpadded bins in the range for [`find_line_complex`] to refine lobes rather than
/// make the whole padded transform.
const MIN_COARSE: usize = 16;
/// The greatest scalloping loss of a rectangular window as a power ratio (3.92 dB), with a
/// margin.
const SCALLOP_MAX: f64 = 2.6;

/// [`find_line_complex`] on the whole zero-padded transform (`x` centred, `m` points): for a
/// range of only a few unpadded bins.
fn find_line_padded(
    x: &[Complex64],
    m: usize,
    rate_hz: f64,
    lo_hz: f64,
    hi_hz: f64,
) -> Option<Line> {
    let mut buf = vec![Complex64::new(0.0, 0.0); m];
    buf[..x.len()].copy_from_slice(x);
    fft(&mut buf, false);
    let bins: Vec<usize> = (0..m)
        .filter(|&k| {
            let f = bin_hz(k, m, rate_hz);
            f >= lo_hz && f <= hi_hz
        })
        .collect();
    if bins.len() < 3 {
        return None;
    }
    let power = |k: usize| buf[k].norm_sqr();
    let &peak = bins.iter().max_by(|&&a, &&b| power(a).total_cmp(&power(b)))?;
    let prominence = prominence(power(peak), background(&bins, peak, (REACH, LOBE), power));
    let (a, b, c) = (buf[(peak + m - 1) % m].norm(), buf[peak].norm(), buf[(peak + 1) % m].norm());
    let freq_hz = bin_hz(peak, m, rate_hz) + parabola(a, b, c) * rate_hz / m as f64;
    Some(Line { freq_hz, prominence })
}

/// Samples between two exact phasors of [`phasors`]: between them the phasor is stepped by one
/// complex multiplication per sample (a sine and cosine per sample cost more than an FFT), and
/// its rounding, about 1e-16 a step, stays under 1e-12 over this many.
const PHASOR_RESYNC: usize = 1024;

/// e^(j2π·cycles·n) for n = 0, 1, 2, …: the shift of a frequency shift, and the kernel of one
/// DFT bin, without a sine and cosine per sample.
pub(super) fn phasors(cycles: f64) -> impl Iterator<Item = Complex64> {
    let step = 2.0 * std::f64::consts::PI * cycles;
    let rot = Complex64::from_polar(1.0, step);
    let mut phasor = Complex64::new(1.0, 0.0);
    (0usize..).map(move |n| {
        if n % PHASOR_RESYNC == 0 {
            phasor = Complex64::from_polar(1.0, step * n as f64);
        }
        let now = phasor;
        phasor *= rot;
        now
    })
}

/// Σ x[n]·e^(−j2π·cycles·n): the DFT of `x` at one frequency (`cycles` per sample), unnormalised.
pub(super) fn dft_sum(x: impl IntoIterator<Item = Complex64>, cycles: f64) -> Complex64 {
    x.into_iter().zip(phasors(-cycles)).map(|(v, p)| v * p).sum()
}

/// The DFT of `x` at one frequency (Hz), normalised by the length: the mean of
/// x[n]·e^(−j2πfn/rate).
pub(super) fn dft_at(x: &[f64], rate_hz: f64, freq_hz: f64) -> Complex64 {
    if x.is_empty() {
        return Complex64::new(0.0, 0.0);
    }
    let sum = dft_sum(x.iter().map(|&v| Complex64::new(v, 0.0)), freq_hz / rate_hz);
    sum / x.len() as f64
}

/// The `q`-quantile (0..1) of `v` (nearest rank of the finite values); 0 for an empty slice.
/// Found by selection, not a full sort: the same value (the rank's element under a total
/// order), in linear time. Sorting the noise bins of a 2^18-point spectrum took 17 % of
/// `measure`'s classification on the bench file.
pub(super) fn quantile(v: &[f64], q: f64) -> f64 {
    if v.is_empty() {
        return 0.0;
    }
    let mut s: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    if s.is_empty() {
        return 0.0;
    }
    let i = ((s.len() - 1) as f64 * q.clamp(0.0, 1.0)).round() as usize;
    *s.select_nth_unstable_by(i, f64::total_cmp).1
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The refined search finds the line the whole zero-padded transform finds: a tone anywhere
    /// in the range, in noise, at lengths that are and are not powers of two.
    #[test]
    fn refining_the_strongest_lobes_finds_what_the_padded_transform_finds() {
        let mut rng = crate::testkit::Rng::new(5);
        for case in 0..40 {
            let n = 600 + 97 * case;
            let rate = 1e4;
            let f0 = -2000.0 + 100.0 * case as f64 + 0.37;
            let noise = crate::testkit::noise64(&mut rng, n, 1.0);
            let x: Vec<Complex64> = noise
                .iter()
                .enumerate()
                .map(|(i, v)| {
                    v + Complex64::from_polar(
                        0.3,
                        2.0 * std::f64::consts::PI * f0 * i as f64 / rate,
                    )
                })
                .collect();
            let mean = x.iter().sum::<Complex64>() / n as f64;
            let centred: Vec<Complex64> = x.iter().map(|v| v - mean).collect();
            let m = PAD * n.next_power_of_two();
            let (lo, hi) = (-3000.0, 3000.0);
            let whole = find_line_padded(&centred, m, rate, lo, hi).unwrap();
            let fast = find_line_complex(&x, rate, lo, hi).unwrap();
            // The same padded bin and parabola: the same frequency to rounding.
            assert!((whole.freq_hz - fast.freq_hz).abs() < 1e-6, "{case}: {whole:?} {fast:?}");
            // The background's median from a quarter of the bins: close, not equal.
            let r = fast.prominence / whole.prominence;
            assert!((0.7..1.4).contains(&r), "{case}: {whole:?} {fast:?}");
        }
    }

    /// The padded bins computed one at a time are the padded transform's bins.
    #[test]
    fn one_bin_at_a_time_is_the_padded_transform() {
        let x = crate::testkit::noise64(&mut crate::testkit::Rng::new(9), 3000, 1.0);
        let m = 4 * 4096;
        let mut buf = vec![Complex64::new(0.0, 0.0); m];
        buf[..x.len()].copy_from_slice(&x);
        fft(&mut buf, false);
        for j in [0, 1, 3, 77, 4095, 8191, 8192, 12_345, m - 1] {
            let at = dft_sum(x.iter().copied(), j as f64 / m as f64);
            assert!((at - buf[j]).norm() < 1e-9 * buf[j].norm().max(1.0), "{j}");
        }
    }
}
