//! When each transmitter of the demo scene is keyed: a pure function of time.
//!
//! Occupancy tests and the `log` command need the true on/off state of every channel at any
//! instant, and replays must be identical, so keying is not random: each channel repeats a fixed
//! pattern of on-intervals inside a period. Time is `sample index / sample rate`, counted from the
//! first sample of the scene.

/// A keying pattern.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Schedule {
    /// On all the time (beacons, links).
    Always,
    /// Repeats every `period_s`; keyed during each `[on, off)` of `on_s` (seconds into the
    /// period). Intervals are sorted, do not touch each other and lie inside the period.
    Cycle { period_s: f64, on_s: &'static [(f64, f64)] },
}

impl Schedule {
    /// True when the transmitter is keyed at `t_s` seconds from the start of the scene.
    pub fn is_keyed(&self, t_s: f64) -> bool {
        match *self {
            Schedule::Always => true,
            Schedule::Cycle { period_s, on_s } => {
                let ph = t_s.rem_euclid(period_s);
                on_s.iter().any(|&(on, off)| ph >= on && ph < off)
            }
        }
    }

    /// Long-run fraction of time keyed, 0 ..= 1.
    pub fn duty(&self) -> f64 {
        match *self {
            Schedule::Always => 1.0,
            Schedule::Cycle { period_s, on_s } => {
                on_s.iter().map(|(on, off)| off - on).sum::<f64>() / period_s
            }
        }
    }

    /// Seconds keyed within `[t0_s, t1_s)`, exactly (for the true duty cycle of any interval).
    pub fn keyed_time(&self, t0_s: f64, t1_s: f64) -> f64 {
        let keyed = self.keyed_since_zero(t1_s) - self.keyed_since_zero(t0_s);
        keyed.clamp(0.0, (t1_s - t0_s).max(0.0))
    }

    /// Seconds keyed within `[0, t)`.
    fn keyed_since_zero(&self, t: f64) -> f64 {
        match *self {
            Schedule::Always => t,
            Schedule::Cycle { period_s, on_s } => {
                let cycles = (t / period_s).floor();
                let ph = t - cycles * period_s;
                let partial: f64 = on_s.iter().map(|&(on, off)| (ph.min(off) - on).max(0.0)).sum();
                cycles * self.duty() * period_s + partial
            }
        }
    }

    /// The on-interval (absolute start and end, seconds) that contains `t_s`, if keyed; for
    /// `Always`, `None` (there are no edges to shape).
    pub fn interval_at(&self, t_s: f64) -> Option<(f64, f64)> {
        match *self {
            Schedule::Always => None,
            Schedule::Cycle { period_s, on_s } => {
                let ph = t_s.rem_euclid(period_s);
                let base = t_s - ph;
                on_s.iter()
                    .find(|&&(on, off)| ph >= on && ph < off)
                    .map(|&(on, off)| (base + on, base + off))
            }
        }
    }

    /// Absolute time of the first key-up or key-down strictly after `t_s`; infinite for `Always`.
    pub fn next_edge_after(&self, t_s: f64) -> f64 {
        match *self {
            Schedule::Always => f64::INFINITY,
            Schedule::Cycle { period_s, on_s } => {
                let ph = t_s.rem_euclid(period_s);
                let base = t_s - ph;
                on_s.iter()
                    .flat_map(|&(on, off)| [on, off])
                    .find(|&e| e > ph)
                    .map_or(base + period_s + on_s.first().map_or(period_s, |f| f.0), |e| base + e)
            }
        }
    }

    /// Appends to `runs` the keyed runs of sample indices within `[n0, n1)` at `rate_hz`, as
    /// half-open `(start, end)` pairs. Sample `n` is in a run exactly when
    /// `is_keyed(n / rate_hz)`: edges found from the pattern are checked against that predicate,
    /// so the generator and the truth never disagree by a sample.
    pub fn runs(&self, rate_hz: f64, n0: u64, n1: u64, runs: &mut Vec<(u64, u64)>) {
        if let Schedule::Always = self {
            if n1 > n0 {
                runs.push((n0, n1));
            }
            return;
        }
        let keyed_at = |n: u64| self.is_keyed(n as f64 / rate_hz);
        let mut n = n0;
        while n < n1 {
            let state = keyed_at(n);
            let edge = self.next_edge_after(n as f64 / rate_hz) * rate_hz;
            let mut m = if edge < n1 as f64 { (edge.ceil() as u64).max(n + 1) } else { n1 };
            while m > n + 1 && keyed_at(m - 1) != state {
                m -= 1;
            }
            while m < n1 && keyed_at(m) == state {
                m += 1;
            }
            if state {
                runs.push((n, m));
            }
            n = m;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const PATTERN: Schedule = Schedule::Cycle { period_s: 2.0, on_s: &[(0.1, 0.5), (1.2, 1.9)] };

    #[test]
    fn keyed_inside_intervals_only() {
        assert!(!PATTERN.is_keyed(0.05));
        assert!(PATTERN.is_keyed(0.1));
        assert!(PATTERN.is_keyed(0.49));
        assert!(!PATTERN.is_keyed(0.5));
        assert!(PATTERN.is_keyed(2.0 * 7.0 + 1.5));
        assert!(Schedule::Always.is_keyed(1e9));
    }

    #[test]
    fn keyed_time_agrees_with_sampling_the_predicate() {
        // Reference: count keyed instants on a fine grid (a Riemann sum of the indicator).
        let (t0, t1) = (0.37, 9.81);
        let steps = 1_000_000;
        let dt = (t1 - t0) / steps as f64;
        let counted = (0..steps).filter(|i| PATTERN.is_keyed(t0 + (*i as f64 + 0.5) * dt)).count();
        let exact = PATTERN.keyed_time(t0, t1);
        assert!((counted as f64 * dt - exact).abs() < 1e-4, "{exact}");
        assert!((PATTERN.duty() - 0.55).abs() < 1e-12);
        assert!((PATTERN.keyed_time(0.0, 20.0) - 11.0).abs() < 1e-9);
    }

    #[test]
    fn runs_match_the_predicate_sample_by_sample() {
        for rate in [1e3, 44_100.0, 1e6 / 3.0] {
            let n1 = (5.0 * rate) as u64;
            let mut runs = Vec::new();
            // Cut the range in uneven pieces as the generator does.
            let mut n = 0;
            while n < n1 {
                let m = (n + 1237).min(n1);
                PATTERN.runs(rate, n, m, &mut runs);
                n = m;
            }
            let mut inside = vec![false; n1 as usize];
            for &(a, b) in &runs {
                assert!(a < b);
                inside[a as usize..b as usize].iter_mut().for_each(|x| *x = true);
            }
            for (i, &k) in inside.iter().enumerate() {
                assert_eq!(k, PATTERN.is_keyed(i as f64 / rate), "sample {i} at {rate} Hz");
            }
        }
    }

    #[test]
    fn interval_and_next_edge() {
        let (on, off) = PATTERN.interval_at(4.3).unwrap();
        assert!((on - 4.1).abs() < 1e-12 && (off - 4.5).abs() < 1e-12, "{on} {off}");
        assert_eq!(PATTERN.interval_at(4.7), None);
        assert!((PATTERN.next_edge_after(4.3) - 4.5).abs() < 1e-12);
        assert!((PATTERN.next_edge_after(1.95) - 2.1).abs() < 1e-12);
        assert_eq!(Schedule::Always.next_edge_after(3.0), f64::INFINITY);
    }
}
