//! The table of the strongest signals: frequency, level, SNR, occupied bandwidth and the channel
//! they fall in. On wide screens it runs in several side-by-side blocks so more signals fit.

use super::super::app::{ChannelMark, Levels};
use super::super::colour::Theme;
use crate::measure::Signal;
use crate::units::format_hz;
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::widgets::Widget;

/// Width of one block of the table; wider screens hold several.
pub const BLOCK_WIDTH: u16 = 80;

pub struct SignalTable<'a> {
    pub signals: &'a [Signal],
    /// The plan's channels (empty without a plan; the column is then left out).
    pub channels: &'a [ChannelMark],
    pub levels: Levels,
    /// Frequency of the marker, to flag the row it sits on.
    pub marker_hz: Option<f64>,
    pub theme: &'a Theme,
}

impl SignalTable<'_> {
    fn header(&self) -> String {
        let level = format!("Level {}", self.levels.unit());
        let mut h = format!(" # {:<16} {:>11} {:>8} {:>12}", "Frequency", level, "SNR", "OBW 99%");
        if !self.channels.is_empty() {
            h.push_str("  Channel");
        }
        h
    }

    fn row(&self, i: usize, s: &Signal) -> String {
        let mut r = format!(
            "{:>2} {:<16} {:>11.1} {:>5.1} dB {:>12}",
            i + 1,
            format_hz(s.freq_hz),
            self.levels.shown(s.level_dbfs),
            s.snr_db,
            format_hz(s.obw.width_hz()),
        );
        if !self.channels.is_empty() {
            let name =
                self.channels.iter().find(|c| c.contains(s.freq_hz)).map_or("–", |c| &c.name);
            r.push_str("  ");
            r.push_str(name);
        }
        r
    }

    /// Whether the marker sits on this signal (within its occupied bandwidth).
    fn under_marker(&self, s: &Signal) -> bool {
        self.marker_hz.is_some_and(|m| m >= s.obw.low_hz && m <= s.obw.high_hz)
    }
}

impl Widget for &SignalTable<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        if area.height == 0 || area.width == 0 {
            return;
        }
        let blocks = (area.width / BLOCK_WIDTH).max(1);
        let block_w = area.width / blocks;
        let rows = (area.height - 1) as usize;
        let header = self.header();
        let used = self.signals.len().div_ceil(rows.max(1)).clamp(1, blocks as usize) as u16;
        for b in 0..used {
            let x = area.x + b * block_w;
            buf.set_stringn(x, area.y, &header, block_w as usize, self.theme.header);
        }
        if self.signals.is_empty() {
            let msg = "  no signal stands clear of the noise";
            buf.set_stringn(area.x, area.y + 1, msg, area.width as usize, self.theme.label);
            return;
        }
        for (i, s) in self.signals.iter().enumerate().take(rows * blocks as usize) {
            let (b, r) = ((i / rows) as u16, (i % rows) as u16);
            let style = if self.under_marker(s) { self.theme.marker } else { self.theme.label };
            let x = area.x + b * block_w;
            buf.set_stringn(x, area.y + 1 + r, self.row(i, s), block_w as usize, style);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::measure::Edges;
    use crate::tui::colour::Depth;
    use crate::tui::widgets::text_lines;

    fn sig(freq_hz: f64, level_dbfs: f64) -> Signal {
        Signal {
            freq_hz,
            level_dbfs,
            snr_db: level_dbfs + 100.0,
            power_dbfs: level_dbfs,
            obw: Edges { low_hz: freq_hz - 6_250.0, high_hz: freq_hz + 6_250.0 },
            peak_bin: 0,
        }
    }

    fn levels(offset_db: Option<f64>) -> Levels {
        Levels { top_dbfs: 0.0, range_db: 80.0, auto: true, offset_db }
    }

    #[test]
    fn rows_show_frequency_level_snr_obw_and_channel() {
        let theme = Theme::new(Depth::Palette256);
        let signals = [sig(433.92e6, -23.44), sig(433.5e6, -61.0)];
        let channels =
            [ChannelMark { name: "Gate-North".into(), center_hz: 433.92e6, width_hz: 25e3 }];
        let t = SignalTable {
            signals: &signals,
            channels: &channels,
            levels: levels(None),
            marker_hz: Some(433.921e6),
            theme: &theme,
        };
        let mut buf = Buffer::empty(Rect::new(0, 0, 80, 4));
        (&t).render(buf.area, &mut buf);
        let lines = text_lines(&buf);
        assert_eq!(
            lines[0].trim_end(),
            " # Frequency         Level dBFS      SNR      OBW 99%  Channel"
        );
        assert_eq!(
            lines[1].trim_end(),
            " 1 433.920000 MHz         -23.4  76.6 dB   12.500 kHz  Gate-North"
        );
        assert_eq!(lines[2].trim_end(), " 2 433.500000 MHz         -61.0  39.0 dB   12.500 kHz  –");
        // The marker sits on the first signal: its row is in the marker's colour.
        assert_eq!(buf[(3, 1)].fg, theme.marker.fg.unwrap());
        assert_eq!(buf[(3, 2)].fg, theme.label.fg.unwrap());
    }

    #[test]
    fn a_reference_offset_prints_dbm_and_no_plan_no_channel_column() {
        let theme = Theme::new(Depth::Mono);
        let signals = [sig(100e6, -20.0)];
        let t = SignalTable {
            signals: &signals,
            channels: &[],
            levels: levels(Some(-30.0)),
            marker_hz: None,
            theme: &theme,
        };
        let mut buf = Buffer::empty(Rect::new(0, 0, 80, 2));
        (&t).render(buf.area, &mut buf);
        let lines = text_lines(&buf);
        assert!(lines[0].contains("Level dBm") && !lines[0].contains("Channel"));
        assert!(lines[1].contains(" -50.0 "), "{}", lines[1]);
    }

    #[test]
    fn wide_screens_use_side_by_side_blocks() {
        let theme = Theme::new(Depth::Mono);
        let signals: Vec<Signal> = (0..4).map(|i| sig(100e6 + i as f64 * 1e5, -20.0)).collect();
        let t = SignalTable {
            signals: &signals,
            channels: &[],
            levels: levels(None),
            marker_hz: None,
            theme: &theme,
        };
        let mut buf = Buffer::empty(Rect::new(0, 0, 160, 3));
        (&t).render(buf.area, &mut buf);
        let lines = text_lines(&buf);
        assert!(lines[0][80..].starts_with(" # Frequency"));
        assert!(lines[1].starts_with(" 1 100.000000 MHz"));
        assert!(lines[2].starts_with(" 2 100.100000 MHz"));
        assert!(lines[1][80..].starts_with(" 3 100.200000 MHz"), "{}", &lines[1]);
        // With fewer signals than rows, the second block (and its header) stays empty.
        let t = SignalTable { signals: &signals[..2], ..t };
        let mut buf = Buffer::empty(Rect::new(0, 0, 160, 3));
        (&t).render(buf.area, &mut buf);
        assert!(text_lines(&buf)[0][80..].trim().is_empty());
    }
}
