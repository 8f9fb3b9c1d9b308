//! The three text lines: the source line at the top, the marker readout and the settings line
//! at the bottom. Each is a list of segments; on a narrow screen the ones that do not fit are
//! left out rather than cut in half.

use super::super::app::{App, Mode};
use super::super::colour::Depth;
use super::super::widgets::waterfall::clock;
use crate::units::format_hz;
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::style::Style;
use ratatui::text::{Line, Span};

const SEP: &str = " · ";
/// Display width of [`SEP`] (the dot is one column, two bytes).
const SEP_WIDTH: usize = 3;
/// The first segment is led by one space instead of a separator.
const FIRST_SAVING: usize = SEP_WIDTH - 1;

/// Joins segments with separators in the order given, leaving out those that do not fit in
/// `width`: the segments with the lowest `rank` go in first. `right` is kept at the right edge,
/// two columns clear, when there is room for it.
pub fn fit(
    segments: Vec<(u8, Span<'static>)>,
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

/// Sample rate for people, without trailing zeros: `2.4 MS/s`, `1 MS/s`, `48 kS/s`.
pub fn format_rate(hz: f64) -> String {
    let (v, unit) = if hz >= 1e6 {
        (format!("{:.3}", hz / 1e6), "MS/s")
    } else if hz >= 1e3 {
        (format!("{:.1}", hz / 1e3), "kS/s")
    } else {
        (format!("{hz:.0}"), "S/s")
    };
    let v = if v.contains('.') { v.trim_end_matches('0').trim_end_matches('.') } else { &v };
    format!("{v} {unit}")
}

/// A row rate for people: `20 rows/s`, `1 row/s`, `0.5 rows/s`.
pub fn format_rows_per_s(r: f64) -> String {
    if (r - 1.0).abs() < 0.05 {
        "1 row/s".to_string()
    } else if r < 1.0 {
        format!("{r:.1} rows/s")
    } else {
        format!("{r:.0} rows/s")
    }
}

/// A frequency without trailing zeros: `433.5 MHz`, `150 kHz`; as exact as [`format_hz`].
pub fn format_hz_compact(hz: f64) -> String {
    let full = format_hz(hz);
    let Some((num, unit)) = full.split_once(' ') else { return full };
    let num = if num.contains('.') { num.trim_end_matches('0').trim_end_matches('.') } else { num };
    format!("{num} {unit}")
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

/// Source, rate, centre, span, playback state and dropped samples.
pub fn source_line(app: &App, width: usize) -> Line<'static> {
    let t = &app.theme;
    let s = &app.source;
    let mut segs = vec![
        (0, Span::styled(tail(&s.label, (width / 5).max(12)), t.title)),
        (2, Span::styled(format_rate(s.sample_rate_hz), t.label)),
        (3, Span::styled(format!("centre {}", format_hz_compact(s.center_hz)), t.label)),
    ];
    if let (Some(v), Some(span)) = (app.view, app.span()) {
        // The whole span is implied by the rate; a zoomed view is worth room.
        let (rank, text) = if (v.width_hz() - span.width_hz()).abs() < 1e-6 * span.width_hz() {
            (5, format!("span {}", format_hz_compact(span.width_hz())))
        } else {
            (1, format!("view {}", format_hz_compact(v.width_hz())))
        };
        segs.push((rank, Span::styled(text, t.label)));
    }
    segs.push((1, state(app)));
    if let Some(time) = shown_time(app) {
        segs.push((1, Span::styled(time, t.label)));
    }
    if s.live {
        let d = app.stats.dropped;
        let (rank, style) = if d > 0 { (1, t.warn) } else { (4, t.label) };
        segs.push((rank, Span::styled(format!("dropped {d} samples"), style)));
    }
    fit(segs, None, width)
}

/// The time of the row on show: the newest, or the time cursor's when scrolled back.
fn shown_time(app: &App) -> Option<String> {
    let newest = app.history.total().checked_sub(1)?;
    let row = app.history.by_index(app.cursor.unwrap_or(newest))?;
    let label = app.times.long_label(row.end_sample);
    Some(match app.cursor {
        Some(_) => format!("◀ {label}, {} back", clock(app.cursor_age_s())),
        None => label,
    })
}

fn state(app: &App) -> Span<'static> {
    let t = &app.theme;
    if app.mode == Mode::Frozen {
        return Span::styled(" FROZEN ", t.warn);
    }
    if app.ended {
        return Span::styled(" end of input ", t.warn);
    }
    let s = &app.source;
    match (s.total_samples, app.stats.position_s) {
        (Some(total), Some(pos)) => {
            let total_s = total as f64 / s.sample_rate_hz;
            let pos = if s.looping && total_s > 0.0 { pos % total_s } else { pos };
            let mut text = format!("▶ {} / {}", clock(pos), clock(total_s));
            if let Some(x) = s.speed.filter(|x| (*x - 1.0).abs() > 1e-9) {
                text.push_str(&format!(" ×{x}"));
            }
            if s.looping {
                text.push_str(" loop");
            }
            Span::styled(text, t.label)
        }
        (None, Some(pos)) => Span::styled(format!("live {}", clock(pos)), t.label),
        _ => Span::styled("waiting for samples", t.label),
    }
}

/// Marker frequency and level, and the difference to the reference marker.
pub fn marker_line(app: &App, width: usize) -> Line<'static> {
    let t = &app.theme;
    let l = app.levels;
    let unit = l.unit();
    if let Some((text, _)) = &app.notice {
        return fit(vec![(0, Span::styled(text.clone(), t.warn))], None, width);
    }
    let Some((f1, v1)) = app.marker_hz.and(app.marker_reading) else {
        let hint = "marker: b strongest · n p walk the table · ← → move · click · ? keys";
        return fit(vec![(0, Span::styled(hint, t.label))], None, width);
    };
    let mut segs = vec![(
        0,
        Span::styled(format!("▲ {}  {:.1} {unit}", format_hz(f1), l.shown(v1)), t.marker),
    )];
    if let Some(ch) = app.channel_at(f1) {
        segs.push((3, Span::styled(ch.name.clone(), t.plan)));
    }
    if let Some((f2, v2)) = app.ref_marker_hz.and(app.ref_reading) {
        segs.push((
            3,
            Span::styled(format!("△ {}  {:.1} {unit}", format_hz(f2), l.shown(v2)), t.ref_marker),
        ));
        segs.push((
            2,
            Span::styled(
                format!(
                    "Δ {}{}  {:+.1} dB",
                    if f1 >= f2 { "+" } else { "" },
                    format_hz(f1 - f2),
                    v1 - v2
                ),
                t.marker,
            ),
        ));
    }
    if let Some(b) = app.band {
        // Ahead of the Δ readout on a narrow screen: the band's width is |Δf| anyway.
        let obw = b.obw.map_or("–".to_string(), |e| format_hz_compact(e.width_hz()));
        let width = format_hz_compact(b.high_hz - b.low_hz);
        let text = format!("band {width}: {:.1} {unit}, OBW {obw}", l.shown(b.power_dbfs));
        segs.push((1, Span::styled(text, t.marker)));
    }
    fit(segs, None, width)
}

