//! The spectrum plot: current, average and hold traces in braille dots (2×4 per cell), with the
//! level scale in the gutter and the markers as vertical lines. A plot of
//! [`LEGEND_FROM_ROWS`] rows and more gives its top row to the legend, so the legend never
//! covers a trace and no marker line runs through it; a smaller one leaves the legend to the
//! help overlay.
//!
//! Where traces share a cell the average's colour wins (it moves least, so cells change colour
//! least often), then the current trace, then the hold.

use super::super::colour::Theme;
use super::super::layout::GUTTER;
use super::super::view::level_step;
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::{Modifier, Style};
use ratatui::widgets::Widget;

/// Offset of the braille block and the bit of each dot (column, row) in a 2×4 cell (Unicode
/// braille patterns: dots 1-2-3-7 down the left, 4-5-6-8 down the right).
const BRAILLE_BASE: u32 = 0x2800;
const DOT_BITS: [[u8; 4]; 2] = [[0x01, 0x02, 0x04, 0x40], [0x08, 0x10, 0x20, 0x80]];
/// In monochrome, the peak hold and the minimum hold are drawn with these.
pub const PEAK_GLYPH: char = '˙';
pub const MIN_GLYPH: char = '.';
/// Height from which the spectrum has a legend row of its own.
pub const LEGEND_FROM_ROWS: u16 = 8;
/// Plot width from which the legend fits beside the unit.
const LEGEND_FROM_COLS: u16 = 60;

pub struct SpectrumPlot<'a> {
    /// Levels in printed units for each half column (two per plot cell); empty before data.
    pub current: &'a [f64],
    pub average: &'a [f64],
    pub hold: &'a [f64],
    /// Per-bin minimum since the last reset, drawn in the hold style.
    pub min_hold: &'a [f64],
    /// Top of the scale in printed units.
    pub top: f64,
    pub range_db: f64,
    pub unit: &'a str,
    pub marker_col: Option<u16>,
    pub ref_marker_col: Option<u16>,
    /// Noise power in one RBW, printed units: marked by a dotted line where no trace is.
    pub floor: Option<f64>,
    /// Of a sweep: per half column, whether its bins were not seen within a revisit time;
    /// there the traces are drawn dotted (the left dots of each cell only) and dimmed.
    pub stale: &'a [bool],
    pub theme: &'a Theme,
}

/// A stale cell's dots: all moved to its left column (dots 1-2-3-7), so a trace there reads as
/// dotted, one column of dots in two.
fn left_dots(bits: u8) -> u8 {
    (bits & 0x47) | ((bits >> 3) & 0x07) | ((bits >> 1) & 0x40)
}

impl SpectrumPlot<'_> {
    /// Dot row (0 at the top) of a level, or `None` when there is nothing to draw.
    fn dot_row(&self, level: f64, dots: usize) -> Option<usize> {
        if !level.is_finite() {
            return None;
        }
        let d = ((self.top - level) / self.range_db * dots as f64).floor();
        Some(d.clamp(0.0, (dots - 1) as f64) as usize)
    }

    /// Dot masks of one trace for every cell, row-major `height × width`.
    fn trace_masks(&self, values: &[f64], width: usize, height: usize) -> Vec<u8> {
        let mut masks = vec![0u8; width * height];
        let dots = height * 4;
        let mut prev: Option<usize> = None;
        for (x, &v) in values.iter().enumerate().take(width * 2) {
            let Some(y) = self.dot_row(v, dots) else {
                prev = None;
                continue;
            };
            // Join to the previous column without doubling its dot.
            let (a, b) = match prev {
                Some(p) if p < y => (p + 1, y),
                Some(p) if p > y => (y, p - 1),
                _ => (y, y),
            };
            for yy in a..=b {
                masks[(yy / 4) * width + x / 2] |= DOT_BITS[x % 2][yy % 4];
            }
            prev = Some(y);
        }
        masks
    }

    fn render_gutter(&self, area: Rect, buf: &mut Buffer) {
        let rows = area.height as usize;
        let t = self.theme;
        for r in 0..area.height {
            buf.set_string(area.x, area.y + r, "     │", t.grid);
        }
        buf.set_stringn(area.x, area.y, self.unit, 5, t.label);
        for (row, label) in self.level_labels(rows) {
            let text = format!("{label:>5}┤");
            buf.set_string(area.x, area.y + row as u16, text, t.label);
        }
    }

    /// Rows (below the unit on row 0) that carry a round level, with the label, top first.
    pub fn level_labels(&self, rows: usize) -> Vec<(usize, String)> {
        let step = level_step(self.range_db, rows, 2.0);
        let bottom = self.top - self.range_db;
        let mut out: Vec<(usize, String)> = Vec::new();
        let mut k = (self.top / step).floor() as i64;
        while k as f64 * step >= bottom {
            let l = k as f64 * step;
            let row = ((self.top - l) / self.range_db * rows as f64).floor() as usize;
            if (1..rows).contains(&row) && out.last().map_or(true, |(r, _)| *r != row) {
                out.push((row, format!("{}", l.round() as i64)));
            }
            k -= 1;
        }
        out
    }
}

