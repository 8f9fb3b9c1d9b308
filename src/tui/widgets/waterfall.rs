//! The waterfall: newest at the top, two rows per text line with half blocks (`▀`: the upper
//! half in the foreground colour, the lower half in the background).
//!
//! Lines are built cell by cell in [`WaterfallPlot::line_cells`], which both the cell-buffer
//! widget and the scrolling painter (`tui::painter`) use, so the two draw the same picture. Cells
//! whose halves have the same colour are written as a space on that background: one byte instead
//! of three, and no foreground code. The gutter carries a time label every few seconds; it is
//! part of the line, so it scrolls with it.

use super::super::colour::{Depth, Palette, Theme};
use super::super::history::{line_rows, History, Row};
use super::super::layout::GUTTER;
use super::super::timeline::TimeBase;
use super::super::view::View;
use ratatui::buffer::{Buffer, Cell};
use ratatui::layout::Rect;
use ratatui::style::Color;
use ratatui::widgets::Widget;

/// Label intervals on the time gutter, seconds.
const LABEL_STEPS_S: [f64; 14] =
    [1.0, 2.0, 5.0, 10.0, 15.0, 30.0, 60.0, 120.0, 300.0, 600.0, 900.0, 1800.0, 3600.0, 7200.0];

pub struct WaterfallPlot<'a> {
    pub history: &'a History,
    pub view: View,
    pub bottom_dbfs: f64,
    pub range_db: f64,
    pub palette: &'a Palette,
    pub theme: &'a Theme,
    /// Seconds between time labels.
    pub label_every_s: f64,
    /// How the gutter's labels tell time.
    pub times: &'a TimeBase,
    /// Rows shown end before this absolute index (all rows when live; the time cursor's row
    /// plus one when scrolled back).
    pub end: u64,
    /// Show a line only once both of its rows are in. At a brisk row rate the wait is one row
    /// (50 ms at 20 rows/s), and it halves the bytes: a half-filled line would be sent twice.
    pub pairs_only: bool,
}

/// Drawn in the waterfall where a sweep's bins were not seen within a revisit time.
pub const STALE_GLYPH: char = '┊';

/// Row rate from which lines wait for both their rows.
pub const PAIRS_ONLY_FROM_ROWS_PER_S: f64 = 5.0;

/// A label interval that puts about one label every six lines at `rows_per_s`.
pub fn label_interval(rows_per_s: f64) -> f64 {
    let lines_per_s = (rows_per_s / 2.0).max(1e-3);
    LABEL_STEPS_S.iter().copied().find(|s| s * lines_per_s >= 6.0).unwrap_or(7200.0)
}

