//! The three text lines: the source line at the top, the marker readout and the settings line
//! at the bottom. Each draws a plain view ([`SourceView`], [`MarkerView`], [`SettingsView`]) that
//! the monitor builds from its state, as a list of segments; on a narrow screen the ones that do
//! not fit are left out rather than cut in half, and a message too long for its line is
//! shortened in the middle, keeping its head and its cause.

use super::super::colour::Theme;
use super::super::state::{BandReading, Levels};
use super::waterfall::STALE_GLYPH;
use crate::units::{format_clock, format_hz, format_hz_compact, format_rate, format_rows_per_s};
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::Style;
use ratatui::text::{Line, Span};
use ratatui::widgets::Widget;

const SEP: &str = " · ";
/// Display width of [`SEP`] (the dot is one column, two bytes).
const SEP_WIDTH: usize = 3;
/// The first segment is led by one space instead of a separator.
const FIRST_SAVING: usize = SEP_WIDTH - 1;

/// Joins segments with separators in the order given, leaving out those that do not fit in
/// `width`: the segments with the lowest `rank` go in first. A segment of rank 0 (the one the
/// line is for, such as a message) is never left out: too long, it is [`shorten`]ed. `right` is
/// kept at the right edge, two columns clear, when there is room for it.
pub fn fit(
    mut segments: Vec<(u8, Span<'static>)>,
    right: Option<Span<'static>>,
    width: usize,
) -> Line<'static> {
    let right_w = right.as_ref().map_or(0, |r| r.width() + 2);
    let room = width.saturating_sub(right_w);
    let mut order: Vec<usize> = (0..segments.len()).collect();
    order.sort_by_key(|&i| segments[i].0);
    let mut keep = vec![false; segments.len()];
    let mut used = 0;
    for i in order {
        // Each segment is counted with a separator; the first shown has a single space instead.
        let extra = segments[i].1.width() + SEP_WIDTH;
        let left = (room + FIRST_SAVING).saturating_sub(used + SEP_WIDTH);
        if used + extra > room + FIRST_SAVING && segments[i].0 == 0 && left > 0 {
            let seg = &mut segments[i].1;
            *seg = Span::styled(shorten(&seg.content, left), seg.style);
        }
        let extra = segments[i].1.width() + SEP_WIDTH;
        if used + extra <= room + FIRST_SAVING {
            keep[i] = true;
            used += extra;
        }
    }
    let mut spans: Vec<Span<'static>> = Vec::new();
    let mut w = 0;
    for (seg, _) in segments.into_iter().zip(&keep).filter(|(_, k)| **k) {
        let lead = if spans.is_empty() { " " } else { SEP };
        w += Span::raw(lead).width() + seg.1.width();
        spans.push(Span::raw(lead));
        spans.push(seg.1);
    }
    if let Some(r) = right {
        if w + right_w <= width {
            spans.push(Span::raw(" ".repeat(width - w - right_w + 2)));
            spans.push(r);
        }
    }
    Line::from(spans)
}

/// How the input is playing.
#[derive(Clone, Debug, PartialEq)]
pub enum PlayState {
    Waiting,
    /// A file: position and length, seconds; speed when not real time; looping.
    Playing {
        pos_s: f64,
        total_s: f64,
        speed: Option<f64>,
        looping: bool,
    },
    /// Live input: seconds since the start.
    Live {
        pos_s: f64,
    },
    Frozen,
    Ended,
}

/// What the source line says: the input, its rate and centre, the view, the playing state, the
/// time of the row on show and the samples dropped.
#[derive(Clone, Debug, PartialEq)]
pub struct SourceView {
    pub label: String,
    pub sample_rate_hz: f64,
    pub center_hz: f64,
    /// The width of the view, and whether it is zoomed in (narrower than the span).
    pub view_hz: Option<(f64, bool)>,
    pub state: PlayState,
    /// The time of the row on show: its label and, scrolled back, how far back (seconds).
    pub time: Option<(String, Option<f64>)>,
    /// Samples dropped (live input only).
    pub dropped: Option<u64>,
    /// The change alarms up, in words (`watch --alarms` only).
    pub changes: Option<String>,
    /// Of a sweep: its steps and revisit time, s.
    pub sweep: Option<(usize, f64)>,
    pub theme: Theme,
}

