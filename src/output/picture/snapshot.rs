//! `snapshot` as a consumer: every row of the run averaged into the picture's rows (bounded
//! memory, see [`crate::output::picture::held_rows`]), emissions found on the way if asked, and at the end the
//! title and footer that say what the picture shows and how it was measured.
//!
//! `--skip` is applied here: the input is read and transformed from its start (a pipe cannot be
//! sought), and rows that begin before the skip are left out, so the picture's time axis starts at
//! the first row after it.

use crate::dsp::Spectrum;
use crate::output::picture::held_rows::{HeldRows, RowAccumulator};
use crate::output::picture::marks::EmissionFinder;
use crate::output::picture::waterfall::{Mark, Timeline};
use crate::pipeline::{Consumer, Flow, RunEnd, RunInfo, TimeSource};
use crate::units::{format_hz, format_num};
use std::io;

/// What the run is asked to collect.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SnapshotPlan {
    /// Rows starting before this sample are left out.
    pub skip_samples: u64,
    /// Stored rows at most (twice the picture's height is plenty).
    pub max_rows: usize,
    /// Columns at most (the picture's width).
    pub max_columns: usize,
    /// Find emissions to outline.
    pub find_emissions: bool,
}

/// The consumer.
pub struct Snapshot {
    plan: SnapshotPlan,
    rows: RowAccumulator,
    finder: Option<EmissionFinder>,
    info: Option<RunInfo>,
    end_sample: u64,
    first_row: Option<u64>,
    refused: u64,
}

/// Everything a picture is drawn from.
pub struct Collected {
    pub held: HeldRows,
    pub timeline: Timeline,
    pub info: RunInfo,
    /// Emissions, when asked for (levels in dBFS; labels carry `offset_db`).
    pub marks: Vec<Mark>,
    /// Rows left out because the engine was retuned mid-run (never in `snapshot` itself).
    pub refused_rows: u64,
}

impl Snapshot {
    pub fn new(plan: SnapshotPlan) -> Snapshot {
        Snapshot {
            plan,
            rows: RowAccumulator::new(plan.max_rows, plan.max_columns),
            finder: plan.find_emissions.then(EmissionFinder::new),
            info: None,
            end_sample: 0,
            first_row: None,
            refused: 0,
        }
    }

    fn take(&mut self, row: &Spectrum, complete: bool) {
        if row.first_sample < self.plan.skip_samples {
            return;
        }
        self.first_row.get_or_insert(row.first_sample);
        if !self.rows.push(row) {
            self.refused += 1;
            return;
        }
        if complete {
            if let Some(f) = self.finder.as_mut() {
                f.push(row);
            }
        }
    }

    /// The rows and times, or `None` when no row was measured. Labels of the marks add
    /// `offset_db` and name `unit`.
    pub fn collect(self, offset_db: f64, unit: &str) -> Option<Collected> {
        let info = self.info?;
        let held = self.rows.finish()?;
        let first = self.first_row.unwrap_or(self.plan.skip_samples);
        let end = self.end_sample.max(held.rows.last().map_or(first, |r| r.end_sample));
        let timeline = Timeline {
            rate_hz: info.source.sample_rate_hz,
            first_sample: first,
            end_sample: end,
            start: info.clock.time(first),
        };
        let marks = self.finder.map(|f| f.finish(offset_db, unit)).unwrap_or_default();
        Some(Collected { held, timeline, info, marks, refused_rows: self.refused })
    }
}

impl Consumer for Snapshot {
    fn start(&mut self, run: &RunInfo) -> io::Result<()> {
        self.info = Some(run.clone());
        Ok(())
    }

    fn row(&mut self, row: &Spectrum) -> io::Result<Flow> {
        self.take(row, true);
        Ok(Flow::Continue)
    }

    fn partial_row(&mut self, row: &Spectrum) -> io::Result<()> {
        self.take(row, false);
        Ok(())
    }

    fn finish(&mut self, end: &RunEnd, run: &RunInfo) -> io::Result<()> {
        self.end_sample = end.end_sample;
        self.info = Some(run.clone());
        Ok(())
    }
}

impl Collected {
    /// "Waterfall of LABEL, 2031-04-17 06:30:00 UTC + 4 s" (or from second S when the start time
    /// is unknown).
    pub fn title(&self) -> String {
        let label = crate::messages::sanitize(&self.info.source.label);
        let dur = format_duration(self.timeline.duration_s());
        match self.timeline.start {
            Some(t) => {
                let t = crate::output::picture::ticks::utc_text(t);
                format!("Waterfall of {label}, {t} + {dur}")
            }
            None => {
                let from = self.timeline.first_sample as f64 / self.timeline.rate_hz;
                format!("Waterfall of {label}, {dur} from {} s", format_num(round3(from)))
            }
        }
    }

