//! The channel-plan row under the frequency axis.

use super::super::colour::Theme;
use super::super::layout::GUTTER;
use super::super::state::ChannelMark;
use super::super::view::View;
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::widgets::Widget;

/// Each channel of the plan as a bracket `├─name─┤` over the columns it covers. A channel too
/// narrow for its name shows its number in the plan instead (`├3┤`, or a mark with the number
/// beside it, `┃3`). Channels that share columns, or sit too close for each number to fit beside
/// its own mark, become one bracket labelled with all their numbers (`1-3`, `1,2`, `2,5`): at any
/// span every channel in view is named or numbered exactly once, and no label touches another,
/// so none can be read as another channel's. The channel panel (`t`) and the marker line give
/// the names.
pub struct PlanRow<'a> {
    pub view: View,
    pub channels: &'a [ChannelMark],
    /// Channels whose alarm is on (same order; shorter means none), highlighted.
    pub alarmed: &'a [bool],
    pub theme: &'a Theme,
}

/// Channels drawn as one bracket.
#[derive(Clone, Debug)]
struct Group {
    /// First and last column of the bracket.
    c0: usize,
    c1: usize,
    /// Indexes in the plan.
    members: Vec<usize>,
    /// Whether a member runs past the view's left / right edge (the bracket stays open there).
    open_lo: bool,
    open_hi: bool,
}

/// Where a group's label is drawn.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Place {
    Inside,
    /// Right of the bracket.
    After,
    /// Left of the bracket (at the right edge of the row, where nothing fits after it).
    Before,
}

impl Group {
    fn inner(&self) -> usize {
        self.c1.saturating_sub(self.c0 + 1)
    }

    /// The name of a lone channel when it fits inside its bracket, else the plan numbers.
    fn label(&self, channels: &[ChannelMark]) -> String {
        match self.members[..] {
            [i] if channels[i].name.chars().count() <= self.inner() => channels[i].name.clone(),
            _ => numbers(&self.members),
        }
    }

    fn fits_inside(&self, channels: &[ChannelMark]) -> bool {
        self.label(channels).chars().count() <= self.inner()
    }

    /// The last column used with the label inside or right of the bracket.
    fn end(&self, channels: &[ChannelMark]) -> usize {
        if self.fits_inside(channels) {
            self.c1
        } else {
            self.c1 + self.label(channels).chars().count()
        }
    }

    /// Whether `next` (starting at or right of this group) cannot keep a bracket of its own:
    /// it shares columns with this one, or starts where this group's number must go. Two
    /// brackets that meet in one column, each with its label inside, stay apart.
    fn crowded_by(&self, next: &Group, channels: &[ChannelMark]) -> bool {
        if next.c0 <= self.c1 {
            let meet = next.c0 == self.c1;
            return !(meet && self.fits_inside(channels) && next.fits_inside(channels));
        }
        self.end(channels) >= next.c0
    }

    fn absorb(&mut self, other: Group) {
        self.c0 = self.c0.min(other.c0);
        self.c1 = self.c1.max(other.c1);
        self.members.extend(other.members);
        self.open_lo |= other.open_lo;
        self.open_hi |= other.open_hi;
    }
}

/// Plan numbers (indexes + 1) in order, runs of three or more as `a-b`: `1-3,5,6`.
fn numbers(members: &[usize]) -> String {
    let mut n: Vec<usize> = members.iter().map(|i| i + 1).collect();
    n.sort_unstable();
    n.dedup();
    let mut parts = Vec::new();
    let mut k = 0;
    while k < n.len() {
        let mut j = k;
        while j + 1 < n.len() && n[j + 1] == n[j] + 1 {
            j += 1;
        }
        match j - k {
            0 => parts.push(n[k].to_string()),
            1 => parts.extend([n[k].to_string(), n[j].to_string()]),
            _ => parts.push(format!("{}-{}", n[k], n[j])),
        }
        k = j + 1;
    }
    parts.join(",")
}

