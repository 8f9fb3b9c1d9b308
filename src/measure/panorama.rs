//! A panorama: the spectra of a retuned receiver's dwells stitched onto one fixed wide grid.
//!
//! Why this shape: every consumer (tracker, `measure`'s average, pictures, census) already reads
//! a [`Spectrum`] through its [`Geometry`]; a panorama row is such a spectrum whose bins run over
//! every centre visited, at the same bin width as one step (rate / FFT size), so downstream
//! nothing needs to know the receiver moved. The grid is fixed before the first sample: each
//! distinct centre keeps its usable bins (those whose centres lie in the central `usable`
//! share of the rate), and a grid bin takes the bin of the same frequency (nearest centre, so within half a
//! bin). The steps need not touch: a plan over separate sub-bands leaves holes between them,
//! whose bins are never in view. Such a bin keeps no level (its PSD stays 0 and its
//! `last_seen` 0, "never"): pictures draw it as a gap, noise-floor estimates leave it out, no
//! emitter is found in it, and a plan channel over it is logged "not measured", never idle.
//!
//! Per grid bin the accumulator keeps the power sum of the current sweep, its frame count and
//! degrees of freedom, and the end sample of the last dwell that saw it ([`Panorama::last_seen`]).
//! A sweep is complete when every distinct centre has been visited once since the last row;
//! then [`Panorama::take`] turns the sums into one wide row (linear power averaged over the
//! frames that saw each bin, Welch 1967) and starts the next sweep.

use crate::dsp::{Geometry, Spectrum};
use crate::source::tuning::Tuning;
use crate::units::format_hz;
use std::sync::Arc;

/// The most bins a panorama's grid may hold: 2^24 (128 MiB for each per-bin table of f64), far
/// beyond any real sweep at a useful resolution (a 6 GHz span at 400 Hz bins), small enough that a
/// hostile recording cannot make the run allocate terabytes.
pub const MAX_GRID_BINS: usize = 1 << 24;

/// Where one distinct centre's usable bins land on the grid.
#[derive(Clone, Debug, PartialEq)]
struct Placement {
    center_hz: f64,
    /// First and last usable bin of a dwell's spectrum (fftshift order).
    first: usize,
    last: usize,
    /// Grid index = dwell bin index + `offset`.
    offset: isize,
}

/// The wide grid a tuning's steps are stitched onto.
#[derive(Clone, Debug, PartialEq)]
pub struct Grid {
    places: Vec<Placement>,
    /// Grid index of each of the tuning's steps' centre (into `places`).
    step_place: Vec<usize>,
    /// The runs of grid bins some step sees (first, last), lowest first, merged where they
    /// touch: between them lie holes, never in view.
    in_view: Vec<(usize, usize)>,
    pub bins: usize,
    pub bin_hz: f64,
    /// Centre of grid bin 0.
    pub first_hz: f64,
}

