//! The monitor's widgets, each a pure `Widget for &T` over plain data so it is tested against a
//! cell buffer, and the whole screen as `Widget for &ScreenView`, a plain value the monitor
//! builds each frame. Nothing here reads the monitor's state itself.

pub mod axis;
pub mod channels;
pub mod help;
pub mod plan_row;
pub mod spectrum;
pub mod status;
pub mod table;
pub mod waterfall;

use super::colour::Theme;
use super::layout::Screen;
use super::state::{ChannelMark, Levels};
use super::view::View;
use axis::FreqAxis;
use channels::ChannelPanel;
use help::HelpOverlay;
use plan_row::PlanRow;
use ratatui::buffer::{Buffer, CellDiffOption};
use ratatui::layout::Rect;
use ratatui::style::Style;
use ratatui::widgets::Widget;
use spectrum::SpectrumPlot;
use status::StatusView;
use table::SignalTable;
use waterfall::WaterfallPlot;

/// The spectrum's traces for one plot width (two values a column), in printed units, with the
/// marks drawn over them.
#[derive(Clone, Debug, PartialEq)]
pub struct SpectrumView {
    /// Current, average, peak hold and minimum hold; empty before data.
    pub traces: [Vec<f64>; 4],
    pub levels: Levels,
    pub marker_col: Option<u16>,
    pub ref_marker_col: Option<u16>,
    /// Noise power in one RBW, dBFS.
    pub floor_dbfs: Option<f64>,
    /// Said in the plot while there is nothing to draw.
    pub message: Option<&'static str>,
    /// Of a sweep: per half column, whether the current row's bins there are stale.
    pub stale: Vec<bool>,
}

/// What the table area shows.
pub enum TableView<'a> {
    Signals(SignalTable<'a>),
    Channels(ChannelPanel<'a>),
}

/// Everything one frame draws, as plain values.
pub struct ScreenView<'a> {
    /// Where each part goes; `None` on a screen too small to draw on.
    pub layout: Option<Screen>,
    pub status: StatusView,
    pub spectrum: SpectrumView,
    /// The frequency window on show (for the axis and the plan row), once a row arrived.
    pub view: Option<View>,
    pub channels: &'a [ChannelMark],
    /// Channels whose alarm is on, in plan order.
    pub alarmed: Vec<bool>,
    /// The waterfall, unless the scrolling painter draws it (its cells are then left alone).
    pub waterfall: Option<WaterfallPlot<'a>>,
    pub painted_waterfall: bool,
    pub table: TableView<'a>,
    pub help: bool,
    /// Where `e` and `g` write, for the help.
    pub files_dir: &'a str,
    pub theme: Theme,
}

impl ScreenView<'_> {
    fn render_spectrum(&self, s: &Screen, buf: &mut Buffer) {
        let sp = &self.spectrum;
        let l = sp.levels;
        let shown = |v: &[f64]| -> Vec<f64> { v.iter().map(|x| l.shown(*x)).collect() };
        let [cur, avg, hold, min_hold] = &sp.traces;
        let (cur, avg, hold, min_hold) = (shown(cur), shown(avg), shown(hold), shown(min_hold));
        let plot = SpectrumPlot {
            current: &cur,
            average: &avg,
            hold: &hold,
            min_hold: &min_hold,
            top: l.shown(l.top_dbfs),
            range_db: l.range_db,
            unit: l.unit(),
            marker_col: sp.marker_col,
            ref_marker_col: sp.ref_marker_col,
            floor: sp.floor_dbfs.map(|f| l.shown(f)),
            stale: &sp.stale,
            theme: &self.theme,
        };
        (&plot).render(s.spectrum, buf);
        if let Some(msg) = sp.message {
            buf.set_string(s.spectrum_plot.x + 2, s.spectrum_plot.y + 1, msg, self.theme.label);
        }
        let Some(v) = self.view else { return };
        let axis = FreqAxis {
            view: v,
            marker_col: sp.marker_col,
            ref_marker_col: sp.ref_marker_col,
            theme: &self.theme,
        };
        (&axis).render(s.axis, buf);
        if let Some(p) = s.plan {
            let row = PlanRow {
                view: v,
                channels: self.channels,
                alarmed: &self.alarmed,
                theme: &self.theme,
            };
            (&row).render(p, buf);
        }
    }

    fn render_waterfall(&self, area: Rect, buf: &mut Buffer) {
        if self.painted_waterfall {
            // Drawn by the scrolling painter; the cell diff must leave these cells alone.
            for y in area.top()..area.bottom() {
                for x in area.left()..area.right() {
                    buf[(x, y)].set_diff_option(CellDiffOption::Skip);
                }
            }
        } else if let Some(w) = &self.waterfall {
            w.render(area, buf);
        }
    }
}

