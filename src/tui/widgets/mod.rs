//! The monitor's widgets, each a pure `Widget for &T` over plain data so it is tested against a
//! cell buffer, and the whole screen as `Widget for &App`.

pub mod axis;
pub mod help;
pub mod spectrum;
pub mod status;
pub mod table;
pub mod waterfall;

use super::app::App;
use super::layout::Screen;
use axis::{FreqAxis, PlanRow};
use help::HelpOverlay;
use ratatui::buffer::{Buffer, CellDiffOption};
use ratatui::layout::Rect;
use ratatui::style::Style;
use ratatui::widgets::Widget;
use spectrum::SpectrumPlot;
use status::{marker_line, put_line, settings_line, source_line};
use table::SignalTable;
use waterfall::{label_interval, WaterfallPlot, PAIRS_ONLY_FROM_ROWS_PER_S};

impl App {
    /// Whether the channel-plan row is on screen.
    pub fn plan_row(&self) -> bool {
        self.plan_visible && !self.channels.is_empty()
    }

    /// Rows per second the DSP delivers (the request, limited by the frames the input has).
    pub fn effective_row_rate(&self) -> f64 {
        let cfg = self.settings.engine(self.source.sample_rate_hz);
        self.source.sample_rate_hz / cfg.hop() as f64 / cfg.frames_per_output.unwrap_or(1) as f64
    }

    /// The waterfall as the painter and the widget see it.
    pub fn waterfall_plot(&self) -> Option<WaterfallPlot<'_>> {
        let rows_per_s = self.effective_row_rate();
        Some(WaterfallPlot {
            history: &self.history,
            view: self.view?,
            bottom_dbfs: self.levels.bottom_dbfs(),
            range_db: self.levels.range_db,
            palette: &self.palette,
            theme: &self.theme,
            label_every_s: label_interval(rows_per_s),
            pairs_only: rows_per_s >= PAIRS_ONLY_FROM_ROWS_PER_S,
        })
    }

    fn render_spectrum(&self, s: &Screen, buf: &mut Buffer) {
        let w = s.spectrum_plot.width as usize;
        let view = self.view;
        let col =
            |f: Option<f64>| view.zip(f).and_then(|(v, f)| v.column_of(f, w)).map(|c| c as u16);
        let l = self.levels;
        let shown = |v: Vec<f64>| -> Vec<f64> { v.into_iter().map(|x| l.shown(x)).collect() };
        let [cur, avg, hold] = match self.trace_columns(2 * w) {
            Some([c, a, h]) => [shown(c), shown(a), shown(h)],
            None => [Vec::new(), Vec::new(), Vec::new()],
        };
        let plot = SpectrumPlot {
            current: &cur,
            average: &avg,
            hold: &hold,
            top: l.shown(l.top_dbfs),
            range_db: l.range_db,
            unit: l.unit(),
            marker_col: col(self.marker_hz),
            ref_marker_col: col(self.ref_marker_hz),
            theme: &self.theme,
        };
        (&plot).render(s.spectrum, buf);
        if cur.is_empty() {
            let msg = if self.ended {
                "the input ended before one row"
            } else {
                "waiting for samples…"
            };
            buf.set_string(s.spectrum_plot.x + 2, s.spectrum_plot.y + 1, msg, self.theme.label);
        }
        if let Some(v) = view {
            let axis = FreqAxis {
                view: v,
                marker_col: col(self.marker_hz),
                ref_marker_col: col(self.ref_marker_hz),
                theme: &self.theme,
            };
            (&axis).render(s.axis, buf);
            if let Some(p) = s.plan {
                (&PlanRow { view: v, channels: &self.channels, theme: &self.theme }).render(p, buf);
            }
        }
    }

    fn render_waterfall(&self, area: Rect, buf: &mut Buffer) {
        if self.waterfall_external {
            // Drawn by the scrolling painter; the cell diff must leave these cells alone.
            for y in area.top()..area.bottom() {
                for x in area.left()..area.right() {
                    buf[(x, y)].set_diff_option(CellDiffOption::Skip);
                }
            }
        } else if let Some(w) = self.waterfall_plot() {
            (&w).render(area, buf);
        }
    }
}

impl Widget for &App {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let Some(s) = Screen::split(area, self.plan_row()) else {
            let msg = "bandwarden needs a terminal of at least 40×14";
            buf.set_stringn(area.x, area.y, msg, area.width as usize, Style::new());
            return;
        };
        let width = area.width as usize;
        put_line(buf, s.status, &source_line(self, width), Style::new());
        self.render_spectrum(&s, buf);
        self.render_waterfall(s.waterfall, buf);
        let table = SignalTable {
            signals: &self.signals,
            channels: &self.channels,
            levels: self.levels,
            marker_hz: self.marker_hz,
            theme: &self.theme,
        };
        (&table).render(s.table, buf);
        put_line(buf, s.marker, &marker_line(self, width), Style::new());
        put_line(buf, s.footer, &settings_line(self, width), Style::new());
        if self.help {
            (&HelpOverlay { theme: &self.theme }).render(area, buf);
        }
    }
}

/// The symbols of a buffer, one string per row (for tests and the bytes measurement).
pub fn text_lines(buf: &Buffer) -> Vec<String> {
    let a = buf.area;
    (a.top()..a.bottom())
        .map(|y| (a.left()..a.right()).map(|x| buf[(x, y)].symbol().to_string()).collect())
        .collect()
}