impl Grid {
    /// Lays out the grid for a tuning at `rate_hz` with `fft_size` bins per step, holes between
    /// the steps' usable bands included (bins there are never in view); an error when no whole
    /// bin is kept or the span would need more than [`MAX_GRID_BINS`] bins.
    pub fn new(tuning: &Tuning, rate_hz: f64, fft_size: usize) -> Result<Grid, String> {
        let bin_hz = rate_hz / fft_size as f64;
        let half = (fft_size / 2) as f64;
        let keep = tuning.usable * rate_hz / 2.0 / bin_hz;
        // Bin i lies (i − N/2) bins from the centre: keep it when that is in [−keep, +keep), so
        // that steps `usable · rate` apart tile the grid without hole or overlap.
        let first = (half - keep - 1e-9).ceil().max(0.0) as usize;
        let last = (((half + keep - 1e-9).ceil() as usize).max(1) - 1).min(fft_size - 1);
        if last < first {
            return Err(format!(
                "--usable {} keeps no whole bin of a {fft_size}-point FFT; give a larger share",
                tuning.usable
            ));
        }
        let centres = tuning.centres();
        let low = |c: f64| c + (first as f64 - half) * bin_hz;
        let first_hz = centres.iter().map(|&c| low(c)).fold(f64::INFINITY, f64::min);
        let last_hz = centres.iter().map(|&c| low(c)).fold(f64::NEG_INFINITY, f64::max);
        // The grid holds every bin between the lowest and the highest step, holes included:
        // refuse one too large to hold before anything of its size is made (a hostile recording
        // with captures petahertz apart, or a plan over a whole band at a narrow bin).
        let span_bins = (last_hz - first_hz) / bin_hz + (last - first + 1) as f64;
        if span_bins.is_nan() || span_bins > MAX_GRID_BINS as f64 {
            return Err(format!(
                "the steps span {} .. {} ({} wide): at bins of {} that is {:.0} grid bins, more than the {MAX_GRID_BINS} a panorama holds; give a smaller --fft (wider bins), a hop plan over a narrower band, or analyse one capture with --segment N",
                format_hz(first_hz - bin_hz / 2.0),
                format_hz(last_hz + (last - first) as f64 * bin_hz + bin_hz / 2.0),
                format_hz(last_hz - first_hz + (last - first + 1) as f64 * bin_hz),
                format_hz(bin_hz),
                span_bins.round()
            ));
        }
        let places: Vec<Placement> = centres
            .iter()
            .map(|&c| Placement {
                center_hz: c,
                first,
                last,
                offset: ((low(c) - first_hz) / bin_hz).round() as isize - first as isize,
            })
            .collect();
        let bins =
            places.iter().map(|p| (p.last as isize + p.offset) as usize + 1).max().unwrap_or(0);
        // The bands in view, merged, from the steps' bands sorted by their first bin (no per-bin
        // table: a plan over separate sub-bands leaves most of its span in holes).
        let mut bands: Vec<(usize, usize)> = places
            .iter()
            .map(|p| {
                ((p.first as isize + p.offset) as usize, (p.last as isize + p.offset) as usize)
            })
            .collect();
        bands.sort_unstable();
        let mut in_view: Vec<(usize, usize)> = Vec::new();
        for (from, to) in bands {
            match in_view.last_mut() {
                Some(last) if from <= last.1 + 1 => last.1 = last.1.max(to),
                _ => in_view.push((from, to)),
            }
        }
        let step_place = tuning
            .steps
            .iter()
            .map(|s| centres.iter().position(|&c| c == s.center_hz).unwrap_or(0))
            .collect();
        Ok(Grid { places, step_place, in_view, bins, bin_hz, first_hz })
    }

    /// Lowest and highest frequency of the panorama (outer bin edges).
    pub fn span_hz(&self) -> (f64, f64) {
        let lo = self.first_hz - self.bin_hz / 2.0;
        (lo, lo + self.bins as f64 * self.bin_hz)
    }

    /// Whether some step sees grid bin `bin` (false in a hole between steps).
    pub fn in_view(&self, bin: usize) -> bool {
        let at = self.in_view.partition_point(|&(_, to)| to < bin);
        self.in_view.get(at).is_some_and(|&(from, _)| from <= bin)
    }

    /// The holes of the panorama: frequency ranges (outer bin edges) between the steps' bands,
    /// lowest first; none when the steps tile the span.
    pub fn holes_hz(&self) -> Vec<(f64, f64)> {
        let edge = |bin: usize| self.first_hz + (bin as f64 - 0.5) * self.bin_hz;
        self.in_view.windows(2).map(|w| (edge(w[0].1 + 1), edge(w[1].0))).collect()
    }

    /// Distinct centres visited, lowest first.
    pub fn centres(&self) -> Vec<f64> {
        self.places.iter().map(|p| p.center_hz).collect()
    }

