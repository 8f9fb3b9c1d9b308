//! The frequency axis under the spectrum (the channel-plan row under it is `plan_row`).

use super::super::colour::Theme;
use super::super::layout::GUTTER;
use super::super::view::{freq_ticks, View};
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::widgets::Widget;

/// Tick marks with round frequencies; the unit sits in the gutter; markers are flagged under
/// their columns.
pub struct FreqAxis<'a> {
    pub view: View,
    pub marker_col: Option<u16>,
    pub ref_marker_col: Option<u16>,
    pub theme: &'a Theme,
}

impl Widget for &FreqAxis<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        if area.width <= GUTTER || area.height == 0 {
            return;
        }
        let width = (area.width - GUTTER) as usize;
        let x0 = area.x + GUTTER;
        let (ticks, unit) = freq_ticks(&self.view, width);
        buf.set_string(area.x, area.y, format!("{unit:>5} "), self.theme.label);
        let markers: Vec<usize> =
            [self.marker_col, self.ref_marker_col].into_iter().flatten().map(usize::from).collect();
        for t in ticks {
            // A label a marker would cut in two is left out; the marker line names the frequency.
            if markers.iter().any(|m| (t.col + 1..=t.col + t.label.len()).contains(m)) {
                continue;
            }
            buf.set_string(x0 + t.col as u16, area.y, "╵", self.theme.grid);
            buf.set_string(x0 + t.col as u16 + 1, area.y, &t.label, self.theme.label);
        }
        for (col, glyph, style) in [
            (self.ref_marker_col, "△", self.theme.ref_marker),
            (self.marker_col, "▲", self.theme.marker),
        ] {
            if let Some(c) = col.filter(|c| (*c as usize) < width) {
                buf.set_string(x0 + c, area.y, glyph, style);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tui::colour::Depth;
    use crate::tui::widgets::text_lines;

    #[test]
    fn axis_labels_sit_right_of_their_ticks() {
        let theme = Theme::new(Depth::Mono);
        let axis = FreqAxis {
            view: View::new(99.5e6, 100.5e6),
            marker_col: Some(10),
            ref_marker_col: Some(22),
            theme: &theme,
        };
        let mut buf = Buffer::empty(Rect::new(0, 0, GUTTER + 40, 1));
        (&axis).render(buf.area, &mut buf);
        // 1 MHz over 40 columns; ticks every 0.2 MHz fit ("99.6" needs 4 + 3 columns of 8):
        // 99.6 at column 4, 99.8 at 12, 100.0 at 20, 100.2 at 28, 100.4 at 36.
        // 100.4 at column 36 would run past the edge and is left out; the reference marker at
        // column 22 would cut "100.0", which is left out too.
        assert_eq!(text_lines(&buf), ["  MHz     ╵99.6 ▲ ╵99.8     △     ╵100.2      "]);
        assert_eq!(
            buf[(GUTTER + 10, 0)].style(),
            buf[(GUTTER + 10, 0)].style().patch(theme.marker)
        );
    }
}