/// What the marker line says: a notice, or the markers' readings and the band between them.
#[derive(Clone, Debug, PartialEq)]
pub struct MarkerView {
    pub notice: Option<String>,
    /// Frequency and level (dBFS) of the marker, and the channel it is in.
    pub marker: Option<(f64, f64)>,
    pub channel: Option<String>,
    pub reference: Option<(f64, f64)>,
    pub band: Option<BandReading>,
    pub levels: Levels,
    pub theme: Theme,
}

/// What the settings line says: analysis, noise floor, scale, pacing and colour map.
#[derive(Clone, Debug, PartialEq)]
pub struct SettingsView {
    pub fft_size: usize,
    pub window: String,
    pub rbw_hz: Option<f64>,
    /// Noise density, dBFS/Hz.
    pub floor_dbfs_per_hz: Option<f64>,
    pub levels: Levels,
    /// Rows per second asked for (the keys `s` and `S` change it).
    pub row_rate: f64,
    pub fps: f64,
    pub rows_per_s: f64,
    pub skipped: u64,
    /// The waterfall's colour map (none in monochrome).
    pub map: Option<&'static str>,
    pub theme: Theme,
}

/// All three lines.
#[derive(Clone, Debug, PartialEq)]
pub struct StatusView {
    pub source: SourceView,
    pub marker: MarkerView,
    pub settings: SettingsView,
}

/// Shortens a message to `max` columns keeping what tells the user most: its head (what
/// happened) and its end (the cause, after the last `: `), with `…` for what was left out:
/// `evidence not written: could not cre…: Permission denied (os error 13)`.
pub fn shorten(text: &str, max: usize) -> String {
    let n = text.chars().count();
    if n <= max {
        return text.to_string();
    }
    if max <= 1 {
        return "…".chars().take(max).collect();
    }
    let cause = text.rfind(": ").map(|i| &text[i + 2..]).unwrap_or("");
    // The cause, when it leaves at least a third of the line to the head; else an even split.
    let tail_n = match cause.chars().count() {
        c if c > 0 && c + max / 3 < max => c,
        _ => (max - 1) / 2,
    };
    let head: String = text.chars().take(max - 1 - tail_n).collect();
    let tail: String = text.chars().skip(n - tail_n).collect();
    format!("{head}…{tail}")
}

/// Shortens a long label (a path) to `max` columns keeping what tells inputs apart: the
/// directories go first (`…/name.sigmf-meta`), then the middle of the name, so its start and
/// its extension stay.
fn tail(text: &str, max: usize) -> String {
    let n = text.chars().count();
    if n <= max {
        return text.to_string();
    }
    if let Some((_, name)) = text.rsplit_once('/') {
        if name.chars().count() + 2 <= max {
            return format!("…/{name}");
        }
        return tail(name, max);
    }
    // Keep the extension (from the last dot, when short) and as much of the start as fits.
    let ext_at = text.rfind('.').filter(|&i| text.len() - i <= max / 2);
    let ext: String = ext_at.map_or(String::new(), |i| text[i..].to_string());
    let keep = max.saturating_sub(ext.chars().count() + 1);
    let head: String = text.chars().take(keep).collect();
    format!("{head}…{ext}")
}

/// A revisit time as it reads best: milliseconds under a second, else seconds.
fn short_duration(s: f64) -> String {
    if s < 1.0 {
        format!("{:.0} ms", s * 1e3)
    } else {
        format!("{s:.1} s")
    }
}