impl WaterfallPlot<'_> {
    /// Rows on show: all that arrived, less an unpaired newest one when lines wait for pairs.
    pub fn shown_rows(&self) -> u64 {
        let total = self.end.min(self.history.total());
        if self.pairs_only {
            total & !1
        } else {
            total
        }
    }

    /// Colour steps of a row across `ncols` plot columns.
    fn steps(&self, row: &Row, ncols: usize) -> Vec<Option<u8>> {
        let map = row.grid.column_map(&self.view, ncols);
        row.column_levels(&map)
            .into_iter()
            .map(|v| {
                v.is_finite().then(|| Palette::step(v as f32, self.bottom_dbfs, self.range_db))
            })
            .collect()
    }

    /// The cells of text line `line` (0 = top), `width` wide including the gutter.
    pub fn line_cells(&self, line: u16, width: u16) -> Vec<Cell> {
        let mut cells = vec![Cell::EMPTY; width as usize];
        let Some(rows) = line_rows(self.shown_rows(), line as u64) else { return cells };
        let Some(lower) = self.history.by_index(rows.lower) else { return cells };
        let upper = rows.upper.and_then(|i| self.history.by_index(i));
        self.gutter(&mut cells, upper.unwrap_or(lower), rows.lower);
        let ncols = width.saturating_sub(GUTTER) as usize;
        let lo = self.steps(lower, ncols);
        let hi = upper.map(|u| self.steps(u, ncols));
        let stale = |r: &Row| r.stale_columns(&r.grid.column_map(&self.view, ncols));
        let stale = [Some(lower), upper].into_iter().flatten().filter_map(stale).fold(
            Vec::new(),
            |acc: Vec<bool>, s| {
                if acc.is_empty() {
                    s
                } else {
                    acc.iter().zip(&s).map(|(a, b)| *a || *b).collect()
                }
            },
        );
        for (x, cell) in cells.iter_mut().skip(GUTTER as usize).enumerate() {
            let l = lo[x];
            let u = hi.as_ref().map_or(l, |h| h[x]);
            self.fill(cell, u, l);
            if stale.get(x).copied().unwrap_or(false) {
                self.mark_stale(cell, l);
            }
        }
        cells
    }

    /// A cell of a sweep's bins not seen within a revisit time: [`STALE_GLYPH`] over its
    /// level's colour (in monochrome, in place of the shade), so it reads without colour.
    fn mark_stale(&self, cell: &mut Cell, lower: Option<u8>) {
        cell.set_char(STALE_GLYPH).set_fg(self.theme.label.fg.unwrap_or(Color::Reset));
        if self.palette.depth != Depth::Mono {
            cell.set_bg(lower.map_or(Color::Reset, |s| self.palette.colour(s)));
        }
    }

    /// One plot cell from the steps of its upper and lower rows.
    fn fill(&self, cell: &mut Cell, upper: Option<u8>, lower: Option<u8>) {
        if self.palette.depth == Depth::Mono {
            let s = upper.max(lower).unwrap_or(0);
            cell.set_symbol(Palette::mono_symbol(s));
            return;
        }
        let colour = |s: Option<u8>| s.map_or(Color::Reset, |s| self.palette.colour(s));
        if upper == lower {
            cell.set_symbol(" ").set_bg(colour(lower));
        } else {
            cell.set_symbol("▀").set_fg(colour(upper)).set_bg(colour(lower));
        }
    }

    /// A time label when this line's newest row is the first past a multiple of the interval.
    fn gutter(&self, cells: &mut [Cell], newest: &Row, lower_index: u64) {
        let every = self.label_every_s;
        let before = lower_index.checked_sub(1).and_then(|i| self.history.by_index(i));
        let slot = |t: f64| (t / every).floor();
        let t = |r: &Row| self.times.label_seconds(r);
        // A new slot, or time going back (a looping file starting again), earns a label.
        let due = before.map_or(true, |b| slot(t(newest)) != slot(t(b)));
        if !due {
            return;
        }
        let text = format!("{:>5} ", self.times.gutter_label(slot(t(newest)) * every, every));
        for (cell, ch) in cells.iter_mut().zip(text.chars()) {
            cell.set_char(ch).set_style(self.theme.label);
        }
    }
}