impl PlanRow<'_> {
    /// The channels in view, one group each, with their first and last columns, left to right.
    fn spans(&self, width: usize) -> Vec<Group> {
        let v = self.view;
        let mut spans: Vec<Group> = self
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
                Some(Group {
                    c0,
                    c1: c1.max(c0),
                    members: vec![i],
                    open_lo: lo < v.lo_hz,
                    open_hi: hi >= v.hi_hz,
                })
            })
            .collect();
        spans.sort_by_key(|g| (g.c0, g.c1));
        spans
    }

    /// The brackets to draw and where each label goes: crowded neighbours are joined left to
    /// right; a last label with no room after its bracket goes before it, or joins the group
    /// before it when there is no room there either.
    fn layout(&self, width: usize) -> Vec<(Group, Place)> {
        let channels = self.channels;
        let mut groups: Vec<Group> = Vec::new();
        for g in self.spans(width) {
            match groups.last_mut() {
                Some(cur) if cur.crowded_by(&g, channels) => cur.absorb(g),
                _ => groups.push(g),
            }
        }
        let mut last_place = Place::Inside;
        while let Some(last) = groups.last() {
            let n = groups.len();
            let len = last.label(channels).chars().count();
            let rooms = [
                (Place::Inside, last.inner()),
                (Place::After, width - last.c1 - 1),
                (Place::Before, last.c0),
            ];
            // One blank column between a label before its bracket and the group before.
            let free_from = if n >= 2 { groups[n - 2].end(channels) + 2 } else { 0 };
            if let Some(&(place, _)) = rooms
                .iter()
                .find(|(p, room)| len + if *p == Place::Before { free_from } else { 0 } <= *room)
            {
                last_place = place;
                break;
            }
            if n == 1 {
                // Too many numbers for the row: the widest room, the list cut short with "…".
                last_place = rooms.iter().max_by_key(|r| r.1).expect("three rooms").0;
                break;
            }
            let last = groups.pop().expect("checked above");
            groups.last_mut().expect("two groups or more").absorb(last);
        }
        let n = groups.len();
        groups
            .into_iter()
            .enumerate()
            .map(|(k, g)| {
                let place = if k + 1 == n {
                    last_place
                } else if g.fits_inside(channels) {
                    Place::Inside
                } else {
                    Place::After
                };
                (g, place)
            })
            .collect()
    }
}

