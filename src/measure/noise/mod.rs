//! Noise-floor estimation that stays put when strong signals occupy part of the band.
//!
//! Method: forward consecutive mean excision (FCME, Saarnisaari & Henttu) with the truncation bias
//! removed using the χ² statistics of an averaged periodogram:
//! 1. start from the 25th percentile of the bins, scaled to a mean by the Gamma quantile (so up
//!    to three quarters of the band may be occupied);
//! 2. keep the bins below `τ·μ`, where `τ` is the Gamma(ν/2) quantile at 1 − 10⁻³;
//! 3. their mean is biased low by the truncation; divide by `E[x | x < τ]` to get a new `μ`;
//! 4. repeat until `μ` settles (a few rounds).
//!
//! On noise alone the estimate is unbiased for any number of averages; a plain median would read
//! 1.59 dB low on a single periodogram (median of an exponential = ln 2 × mean).
//!
//! [`tracker`] follows the floor through a sequence of rows for the occupancy log.

pub mod tracker;

use super::stats::{gamma_quantile_unit_mean, truncated_mean_unit};
use crate::dsp::Spectrum;
use crate::kernels::Kernels;

/// Probability that a noise-only bin is excised as "signal".
const EXCISION_FALSE_ALARM: f64 = 1e-3;

/// Estimates the noise density (same units as `psd`, e.g. FS²/Hz) of a PSD whose bins have `dof`
/// equivalent degrees of freedom. Allocates its working space on every call; code that estimates
/// the floor of every row keeps a [`NoiseFloor`] instead.
pub fn noise_floor(psd: &[f64], dof: f64) -> f64 {
    NoiseFloor::new().estimate(psd, dof)
}

/// The noise density of a spectrum over the bins ever in view (all but a panorama's holes).
pub fn spectrum_floor(spec: &Spectrum) -> f64 {
    NoiseFloor::new().estimate_seen(&spec.psd, spec.dof, spec.seen())
}

/// FCME with its working space (a copy of the finite bins) kept between calls, so that
/// estimating the floor of every row, about a hundred times a second, allocates nothing once the
/// first row has sized the buffer.
///
/// Nothing is sorted: the start needs one order statistic (found by selection, O(n)), and each
/// round needs only the count and the sum of the bins below the threshold, one vectorised pass
/// ([`Kernels::sum_below`]). A full sort of a 4096-bin row cost more than the row's transforms.
///
/// The start's order statistic is found by [`Quartile`], which remembers where the last row's
/// lay: the PSD a tracker feeds in is averaged over time and moves little from row to row.
#[derive(Clone, Debug)]
pub struct NoiseFloor {
    values: Vec<f64>,
    quartile: Quartile,
    kernels: Kernels,
}

impl Default for NoiseFloor {
    fn default() -> Self {
        NoiseFloor { values: Vec::new(), quartile: Quartile::default(), kernels: Kernels::detect() }
    }
}

impl NoiseFloor {
    pub fn new() -> NoiseFloor {
        NoiseFloor::default()
    }

    /// As [`noise_floor`], with the same result to rounding (the bins are summed in another
    /// order when the quartile was found without reordering them).
    pub fn estimate(&mut self, psd: &[f64], dof: f64) -> f64 {
        gather_finite(psd, &mut self.values);
        self.settle(dof)
    }

    /// As [`NoiseFloor::estimate`] over the bins of `psd` that were ever in view (`seen`: per
    /// bin, see [`Spectrum::seen`]; `None`: all): a panorama's holes hold no level, and their
    /// zeros would drag the floor down.
    pub fn estimate_seen(
        &mut self,
        psd: &[f64],
        dof: f64,
        seen: Option<impl Iterator<Item = bool>>,
    ) -> f64 {
        let Some(seen) = seen else { return self.estimate(psd, dof) };
        self.values.clear();
        self.values.extend(psd.iter().zip(seen).filter(|(v, s)| *s && v.is_finite()).map(|p| *p.0));
        self.settle(dof)
    }

    /// FCME over the values gathered.
    fn settle(&mut self, dof: f64) -> f64 {
        if self.values.is_empty() {
            return 0.0;
        }
        let q25 = self.quartile.find(&mut self.values);
        fcme(&self.values, q25, dof, self.kernels)
    }
}

/// Copies the finite values of `psd` into `out`, in order: branch-free (every value is
/// written, the end advances only past finite ones), since nearly all bins are finite.
fn gather_finite(psd: &[f64], out: &mut Vec<f64>) {
    out.resize(psd.len(), 0.0);
    let mut kept = 0;
    for &v in psd {
        out[kept] = v;
        kept += usize::from(v.is_finite());
    }
    out.truncate(kept);
}