impl Widget for &WaterfallPlot<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        for y in 0..area.height {
            for (x, cell) in self.line_cells(y, area.width).into_iter().enumerate() {
                buf[(area.x + x as u16, area.y + y)] = cell;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tui::colour::MapKind;
    use crate::tui::view::BinGrid;

    /// A row of 8 bins (1 Hz each, centred 0..7 Hz) at `level` with a peak at `peak`.
    fn row(level: f32, peak: usize, time_s: f64) -> Row {
        let mut level_db = vec![level; 8];
        level_db[peak] = 0.0;
        Row::new(BinGrid { first_hz: 0.0, bin_hz: 1.0, len: 8 }, &level_db, time_s)
    }

    fn plot<'a>(h: &'a History, p: &'a Palette, t: &'a Theme) -> WaterfallPlot<'a> {
        static TIMES: std::sync::OnceLock<TimeBase> = std::sync::OnceLock::new();
        WaterfallPlot {
            times: TIMES.get_or_init(|| TimeBase::relative(1.0)),
            end: u64::MAX,
            history: h,
            view: View::new(-0.5, 7.5),
            bottom_dbfs: -80.0,
            range_db: 80.0,
            palette: p,
            theme: t,
            label_every_s: 1.0,
            pairs_only: false,
        }
    }

    #[test]
    fn half_blocks_put_the_newer_row_on_top() {
        let mut h = History::new(1 << 20);
        h.push(row(-80.0, 2, 0.5)); // older: lower half
        h.push(row(-80.0, 5, 1.2)); // newer: upper half
        let p = Palette::new(Depth::TrueColour, MapKind::Viridis);
        let t = Theme::new(Depth::TrueColour);
        let w = plot(&h, &p, &t);
        let cells = w.line_cells(0, GUTTER + 8);
        let (floor, peak) = (p.colour(0), p.colour(31));
        let plot_cells = &cells[GUTTER as usize..];
        // Column 5: the newer row's peak on top of the older row's floor.
        assert_eq!(plot_cells[5].symbol(), "▀");
        assert_eq!((plot_cells[5].fg, plot_cells[5].bg), (peak, floor));
        // Column 2: the older row's peak below.
        assert_eq!((plot_cells[2].fg, plot_cells[2].bg), (floor, peak));
        // Equal halves are a space on the background colour.
        assert_eq!(plot_cells[0].symbol(), " ");
        assert_eq!(plot_cells[0].bg, floor);
        // The line's newest row ends at 1.2 s, the first past 1 s: labelled 00:01.
        let gutter: String = cells[..GUTTER as usize].iter().map(|c| c.symbol()).collect();
        assert_eq!(gutter, "00:01 ");
    }

    #[test]
    fn a_partial_line_fills_both_halves_and_older_lines_follow() {
        let mut h = History::new(1 << 20);
        for (i, peak) in [1usize, 2, 3].iter().enumerate() {
            h.push(row(-80.0, *peak, 0.3 * i as f64));
        }
        let p = Palette::new(Depth::TrueColour, MapKind::Grey);
        let t = Theme::new(Depth::TrueColour);
        let w = plot(&h, &p, &t);
        let top = w.line_cells(0, GUTTER + 8);
        let g = GUTTER as usize;
        assert_eq!(top[g + 3].symbol(), " ");
        assert_eq!(top[g + 3].bg, p.colour(31));
        let second = w.line_cells(1, GUTTER + 8);
        assert_eq!((second[g + 2].fg, second[g + 1].bg), (p.colour(31), p.colour(31)));
        // No rows for the third line: left empty.
        assert!(w.line_cells(2, GUTTER + 8).iter().all(|c| *c == Cell::EMPTY));
        // Waiting for pairs, the lone newest row is not shown yet: the complete pair is on top.
        let w = WaterfallPlot { pairs_only: true, ..w };
        assert_eq!(w.shown_rows(), 2);
        assert_eq!(w.line_cells(0, GUTTER + 8)[g + 2].fg, p.colour(31));
    }

    #[test]
    fn mono_uses_a_character_ramp() {
        let mut h = History::new(1 << 20);
        h.push(row(-80.0, 4, 0.0));
        let p = Palette::new(Depth::Mono, MapKind::Viridis);
        let t = Theme::new(Depth::Mono);
        let mut buf = Buffer::empty(Rect::new(0, 0, GUTTER + 8, 2));
        (&plot(&h, &p, &t)).render(buf.area, &mut buf);
        assert_eq!(crate::tui::widgets::text_lines(&buf), ["00:00     █   ", "              "]);
        assert_eq!(buf[(GUTTER + 4, 0)].fg, Color::Reset);
    }

    #[test]
    fn stale_bins_carry_a_marker_readable_without_colour() {
        // Bins 5..8 of a sweep's row were not seen within a revisit time: marked in mono and in
        // colour (over their level's colour), the others drawn as before.
        let mut h = History::new(1 << 20);
        let stale: Vec<bool> = (0..8).map(|i| i >= 5).collect();
        h.push(row(-80.0, 2, 0.0).with_stale(&stale));
        for depth in [Depth::Mono, Depth::TrueColour] {
            let p = Palette::new(depth, MapKind::Grey);
            let t = Theme::new(depth);
            let cells = plot(&h, &p, &t).line_cells(0, GUTTER + 8);
            let marks: Vec<bool> = cells[GUTTER as usize..]
                .iter()
                .map(|c| c.symbol() == STALE_GLYPH.to_string())
                .collect();
            assert_eq!(marks, stale, "{depth:?}");
        }
    }

    #[test]
    fn label_intervals() {
        // 20 rows/s is 10 lines/s: one label a second is every 10 lines.
        assert_eq!(label_interval(20.0), 1.0);
        assert_eq!(label_interval(2.0), 10.0);
    }
}