impl Widget for &SpectrumPlot<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        if area.width <= GUTTER || area.height == 0 {
            return;
        }
        let legend = area.height >= LEGEND_FROM_ROWS && area.width - GUTTER >= LEGEND_FROM_COLS;
        let area = if legend {
            self.render_legend(Rect::new(area.x + GUTTER, area.y, area.width - GUTTER, 1), buf);
            Rect::new(area.x, area.y + 1, area.width, area.height - 1)
        } else {
            area
        };
        self.render_gutter(Rect::new(area.x, area.y, GUTTER, area.height), buf);
        let plot = Rect::new(area.x + GUTTER, area.y, area.width - GUTTER, area.height);
        let (w, h) = (plot.width as usize, plot.height as usize);
        let mono = self.theme.mono;
        let mut layers = vec![
            (self.trace_masks(self.average, w, h), self.theme.average),
            (self.trace_masks(self.current, w, h), self.theme.current),
        ];
        // Without colours the holds cannot share the braille with the other traces: they get
        // glyphs of their own where nothing else is drawn.
        let holds = [
            (self.trace_masks(self.hold, w, h), PEAK_GLYPH),
            (self.trace_masks(self.min_hold, w, h), MIN_GLYPH),
        ];
        if !mono {
            for (m, _) in &holds {
                layers.push((m.clone(), self.theme.hold));
            }
        }
        let grid_rows: Vec<usize> = self.level_labels(h).into_iter().map(|(r, _)| r).collect();
        let floor_row = self.floor.and_then(|f| self.dot_row(f, h * 4)).map(|d| d / 4);
        if let Some(r) = floor_row {
            buf.set_string(area.x + GUTTER - 1, plot.y + r as u16, "◂", self.theme.floor);
        }
        for y in 0..h {
            for x in 0..w {
                let i = y * w + x;
                let mut bits = layers.iter().fold(0u8, |acc, (m, _)| acc | m[i]);
                let mut style = layers.iter().find(|(m, _)| m[i] != 0).map(|(_, s)| *s);
                if self.stale.get(2 * x).copied().unwrap_or(false)
                    || self.stale.get(2 * x + 1).copied().unwrap_or(false)
                {
                    bits = left_dots(bits);
                    style = style.map(|s| s.add_modifier(Modifier::DIM));
                }
                let cell = &mut buf[(plot.x + x as u16, plot.y + y as u16)];
                let hold = holds.iter().find(|(m, _)| mono && m[i] != 0).map(|(_, g)| *g);
                if bits != 0 {
                    let ch = char::from_u32(BRAILLE_BASE + bits as u32).unwrap_or(' ');
                    cell.set_char(ch).set_style(style.unwrap_or_default());
                } else if let Some(g) = hold {
                    cell.set_char(g).set_style(self.theme.hold);
                } else if floor_row == Some(y) {
                    cell.set_char(if x % 2 == 0 { '·' } else { ' ' }).set_style(self.theme.floor);
                } else if grid_rows.contains(&y) {
                    cell.set_char('┄').set_style(self.theme.grid);
                }
            }
        }
        for (col, style, glyph) in [
            (self.ref_marker_col, self.theme.ref_marker, '┆'),
            (self.marker_col, self.theme.marker, '│'),
        ] {
            let Some(c) = col.filter(|c| (*c as usize) < w) else { continue };
            for y in 0..plot.height {
                let cell = &mut buf[(plot.x + c, plot.y + y)];
                if cell.symbol().chars().next().is_some_and(is_braille) {
                    cell.set_style(Style::reset().patch(style));
                } else {
                    cell.set_char(glyph).set_style(Style::reset().patch(style));
                }
            }
        }
    }
}

