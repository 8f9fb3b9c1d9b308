//! Picture (`g`): the history the monitor holds drawn as a PNG waterfall, with the same drawing
//! code as `bandwarden snapshot` ([`crate::output::picture::waterfall::draw_waterfall`]), written to the
//! folder of `--evidence-dir` (default: the working directory) as `bandwarden-YYYYMMDDTHHMMSSZ.png` (the UTC time of writing).
//!
//! The picture covers the newest stretch of history that shares one frequency grid (a change of
//! FFT size or a retune starts a new stretch), at most the history's cap. Rows are drawn at the
//! levels the screen keeps (a hundredth of a dB; above 8192 bins the largest of neighbouring
//! bins, as the screen shows them). The colour scale is the screen's (reference level and range)
//! and the frequencies are the screen's (the zoomed view, in whole bins), so the picture looks
//! like what the operator saw. Time runs as on the screen: the newest row at the top.

use super::super::history::Row;
use super::super::view::BinGrid;
use super::App;
use crate::output::picture::canvas::PictureFormat;
use crate::output::picture::held_rows::HeldRow;
use crate::output::picture::waterfall::{
    draw_waterfall, ChannelBand, PictureSettings, Timeline, WaterfallView,
};
use crate::output::sink;
use crate::units::{db, format_hz};
use anyhow::{bail, Result};
use std::io::Write;
use time::OffsetDateTime;

/// Size of the picture, pixels: wide enough for a readable axis and table-free footer.
const WIDTH: u32 = 1400;
const HEIGHT: u32 = 900;

impl App {
    /// Draws the held history into `dir` named for `now`; returns the path.
    pub fn write_picture(&self, dir: &str, now: OffsetDateTime) -> Result<String> {
        let rows = self.newest_stretch();
        let (Some(first), Some(last)) = (rows.first(), rows.last()) else {
            bail!("no rows in the history yet");
        };
        let grid = first.grid;
        let bins = self.shown_bins(grid);
        let mut held = held_rows(&rows);
        for h in &mut held {
            h.level_db = h.level_db[bins.clone()].to_vec();
        }
        let low_hz = grid.freq(bins.start) - 0.5 * grid.bin_hz;
        let high_hz = low_hz + bins.len() as f64 * grid.bin_hz;
        // The traces are drawn only when they are on the same grid as the rows.
        let cur = self.traces.current();
        let same_grid = cur.is_some_and(|c| c.fft_size == grid.len);
        let trace_db = |psd: &[f64]| -> Option<Vec<f32>> {
            let rbw = cur?.rbw_hz;
            same_grid.then(|| psd[bins.clone()].iter().map(|&p| db(p * rbw) as f32).collect())
        };
        let average = trace_db(self.traces.average_psd());
        let peak = trace_db(self.traces.hold_psd());
        let view = WaterfallView {
            rows: &held,
            low_hz,
            high_hz,
            average_db: average.as_deref(),
            peak_db: peak.as_deref(),
        };
        let first_sample = held[0].first_sample;
        let timeline = Timeline {
            rate_hz: self.source.sample_rate_hz,
            first_sample,
            end_sample: last.end_sample,
            start: self.times.utc_at(first_sample),
        };
        let offset = self.levels.offset_db;
        let top = self.levels.top_dbfs + offset.unwrap_or(0.0);
        let scale = (top - self.levels.range_db, top);
        let settings = PictureSettings {
            width: WIDTH,
            height: HEIGHT,
            map: self.look.palette.map,
            scale: (scale.0.is_finite() && scale.1.is_finite()).then_some(scale),
            ref_offset_db: offset,
            title: format!("Waterfall of {} (monitor history)", self.source.label),
            footer: self.picture_footer(held.len(), &timeline),
            channels: self
                .plan
                .marks
                .iter()
                .map(|c| ChannelBand {
                    name: c.name.clone(),
                    low_hz: c.center_hz - 0.5 * c.width_hz,
                    high_hz: c.center_hz + 0.5 * c.width_hz,
                })
                // As on the plan row: only the channels in view.
                .filter(|c| c.high_hz > low_hz && c.low_hz < high_hz)
                .collect(),
            marks: Vec::new(),
            newest_at_top: true,
        };
        let bytes = draw_waterfall(&view, &timeline, &settings, PictureFormat::Png)?;
        let path = format!("{dir}/{}.png", super::evidence::file_stem(now));
        let mut out = sink::open(&path, false, "picture")?.out;
        out.write_all(&bytes)?;
        out.flush()?;
        Ok(path)
    }

    /// The bins of `grid` on screen: those of the zoomed view (all of them before a view).
    fn shown_bins(&self, grid: BinGrid) -> std::ops::Range<usize> {
        let bins = self.view.map_or(0..grid.len, |v| grid.bins_in(v.lo_hz, v.hi_hz));
        if bins.is_empty() {
            0..grid.len
        } else {
            bins
        }
    }

    /// The held rows of the newest stretch on one grid, oldest first.
    fn newest_stretch(&self) -> Vec<&Row> {
        let mut rows: Vec<&Row> = self.history.rows_oldest_first().collect();
        if let Some(newest) = rows.last().map(|r| r.grid) {
            let keep = rows.iter().rev().take_while(|r| r.grid == newest).count();
            rows.drain(..rows.len() - keep);
        }
        rows
    }