    /// Which distinct centres see the band `[low_hz, high_hz]` whole.
    pub fn centres_seeing(&self, low_hz: f64, high_hz: f64) -> Vec<usize> {
        let eps = 1e-6 * self.bin_hz;
        (0..self.places.len())
            .filter(|&k| {
                let p = &self.places[k];
                let lo = self.first_hz + (p.first as isize + p.offset) as f64 * self.bin_hz;
                let hi = self.first_hz + (p.last as isize + p.offset) as f64 * self.bin_hz;
                lo - self.bin_hz / 2.0 <= low_hz + eps && high_hz - eps <= hi + self.bin_hz / 2.0
            })
            .collect()
    }

    /// The distinct centre (index into [`Grid::centres`]) at `center_hz`, if the grid has it.
    pub fn place_of_centre(&self, center_hz: f64) -> Option<usize> {
        self.places.iter().position(|p| crate::source::tuning::same_centre(p.center_hz, center_hz))
    }

    /// The distinct centre (index into [`Grid::centres`]) of the tuning's step `step`.
    pub fn place_of_step(&self, step: usize) -> usize {
        self.step_place[step]
    }
}

/// How long a channel is in view in a panorama, in ITU-R Report SM.2256's terms (from memory):
/// the observation time is the time the receiver spends on the channel, the revisit time the
/// time from the start of one visit to the start of the next.
///
/// A channel lying across a step boundary is seen part by part, each part in its own dwell;
/// the stitched row holds every part once a sweep. Its observation time is that of its least
/// observed bin (every bin of it was seen at least that long), its revisit time that bin's: for
/// a channel inside one step that is the step's dwells, for one across a boundary the shorter
/// of its parts' dwells, once a sweep.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ViewTimes {
    /// Seconds in view per sweep (the dwells that hold its least observed bin, less the
    /// settling time).
    pub observation_per_sweep_s: f64,
    /// Mean seconds between the starts of successive visits; `None` with fewer than two.
    pub revisit_s: Option<f64>,
}

/// The view times of the channel `[low_hz, high_hz]`; `None` when some part of it is never in
/// view.
pub fn view_times(
    tuning: &Tuning,
    grid: &Grid,
    rate_hz: f64,
    low_hz: f64,
    high_hz: f64,
) -> Option<ViewTimes> {
    let (lo, hi) = grid.span_hz();
    let eps = 1e-6 * grid.bin_hz;
    if low_hz < lo - eps || high_hz > hi + eps {
        return None;
    }
    // The grid bins whose centres lie in the channel (its centre bin when it is narrower).
    let bin = |f: f64| (f - grid.first_hz) / grid.bin_hz;
    let top = grid.bins.saturating_sub(1);
    let mut first = (bin(low_hz).ceil().max(0.0) as usize).min(top);
    let mut last = (bin(high_hz).floor().max(0.0) as usize).min(top);
    if first > last {
        first = (bin(0.5 * (low_hz + high_hz)).round().max(0.0) as usize).min(top);
        last = first;
    }
    let mut least: Option<(u64, ViewTimes)> = None;
    for b in first..=last {
        let f = grid.first_hz + b as f64 * grid.bin_hz;
        let (observed, v) = bin_view_times(tuning, grid, rate_hz, &grid.centres_seeing(f, f))?;
        if !least.is_some_and(|(o, _)| observed >= o) {
            least = Some((observed, v));
        }
    }
    least.map(|(_, v)| v)
}