/// The value of rank `n / 4` (from 0, in ascending order) of `n` finite values, found by
/// looking first between bounds around the last answer.
///
/// One branch-free pass counts the values below the lower bound and gathers those inside the
/// bounds; when the rank falls inside, only that handful is selected from. Otherwise (the first
/// row, or a row that moved more than the bounds allow) the whole set is selected from, as
/// before. Either way the answer is the same value: the order statistic of the set. Selection
/// over all 4096 bins of every row had been the largest single cost of the occupancy tracker.
#[derive(Clone, Debug, Default)]
struct Quartile {
    /// The last answer, if any.
    last: Option<f64>,
    /// Half the width of the bounds, relative to the last answer.
    reach: f64,
    /// Values inside the bounds (sized to the set once, reused).
    inside: Vec<f64>,
    /// How many answers were found inside the bounds (for the tests).
    hits: u64,
}

impl Quartile {
    /// Bounds of ±2 % hold about a tenth of the bins of a PSD averaged over a few rows: few to
    /// select from, yet wide enough that a time-averaged PSD's quartile rarely leaves them.
    const START_REACH: f64 = 0.02;

    /// The value of rank `values.len() / 4`; `values` may be reordered. Not for an empty set.
    fn find(&mut self, values: &mut [f64]) -> f64 {
        let k = values.len() / 4;
        if let Some(v) = self.last.and_then(|last| self.within(values, k, last)) {
            self.last = Some(v);
            self.hits += 1;
            // Narrow again, slowly, after a burst of movement has passed.
            self.reach = (self.reach * 0.9).max(Self::START_REACH);
            return v;
        }
        let v = *values.select_nth_unstable_by(k, |x, y| x.total_cmp(y)).1;
        self.reach = match self.last {
            None => Self::START_REACH,
            // Missed: the rows move faster than the bounds allowed.
            Some(_) => (self.reach * 4.0).min(1.0),
        };
        self.last = Some(v);
        v
    }

    /// Rank `k` of `values` if it lies within the bounds around `last`.
    fn within(&mut self, values: &[f64], k: usize, last: f64) -> Option<f64> {
        let (lo, hi) = (last * (1.0 - self.reach), last * (1.0 + self.reach));
        self.inside.resize(values.len(), 0.0);
        let (mut below, mut held) = (0, 0);
        for &v in values {
            below += usize::from(v < lo);
            self.inside[held] = v;
            held += usize::from(v >= lo && v < hi);
        }
        if k < below || k >= below + held {
            return None;
        }
        let inside = &mut self.inside[..held];
        Some(*inside.select_nth_unstable_by(k - below, |x, y| x.total_cmp(y)).1)
    }
}

/// The iteration over the finite bins `values`, from their lower quartile `q25`.
fn fcme(values: &[f64], q25: f64, dof: f64, kernels: Kernels) -> f64 {
    let a = (dof / 2.0).max(0.5);
    let mut mu = q25 / gamma_quantile_unit_mean(0.25, a);
    if mu <= 0.0 {
        return 0.0;
    }
    let tau = gamma_quantile_unit_mean(1.0 - EXCISION_FALSE_ALARM, a);
    let correction = truncated_mean_unit(a, tau);
    for _ in 0..50 {
        let (count, sum) = match kernels.sum_below(values, tau * mu) {
            // Nothing below the threshold: the lowest bin alone stands for the noise.
            (0, _) => (1, values.iter().copied().fold(f64::INFINITY, f64::min)),
            kept => kept,
        };
        let next = sum / count as f64 / correction;
        let settled = (next - mu).abs() <= 1e-9 * mu;
        mu = next;
        if settled {
            break;
        }
    }
    mu
}

#[cfg(test)]
mod tests {
    use super::*;

    use crate::testkit::Rng;

    /// Exponential variates (single-periodogram noise bins) from a fixed seed.
    fn exp_bins(n: usize, mean: f64, seed: u64) -> Vec<f64> {
        let mut rng = Rng::new(seed);
        (0..n).map(|_| rng.exponential(mean)).collect()
    }

    #[test]
    fn unbiased_on_noise_alone() {
        // Mean of the estimate over many trials must equal the true density (law of large
        // numbers on the χ² model; tolerance 0.1 dB).
        let mut sum = 0.0;
        for seed in 1..=40 {
            sum += noise_floor(&exp_bins(4096, 2.0, seed), 2.0);
        }
        let mean = sum / 40.0;
        assert!((10.0 * (mean / 2.0).log10()).abs() < 0.1, "{mean}");
    }

