//! The table of signals from the shared detector: centre frequency (the middle of the occupied
//! band for a wideband signal), integrated power, peak level in one RBW, SNR, 99 % occupied
//! bandwidth and the channel it falls in. Rows keep a stable order (by frequency unless `r`
//! asks for power) so that `n` and `p` walk them predictably; on wide screens the table runs in
//! several side-by-side blocks so more signals fit. When the rows still do not all fit, the
//! table shows a window of them from `first` and says how many more there are (`+3 more`); the
//! monitor moves that window to keep the marker's row in view.

use super::super::colour::Theme;
use super::super::state::{ChannelMark, Levels, SortKey};
use crate::measure::classify::Class;
use crate::measure::Signal;
use crate::units::format_hz;
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::widgets::Widget;

/// Width of one block of the table; wider screens hold several.
pub const BLOCK_WIDTH: u16 = 80;

/// Where row `i` of `rows` lies in a table drawn in `area`: (x, y, width).
fn cell_of(area: Rect, i: usize) -> Option<(u16, u16, u16)> {
    let blocks = (area.width / BLOCK_WIDTH).max(1);
    let block_w = area.width / blocks;
    let per_block = area.height.checked_sub(1)? as usize;
    if per_block == 0 || i >= per_block * blocks as usize {
        return None;
    }
    let (b, r) = ((i / per_block) as u16, (i % per_block) as u16);
    Some((area.x + b * block_w, area.y + 1 + r, block_w))
}

/// Rows a table in `area` shows at once.
pub fn capacity(area: Rect) -> usize {
    let blocks = (area.width / BLOCK_WIDTH).max(1) as usize;
    area.height.saturating_sub(1) as usize * blocks
}

/// The first row to show of `rows` so that the window starting near `first` is full and holds
/// row `keep` (when given).
pub fn first_shown(rows: usize, cap: usize, first: usize, keep: Option<usize>) -> usize {
    let mut first = first;
    if let Some(k) = keep.filter(|&k| k < rows) {
        if k < first {
            first = k;
        } else if cap > 0 && k >= first + cap {
            first = k + 1 - cap;
        }
    }
    first.min(rows.saturating_sub(cap))
}

/// The row of a table of `rows` rows shown from `first` in `area` under the screen cell
/// (`x`, `y`), if any.
pub fn row_at(area: Rect, rows: usize, first: usize, x: u16, y: u16) -> Option<usize> {
    (first..rows).find(|&i| {
        cell_of(area, i - first).is_some_and(|(bx, by, w)| y == by && x >= bx && x < bx + w)
    })
}

/// The header drawn over each block in use for `rows` rows shown from `first`, and, when they
/// do not all fit, how many more there are and which way (`↓ +3 more`, `↑ +2 more`).
pub fn render_frame(
    area: Rect,
    rows: usize,
    first: usize,
    header: &str,
    theme: &Theme,
    buf: &mut Buffer,
) {
    let blocks = (area.width / BLOCK_WIDTH).max(1);
    let block_w = area.width / blocks;
    let per_block = (area.height.saturating_sub(1) as usize).max(1);
    let shown = rows.saturating_sub(first).min(capacity(area));
    let used = shown.div_ceil(per_block).clamp(1, blocks as usize) as u16;
    for b in 0..used {
        let x = area.x + b * block_w;
        buf.set_stringn(x, area.y, header, block_w as usize, theme.header);
    }
    let (above, below) = (first, rows.saturating_sub(first + shown));
    if above + below == 0 {
        return;
    }
    let arrow = match (above > 0, below > 0) {
        (true, true) => "↕",
        (true, false) => "↑",
        _ => "↓",
    };
    let hint = format!(" {arrow} +{} more ", above + below);
    let w = hint.chars().count() as u16;
    if w <= area.width {
        buf.set_string(area.x + area.width - w, area.y, hint, theme.warn);
    }
}

/// Draws `text` as row `i` of a table in `area`, if it fits.
pub fn put_row(area: Rect, i: usize, text: &str, style: ratatui::style::Style, buf: &mut Buffer) {
    if let Some((x, y, w)) = cell_of(area, i) {
        buf.set_stringn(x, y, text, w as usize, style);
    }
}

