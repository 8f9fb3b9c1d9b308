//! A channel's noise floor over time, for the sparkline of the report picture: the mean (in dB)
//! of the logged interval floors in each time bucket. The buckets start one second wide and
//! double whenever there would be more than [`MAX_BUCKETS`], so a month of one-second intervals
//! costs as little as a minute of them, and files read in any order give the same buckets.

use std::collections::BTreeMap;

/// Most buckets kept; a sparkline is a few hundred pixels wide at most.
pub const MAX_BUCKETS: usize = 256;

#[derive(Clone, Debug)]
pub struct FloorSeries {
    /// Width of a bucket, seconds (a power of two).
    bucket_s: f64,
    /// Bucket index (time / bucket_s, floored) → (Σ floor dB, intervals).
    buckets: BTreeMap<i64, (f64, u64)>,
}

impl Default for FloorSeries {
    fn default() -> Self {
        FloorSeries { bucket_s: 1.0, buckets: BTreeMap::new() }
    }
}

impl FloorSeries {
    /// One interval's floor `value_db` at time `t` (seconds).
    pub fn push(&mut self, t: f64, value_db: f64) {
        if !(t.is_finite() && value_db.is_finite()) {
            return;
        }
        let e = self.buckets.entry((t / self.bucket_s).floor() as i64).or_default();
        e.0 += value_db;
        e.1 += 1;
        while self.buckets.len() > MAX_BUCKETS {
            self.widen();
        }
    }

    /// Doubles the bucket width, joining pairs of buckets.
    fn widen(&mut self) {
        self.bucket_s *= 2.0;
        let old = std::mem::take(&mut self.buckets);
        for (k, (sum, n)) in old {
            let e = self.buckets.entry(k.div_euclid(2)).or_default();
            e.0 += sum;
            e.1 += n;
        }
    }

    /// The series whose buckets, `width_s` wide (a power of two, at least 1 s), hold these
    /// (bucket index, Σ floor dB, intervals): widened as the pushes of those intervals would
    /// have widened it, so a database that sums the buckets ([`crate::store::read`]) gives the
    /// buckets of the logs, provided no narrower width would have held them all
    /// ([`FloorSeries::bucket_s`] above `width_s`, or `width_s` is 1 s).
    pub fn from_buckets(width_s: f64, buckets: impl IntoIterator<Item = (i64, f64, u64)>) -> Self {
        let mut s = FloorSeries { bucket_s: width_s, buckets: BTreeMap::new() };
        for (k, sum, n) in buckets {
            let e = s.buckets.entry(k).or_default();
            e.0 += sum;
            e.1 += n;
        }
        while s.buckets.len() > MAX_BUCKETS {
            s.widen();
        }
        s
    }

    /// Width of a bucket, seconds.
    pub fn bucket_s(&self) -> f64 {
        self.bucket_s
    }

    /// (middle of the bucket, mean floor dB) in time order.
    pub fn points(&self) -> Vec<(f64, f64)> {
        self.buckets
            .iter()
            .map(|(k, (sum, n))| ((*k as f64 + 0.5) * self.bucket_s, sum / *n as f64))
            .collect()
    }

    pub fn is_empty(&self) -> bool {
        self.buckets.is_empty()
    }
}

/// `points` cut into runs where the spacing jumps to more than three times its median (a gap
/// in the logs), so a line is never drawn across time nobody measured.
pub fn runs(points: &[(f64, f64)]) -> Vec<&[(f64, f64)]> {
    if points.len() < 3 {
        return if points.is_empty() { vec![] } else { vec![points] };
    }
    let mut steps: Vec<f64> = points.windows(2).map(|w| w[1].0 - w[0].0).collect();
    steps.sort_by(f64::total_cmp);
    let typical = steps[steps.len() / 2];
    let mut out = Vec::new();
    let mut from = 0;
    for i in 1..points.len() {
        if points[i].0 - points[i - 1].0 > 3.0 * typical {
            out.push(&points[from..i]);
            from = i;
        }
    }
    out.push(&points[from..]);
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn buckets_keep_the_mean_and_widen_in_any_order() {
        // An hour of one-second floors: -170 dB for the first half, -164 dB after (a 6 dB step).
        let mut fwd = FloorSeries::default();
        let mut back = FloorSeries::default();
        let floor = |t: usize| if t < 1800 { -170.0 } else { -164.0 };
        for t in 0..3600 {
            fwd.push(t as f64, floor(t));
            back.push((3599 - t) as f64, floor(3599 - t));
        }
        let p = fwd.points();
        assert_eq!(p, back.points());
        assert!(p.len() <= MAX_BUCKETS && p.len() >= MAX_BUCKETS / 2, "{}", p.len());
        // 3600 s in at most 256 buckets: 16 s each, each the mean of its 16 floors: -170 before
        // the step, -164 after, and the bucket across it (1792..1808 s) half of each.
        assert_eq!(fwd.bucket_s, 16.0);
        for &(t, v) in &p {
            let from = (t - 8.0) as usize;
            let want = (from..from + 16).map(floor).sum::<f64>() / 16.0;
            assert_eq!(v, want, "at {t}");
        }
        assert_eq!(p.iter().find(|q| q.0 == 1800.0).map(|q| q.1), Some(-167.0));
        assert_eq!(runs(&p).len(), 1);
    }

    #[test]
    fn buckets_summed_elsewhere_widen_as_the_pushes_do() {
        // Two days of one-minute floors with a gap of a day between them: pushed one by one,
        // and summed per 64 s bucket (as a database groups them), the same buckets come out.
        // The floors are quarters of a dB, so every sum is exact whatever the order of adding.
        let mut pushed = FloorSeries::default();
        let mut fine: BTreeMap<i64, (f64, u64)> = BTreeMap::new();
        let times = (0..1440).chain(2880..4320).map(|m| 1_796_335_200.0 + 60.0 * m as f64);
        for (i, t) in times.enumerate() {
            let v = -170.0 + (i % 7) as f64 * 0.25;
            pushed.push(t, v);
            let e = fine.entry((t / 64.0).floor() as i64).or_default();
            e.0 += v;
            e.1 += 1;
        }
        let summed = FloorSeries::from_buckets(64.0, fine.iter().map(|(k, (s, n))| (*k, *s, *n)));
        assert!(summed.bucket_s() > 64.0, "wider than the buckets summed");
        assert_eq!(summed.bucket_s(), pushed.bucket_s());
        assert_eq!(summed.points(), pushed.points());
    }

    #[test]
    fn a_gap_in_the_logs_cuts_the_line() {
        let mut s = FloorSeries::default();
        for t in (0..600).step_by(60).chain((7200..7800).step_by(60)) {
            s.push(t as f64, -168.0);
        }
        let p = s.points();
        let r = runs(&p);
        assert_eq!(r.iter().map(|r| r.len()).collect::<Vec<_>>(), [10, 10]);
    }
}
