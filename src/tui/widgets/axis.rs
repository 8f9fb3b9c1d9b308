//! The frequency axis under the spectrum, and the channel-plan row under it.

use super::super::colour::Theme;
use super::super::layout::GUTTER;
use super::super::state::ChannelMark;
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

/// Each channel of the plan as a bracket `├─name─┤` over the columns it covers. A channel too
/// narrow for its name shows its number in the plan instead (`├3┤`, or `3` alone), and the
/// channel panel (`t`) and the marker line give the name: the row stays readable at 80 columns
/// however many channels crowd it.
pub struct PlanRow<'a> {
    pub view: View,
    pub channels: &'a [ChannelMark],
    /// Channels whose alarm is on (same order; shorter means none), highlighted.
    pub alarmed: &'a [bool],
    pub theme: &'a Theme,
}

impl PlanRow<'_> {
    /// The channels in view with their first and last columns and their number, left to right.
    fn spans(&self, width: usize) -> Vec<(usize, usize, usize)> {
        let v = self.view;
        let mut spans: Vec<(usize, usize, usize)> = self
            .channels
            .iter()
            .enumerate()
            .filter_map(|(i, ch)| {
                let (lo, hi) = (ch.center_hz - 0.5 * ch.width_hz, ch.center_hz + 0.5 * ch.width_hz);
                if hi < v.lo_hz || lo >= v.hi_hz {
                    return None;
                }
                let c0 = v.column_of(lo.max(v.lo_hz), width).unwrap_or(0);
                let c1 =
                    v.column_of(hi.min(v.hi_hz) - 1e-9 * v.width_hz(), width).unwrap_or(width - 1);
                Some((c0, c1.max(c0), i))
            })
            .collect();
        spans.sort_by_key(|s| s.0);
        spans
    }
}

impl Widget for &PlanRow<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        if area.width <= GUTTER || area.height == 0 {
            return;
        }
        let width = (area.width - GUTTER) as usize;
        let x0 = area.x + GUTTER;
        buf.set_string(area.x, area.y, " plan ", self.theme.label);
        let v = self.view;
        let style = self.theme.plan;
        let spans = self.spans(width);
        for (k, &(c0, c1, i)) in spans.iter().enumerate() {
            let ch = &self.channels[i];
            let style = if self.alarmed.get(i) == Some(&true) { self.theme.warn } else { style };
            let (lo, hi) = (ch.center_hz - 0.5 * ch.width_hz, ch.center_hz + 0.5 * ch.width_hz);
            let inner = c1.saturating_sub(c0 + 1);
            let number = (i + 1).to_string();
            let name_w = ch.name.chars().count();
            // Free columns up to the next channel, for a label that overflows its bracket.
            let next = spans.get(k + 1).map_or(width, |s| s.0);
            let label = if name_w <= inner {
                ch.name.clone()
            } else if number.len() <= inner {
                number.clone()
            } else {
                // Too narrow even for its number: a mark, the number beside it if it fits.
                let mark = if c1 == c0 {
                    "┃".to_string()
                } else {
                    format!("├{}┤", "─".repeat(inner))
                };
                buf.set_string(x0 + c0 as u16, area.y, &mark, style);
                let after = c0 + mark.chars().count();
                if after + number.len() <= next {
                    buf.set_string(x0 + after as u16, area.y, &number, style);
                }
                continue;
            };
            let pad = inner - label.chars().count();
            let text = format!(
                "{}{}{}{}{}",
                if lo >= v.lo_hz { "├" } else { "─" },
                "─".repeat(pad / 2),
                label,
                "─".repeat(pad - pad / 2),
                if hi < v.hi_hz { "┤" } else { "─" },
            );
            buf.set_string(x0 + c0 as u16, area.y, text, style);
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

    #[test]
    fn channels_are_bracketed_and_named() {
        let theme = Theme::new(Depth::Mono);
        let channels = vec![
            ChannelMark::new("GATE", 1_000.0, 1_000.0),
            ChannelMark::new("far-away", 1e6, 10.0),
        ];
        let row = PlanRow {
            view: View::new(0.0, 2_000.0),
            channels: &channels,
            alarmed: &[],
            theme: &theme,
        };
        let mut buf = Buffer::empty(Rect::new(0, 0, GUTTER + 20, 1));
        (&row).render(buf.area, &mut buf);
        // 100 Hz a column: 500..1500 Hz covers columns 5..=14.
        assert_eq!(text_lines(&buf), [" plan      ├──GATE──┤     "]);
        // A channel narrower than its name shows its number (2nd in the plan) inside.
        let narrow =
            vec![ChannelMark::new("x", 0.0, 1.0), ChannelMark::new("Beacon", 300.0, 300.0)];
        let row = PlanRow {
            view: View::new(0.0, 2_000.0),
            channels: &narrow,
            alarmed: &[],
            theme: &theme,
        };
        let mut buf = Buffer::empty(Rect::new(0, 0, GUTTER + 20, 1));
        (&row).render(buf.area, &mut buf);
        assert_eq!(text_lines(&buf)[0].trim_end(), " plan ┃├2─┤");
        // Narrower still: a mark, and the number beside it where the next channel leaves room.
        let two =
            vec![ChannelMark::new("ops", 300.0, 100.0), ChannelMark::new("yard", 700.0, 100.0)];
        let row =
            PlanRow { view: View::new(0.0, 2_000.0), channels: &two, alarmed: &[], theme: &theme };
        let mut buf = Buffer::empty(Rect::new(0, 0, GUTTER + 20, 1));
        (&row).render(buf.area, &mut buf);
        assert_eq!(text_lines(&buf)[0].trim_end(), " plan   ├┤1 ├┤2");
    }
}