/// The view times of a band seen by the grid's distinct centres `seeing`, with the samples it
/// is observed in the timeline; `None` when no step sees it.
fn bin_view_times(
    tuning: &Tuning,
    grid: &Grid,
    rate_hz: f64,
    seeing: &[usize],
) -> Option<(u64, ViewTimes)> {
    let steps = &tuning.steps;
    let mut visits = Vec::new();
    let mut observed = 0u64;
    for (k, s) in steps.iter().enumerate() {
        if !seeing.contains(&grid.place_of_step(k)) {
            continue;
        }
        visits.push(s.start);
        // The last dwell of a recording has no known end: its length is left out.
        let end = steps.get(k + 1).map(|n| n.start).or(tuning.period);
        if let Some(end) = end {
            observed += (end - s.start).saturating_sub(tuning.settle_samples);
        }
    }
    if visits.is_empty() {
        return None;
    }
    // Sweeps in the timeline: a hop plan is one; a recording visits its least seen centre once
    // a sweep.
    let sweeps = match tuning.period {
        Some(_) => 1,
        None => (0..grid.places.len())
            .map(|p| (0..steps.len()).filter(|&k| grid.place_of_step(k) == p).count())
            .min()
            .unwrap_or(1)
            .max(1),
    };
    let revisit = match tuning.period {
        Some(p) => Some(p as f64 / visits.len() as f64),
        None if visits.len() > 1 => {
            Some((visits[visits.len() - 1] - visits[0]) as f64 / (visits.len() - 1) as f64)
        }
        None => None,
    };
    let v = ViewTimes {
        observation_per_sweep_s: observed as f64 / sweeps as f64 / rate_hz,
        revisit_s: revisit.map(|r| r / rate_hz),
    };
    Some((observed, v))
}

/// FFT frames of `fft_size` at `hop` that one sweep of `tuning` gives its least seen grid bin:
/// each dwell yields ⌊(length − settle − N) / hop⌋ + 1 whole frames (the engine drops the
/// unfinished one at a dwell's end), summed over the dwells whose step sees the bin. A hop plan
/// is one sweep; a recording's dwells are shared over as many sweeps as it visits its least
/// visited centre, and its last dwell (no known end) is left out. For a stream that reports its
/// retunes these are the plan's expected dwells.
pub fn frames_per_sweep(tuning: &Tuning, grid: &Grid, fft_size: usize, hop: usize) -> u64 {
    let steps = &tuning.steps;
    let mut frames = vec![0u64; grid.places.len()];
    let mut visits = vec![0u64; grid.places.len()];
    for (k, s) in steps.iter().enumerate() {
        let place = grid.place_of_step(k);
        visits[place] += 1;
        let Some(end) = steps.get(k + 1).map(|n| n.start).or(tuning.period) else { continue };
        let len = (end - s.start).saturating_sub(tuning.settle_samples);
        if len >= fft_size as u64 {
            frames[place] += (len - fft_size as u64) / hop.max(1) as u64 + 1;
        }
    }
    let sweeps =
        if tuning.period.is_some() { 1 } else { visits.iter().copied().min().unwrap_or(1) };
    let per_place = frames.iter().map(|f| f / sweeps.max(1));
    // Where steps overlap a bin is seen by more than one; every bin in view is seen by at least
    // one place, so the least seen bin sees at least the least place's frames.
    per_place.min().unwrap_or(0)
}

/// The accumulator of one panorama.
pub struct Panorama {
    grid: Grid,
    sum: Vec<f64>,
    frames: Vec<u64>,
    dof: Vec<f64>,
    /// End sample (one past) of the last dwell that saw each bin; `None`: never yet.
    last_seen: Vec<Option<u64>>,
    /// Distinct centres visited in the current sweep.
    visited: Vec<bool>,
    first_sample: Option<u64>,
    end_sample: u64,
    out: Spectrum,
}

impl Panorama {
    /// `step` is the geometry of one dwell's spectra (window, rate, FFT size).
    pub fn new(grid: Grid, step: &Geometry) -> Panorama {
        let n = grid.bins;
        let center = grid.first_hz + (n / 2) as f64 * grid.bin_hz;
        let out = Spectrum::empty(Arc::new(step.widened(center, n)));
        Panorama {
            sum: vec![0.0; n],
            frames: vec![0; n],
            dof: vec![0.0; n],
            last_seen: vec![None; n],
            visited: vec![false; grid.places.len()],
            first_sample: None,
            end_sample: 0,
            out,
            grid,
        }
    }