    #[test]
    fn robust_to_a_third_of_the_band_occupied() {
        let mut bins = exp_bins(4096, 1.0, 7);
        for b in bins.iter_mut().take(1400) {
            *b *= 1000.0;
        }
        let est = noise_floor(&bins, 2.0);
        assert!((10.0 * est.log10()).abs() < 0.5, "{est}");
    }

    /// FCME as first written: the bins sorted, the sum below the threshold read off prefix sums.
    fn fcme_by_sorting(psd: &[f64], dof: f64) -> f64 {
        let mut sorted: Vec<f64> = psd.iter().copied().filter(|v| v.is_finite()).collect();
        sorted.sort_unstable_by(|a, b| a.total_cmp(b));
        let prefix: Vec<f64> = std::iter::once(0.0)
            .chain(sorted.iter().scan(0.0, |acc, v| {
                *acc += v;
                Some(*acc)
            }))
            .collect();
        let a = (dof / 2.0).max(0.5);
        let mut mu = sorted[sorted.len() / 4] / gamma_quantile_unit_mean(0.25, a);
        let tau = gamma_quantile_unit_mean(1.0 - EXCISION_FALSE_ALARM, a);
        let correction = truncated_mean_unit(a, tau);
        for _ in 0..50 {
            let count = sorted.partition_point(|v| *v < tau * mu).max(1);
            let next = prefix[count] / count as f64 / correction;
            let settled = (next - mu).abs() <= 1e-9 * mu;
            mu = next;
            if settled {
                break;
            }
        }
        mu
    }

    #[test]
    fn selection_and_sums_agree_with_the_sorted_method() {
        // The same bins kept in every round, only summed in another order: equal to rounding.
        for (seed, n, dof, occupied) in [(4, 4096, 2.0, 0), (5, 4095, 14.0, 900), (6, 17, 8.0, 3)] {
            let mut bins = exp_bins(n, 1.0, seed);
            for b in bins.iter_mut().take(occupied) {
                *b *= 500.0;
            }
            bins[n / 2] = f64::INFINITY;
            let (fast, sorted) = (noise_floor(&bins, dof), fcme_by_sorting(&bins, dof));
            assert!((fast - sorted).abs() <= 1e-12 * sorted, "n {n}: {fast} vs {sorted}");
        }
    }

    #[test]
    fn reused_scratch_gives_the_one_shot_result_to_the_bit() {
        // The scratch must carry nothing from one row into the next: rows of other lengths,
        // levels and degrees of freedom, in turn, each equal to a fresh estimate.
        let mut scratch = NoiseFloor::new();
        for (seed, n, mean, dof) in [(1, 4096, 2.0, 2.0), (2, 1000, 0.5, 14.0), (3, 4096, 9.0, 2.0)]
        {
            let mut bins = exp_bins(n, mean, seed);
            bins[7] = f64::NAN;
            let (kept, fresh) = (scratch.estimate(&bins, dof), noise_floor(&bins, dof));
            assert!((kept - fresh).abs() <= 1e-12 * fresh, "n {n}: {kept} vs {fresh}");
        }
        assert_eq!(scratch.estimate(&[], 2.0), 0.0);
    }
    #[test]
    fn the_remembered_quartile_is_the_order_statistic() {
        // Against a full sort (rank n/4 of the sorted set), over rows that drift slowly (found
        // within the bounds), jump by 10x (missed, then found again), carry ties, and change
        // length.
        let mut q = Quartile::default();
        let mut rng = Rng::new(11);
        let mut level = 1.0;
        for row in 0..300 {
            level *= match row {
                100 => 10.0,
                200 => 0.05,
                _ => 1.0 + 0.002 * (rng.uniform() - 0.5),
            };
            let n = if row % 7 == 0 { 4095 } else { 4096 };
            let mut values: Vec<f64> =
                (0..n).map(|_| level * (0.8 + 0.4 * rng.uniform())).collect();
            for i in (0..n).step_by(97) {
                values[i] = values[0];
            }
            let mut sorted = values.clone();
            sorted.sort_by(|a, b| a.total_cmp(b));
            assert_eq!(q.find(&mut values), sorted[n / 4], "row {row}");
        }
        // All but the first row and the rows after each jump were found inside the bounds.
        assert!(q.hits >= 290, "{}", q.hits);
    }
}