impl SourceView {
    pub fn line(&self, width: usize) -> Line<'static> {
        let t = &self.theme;
        let mut segs = vec![
            (0, Span::styled(tail(&self.label, (width / 5).max(12)), t.title)),
            (2, Span::styled(format_rate(self.sample_rate_hz), t.label)),
            (3, Span::styled(format!("centre {}", format_hz_compact(self.center_hz)), t.label)),
        ];
        if let Some((w, zoomed)) = self.view_hz {
            // The whole span is implied by the rate; a zoomed view is worth room.
            let (rank, text) = if zoomed {
                (1, format!("view {}", format_hz_compact(w)))
            } else {
                (5, format!("span {}", format_hz_compact(w)))
            };
            segs.push((rank, Span::styled(text, t.label)));
        }
        segs.push((1, self.state_span()));
        if let Some((steps, revisit_s)) = self.sweep {
            // Said even on a narrow screen: the picture is stitched, and old bins are marked.
            let text = format!(
                "sweep {steps} steps, revisit {}, {STALE_GLYPH} older",
                short_duration(revisit_s)
            );
            segs.push((1, Span::styled(text, t.label)));
        }
        if let Some((label, back)) = &self.time {
            let text = match back {
                Some(s) => format!("◀ {label}, {} back", format_clock(*s)),
                None => label.clone(),
            };
            segs.push((1, Span::styled(text, t.label)));
        }
        if let Some(d) = self.dropped {
            let (rank, style) = if d > 0 { (1, t.warn) } else { (4, t.label) };
            segs.push((rank, Span::styled(format!("dropped {d} samples"), style)));
        }
        if let Some(c) = &self.changes {
            // An alarm up is never left out (shortened if it must be); none is worth little room.
            let (rank, style) = if c.starts_with('▲') { (0, t.warn) } else { (6, t.label) };
            segs.push((rank, Span::styled(c.clone(), style)));
        }
        fit(segs, None, width)
    }

    fn state_span(&self) -> Span<'static> {
        let t = &self.theme;
        match self.state {
            PlayState::Frozen => Span::styled(" FROZEN ", t.warn),
            PlayState::Ended => Span::styled(" end of input ", t.warn),
            PlayState::Playing { pos_s, total_s, speed, looping } => {
                let mut text = format!("▶ {} / {}", format_clock(pos_s), format_clock(total_s));
                if let Some(x) = speed.filter(|x| (*x - 1.0).abs() > 1e-9) {
                    text.push_str(&format!(" ×{x}"));
                }
                if looping {
                    text.push_str(" loop");
                }
                Span::styled(text, t.label)
            }
            PlayState::Live { pos_s } => {
                Span::styled(format!("live {}", format_clock(pos_s)), t.label)
            }
            PlayState::Waiting => Span::styled("waiting for samples", t.label),
        }
    }
}

impl MarkerView {
    pub fn line(&self, width: usize) -> Line<'static> {
        let t = &self.theme;
        let l = self.levels;
        let unit = l.unit();
        if let Some(text) = &self.notice {
            return fit(vec![(0, Span::styled(text.clone(), t.warn))], None, width);
        }
        let Some((f1, v1)) = self.marker else {
            let hint = "marker: b strongest · n p walk the table · ← → move · click · ? keys";
            return fit(vec![(0, Span::styled(hint, t.label))], None, width);
        };
        let mut segs = vec![(
            0,
            Span::styled(format!("▲ {}  {:.1} {unit}", format_hz(f1), l.shown(v1)), t.marker),
        )];
        if let Some(ch) = &self.channel {
            segs.push((3, Span::styled(ch.clone(), t.plan)));
        }
        if let Some((f2, v2)) = self.reference {
            let text = format!("△ {}  {:.1} {unit}", format_hz(f2), l.shown(v2));
            segs.push((3, Span::styled(text, t.ref_marker)));
            let sign = if f1 >= f2 { "+" } else { "" };
            let text = format!("Δ {sign}{}  {:+.1} dB", format_hz(f1 - f2), v1 - v2);
            segs.push((2, Span::styled(text, t.marker)));
        }
        if let Some(b) = self.band {
            // Ahead of the Δ readout on a narrow screen: the band's width is |Δf| anyway.
            let obw = b.obw.map_or("–".to_string(), |e| format_hz_compact(e.width_hz()));
            let width = format_hz_compact(b.high_hz - b.low_hz);
            let power = b
                .power_dbfs
                .map_or("noise only".to_string(), |p| format!("{:.1} {unit}", l.shown(p)));
            let text = format!("band {width}: {power}, OBW {obw}");
            segs.push((1, Span::styled(text, t.marker)));
        }
        fit(segs, None, width)
    }
}