/// `label` in at most `room` characters: a list too long is cut after a comma and ends in "…",
/// so a number is never shown cut (where it could read as another channel's).
fn fit(label: &str, room: usize) -> String {
    if label.chars().count() <= room {
        return label.to_string();
    }
    let cut = label
        .char_indices()
        .rev()
        .find(|&(i, c)| c == ',' && i + 2 <= room)
        .map_or(0, |(i, _)| i + 1);
    if room == 0 {
        String::new()
    } else {
        format!("{}…", &label[..cut])
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
        let mut put = |col: usize, text: &str, style| {
            if col < width {
                buf.set_stringn(x0 + col as u16, area.y, text, width - col, style);
            }
        };
        for (g, place) in self.layout(width) {
            let alarmed = g.members.iter().any(|&i| self.alarmed.get(i) == Some(&true));
            let style = if alarmed { self.theme.warn } else { self.theme.plan };
            let label = g.label(self.channels);
            let inner = g.inner();
            if place == Place::Inside {
                let label = fit(&label, inner);
                let pad = inner - label.chars().count();
                let text = format!(
                    "{}{}{}{}{}",
                    if g.open_lo { "─" } else { "├" },
                    "─".repeat(pad / 2),
                    label,
                    "─".repeat(pad - pad / 2),
                    if g.open_hi { "─" } else { "┤" },
                );
                put(g.c0, &text, style);
                continue;
            }
            let mark = if g.c1 == g.c0 {
                "┃".to_string()
            } else {
                format!("├{}┤", "─".repeat(inner))
            };
            put(g.c0, &mark, style);
            if place == Place::After {
                put(g.c1 + 1, &fit(&label, width - g.c1 - 1), style);
            } else {
                let label = fit(&label, g.c0);
                put(g.c0 - label.chars().count(), &label, style);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tui::colour::Depth;
    use crate::tui::widgets::text_lines;

    fn row_text(view: View, channels: &[ChannelMark], cols: u16) -> String {
        let theme = Theme::new(Depth::Mono);
        let row = PlanRow { view, channels, alarmed: &[], theme: &theme };
        let mut buf = Buffer::empty(Rect::new(0, 0, GUTTER + cols, 1));
        (&row).render(buf.area, &mut buf);
        text_lines(&buf).remove(0)
    }

    #[test]
    fn channels_are_bracketed_and_named() {
        let channels = vec![
            ChannelMark::new("GATE", 1_000.0, 1_000.0),
            ChannelMark::new("far-away", 1e6, 10.0),
        ];
        // 100 Hz a column: 500..1500 Hz covers columns 5..=14.
        assert_eq!(row_text(View::new(0.0, 2_000.0), &channels, 20), " plan      ├──GATE──┤     ");
        // A channel narrower than its name shows its number (2nd in the plan) inside.
        let narrow =
            vec![ChannelMark::new("x", 1_050.0, 1.0), ChannelMark::new("Beacon", 300.0, 300.0)];
        assert_eq!(row_text(View::new(0.0, 2_000.0), &narrow, 20).trim_end(), " plan  ├2─┤     ┃1");
        // Narrower still: a mark, and the number beside it where the next channel leaves room.
        let two =
            vec![ChannelMark::new("ops", 300.0, 100.0), ChannelMark::new("yard", 700.0, 100.0)];
        assert_eq!(row_text(View::new(0.0, 2_000.0), &two, 20).trim_end(), " plan   ├┤1 ├┤2");
        // Neighbours meeting in one column (10: 100..1050 Hz and 1050..1850 Hz) keep their names.
        let abut =
            vec![ChannelMark::new("ops", 575.0, 950.0), ChannelMark::new("yard", 1_450.0, 800.0)];
        assert_eq!(
            row_text(View::new(0.0, 2_000.0), &abut, 20).trim_end(),
            " plan  ├──ops───├─yard──┤"
        );
    }

    #[test]
    fn crowded_channels_share_one_bracket_with_all_their_numbers() {
        // 100 Hz a column. Channel 1 (a one-column mark at column 0) leaves no room for its
        // number before channel 2 starts at column 1: one bracket "1,2" over both.
        let touching =
            vec![ChannelMark::new("x", 50.0, 10.0), ChannelMark::new("Beacon", 300.0, 300.0)];
        assert_eq!(row_text(View::new(0.0, 2_000.0), &touching, 20).trim_end(), " plan ├1,2┤");
        // Three in one column, a fourth apart: "1-3" beside the shared mark, then "4".
        let three = vec![
            ChannelMark::new("a", 510.0, 10.0),
            ChannelMark::new("b", 530.0, 10.0),
            ChannelMark::new("c", 560.0, 10.0),
            ChannelMark::new("d", 1_250.0, 10.0),
        ];
        assert_eq!(
            row_text(View::new(0.0, 2_000.0), &three, 20).trim_end(),
            " plan      ┃1-3   ┃4"
        );
        // Plan order is not frequency order: the numbers are listed in order, runs shortened.
        let mixed = vec![
            ChannelMark::new("a", 510.0, 10.0),
            ChannelMark::new("b", 1_800.0, 10.0),
            ChannelMark::new("c", 530.0, 10.0),
        ];
        assert_eq!(
            row_text(View::new(0.0, 2_000.0), &mixed, 20).trim_end(),
            " plan      ┃1,3        ├┤2"
        );
        // At the right edge, with no room after its mark, the number goes before it.
        let edge = vec![ChannelMark::new("a", 1_050.0, 10.0), ChannelMark::new("b", 1_995.0, 5.0)];
        assert_eq!(
            row_text(View::new(0.0, 2_000.0), &edge, 20).trim_end(),
            " plan           ┃1      2┃"
        );
        assert_eq!(numbers(&[0, 1, 2, 4, 5, 8]), "1-3,5,6,9");
    }

    /// Every channel number or name shown on a plan row, ranges expanded (plan indexes).
    fn shown(row: &str, channels: &[ChannelMark]) -> Vec<usize> {
        let body: String = row.chars().skip(GUTTER as usize).collect();
        let mut out = Vec::new();
        let tokens = body.split(|c: char| !(c.is_ascii_alphanumeric() || c == ',' || c == '-'));
        for token in tokens.filter(|t| !t.is_empty()) {
            if let Some(i) = channels.iter().position(|c| c.name == token) {
                out.push(i);
                continue;
            }
            for part in token.split(',').filter(|p| !p.is_empty()) {
                let (a, b) = part.split_once('-').unwrap_or((part, part));
                let (a, b): (usize, usize) = (a.parse().unwrap(), b.parse().unwrap());
                out.extend((a..=b).map(|n| n - 1));
            }
        }
        out.sort_unstable();
        out
    }

    #[test]
    fn every_channel_in_view_is_named_or_numbered_exactly_once_at_any_span() {
        // Seeded plans of 2 to 40 channels, crowded and spread, in views from far out to close
        // in, at 20, 74 and 154 columns (80 and 160 column terminals).
        let mut seed: u64 = 0x9e37_79b9_7f4a_7c15;
        let mut next = move || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            (seed >> 11) as f64 / (1u64 << 53) as f64
        };
        let names = ["ops", "yard", "gate", "ferry", "beacon", "telem", "backhaul"];
        for trial in 0..400 {
            let count = 2 + (next() * 39.0) as usize;
            let channels: Vec<ChannelMark> = (0..count)
                .map(|i| {
                    let name = if i < names.len() { names[i].to_string() } else { format!("c{i}") };
                    let width_hz = 1e3 * (1.0 + 300.0 * next() * next());
                    ChannelMark::new(&name, 433e6 + 2e6 * next(), width_hz)
                })
                .collect();
            let span_hz = 10f64.powf(3.5 + 3.0 * next());
            let lo_hz = 433e6 + (2e6 - span_hz) * next();
            let view = View::new(lo_hz, lo_hz + span_hz);
            let in_view: Vec<usize> = (0..count)
                .filter(|&i| {
                    let c = &channels[i];
                    c.center_hz + 0.5 * c.width_hz >= view.lo_hz
                        && c.center_hz - 0.5 * c.width_hz < view.hi_hz
                })
                .collect();
            for cols in [20u16, 74, 154] {
                let row = row_text(view, &channels, cols);
                let got = shown(&row, &channels);
                if row.contains('…') {
                    // Too many numbers for the row (40 channels in 20 columns): the list is cut
                    // where it says so, and what is shown is still right and shown once.
                    assert!(cols == 20 || count > 12, "trial {trial} at {cols} columns:\n{row}");
                    let mut once = got.clone();
                    once.dedup();
                    assert_eq!(once, got, "trial {trial} at {cols} columns:\n{row}");
                    assert!(got.iter().all(|i| in_view.contains(i)), "trial {trial}:\n{row}");
                    continue;
                }
                assert_eq!(got, in_view, "trial {trial} at {cols} columns:\n{row}");
            }
        }
    }
}