impl SpectrumPlot<'_> {
    /// The legend: each trace's name in its own colour (in monochrome, with its glyph).
    pub fn legend(&self) -> Vec<(String, Style)> {
        SpectrumPlot::legend_of(self.theme)
    }

    /// The legend for a theme.
    pub fn legend_of(t: &Theme) -> Vec<(String, Style)> {
        let mut items = vec![
            (if t.mono { "⣿ average" } else { "⣀ average" }.to_string(), t.average),
            ("⣀ current".to_string(), t.current),
        ];
        if t.mono {
            items.push((format!("{PEAK_GLYPH} peak {MIN_GLYPH} min hold"), t.hold));
        } else {
            items.push(("⣀ peak/min hold".to_string(), t.hold));
        }
        items
    }

    /// Writes the legend right-aligned in its own row, if it fits.
    fn render_legend(&self, row: Rect, buf: &mut Buffer) {
        let items = self.legend();
        let width: usize = items.iter().map(|(s, _)| s.chars().count() + 2).sum();
        if width + 2 > row.width as usize {
            return;
        }
        let mut x = row.x + row.width - width as u16;
        for (text, style) in items {
            buf.set_string(x, row.y, &text, style);
            x += text.chars().count() as u16;
            buf.set_string(x, row.y, "  ", Style::reset());
            x += 2;
        }
    }
}

