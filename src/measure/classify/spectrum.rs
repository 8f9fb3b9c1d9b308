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
/// at sample rate `rate_hz`. Zero-padded four times and interpolated with a parabola through
/// the top three magnitudes, so the frequency is good to a small fraction of 1 / duration.
pub(super) fn find_line(x: &[f64], rate_hz: f64, lo_hz: f64, hi_hz: f64) -> Option<Line> {
    let z: Vec<Complex64> = x.iter().map(|&v| Complex64::new(v, 0.0)).collect();
    find_line_complex(&z, rate_hz, lo_hz, hi_hz)
}

/// As [`find_line`] for a complex sequence (signed frequencies; the range may be negative).
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
    let m = (4 * n).next_power_of_two();
    let mut buf = vec![Complex64::new(0.0, 0.0); m];
    for (b, v) in buf.iter_mut().zip(x) {
        *b = v - mean;
    }
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
    // Background: the median of the searched bins near the peak (its own main lobe left out),
    // so a sloping continuous spectrum does not pass for a line.
    let pos = bins.iter().position(|&k| k == peak).unwrap_or(0);
    let (reach, lobe) = (256usize, 12usize);
    let mut local: Vec<f64> = bins[pos.saturating_sub(reach)..(pos + reach + 1).min(bins.len())]
        .iter()
        .filter(|&&k| k.abs_diff(peak) > lobe)
        .map(|&k| power(k))
        .collect();
    if local.len() < 8 {
        local = bins.iter().map(|&k| power(k)).collect();
    }
    let mid = local.len() / 2;
    let median = *local.select_nth_unstable_by(mid, f64::total_cmp).1;
    let prominence = if median > 0.0 { power(peak) / median } else { f64::INFINITY };
    let (a, b, c) = (buf[(peak + m - 1) % m].norm(), buf[peak].norm(), buf[(peak + 1) % m].norm());
    let den = a - 2.0 * b + c;
    let delta = if den.abs() > 0.0 { (0.5 * (a - c) / den).clamp(-0.5, 0.5) } else { 0.0 };
    let freq_hz = bin_hz(peak, m, rate_hz) + delta * rate_hz / m as f64;
    Some(Line { freq_hz, prominence })
}

/// The DFT of `x` at one frequency (Hz), normalised by the length: the mean of
/// x[n]·e^(−j2πfn/rate).
pub(super) fn dft_at(x: &[f64], rate_hz: f64, freq_hz: f64) -> Complex64 {
    if x.is_empty() {
        return Complex64::new(0.0, 0.0);
    }
    let w = -2.0 * std::f64::consts::PI * freq_hz / rate_hz;
    let sum: Complex64 =
        x.iter().enumerate().map(|(n, &v)| v * Complex64::from_polar(1.0, w * n as f64)).sum();
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