impl Widget for &ScreenView<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        let Some(s) = self.layout else {
            let msg = "bandwarden needs a terminal of at least 40×14";
            buf.set_stringn(area.x, area.y, msg, area.width as usize, Style::new());
            return;
        };
        self.status.source.render(s.status, buf);
        self.render_spectrum(&s, buf);
        self.render_waterfall(s.waterfall, buf);
        match &self.table {
            TableView::Signals(t) => t.render(s.table, buf),
            TableView::Channels(p) => p.render(s.table, buf),
        }
        self.status.marker.render(s.marker, buf);
        self.status.settings.render(s.footer, buf);
        if self.help {
            (&HelpOverlay { theme: &self.theme, files_dir: self.files_dir }).render(area, buf);
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::{Spectrum, Window, WindowKind};
    use crate::pipeline::clock::Clock;
    use crate::pipeline::latest::RowSettings;
    use crate::tui::app::App;
    use crate::tui::colour::Depth;
    use crate::tui::input::Intent;
    use crate::tui::state::{ChannelMark, SourceSummary};
    use ratatui::backend::TestBackend;
    use ratatui::Terminal;
    use std::time::Instant;

    /// 1024 bins of 1 kHz around 100 MHz: a flat floor and a tone in FFT bin 100 (100.1 MHz).
    fn row() -> Spectrum {
        let n = 1024;
        let mut power = vec![1.0; n];
        power[100] = 1e6;
        let w = Window::new(WindowKind::Hann, n);
        Spectrum::from_power_sum(&power, 1, 2.0, &w, 1.024e6, 100e6, 0, n as u64)
    }

    fn start() -> time::OffsetDateTime {
        use time::format_description::well_known::Rfc3339;
        time::OffsetDateTime::parse("2031-04-17T06:30:00Z", &Rfc3339).unwrap()
    }

    fn app(channels: Vec<ChannelMark>) -> App {
        let source = SourceSummary {
            label: "bench\u{1b}[2J.cf32".chars().filter(|c| !c.is_control()).collect(),
            sample_rate_hz: 1.024e6,
            center_hz: 100e6,
            total_samples: Some(10_240_000),
            live: false,
            speed: Some(1.0),
            looping: false,
            clock: Clock::new(1.024e6, Some(start())),
        };
        let settings = RowSettings {
            fft_size: 1024,
            window: WindowKind::Hann,
            overlap: 0.5,
            row_rate: 20.0,
            threads: 1,
        };
        let mut a = App::new(source, settings, Depth::TrueColour, None, channels, Instant::now());
        for _ in 0..30 {
            a.push_row(row());
        }
        a.measure();
        a
    }

    fn draw(app: &App, w: u16, h: u16) -> Buffer {
        let mut term = Terminal::new(TestBackend::new(w, h)).unwrap();
        term.draw(|f| f.render_widget(&app.screen_view(f.area()), f.area())).unwrap();
        term.backend().buffer().clone()
    }

    #[test]
    fn the_whole_screen_at_80x24() {
        let a = app(Vec::new());
        let buf = draw(&a, 80, 24);
        let lines = text_lines(&buf);
        assert!(lines[0].starts_with(" bench[2J.cf32 · "), "{}", lines[0]);
        assert!(lines[0].contains("centre 100 MHz") && lines[0].contains("▶ 00:00 / 00:10"));
        assert!(lines[1].starts_with("dBFS │"));
        // Axis row (below 6 spectrum rows) with its unit and a label at 100.0 MHz.
        assert!(lines[7].starts_with("  MHz ") && lines[7].contains("╵100.0"), "{}", lines[7]);
        // The table lists the tone; the marker line invites a marker; the settings line ends
        // with the help key.
        assert!(lines[18].starts_with(" # Frequency"));
        assert!(lines[19].starts_with(" 1 100.100000 MHz"), "{}", lines[19]);
        assert!(lines[22].starts_with(" marker: b strongest"), "{}", lines[22]);
        assert!(
            lines[23].starts_with(" FFT 1024 hann · RBW 1.5 kHz ·")
                || lines[23].contains("RBW 1.500 kHz")
        );
        assert!(lines[23].trim_end().ends_with("? keys"));
        // The newest waterfall line (row 8) has the tone's colour in the tone's column, and
        // the floor's colour elsewhere.
        let s = Screen::split(buf.area, false).unwrap();
        let plot = s.waterfall_plot();
        let col = a.view().unwrap().column_of(100.1e6, plot.width as usize).unwrap() as u16;
        let top = plot.y;
        let cur = a.traces().current().unwrap();
        let step = |i: usize| {
            let level = crate::units::db(cur.psd[i] * cur.rbw_hz) as f32;
            crate::tui::colour::Palette::step(level, a.levels().bottom_dbfs(), a.levels().range_db)
        };
        // Bin 612 holds the tone (FFT bin 100 after the shift); bin 0 is floor.
        let (tone, floor) = (step(612), step(0));
        assert!(tone >= 25 && floor <= 8, "tone step {tone}, floor step {floor}");
        assert_eq!(buf[(plot.x + col, top)].bg, a.palette().colour(tone));
        assert_eq!(buf[(plot.x + 2, top)].bg, a.palette().colour(floor));
    }

    #[test]
    fn marker_zoom_and_reference_marker_show_on_screen() {
        let mut a = app(Vec::new());
        a.apply(Intent::MarkerToStrongest);
        a.apply(Intent::SetRefMarker);
        a.apply(Intent::ZoomIn);
        a.apply(Intent::MarkerRight(10));
        let buf = draw(&a, 80, 24);
        let lines = text_lines(&buf);
        assert!(
            lines[0].contains("view 512 kHz · ") && lines[0].contains("1.024 MS/s"),
            "{}",
            lines[0]
        );
        // The moving marker is on the floor, 10 columns (of 6.9 kHz) above the tone; at 80
        // columns the reference marker's own reading gives way to the difference.
        assert!(lines[22].contains("▲ 100.174000 MHz"), "{}", lines[22]);
        assert!(lines[22].contains("band 74 kHz: "), "{}", lines[22]);
        // The axis flags both markers.
        assert!(lines[7].contains('▲') && lines[7].contains('△'), "{}", lines[7]);
        // A wider screen has room for the reference marker's reading too.
        let wide = text_lines(&draw(&a, 160, 30));
        let marker = wide.iter().find(|l| l.starts_with(" ▲")).unwrap();
        assert!(
            marker.contains("△ 100.100000 MHz") && marker.contains("Δ +74.000 kHz"),
            "{marker}"
        );
    }

    #[test]
    fn a_plan_adds_its_row_and_names_signals() {
        let ch = vec![ChannelMark::new("Gate-North", 100.1e6, 200e3)];
        let mut a = app(ch);
        let buf = draw(&a, 160, 48);
        let lines = text_lines(&buf);
        let s = Screen::split(buf.area, true).unwrap();
        let plan = s.plan.unwrap().y as usize;
        assert!(lines[plan].starts_with(" plan ") && lines[plan].contains("Gate-North"));
        let row1 = &lines[s.table.y as usize + 1];
        assert!(row1.starts_with(" 1 100.100000 MHz") && row1.contains("Gate-North"), "{row1}");
        // Toggling the overlay removes the row; the table keeps the channel column.
        a.apply(Intent::TogglePlan);
        let lines = text_lines(&draw(&a, 160, 48));
        assert!(!lines.iter().any(|l| l.starts_with(" plan ")));
        assert!(lines
            .iter()
            .any(|l| l.starts_with(" 1 100.100000 MHz") && l.contains("Gate-North")));
    }

    #[test]
    fn the_largest_screen_keeps_every_part() {
        let a = app(vec![ChannelMark::new("gate", 100.1e6, 25e3)]);
        let buf = draw(&a, 300, 100);
        let lines = text_lines(&buf);
        let s = Screen::split(buf.area, true).unwrap();
        assert!(lines[0].contains("centre 100 MHz"));
        assert!(lines[s.axis.y as usize].starts_with("  MHz "));
        assert!(lines[s.plan.unwrap().y as usize].contains("gate"));
        assert!(lines[s.table.y as usize + 1].starts_with(" 1 100.100000 MHz"));
        assert!(lines[99].trim_end().ends_with("? keys"));
        // Finer axis steps on a wider plot: more than ten labels.
        assert!(lines[s.axis.y as usize].matches('╵').count() > 10);
    }

    #[test]
    fn help_overlay_and_small_terminals() {
        let mut a = app(Vec::new());
        a.apply(Intent::ToggleHelp);
        let lines = text_lines(&draw(&a, 80, 24));
        assert!(lines.iter().any(|l| l.contains("┌ keys ")));
        assert!(lines.iter().any(|l| l.contains("FFT ×2 / ÷2")));
        let small = text_lines(&draw(&a, 30, 10));
        assert!(small[0].starts_with("bandwarden needs a terminal of"));
    }

    #[test]
    fn the_painted_waterfall_is_left_to_the_painter() {
        let mut a = app(Vec::new());
        let s0 = Screen::split(Rect::new(0, 0, 80, 24), false);
        a.set_screen(s0, true);
        let buf = draw(&a, 80, 24);
        let s = Screen::split(buf.area, false).unwrap();
        let w = s.waterfall;
        for y in w.top()..w.bottom() {
            for x in w.left()..w.right() {
                assert_eq!(buf[(x, y)].bg, ratatui::style::Color::Reset, "cell {x},{y} drawn");
            }
        }
        // With the help open, the overlay's cells are drawn through the diff; the waterfall
        // around it stays with the painter.
        a.apply(Intent::ToggleHelp);
        let mut b = Buffer::empty(Rect::new(0, 0, 80, 24));
        (&a.screen_view(b.area)).render(b.area, &mut b);
        let (x, y) = (w.x, w.y + 2);
        assert_eq!(b[(x, y)].diff_option, CellDiffOption::Skip);
        let popup_edge = (w.left()..w.right()).find(|&x| b[(x, y)].symbol() == "│").unwrap();
        assert_eq!(b[(popup_edge, y)].diff_option, CellDiffOption::None);
        assert_eq!(b[(popup_edge + 2, y)].diff_option, CellDiffOption::None);
    }
}