/// Below this width the settings line takes its compact form.
const COMPACT_BELOW: usize = 120;

impl SettingsView {
    /// The line: in full on a wide screen; below [`COMPACT_BELOW`] columns in a compact form
    /// that keeps what the keys change (FFT and window, scale and `auto`, row rate, colour map)
    /// and gives up the noise floor and the frame rate first.
    pub fn line(&self, width: usize) -> Line<'static> {
        let t = &self.theme;
        let l = self.levels;
        let compact = width < COMPACT_BELOW;
        let auto = if l.auto { " auto" } else { "" };
        let rate = if compact {
            format_rows_per_s(self.row_rate)
        } else {
            // The rate asked for, and the rate measured when the input cannot give it.
            let got = self.rows_per_s;
            let short = got > 0.0 && got < 0.8 * self.row_rate;
            let got = if short { format!(" (got {got:.1})") } else { String::new() };
            format!("{}{got}", format_rows_per_s(self.row_rate))
        };
        let mut segs =
            vec![(0, Span::styled(format!("FFT {} {}", self.fft_size, self.window), t.label))];
        if let Some(rbw) = self.rbw_hz {
            let text = if compact { format_hz_compact(rbw) } else { format_hz(rbw) };
            segs.push((if compact { 4 } else { 1 }, Span::styled(format!("RBW {text}"), t.label)));
        }
        if let Some(d) = self.floor_dbfs_per_hz {
            let text = format!("floor {:.1} {}/Hz", l.shown(d), l.unit());
            segs.push((if compact { 6 } else { 1 }, Span::styled(text, t.label)));
        }
        if compact {
            let scale =
                format!("{:.0} {}/{:.0} dB{auto}", l.shown(l.top_dbfs), l.unit(), l.range_db);
            segs.push((1, Span::styled(scale, t.label)));
        } else {
            let scale = format!("ref {:.0} {}", l.shown(l.top_dbfs), l.unit());
            segs.push((2, Span::styled(scale, t.label)));
            let range = format!("range {:.0} dB{auto}", l.range_db);
            segs.push((3, Span::styled(range, t.label)));
            segs.push((5, Span::styled(format!("{:.0} fps", self.fps), t.label)));
        }
        segs.push((2, Span::styled(rate, t.label)));
        // Compact, the skip count shows only once there is one.
        if self.skipped > 0 || !compact {
            let (rank, style) = if self.skipped > 0 { (1, t.warn) } else { (7, t.label) };
            let unit = if compact { "" } else { " rows" };
            segs.push((rank, Span::styled(format!("skipped {}{unit}", self.skipped), style)));
        }
        if let Some(map) = self.map {
            segs.push((3, Span::styled(map.to_string(), t.label)));
        }
        fit(segs, Some(Span::styled("? keys ", t.header)), width)
    }
}

impl Widget for &SourceView {
    fn render(self, area: Rect, buf: &mut Buffer) {
        put_line(buf, area, &self.line(area.width as usize), Style::new());
    }
}

impl Widget for &MarkerView {
    fn render(self, area: Rect, buf: &mut Buffer) {
        put_line(buf, area, &self.line(area.width as usize), Style::new());
    }
}

impl Widget for &SettingsView {
    fn render(self, area: Rect, buf: &mut Buffer) {
        put_line(buf, area, &self.line(area.width as usize), Style::new());
    }
}