    pub fn grid(&self) -> &Grid {
        &self.grid
    }

    /// Adds one spectrum of a dwell at the tuning's step `step`: its usable bins, weighted by
    /// its frames.
    pub fn add(&mut self, step: usize, row: &Spectrum) {
        self.add_at(self.grid.place_of_step(step), row);
    }

    /// Adds one spectrum of a dwell at the grid's distinct centre `place` (index into
    /// [`Grid::centres`]): its usable bins, weighted by its frames.
    pub fn add_at(&mut self, place: usize, row: &Spectrum) {
        let place = &self.grid.places[place];
        let w = row.frames as f64;
        for i in place.first..=place.last {
            let j = (i as isize + place.offset) as usize;
            self.sum[j] += row.psd[i] * w;
            self.frames[j] += row.frames;
            self.dof[j] += row.dof;
            self.last_seen[j] = Some(row.end_sample);
        }
        self.first_sample.get_or_insert(row.first_sample);
        self.end_sample = self.end_sample.max(row.end_sample);
    }

    /// Marks the dwell at step `step` over; true when the sweep is now complete (every centre
    /// visited since the last row).
    pub fn dwell_done(&mut self, step: usize) -> bool {
        self.dwell_done_at(self.grid.place_of_step(step))
    }

    /// Marks a dwell at the distinct centre `place` over; true when the sweep is now complete.
    pub fn dwell_done_at(&mut self, place: usize) -> bool {
        self.visited[place] = true;
        self.visited.iter().all(|v| *v)
    }

    /// True when frames were added since the last row.
    pub fn pending(&self) -> bool {
        self.first_sample.is_some()
    }

    /// End sample of the last dwell that saw each grid bin (`None`: never in view yet).
    pub fn last_seen(&self) -> &[Option<u64>] {
        &self.last_seen
    }

    /// The current sweep as one wide row, and a new sweep begun. A bin not seen in this sweep
    /// (only at the end of input, a partial sweep) keeps its last value, stale.
    pub fn take(&mut self) -> &Spectrum {
        let out = &mut self.out;
        let mut min_frames = u64::MAX;
        let mut min_dof = f64::INFINITY;
        for j in 0..self.sum.len() {
            if self.frames[j] > 0 {
                out.psd[j] = self.sum[j] / self.frames[j] as f64;
                min_frames = min_frames.min(self.frames[j]);
                min_dof = min_dof.min(self.dof[j]);
            }
        }
        out.frames = if min_frames == u64::MAX { 0 } else { min_frames };
        out.dof = if min_dof.is_finite() { min_dof } else { 0.0 };
        out.first_sample = self.first_sample.take().unwrap_or(self.end_sample);
        out.end_sample = self.end_sample;
        out.last_seen = Some(Arc::new(self.last_seen.iter().map(|s| s.unwrap_or(0)).collect()));
        self.sum.iter_mut().for_each(|s| *s = 0.0);
        self.frames.iter_mut().for_each(|f| *f = 0);
        self.dof.iter_mut().for_each(|d| *d = 0.0);
        self.visited.iter_mut().for_each(|v| *v = false);
        &self.out
    }