pub struct SignalTable<'a> {
    pub signals: &'a [Signal],
    /// The first row on show.
    pub first: usize,
    /// The plan's channels (empty without a plan; the column is then left out).
    pub channels: &'a [ChannelMark],
    pub levels: Levels,
    pub sort: SortKey,
    /// Frequency of the marker, to flag the row it sits on.
    pub marker_hz: Option<f64>,
    pub theme: &'a Theme,
    /// Kinds found by the live classifier (centre, OBW, class); `None`: no kind column.
    pub kinds: Option<&'a [(f64, f64, Class)]>,
}

impl SignalTable<'_> {
    fn header(&self) -> String {
        let unit = self.levels.unit();
        let (f, p) = match self.sort {
            SortKey::Frequency => ("Frequency ↑", format!("Power {unit}")),
            SortKey::Power => ("Frequency", format!("↓Power {unit}")),
        };
        let mut h = format!(
            " # {:<16} {:>11} {:>9} {:>6} {:>11}",
            f,
            p,
            format!("Peak {unit}"),
            "SNR dB",
            "OBW 99%"
        );
        if self.kinds.is_some() {
            h.push_str(&format!(" {:<6}", "Kind"));
        }
        if !self.channels.is_empty() {
            h.push_str("  Channel");
        }
        h
    }

    fn row(&self, i: usize, s: &Signal) -> String {
        let mut r = format!(
            "{:>2} {:<16} {:>11.1} {:>9.1} {:>6.1} {:>11}",
            i + 1,
            format_hz(s.freq_hz),
            self.levels.shown(s.power_dbfs),
            self.levels.shown(s.level_dbfs),
            s.snr_db,
            format_hz(s.obw.width_hz()),
        );
        if let Some(kinds) = self.kinds {
            r.push_str(&format!(" {:<6}", kind_of(kinds, s)));
        }
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

/// The kind of signal `s`: that of the classified signal whose centre lies within its band
/// (`?` for unknown, blank while none was classified yet).
fn kind_of(kinds: &[(f64, f64, Class)], s: &Signal) -> &'static str {
    kinds
        .iter()
        .filter(|k| k.0 >= s.obw.low_hz && k.0 <= s.obw.high_hz)
        .min_by(|a, b| (a.0 - s.freq_hz).abs().total_cmp(&(b.0 - s.freq_hz).abs()))
        .map_or("", |k| if k.2 == Class::Unknown { "?" } else { k.2.as_str() })
}