    fn picture_footer(&self, rows: usize, timeline: &Timeline) -> Vec<String> {
        let analysis = match self.traces.current() {
            Some(c) => {
                format!("FFT {} · {} window · RBW {}", c.fft_size, c.window, format_hz(c.rbw_hz))
            }
            None => String::from("no spectrum"),
        };
        let time = if timeline.start.is_some() { "UTC" } else { "seconds of input" };
        vec![
            format!(
                "source {} · centre {} · rate {} · {analysis}",
                self.source.label,
                format_hz(self.source.center_hz),
                format_hz(self.source.sample_rate_hz),
            ),
            format!(
                "{rows} rows of the monitor's history (as shown on screen: levels in one RBW, colour scale of the screen) · time: {time}"
            ),
        ]
    }

    /// `g`: writes the picture into the files folder and says where (or what failed).
    pub(super) fn picture_key(&mut self) {
        let msg = match self.write_picture(&self.files_dir, OffsetDateTime::now_utc()) {
            Ok(path) => format!("wrote {}", self.shown_path(&path)),
            Err(e) => format!("picture not written: {e:#}"),
        };
        self.say(crate::messages::sanitize(&msg));
    }
}

/// The rows as the picture takes them: each spans from the end of the one before (the first
/// row is given the same length as the second).
fn held_rows(rows: &[&Row]) -> Vec<HeldRow> {
    let step = match rows {
        [a, b, ..] => b.end_sample.saturating_sub(a.end_sample).max(1),
        _ => 1,
    };
    let mut prev = rows.first().map(|r| r.end_sample.saturating_sub(step)).unwrap_or(0);
    rows.iter()
        .map(|r| {
            let h = HeldRow {
                first_sample: prev.min(r.end_sample),
                end_sample: r.end_sample,
                level_db: r.levels_db().collect(),
            };
            prev = r.end_sample;
            h
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::{Spectrum, Window, WindowKind};
    use crate::tui::app::tests::{settings, summary};
    use crate::tui::colour::Depth;
    use std::time::Instant;
    use time::format_description::well_known::Rfc3339;

    #[test]
    fn the_history_becomes_a_png_named_with_the_utc_time() {
        let mut a = App::new(summary(), settings(), Depth::Mono, None, Vec::new(), Instant::now());
        let w = Window::new(WindowKind::Hann, 1024);
        for k in 0..40u64 {
            let mut power = vec![1.0; 1024];
            power[100 + (k as usize % 5)] = 1e6;
            let spec = Spectrum::from_power_sum(
                &power,
                1,
                2.0,
                &w,
                1.024e6,
                100e6,
                k * 1024,
                (k + 1) * 1024,
            );
            a.push_row(spec);
        }
        a.measure();
        let dir = std::env::temp_dir().join(format!("bw-picture-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let now = OffsetDateTime::parse("2031-04-17T06:30:02Z", &Rfc3339).unwrap();
        let path = a.write_picture(dir.to_str().unwrap(), now).unwrap();
        assert!(path.ends_with("bandwarden-20310417T063002Z.png"), "{path}");
        let bytes = std::fs::read(&path).unwrap();
        // PNG signature (ISO/IEC 15948, section 5.2) and the size asked for in the IHDR chunk.
        assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n");
        let width = u32::from_be_bytes(bytes[16..20].try_into().unwrap());
        let height = u32::from_be_bytes(bytes[20..24].try_into().unwrap());
        assert_eq!((width, height), (WIDTH, HEIGHT));
        std::fs::remove_dir_all(&dir).ok();
    }

    #[test]
    fn the_picture_covers_the_zoomed_view() {
        let mut a = App::new(summary(), settings(), Depth::Mono, None, Vec::new(), Instant::now());
        let w = Window::new(WindowKind::Hann, 1024);
        a.push_row(Spectrum::from_power_sum(&[1.0; 1024], 1, 2.0, &w, 1.024e6, 100e6, 0, 1024));
        let grid = a.history.rows_oldest_first().next().unwrap().grid;
        assert_eq!(a.shown_bins(grid), 0..1024, "the whole span");
        a.markers.at = Some(100.2e6);
        a.apply(crate::tui::input::Intent::ZoomIn);
        let v = a.view.unwrap();
        let bins = a.shown_bins(grid);
        // 1 kHz bins: half the span is 512 of them, each centred inside the view.
        assert_eq!(bins.len(), 512);
        assert!(grid.freq(bins.start) >= v.lo_hz && grid.freq(bins.end - 1) < v.hi_hz);
    }

    #[test]
    fn rows_span_from_the_end_of_the_one_before() {
        let mut a = App::new(summary(), settings(), Depth::Mono, None, Vec::new(), Instant::now());
        let w = Window::new(WindowKind::Hann, 64);
        for k in 0..3u64 {
            let spec =
                Spectrum::from_power_sum(&[1.0; 64], 1, 2.0, &w, 1e6, 0.0, k * 100, (k + 1) * 100);
            a.push_row(spec);
        }
        let held = held_rows(&a.newest_stretch());
        let spans: Vec<(u64, u64)> = held.iter().map(|h| (h.first_sample, h.end_sample)).collect();
        assert_eq!(spans, vec![(0, 100), (100, 200), (200, 300)]);
    }

    #[test]
    fn an_empty_history_is_an_error_not_a_picture() {
        let a = App::new(summary(), settings(), Depth::Mono, None, Vec::new(), Instant::now());
        let err = a.write_picture(".", OffsetDateTime::now_utc()).unwrap_err();
        assert!(err.to_string().contains("no rows"), "{err}");
    }
}
