//! A census over a panorama: a retuned receiver's sweep seen as one wide row per sweep.
//!
//! Why a pass of its own: a row of a panorama stands for a whole sweep, but any one emitter was
//! in view only while a dwell that holds it lasted. Tracking on the wide rows already keeps an
//! emission open while the receiver is away (its bins are refreshed once a sweep, so a sweep in
//! which it is still on continues it); what changes is the clock its airtime is counted on.
//! An emitter is *in view* while a dwell whose usable band holds its centre lasts, less the
//! settling time after the retune (ITU-R Report SM.2256's observation time, from memory). Its
//! airtime is the share of each sweep row its emissions filled (the tracker places edges inside
//! a row by the share of the full energy the row reached, and in a panorama that share is the
//! share of the emitter's own dwell) times the time it was in view in that sweep; its duty is
//! that airtime over its observation time. Time away is neither on nor idle.

use super::{CensusSettings, Emission, EmitterFigures};
use crate::measure::panorama::Grid;
use crate::source::tuning::Tuning;

/// What a census needs to know of the sweep it runs on.
#[derive(Clone, Debug)]
pub struct SweepView {
    pub tuning: Tuning,
    pub grid: Grid,
    /// The receiver's sample rate (samples of the input per second).
    pub rate_hz: f64,
    /// FFT size of one step's spectra.
    pub fft_size: usize,
    /// Samples of one sweep: a hop plan's period, or a recording's length over the visits of its
    /// least visited centre.
    pub sweep_samples: u64,
}

/// The sweep as the census reports it.
#[derive(Clone, Debug, PartialEq)]
pub struct SweepFacts {
    /// Outer bin edges of the panorama, Hz.
    pub low_hz: f64,
    pub high_hz: f64,
    /// Dwells in one sweep (a hop plan's lines; a recording's captures over its sweeps).
    pub steps: usize,
    /// Distinct centres visited.
    pub centres: usize,
    /// Time from the start of one sweep to the next: how often every bin is revisited, s.
    pub revisit_s: f64,
    /// Settling time skipped after each retune, s.
    pub settle_s: f64,
    /// FFT size of one step (the panorama's rows have more bins: `bins`).
    pub fft_size: usize,
    pub bins: usize,
}

impl SweepView {
    /// The view of `tuning` stitched onto `grid` at `rate_hz` with `fft_size`-point steps;
    /// `total_samples` is the input's length when known (a recording's sweep is measured on it).
    pub fn new(
        tuning: Tuning,
        grid: Grid,
        (rate_hz, fft_size): (f64, usize),
        total_samples: Option<u64>,
    ) -> SweepView {
        let sweep_samples = match tuning.period {
            Some(p) => p,
            None => {
                let visits = (0..grid.centres().len())
                    .map(|c| {
                        (0..tuning.steps.len()).filter(|&k| grid.place_of_step(k) == c).count()
                    })
                    .min()
                    .unwrap_or(1)
                    .max(1);
                let end =
                    total_samples.or_else(|| tuning.steps.last().map(|s| s.start)).unwrap_or(0);
                (end / visits as u64).max(1)
            }
        };
        SweepView { tuning, grid, rate_hz, fft_size, sweep_samples }
    }

    /// Fits a census's settings to the sweep: a row is a sweep, so its stride is the sweep's,
    /// and the hang (`hang_s`) is counted in whole sweeps (a sweep in which the emitter's own
    /// dwell did not see it ends the emission).
    pub fn fit(&self, settings: &mut CensusSettings, hang_s: f64) {
        settings.timing.stride = self.sweep_samples;
        settings.hang_rows = (hang_s * self.rate_hz / self.sweep_samples as f64).floor() as u32;
    }

    pub fn facts(&self) -> SweepFacts {
        let (low_hz, high_hz) = self.grid.span_hz();
        let centres = self.grid.centres().len();
        let steps = match self.tuning.period {
            Some(_) => self.tuning.steps.len(),
            None => {
                let sweeps = (self.tuning.steps.len() / centres.max(1)).max(1);
                self.tuning.steps.len().div_ceil(sweeps)
            }
        };
        SweepFacts {
            low_hz,
            high_hz,
            steps,
            centres,
            revisit_s: self.sweep_samples as f64 / self.rate_hz,
            settle_s: self.tuning.settle_samples as f64 / self.rate_hz,
            fft_size: self.fft_size,
            bins: self.grid.bins,
        }
    }