impl Widget for &SignalTable<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        if area.height == 0 || area.width == 0 {
            return;
        }
        render_frame(area, self.signals.len(), self.first, &self.header(), self.theme, buf);
        if self.signals.is_empty() {
            let msg = "  no signal stands clear of the noise";
            buf.set_stringn(area.x, area.y + 1, msg, area.width as usize, self.theme.label);
            return;
        }
        for (i, s) in self.signals.iter().enumerate().skip(self.first) {
            let style = if self.under_marker(s) { self.theme.marker } else { self.theme.label };
            put_row(area, i - self.first, &self.row(i, s), style, buf);
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
            power_dbfs: level_dbfs + 3.0,
            obw: Edges { low_hz: freq_hz - 6_250.0, high_hz: freq_hz + 6_250.0 },
            peak_bin: 0,
        }
    }

    /// A table of `signals` from the first row, by frequency, without a plan or a marker.
    fn plain<'a>(signals: &'a [Signal], theme: &'a Theme) -> SignalTable<'a> {
        SignalTable {
            signals,
            first: 0,
            channels: &[],
            levels: levels(None),
            sort: SortKey::Frequency,
            marker_hz: None,
            theme,
            kinds: None,
        }
    }

    fn levels(offset_db: Option<f64>) -> Levels {
        Levels { top_dbfs: 0.0, range_db: 80.0, auto: true, offset_db }
    }

    #[test]
    fn rows_show_frequency_level_snr_obw_and_channel() {
        let theme = Theme::new(Depth::Palette256);
        let signals = [sig(433.92e6, -23.44), sig(433.5e6, -61.0)];
        let channels = [ChannelMark::new("Gate-North", 433.92e6, 25e3)];
        let t = SignalTable {
            signals: &signals,
            first: 0,
            channels: &channels,
            levels: levels(None),
            sort: SortKey::Frequency,
            marker_hz: Some(433.921e6),
            theme: &theme,
            kinds: None,
        };
        let mut buf = Buffer::empty(Rect::new(0, 0, 80, 4));
        (&t).render(buf.area, &mut buf);
        let lines = text_lines(&buf);
        assert_eq!(
            lines[0].trim_end(),
            " # Frequency ↑       Power dBFS Peak dBFS SNR dB     OBW 99%  Channel"
        );
        assert_eq!(
            lines[1].trim_end(),
            " 1 433.920000 MHz         -20.4     -23.4   76.6  12.500 kHz  Gate-North"
        );
        assert_eq!(
            lines[2].trim_end(),
            " 2 433.500000 MHz         -58.0     -61.0   39.0  12.500 kHz  –"
        );
        // The marker sits on the first signal: its row is in the marker's colour.
        assert_eq!(buf[(3, 1)].fg, theme.marker.fg.unwrap());
        assert_eq!(buf[(3, 2)].fg, theme.label.fg.unwrap());
    }

    #[test]
    fn a_kind_column_names_each_classified_signal_within_80_columns() {
        let theme = Theme::new(Depth::Mono);
        let signals = [sig(433.92e6, -23.44), sig(433.5e6, -61.0), sig(433.6e6, -50.0)];
        let channels = [ChannelMark::new("Gate-North", 433.92e6, 25e3)];
        // A kind found 1 kHz off the first signal's centre (inside its band), an unknown one for
        // the third, none yet for the second.
        let kinds = [(433.921e6, 12e3, Class::Fsk), (433.6e6, 12e3, Class::Unknown)];
        let t = SignalTable { channels: &channels, kinds: Some(&kinds), ..plain(&signals, &theme) };
        let mut buf = Buffer::empty(Rect::new(0, 0, 80, 4));
        (&t).render(buf.area, &mut buf);
        let lines = text_lines(&buf);
        assert!(lines[0].trim_end().ends_with("OBW 99% Kind    Channel"), "{}", lines[0]);
        assert!(lines[1].trim_end().ends_with("12.500 kHz fsk     Gate-North"), "{}", lines[1]);
        assert!(lines[2].trim_end().ends_with("12.500 kHz         –"), "{}", lines[2]);
        assert!(lines[3].trim_end().ends_with("12.500 kHz ?       –"), "{}", lines[3]);
    }

    #[test]
    fn a_reference_offset_prints_dbm_and_no_plan_no_channel_column() {
        let theme = Theme::new(Depth::Mono);
        let signals = [sig(100e6, -20.0)];
        let t = SignalTable { levels: levels(Some(-30.0)), ..plain(&signals, &theme) };
        let mut buf = Buffer::empty(Rect::new(0, 0, 80, 2));
        (&t).render(buf.area, &mut buf);
        let lines = text_lines(&buf);
        assert!(lines[0].contains("Power dBm") && !lines[0].contains("Channel"));
        assert!(lines[1].contains(" -47.0 ") && lines[1].contains(" -50.0 "), "{}", lines[1]);
    }

    #[test]
    fn wide_screens_use_side_by_side_blocks() {
        let theme = Theme::new(Depth::Mono);
        let signals: Vec<Signal> = (0..4).map(|i| sig(100e6 + i as f64 * 1e5, -20.0)).collect();
        let t = plain(&signals, &theme);
        let mut buf = Buffer::empty(Rect::new(0, 0, 160, 3));
        (&t).render(buf.area, &mut buf);
        let lines = text_lines(&buf);
        let right = |l: &str| l.chars().skip(80).collect::<String>();
        assert!(right(&lines[0]).starts_with(" # Frequency"));
        assert!(lines[1].starts_with(" 1 100.000000 MHz"));
        assert!(lines[2].starts_with(" 2 100.100000 MHz"));
        assert!(right(&lines[1]).starts_with(" 3 100.200000 MHz"), "{}", &lines[1]);
        // With fewer signals than rows, the second block (and its header) stays empty.
        let t = SignalTable { signals: &signals[..2], ..t };
        let mut buf = Buffer::empty(Rect::new(0, 0, 160, 3));
        (&t).render(buf.area, &mut buf);
        assert!(right(&text_lines(&buf)[0]).trim().is_empty());
    }

    #[test]
    fn sort_keys_give_a_stable_order_and_clicks_find_rows() {
        let mut signals = vec![sig(100.2e6, -50.0), sig(100.1e6, -20.0), sig(100.3e6, -30.0)];
        SortKey::Frequency.apply(&mut signals);
        let f: Vec<f64> = signals.iter().map(|s| s.freq_hz).collect();
        assert_eq!(f, vec![100.1e6, 100.2e6, 100.3e6]);
        SortKey::Power.apply(&mut signals);
        let p: Vec<f64> = signals.iter().map(|s| s.power_dbfs).collect();
        assert_eq!(p, vec![-17.0, -27.0, -47.0]);
        assert_eq!(SortKey::Power.next(), SortKey::Frequency);
        // Two blocks of two rows at 160×3 (table at y = 10): row 3 is in the second block.
        let area = Rect::new(0, 10, 160, 3);
        assert_eq!(row_at(area, 4, 0, 5, 11), Some(0));
        assert_eq!(row_at(area, 4, 0, 5, 12), Some(1));
        assert_eq!(row_at(area, 4, 0, 85, 12), Some(3));
        assert_eq!(row_at(area, 4, 0, 5, 10), None, "the header is no row");
        assert_eq!(row_at(area, 3, 0, 85, 12), None, "no fourth row");
        // Scrolled down by two, the first cell holds row 2.
        assert_eq!(row_at(area, 7, 2, 5, 11), Some(2));
    }

    #[test]
    fn the_power_order_is_marked_in_the_header() {
        let theme = Theme::new(Depth::Mono);
        let signals = [sig(100e6, -20.0)];
        let t = SignalTable { sort: SortKey::Power, ..plain(&signals, &theme) };
        let mut buf = Buffer::empty(Rect::new(0, 0, 80, 2));
        (&t).render(buf.area, &mut buf);
        assert!(
            text_lines(&buf)[0].starts_with(" # Frequency        ↓Power dBFS"),
            "{:?}",
            text_lines(&buf)
        );
    }

    #[test]
    fn rows_that_do_not_fit_scroll_and_say_how_many_more() {
        let theme = Theme::new(Depth::Mono);
        let signals: Vec<Signal> = (0..7).map(|i| sig(100e6 + i as f64 * 1e5, -20.0)).collect();
        // Three rows under the header at 80 columns: 7 signals, 4 hidden below.
        let t = plain(&signals, &theme);
        let mut buf = Buffer::empty(Rect::new(0, 0, 80, 4));
        (&t).render(buf.area, &mut buf);
        let lines = text_lines(&buf);
        assert!(lines[0].ends_with(" ↓ +4 more "), "{}", lines[0]);
        assert!(lines[3].starts_with(" 3 100.200000 MHz"));
        // From row 3 on: rows 4..6 shown, three above and one below.
        let t = SignalTable { first: 3, ..t };
        let mut buf = Buffer::empty(Rect::new(0, 0, 80, 4));
        (&t).render(buf.area, &mut buf);
        let lines = text_lines(&buf);
        assert!(lines[0].ends_with(" ↕ +4 more "), "{}", lines[0]);
        assert!(lines[1].starts_with(" 4 100.300000 MHz"), "{}", lines[1]);
        // The window follows the row to keep and is always full.
        assert_eq!(first_shown(7, 3, 0, Some(5)), 3);
        assert_eq!(first_shown(7, 3, 4, Some(1)), 1);
        assert_eq!(first_shown(7, 3, 6, None), 4);
        assert_eq!(first_shown(2, 3, 1, None), 0);
        assert_eq!(capacity(Rect::new(0, 0, 160, 4)), 6);
    }
}