    /// True when some grid bin that a step sees has not been seen yet (only before the first
    /// sweep ends); the bins of holes are never seen and do not count.
    pub fn has_unseen(&self) -> bool {
        self.last_seen.iter().enumerate().any(|(j, s)| s.is_none() && self.grid.in_view(j))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::{Window, WindowKind};
    use crate::source::tuning::{Step, Tuning};

    fn tuning(centres: &[f64], usable: f64) -> Tuning {
        let steps = centres
            .iter()
            .enumerate()
            .map(|(k, &c)| Step { start: 1000 * k as u64, center_hz: c })
            .collect();
        Tuning { steps, period: None, settle_samples: 0, usable, follows_stream: false }
    }

    /// A panorama of `centres` at 1 MS/s, 1000-point Hann, 80 % kept, and an empty dwell row.
    fn panorama_of(centres: &[f64]) -> (Panorama, Spectrum) {
        let g = Grid::new(&tuning(centres, 0.8), 1e6, 1000).unwrap();
        let step = Geometry::new(&Window::new(WindowKind::Hann, 1000), 1e6, 0.0);
        let row = Spectrum::empty(Arc::new(step.clone()));
        (Panorama::new(g, &step), row)
    }

    #[test]
    fn steps_tile_the_grid_at_the_step_bin_width() {
        // 1 MS/s, 1000 bins of 1 kHz, 80 % usable: 800 bins per step; centres 800 kHz apart
        // tile 4 × 800 = 3200 bins exactly.
        let t = tuning(&[100e6, 100.8e6, 101.6e6, 102.4e6], 0.8);
        let g = Grid::new(&t, 1e6, 1000).unwrap();
        assert_eq!((g.bins, g.bin_hz), (3200, 1e3));
        let (lo, hi) = g.span_hz();
        // Bin centres 99.6 MHz .. 102.799 MHz, edges half a bin beyond.
        assert!((lo - 99.5995e6).abs() < 1.0 && (hi - 102.7995e6).abs() < 1.0, "{lo} {hi}");
        assert_eq!(g.centres_seeing(100.79e6, 100.81e6), vec![1]);
    }

    #[test]
    fn a_channel_is_in_view_for_its_dwells_less_settling() {
        // A hop plan of four 50 ms dwells at 1 MS/s, 2 ms settling: a channel inside one step
        // is observed 48 ms a sweep and revisited every 200 ms (one sweep).
        let mut t = tuning(&[100e6, 100.8e6, 101.6e6, 102.4e6], 0.8);
        t.steps.iter_mut().enumerate().for_each(|(k, s)| s.start = 50_000 * k as u64);
        t.period = Some(200_000);
        t.settle_samples = 2_000;
        let g = Grid::new(&t, 1e6, 1000).unwrap();
        let v = view_times(&t, &g, 1e6, 100.79e6, 100.795e6).unwrap();
        assert!((v.observation_per_sweep_s - 0.048).abs() < 1e-12, "{v:?}");
        assert_eq!(v.revisit_s, Some(0.2));
        assert!(view_times(&t, &g, 1e6, 103e6, 103.01e6).is_none(), "never in view");
        // Across the boundary of steps 0 and 1 (100.4 MHz): each part is seen in its own 48 ms
        // a sweep, so every bin of it is seen 48 ms a sweep, once a sweep.
        let v = view_times(&t, &g, 1e6, 100.39e6, 100.41e6).unwrap();
        assert!((v.observation_per_sweep_s - 0.048).abs() < 1e-12, "{v:?}");
        assert_eq!(v.revisit_s, Some(0.2));
        // Half beyond the last step's band: part of it is never in view.
        assert!(view_times(&t, &g, 1e6, 102.79e6, 102.81e6).is_none());
        // Frames a sweep: each 48 ms settled dwell of 48 000 samples holds
        // ⌊(48 000 − 1000) / 500⌋ + 1 = 95 whole frames of 1000 at hop 500.
        assert_eq!(frames_per_sweep(&t, &g, 1000, 500), 95);
    }

    #[test]
    fn a_hole_between_steps_is_never_in_view_and_a_huge_span_is_refused() {
        // 1 MS/s, 1 kHz bins, 80 % kept: 100 MHz sees 99.6 .. 100.4 MHz, 101 MHz 100.6 .. 101.4:
        // 200 bins between them are never in view.
        let t = tuning(&[100e6, 101e6], 0.8);
        let g = Grid::new(&t, 1e6, 1000).unwrap();
        assert_eq!(g.bins, 1800);
        assert!(g.in_view(0) && g.in_view(799) && !g.in_view(800) && !g.in_view(999));
        assert!(g.in_view(1000) && g.in_view(1799) && !g.in_view(1800));
        let holes = g.holes_hz();
        assert_eq!(holes.len(), 1, "{holes:?}");
        assert!((holes[0].0 - 100.3995e6).abs() < 1.0 && (holes[0].1 - 100.5995e6).abs() < 1.0);
        // Steps listed out of order: three tile, the fourth lies beyond a hole.
        let g = Grid::new(&tuning(&[101.6e6, 100e6, 100.8e6, 103e6], 0.8), 1e6, 1000).unwrap();
        assert_eq!(g.holes_hz().len(), 1);
        // Bins from 99.6 MHz: the hole 102.0 .. 102.6 MHz is bins 2400 ..= 2999.
        assert!(g.in_view(2399) && !g.in_view(2400) && !g.in_view(2999) && g.in_view(3000));
        // The hole has no view times; the steps on either side do.
        assert!(
            view_times(&t, &Grid::new(&t, 1e6, 1000).unwrap(), 1e6, 100.5e6, 100.51e6).is_none()
        );
        // Centres 9 PHz apart (a hostile recording): refused by its bin count, before any table
        // of its size is made.
        let e = Grid::new(&tuning(&[1e6, 9e15], 0.8), 1e6, 1000).unwrap_err();
        assert!(e.contains("grid bins") && e.contains("--fft") && e.contains("16777216"), "{e}");
    }

    #[test]
    fn a_dwell_lands_on_its_own_frequencies_and_sweeps_complete() {
        let (mut p, mut row) = panorama_of(&[100e6, 100.8e6]);
        row.frames = 2;
        row.psd[600] = 1.0; // +100 kHz from the second centre: 100.9 MHz
        row.end_sample = 1500;
        p.add(1, &row);
        assert!(!p.dwell_done(1));
        assert!(p.has_unseen(), "the first centre's bins are not seen yet");
        row.psd[600] = 0.0;
        p.add(0, &row);
        assert!(p.dwell_done(0));
        let wide = p.take();
        let peak =
            (0..wide.psd.len()).max_by(|&a, &b| wide.psd[a].total_cmp(&wide.psd[b])).unwrap();
        assert!((wide.freq_of_bin(peak as f64) - 100.9e6).abs() < 1.0);
        assert_eq!(wide.frames, 2);
        assert!(!p.has_unseen());
    }

    #[test]
    fn a_sweep_with_a_hole_completes_and_its_row_says_what_was_never_seen() {
        // 100 MHz sees 99.6 .. 100.4 MHz, 101 MHz 100.6 .. 101.4: a hole between.
        let (mut p, mut row) = panorama_of(&[100e6, 101e6]);
        row.frames = 1;
        row.psd.iter_mut().for_each(|x| *x = 1.0);
        row.end_sample = 10;
        p.add(0, &row);
        assert!(!p.dwell_done(0) && p.has_unseen());
        p.add(1, &row);
        assert!(p.dwell_done(1));
        assert!(!p.has_unseen(), "the hole's bins are never seen and do not hold the sweep");
        let wide = p.take();
        assert!(!wide.never_saw(100.0e6, 100.01e6) && !wide.never_saw(101.0e6, 101.01e6));
        assert!(wide.never_saw(100.5e6, 100.51e6), "in the hole");
        assert!(wide.never_saw(100.39e6, 100.41e6), "half over the hole");
        assert!(wide.never_saw(101.5e6, 101.51e6), "beyond the span");
        // The hole's bins hold no level; the noise floor is read over the bins in view (all at
        // 1: FCME's truncation correction for the χ² model leaves it within 0.1 dB of that).
        let floor = crate::measure::spectrum_floor(wide);
        assert!(crate::units::db(floor).abs() < 0.1, "{floor}");
        // Counted in, the hole's zeros (200 of 1800 bins) would drag it down.
        let all = crate::measure::noise_floor(&wide.psd, wide.dof);
        assert!(all < 0.95 * floor, "{all} {floor}");
    }
}