    /// The settled stretches `[start, end)` of input, before `end`, in which a dwell's usable
    /// band held `freq_hz`, in order.
    pub fn in_view(&self, freq_hz: f64, end: u64) -> Vec<(u64, u64)> {
        let seeing = self.grid.centres_seeing(freq_hz, freq_hz);
        let mut out = Vec::new();
        let mut at = 0u64;
        while at < end {
            let d = self.tuning.dwell_at(at);
            let to = d.end.unwrap_or(end).min(end);
            let from = d.start + self.tuning.settle_samples;
            if seeing.contains(&self.grid.place_of_step(d.step)) && from < to {
                out.push((from, to));
            }
            at = to.max(at + 1);
        }
        out
    }

    /// Recounts every emitter's airtime and duty over the time it was in view and sets its
    /// observation time. `rows` are the sweep rows' spans in order, `emissions` the census's
    /// (each naming its emitter), `end` one past the last sample read.
    pub fn apply(
        &self,
        emitters: &mut [EmitterFigures],
        emissions: &[Emission],
        rows: &[(u64, u64)],
        end: u64,
    ) {
        for (k, e) in emitters.iter_mut().enumerate() {
            let view = view_per_row(&self.in_view(e.center_hz, end), rows);
            let observed: f64 = view.iter().sum();
            let on: f64 = emissions
                .iter()
                .filter(|x| x.emitter == k)
                .map(|x| on_in_view((x.sample_start, x.sample_start + x.sample_count), rows, &view))
                .sum();
            e.observation_s = Some(observed / self.rate_hz);
            e.airtime_s = on / self.rate_hz;
            e.airtime_pct = if observed > 0.0 { 100.0 * on / observed } else { 0.0 };
        }
    }
}

/// Samples in view per row: each in-view stretch goes wholly to the row whose span holds its
/// middle (rows start a frame's overhang after the first settled sample, so an edge test
/// would shave a few samples off a dwell); stretches outside every row were never analysed.
fn view_per_row(view: &[(u64, u64)], rows: &[(u64, u64)]) -> Vec<f64> {
    let mut per_row = vec![0.0; rows.len()];
    for &(a, b) in view {
        let mid = a + (b - a) / 2;
        let r = rows.partition_point(|&(s, _)| s <= mid);
        if let Some(r) = r.checked_sub(1).filter(|&r| mid < rows[r].1) {
            per_row[r] += (b - a) as f64;
        }
    }
    per_row
}

/// Samples of view an emission `[start, end)` filled: per row, the share of the row it covers
/// times the row's view.
fn on_in_view((start, end): (u64, u64), rows: &[(u64, u64)], view: &[f64]) -> f64 {
    let first = rows.partition_point(|&(_, e)| e <= start);
    rows[first..]
        .iter()
        .zip(&view[first..])
        .take_while(|((s, _), _)| *s < end)
        .map(|(&(s, e), v)| {
            let covered = end.min(e).saturating_sub(start.max(s)) as f64;
            covered / (e - s).max(1) as f64 * v
        })
        .sum()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::source::tuning::Step;

    /// Four 50 ms dwells at 1 MS/s, 800 kHz apart, 2 ms settling: the sweep of tests/panorama.
    fn view() -> SweepView {
        let steps = (0..4)
            .map(|k| Step { start: 50_000 * k as u64, center_hz: 446e6 + 0.8e6 * k as f64 })
            .collect();
        let t = Tuning {
            steps,
            period: Some(200_000),
            settle_samples: 2_000,
            usable: 0.8,
            follows_stream: false,
        };
        let grid = Grid::new(&t, 1e6, 1000).unwrap();
        SweepView::new(t, grid, (1e6, 1000), None)
    }

    #[test]
    fn an_emitter_is_in_view_only_in_its_own_dwells() {
        let v = view();
        // 447.7 MHz lies in the third step (447.2 .. 448.0 MHz): 102 ms .. 150 ms of each sweep.
        let iv = v.in_view(447.7e6, 400_000);
        assert_eq!(iv, vec![(102_000, 150_000), (302_000, 350_000)]);
        let f = v.facts();
        assert_eq!((f.steps, f.centres, f.revisit_s, f.settle_s), (4, 4, 0.2, 0.002));
    }

    #[test]
    fn airtime_counts_the_share_of_a_row_times_its_view() {
        // Rows of one sweep each; 48 ms in view a sweep. On for all of row 0 and half of row 1
        // (by energy share): 48 + 24 ms on, of 96 ms observed.
        let rows = [(2_250, 202_250), (202_250, 402_250)];
        let v = view();
        let per_row = view_per_row(&v.in_view(447.7e6, 400_000), &rows);
        assert_eq!(per_row, vec![48_000.0, 48_000.0]);
        let on = on_in_view((2_250, 302_250), &rows, &per_row);
        assert!((on - 72_000.0).abs() < 1e-6, "{on}");
        // An emission outside every row counts nothing.
        assert_eq!(on_in_view((500_000, 600_000), &rows, &per_row), 0.0);
    }
}