/// FFT, window, RBW, scale, pacing and the help key.
pub fn settings_line(app: &App, width: usize) -> Line<'static> {
    let t = &app.theme;
    let l = app.levels;
    let (fft, window, rbw) = match app.traces.current() {
        Some(c) => (c.fft_size, c.window, Some(c.rbw_hz)),
        None => (app.settings.fft_size, app.settings.window, None),
    };
    let mut segs = vec![(0, Span::styled(format!("FFT {fft} {window}"), t.label))];
    if let Some(rbw) = rbw {
        segs.push((1, Span::styled(format!("RBW {}", format_hz(rbw)), t.label)));
    }
    if let Some(d) = app.floor_density {
        let text = format!("floor {:.1} {}/Hz", l.shown(crate::units::db(d)), l.unit());
        segs.push((1, Span::styled(text, t.label)));
    }
    let scale = format!("ref {:.0} {}", l.shown(l.top_dbfs), l.unit());
    segs.push((2, Span::styled(scale, t.label)));
    let range = format!("range {:.0} dB{}", l.range_db, if l.auto { " auto" } else { "" });
    segs.push((3, Span::styled(range, t.label)));
    let st = &app.stats;
    segs.push((5, Span::styled(format!("{:.0} fps", st.fps), t.label)));
    segs.push((6, Span::styled(format_rows_per_s(st.rows_per_s), t.label)));
    let (rank, style) = if st.skipped > 0 { (1, t.warn) } else { (4, t.label) };
    segs.push((rank, Span::styled(format!("skipped {} rows", st.skipped), style)));
    if app.depth != Depth::Mono {
        segs.push((7, Span::styled(app.palette.map.name().to_string(), t.label)));
    }
    fit(segs, Some(Span::styled("? keys ", t.header)), width)
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
    fn rates_and_tails() {
        assert_eq!(format_rate(2.4e6), "2.4 MS/s");
        assert_eq!(format_rate(1e6), "1 MS/s");
        assert_eq!(format_rate(48e3), "48 kS/s");
        assert_eq!(format_rate(2.048e6), "2.048 MS/s");
        assert_eq!(format_rows_per_s(1.0), "1 row/s");
        assert_eq!(format_rows_per_s(20.0), "20 rows/s");
        assert_eq!(format_rows_per_s(0.5), "0.5 rows/s");
        assert_eq!(format_hz_compact(433.5e6), "433.5 MHz");
        assert_eq!(format_hz_compact(150e3), "150 kHz");
        assert_eq!(format_hz_compact(433.920001e6), "433.920001 MHz");
        assert_eq!(tail("/very/long/path/to/rec.sigmf-meta", 20), "…/rec.sigmf-meta");
        assert_eq!(
            tail("/data/wrenhollow-ridge-dawn-chorus.sigmf-meta", 24),
            "wrenhollow-r….sigmf-meta"
        );
        assert_eq!(tail("short", 20), "short");
    }
}
