//! The noise floor followed through a sequence of rows, for occupancy (ITU-R SM.1880) whose
//! threshold is set relative to it.
//!
//! One row's FCME estimate is too noisy and too easily lifted by a wideband burst to set a
//! threshold, so the tracker works in three steps (their reasons are in the
//! [occupancy definitions](crate::measure::occupancy)):
//! 1. [`SmoothedPsd`]: the rows' PSD averaged over time, so noise-only bins spread less;
//! 2. [`NoiseFloor`]: FCME on that smoothed PSD, with its buffers kept;
//! 3. [`FloorTracker`]: the running median of step 2 over the last rows.
//!
//! [`NoiseTracker`] chains the three. After the first row nothing here allocates.

use super::NoiseFloor;
use crate::dsp::average::ExpAverage;
use crate::dsp::Spectrum;
use std::collections::VecDeque;

/// The rows' PSD averaged over time: a cumulative mean for the first `1/α` rows, an exponential
/// average of weight `α` after that.
#[derive(Clone, Debug)]
pub struct SmoothedPsd {
    average: ExpAverage,
}

impl SmoothedPsd {
    pub fn new(alpha: f64) -> SmoothedPsd {
        SmoothedPsd { average: ExpAverage::new(alpha) }
    }

    /// Adds a row; returns the smoothed PSD and its equivalent degrees of freedom (the row's times
    /// the number of rows averaged, at most `(2 − α)/α`, the steady-state variance ratio of an
    /// exponential average of independent values; rows are treated as independent).
    pub fn push(&mut self, row: &Spectrum) -> (&[f64], f64) {
        self.average.push(&row.psd);
        (self.average.psd(), row.dof * self.average.equivalent_averages())
    }
}

/// Median of the per-row noise densities over a sliding window of rows.
#[derive(Clone, Debug)]
pub struct FloorTracker {
    capacity: usize,
    recent: VecDeque<f64>,
    sorted: Vec<f64>,
}

impl FloorTracker {
    pub fn new(rows: usize) -> FloorTracker {
        let capacity = rows.max(1);
        FloorTracker {
            capacity,
            recent: VecDeque::with_capacity(capacity),
            sorted: Vec::with_capacity(capacity),
        }
    }

    /// Adds one row's estimate and returns the tracked density.
    pub fn push(&mut self, density: f64) -> f64 {
        let density = if density.is_finite() { density.max(0.0) } else { 0.0 };
        if self.recent.len() == self.capacity {
            let old = self.recent.pop_front().expect("full");
            let at = self.sorted.partition_point(|v| *v < old);
            self.sorted.remove(at);
        }
        self.recent.push_back(density);
        let at = self.sorted.partition_point(|v| *v < density);
        self.sorted.insert(at, density);
        self.current()
    }

    /// The median of what is remembered (the lower middle for an even count), 0 before any row.
    pub fn current(&self) -> f64 {
        match self.sorted.len() {
            0 => 0.0,
            n => self.sorted[(n - 1) / 2],
        }
    }
}

/// The tracked noise density of a sequence of rows: smoothing, FCME, running median.
#[derive(Clone, Debug)]
pub struct NoiseTracker {
    smoothed: SmoothedPsd,
    fcme: NoiseFloor,
    median: FloorTracker,
}

impl NoiseTracker {
    /// `alpha`: weight of a new row in the smoothed PSD; `rows`: memory of the running median.
    pub fn new(alpha: f64, rows: usize) -> NoiseTracker {
        NoiseTracker {
            smoothed: SmoothedPsd::new(alpha),
            fcme: NoiseFloor::new(),
            median: FloorTracker::new(rows),
        }
    }

    /// Takes a row and returns the tracked density (FS²/Hz).
    pub fn push(&mut self, row: &Spectrum) -> f64 {
        let (psd, dof) = self.smoothed.push(row);
        self.median.push(self.fcme.estimate_seen(psd, dof, row.seen()))
    }

    /// The tracked density, 0 before the first row.
    pub fn current(&self) -> f64 {
        self.median.current()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_floor_tracker_is_a_running_median() {
        let mut t = FloorTracker::new(5);
        for v in [1.0, 1.0, 100.0, 1.0, 100.0] {
            t.push(v);
        }
        assert_eq!(t.current(), 1.0);
        // Outliers are outvoted while they are fewer than half of the memory...
        t.push(1.0); // 1, 100, 1, 100, 1
        assert_eq!(t.current(), 1.0);
        // ...and followed once they are the majority: 100, 1, 100, 1, 100.
        t.push(100.0);
        assert_eq!(t.current(), 100.0);
        assert_eq!(FloorTracker::new(3).current(), 0.0);
    }

    #[test]
    fn the_smoothed_psd_averages_then_forgets() {
        let row = |v: f64| {
            let mut s = crate::measure::band::tests::spectrum_with(vec![v; 4]);
            s.dof = 2.0;
            s
        };
        let mut sm = SmoothedPsd::new(0.25);
        // Cumulative mean for the first 1/α = 4 rows: (4 + 0 + 2 + 2)/4 = 2.
        for v in [4.0, 0.0, 2.0] {
            sm.push(&row(v));
        }
        let (psd, dof) = sm.push(&row(2.0));
        assert_eq!((psd[0], dof), (2.0, 8.0));
        // Then weight α: 2 + 0.25·(10 − 2) = 4.
        let (psd, dof) = sm.push(&row(10.0));
        assert_eq!((psd[0], dof), (4.0, 10.0));
        // ν stops growing at (2 − α)/α = 7 rows' worth.
        for _ in 0..5 {
            sm.push(&row(4.0));
        }
        assert_eq!(sm.push(&row(4.0)).1, 14.0);
    }
}