fn is_braille(c: char) -> bool {
    (0x2801..=0x28FF).contains(&(c as u32))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tui::colour::Depth;

    fn plot<'a>(
        cur: &'a [f64],
        avg: &'a [f64],
        hold: &'a [f64],
        theme: &'a Theme,
    ) -> SpectrumPlot<'a> {
        SpectrumPlot {
            current: cur,
            average: avg,
            hold,
            min_hold: &[],
            top: 0.0,
            range_db: 80.0,
            unit: "dBFS",
            marker_col: None,
            ref_marker_col: None,
            floor: None,
            stale: &[],
            theme,
        }
    }

    #[test]
    fn stale_columns_draw_a_dotted_trace() {
        // A flat trace over 10 cells (20 half columns), the last four cells stale: there only
        // the left dots are drawn (braille dots 1-2-3-7), elsewhere both columns.
        let t = Theme::new(Depth::Mono);
        let flat = vec![-40.0; 20];
        let stale: Vec<bool> = (0..20).map(|i| i >= 12).collect();
        let p = SpectrumPlot { stale: &stale, ..plot(&flat, &[], &[], &t) };
        let mut buf = Buffer::empty(Rect::new(0, 0, GUTTER + 10, 4));
        (&p).render(buf.area, &mut buf);
        let row: Vec<u32> = (0..10)
            .filter_map(|x| {
                (0..4).find_map(|y| {
                    let c = buf[(GUTTER + x, y)].symbol().chars().next()?;
                    is_braille(c).then(|| c as u32 - BRAILLE_BASE)
                })
            })
            .collect();
        assert_eq!(row.len(), 10, "a dot in every cell");
        assert!(row[..6].iter().all(|b| b & 0xb8 != 0), "fresh cells have right dots: {row:?}");
        assert!(row[6..].iter().all(|b| b & 0xb8 == 0), "stale cells only left dots: {row:?}");
    }

    #[test]
    fn a_flat_trace_sits_in_the_right_dot_row() {
        let theme = Theme::new(Depth::TrueColour);
        // 4 rows × 4 dots over 80 dB: 5 dB a dot. −50 dB is dot row 10: text row 2, dot row 2,
        // both columns: bits 0x04 | 0x20 = ⠤.
        let avg = vec![-50.0; 20];
        let p = plot(&[], &avg, &[], &theme);
        let mut buf = Buffer::empty(Rect::new(0, 0, GUTTER + 10, 4));
        (&p).render(buf.area, &mut buf);
        for x in GUTTER..GUTTER + 10 {
            assert_eq!(buf[(x, 2)].symbol(), "⠤");
            assert_eq!(buf[(x, 2)].style().fg, theme.average.fg);
        }
        assert_eq!(buf[(GUTTER, 1)].symbol(), " ");
    }

    #[test]
    fn a_tone_draws_a_joined_peak() {
        let theme = Theme::new(Depth::TrueColour);
        let mut cur = vec![-75.0; 20];
        cur[9] = -1.0; // dot row 0
        let p = plot(&cur, &[], &[], &theme);
        let mut buf = Buffer::empty(Rect::new(0, 0, GUTTER + 10, 4));
        (&p).render(buf.area, &mut buf);
        // Half-column 9 is the right half of cell 4: its line runs from the top to the floor
        // (dot row 15 is the bottom row, −75 dB), so every row of that cell has right dots.
        let c = GUTTER + 4;
        assert_eq!(buf[(c, 0)].symbol(), "⢸"); // right column, all four dots: 0x08|0x10|0x20|0x80
        assert_eq!(buf[(c, 0)].style().fg, theme.current.fg);
        // The bottom row holds the floor in both halves of other cells: dot row 15 → ⣀.
        assert_eq!(buf[(GUTTER, 3)].symbol(), "⣀");
    }

    #[test]
    fn gutter_shows_unit_and_round_levels() {
        let theme = Theme::new(Depth::Mono);
        let p = plot(&[], &[], &[], &theme);
        let mut buf = Buffer::empty(Rect::new(0, 0, GUTTER + 4, 8));
        (&p).render(buf.area, &mut buf);
        // 8 rows over 80 dB: 10 dB a row; labels at least two rows apart → 20 dB steps.
        let expect = Buffer::with_lines([
            "dBFS │    ",
            "     │    ",
            "  -20┤┄┄┄┄",
            "     │    ",
            "  -40┤┄┄┄┄",
            "     │    ",
            "  -60┤┄┄┄┄",
            "     │    ",
        ]);
        for y in 0..8 {
            for x in 0..GUTTER + 4 {
                assert_eq!(buf[(x, y)].symbol(), expect[(x, y)].symbol(), "at {x},{y}");
            }
        }
    }

    #[test]
    fn the_marker_is_a_line_through_the_plot() {
        let theme = Theme::new(Depth::TrueColour);
        let avg = vec![-50.0; 20];
        let mut p = plot(&[], &avg, &[], &theme);
        p.marker_col = Some(3);
        let mut buf = Buffer::empty(Rect::new(0, 0, GUTTER + 10, 4));
        (&p).render(buf.area, &mut buf);
        assert_eq!(buf[(GUTTER + 3, 0)].symbol(), "│");
        assert_eq!(buf[(GUTTER + 3, 0)].style().fg, theme.marker.fg);
        // The trace cell keeps its dots but takes the marker's colour.
        assert_eq!(buf[(GUTTER + 3, 2)].symbol(), "⠤");
        assert_eq!(buf[(GUTTER + 3, 2)].style().fg, theme.marker.fg);
    }

    #[test]
    fn the_noise_floor_is_marked() {
        let theme = Theme::new(Depth::Mono);
        let mut p = plot(&[], &[], &[], &theme);
        // 4 rows over 80 dB: −70 dB is dot row 14, text row 3.
        p.floor = Some(-70.0);
        let mut buf = Buffer::empty(Rect::new(0, 0, GUTTER + 6, 4));
        (&p).render(buf.area, &mut buf);
        assert_eq!(crate::tui::widgets::text_lines(&buf)[3], "     ◂· · · ");
    }

    #[test]
    fn in_mono_the_holds_have_glyphs_of_their_own_and_a_legend_names_them() {
        let theme = Theme::new(Depth::Mono);
        // Average at −50 dB; peak hold at −10 dB (dot row 2, text row 0); minimum hold at
        // −75 dB (text row 3).
        let avg = vec![-50.0; 140];
        let hold = vec![-10.0; 140];
        let min = vec![-75.0; 140];
        let mut p = plot(&[], &avg, &hold, &theme);
        p.min_hold = &min;
        let mut buf = Buffer::empty(Rect::new(0, 0, GUTTER + 70, 4));
        (&p).render(buf.area, &mut buf);
        let lines = crate::tui::widgets::text_lines(&buf);
        assert_eq!(buf[(GUTTER, 0)].symbol(), "˙");
        assert_eq!(buf[(GUTTER, 3)].symbol(), ".");
        assert_eq!(buf[(GUTTER, 2)].symbol(), "⠤");
        assert!(!lines[0].contains("average"), "no legend row in four rows: {}", lines[0]);
        // From eight rows the legend has the top row to itself; the marker stays below it.
        let mut tall = SpectrumPlot { marker_col: Some(60), ..p };
        tall.hold = &[];
        let mut buf = Buffer::empty(Rect::new(0, 0, GUTTER + 70, 8));
        (&tall).render(buf.area, &mut buf);
        let lines = crate::tui::widgets::text_lines(&buf);
        assert!(lines[0].ends_with("⣿ average  ⣀ current  ˙ peak . min hold  "), "{}", lines[0]);
        assert!(lines[0].starts_with("      "), "{}", lines[0]);
        assert!(lines[1].starts_with("dBFS │"), "{}", lines[1]);
        assert_eq!(buf[(GUTTER + 60, 1)].symbol(), "│");
        // In colour the holds are braille in their own colour, and the legend says which.
        let theme = Theme::new(Depth::Palette256);
        let p = SpectrumPlot { theme: &theme, ..p };
        let mut buf = Buffer::empty(Rect::new(0, 0, GUTTER + 70, 4));
        (&p).render(buf.area, &mut buf);
        assert_eq!(buf[(GUTTER, 3)].symbol(), "⣀");
        assert_eq!(buf[(GUTTER, 3)].fg, theme.hold.fg.unwrap());
        let mut buf = Buffer::empty(Rect::new(0, 0, GUTTER + 70, 8));
        (&p).render(buf.area, &mut buf);
        let lines = crate::tui::widgets::text_lines(&buf);
        assert!(lines[0].contains("⣀ average  ⣀ current  ⣀ peak/min hold"), "{}", lines[0]);
    }
}