/// Writes a line into one row of the buffer.
pub fn put_line(buf: &mut Buffer, area: Rect, line: &Line<'_>, base: Style) {
    buf.set_style(area, base);
    buf.set_line(area.x, area.y, line, area.width);
}

#[cfg(test)]
mod tests {
    use super::*;

    fn text(line: &Line<'_>) -> String {
        line.spans.iter().map(|s| s.content.as_ref()).collect()
    }

    #[test]
    fn segments_that_do_not_fit_are_left_out_whole() {
        let segs =
            || vec![(0, Span::raw("aaaa")), (1, Span::raw("bbbbbbbbbb")), (2, Span::raw("cc"))];
        assert_eq!(text(&fit(segs(), None, 40)), " aaaa · bbbbbbbbbb · cc");
        assert_eq!(text(&fit(segs(), None, 12)), " aaaa · cc");
        assert_eq!(text(&fit(segs(), Some(Span::raw("? k")), 20)), " aaaa · cc       ? k");
        // Rank decides what stays, not position: "cc" first, then "aaaa"; "b…" is dropped.
        let ranked =
            vec![(1, Span::raw("aaaa")), (2, Span::raw("bbbbbbbbbb")), (0, Span::raw("cc"))];
        assert_eq!(text(&fit(ranked, None, 12)), " aaaa · cc");
        let ranked =
            vec![(1, Span::raw("aaaa")), (0, Span::raw("bbbbbbbbbb")), (2, Span::raw("cc"))];
        assert_eq!(text(&fit(ranked, None, 12)), " bbbbbbbbbb");
    }

    #[test]
    fn long_labels_keep_their_tails() {
        assert_eq!(tail("/very/long/path/to/rec.sigmf-meta", 20), "…/rec.sigmf-meta");
        assert_eq!(
            tail("/data/wrenhollow-ridge-dawn-chorus.sigmf-meta", 24),
            "wrenhollow-r….sigmf-meta"
        );
        assert_eq!(tail("short", 20), "short");
    }

    #[test]
    fn a_long_message_keeps_its_head_and_its_cause() {
        let msg = "evidence not written: could not create /srv/very/long/folder/of/the/station/bandwarden-20310417T063002Z.csv: Permission denied (os error 13)";
        let s = shorten(msg, 78);
        assert_eq!(s.chars().count(), 78);
        assert!(s.starts_with("evidence not written: could not create /srv/"), "{s}");
        assert!(s.ends_with("…Permission denied (os error 13)"), "{s}");
        // On the marker line the notice is never blanked, whatever the width.
        for width in [40, 80, 120] {
            let line = fit(vec![(0, Span::raw(msg))], None, width);
            let text = text(&line);
            assert!(text.starts_with(" evidence not"), "{width}: {text}");
            assert!(text.chars().count() <= width, "{width}: {text}");
        }
        // No cause: an even cut keeps both ends.
        assert_eq!(shorten("abcdefghij", 7), "abc…hij");
    }

    #[test]
    fn the_settings_line_keeps_what_the_keys_change_at_80_columns() {
        let view = SettingsView {
            fft_size: 4096,
            window: "hann".into(),
            rbw_hz: Some(366.2),
            floor_dbfs_per_hz: Some(-94.8),
            levels: Levels { top_dbfs: -25.0, range_db: 55.0, auto: false, offset_db: None },
            row_rate: 0.5,
            fps: 30.0,
            rows_per_s: 0.5,
            skipped: 0,
            map: Some("viridis"),
            theme: Theme::new(crate::tui::colour::Depth::Palette256),
        };
        let narrow = text(&view.line(80));
        assert_eq!(
            narrow.trim_end(),
            " FFT 4096 hann · RBW 366.2 Hz · -25 dBFS/55 dB · 0.5 rows/s · viridis    ? keys"
        );
        let wide = text(&view.line(160));
        assert!(
            wide.contains("ref -25 dBFS · range 55 dB · ") && wide.contains("floor -94.8"),
            "{wide}"
        );
    }
}