    /// Two lines: the band and the analysis; the averaging and where the time came from.
    pub fn footer(&self) -> Vec<String> {
        let g = &self.held.geometry;
        let e = &self.info.engine;
        let frames = e.frames_per_output.unwrap_or(1);
        let row_s =
            (frames as f64 * e.hop() as f64 + (e.fft_size - e.hop()) as f64) / g.sample_rate_hz;
        let stored = self.held.rows_per_stored;
        let time = match (self.timeline.start, self.info.time_source) {
            (None, _) => "start time unknown (give --start)",
            (Some(_), TimeSource::Option) => "time from --start",
            (Some(_), TimeSource::Recording) => "time from the recording (SigMF core:datetime)",
            (Some(_), _) => "time from the wall clock",
        };
        if let Some(lines) = self.panorama_footer(time) {
            return lines;
        }
        vec![
            format!(
                "source {} · centre {} · span {} · RBW {} · FFT {} · {} window · {} % overlap",
                crate::messages::sanitize(&self.info.source.label),
                format_hz(g.center_hz),
                format_hz(g.sample_rate_hz),
                format_hz(g.rbw_hz),
                g.fft_size,
                g.window,
                format_num((e.overlap * 100.0).round()),
            ),
            format!(
                "each spectrum averages {frames} FFT frame{} ({}); {} spectra in all, {} per stored row, averaged in power into pixel rows",
                if frames == 1 { "" } else { "s" },
                format_duration(row_s),
                self.held.input_rows,
                stored,
            ),
            format!("levels: largest bin per pixel column · {time}"),
        ]
    }

    /// The footer of a panorama: each row is a sweep, so the step's FFT, the grid's bins, the
    /// span and the frames a sweep gives (computed from the tuning) are named, not the grid size
    /// as an FFT; `None` for an input at one centre.
    fn panorama_footer(&self, time: &str) -> Option<Vec<String>> {
        let src = &self.info.source;
        let t = src.tuning.as_ref()?;
        let e = &self.info.engine;
        let grid = crate::pipeline::stitch::grid_of(src, e.fft_size).ok()??;
        let g = &self.held.geometry;
        let (lo, hi) = grid.span_hz();
        let steps = grid.centres().len();
        let frames = crate::measure::panorama::frames_per_sweep(t, &grid, e.fft_size, e.hop());
        let expected = if t.follows_stream { " (the hop plan's dwells)" } else { "" };
        Some(vec![
            format!(
                "source {} · panorama {} .. {} (span {}) · {steps} steps · FFT {} a step at {} · {} grid bins of {} · RBW {} · {} window · {} % overlap",
                crate::messages::sanitize(&src.label),
                format_hz(lo),
                format_hz(hi),
                format_hz(hi - lo),
                e.fft_size,
                format_hz(src.sample_rate_hz),
                grid.bins,
                format_hz(grid.bin_hz),
                format_hz(g.rbw_hz),
                g.window,
                format_num((e.overlap * 100.0).round()),
            ),
            format!(
                "each spectrum is one sweep of {steps} dwells: {frames} FFT frame{} a sweep at its least seen bin{expected}; {} sweeps in all, {} per stored row, averaged in power into pixel rows",
                if frames == 1 { "" } else { "s" },
                self.held.input_rows,
                self.held.rows_per_stored,
            ),
            format!("levels: largest bin per pixel column{} · {time}", holes_words(&grid)),
        ])
    }
}

fn round3(x: f64) -> f64 {
    (x * 1e3).round() / 1e3
}

/// `250 ms`, `4 s`, `12 min 30 s`, `1 h 5 min`.
pub fn format_duration(s: f64) -> String {
    if s == 0.0 {
        "0 s".to_string()
    } else if s < 1.0 {
        format!("{} ms", format_num(round3(s * 1e3).round()))
    } else if s < 120.0 {
        format!("{} s", format_num((s * 100.0).round() / 100.0))
    } else if s < 7200.0 {
        // Rounded before it is split, so 119.6 s is 2 min 0 s, never 1 min 60 s.
        let whole = s.round() as u64;
        format!("{} min {} s", whole / 60, whole % 60)
    } else {
        let minutes = (s / 60.0).round() as u64;
        format!("{} h {} min", minutes / 60, minutes % 60)
    }
}

/// The holes of a panorama in words for the footer (" · grey: never in view, 447.1995 ..
/// 447.9995 MHz"), or nothing when its steps tile the span.
fn holes_words(grid: &crate::measure::panorama::Grid) -> String {
    let holes = grid.holes_hz();
    if holes.is_empty() {
        return String::new();
    }
    let listed: Vec<String> =
        holes.iter().map(|&(a, b)| format!("{} .. {}", format_hz(a), format_hz(b))).collect();
    format!(" · grey: never in view, {}", listed.join(", "))
}

#[cfg(test)]
mod tests {
    use super::format_duration;

    /// Rounding never shows 60 in the smaller unit.
    #[test]
    fn durations_round_before_they_split() {
        assert_eq!(format_duration(28_798.0), "8 h 0 min");
        assert_eq!(format_duration(21_584.0), "6 h 0 min");
        assert_eq!(format_duration(179.6), "3 min 0 s");
        assert_eq!(format_duration(5392.0), "89 min 52 s");
        assert_eq!(format_duration(27.048), "27.05 s");
    }
}
