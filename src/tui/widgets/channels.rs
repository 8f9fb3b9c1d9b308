//! The channel panel (`t` with a plan): for each channel its number (as on the plan row when
//! names do not fit there), name, centre, power now, how busy it was over the last minute
//! (ITU-R SM.1880 occupancy, as `log` counts it) and when it was last heard. A channel over its
//! alarm threshold is highlighted.

use super::super::channels::{ChannelActivity, BUSY_WINDOW_S};
use super::super::colour::Theme;
use super::super::state::{ChannelMark, Levels};
use super::super::timeline::TimeBase;
use super::table::{put_row, render_frame};
use crate::units::format_hz;
use ratatui::buffer::Buffer;
use ratatui::layout::Rect;
use ratatui::widgets::Widget;

pub struct ChannelPanel<'a> {
    pub channels: &'a [ChannelMark],
    /// The first row on show.
    pub first: usize,
    pub activity: &'a ChannelActivity,
    pub levels: Levels,
    pub times: &'a TimeBase,
    pub marker_hz: Option<f64>,
    pub theme: &'a Theme,
}

impl ChannelPanel<'_> {
    fn header(&self) -> String {
        format!(
            " # {:<10} {:<16} {:>10} {:>8} {:>13}",
            "Channel",
            "Centre",
            format!("Power {}", self.levels.unit()),
            format!("Busy {:.0}m", BUSY_WINDOW_S / 60.0),
            "Last heard"
        )
    }

    fn row(&self, i: usize, ch: &ChannelMark) -> String {
        let st = self.activity.channels.get(i);
        let power = st
            .and_then(|s| s.power_dbfs)
            .map_or("–".to_string(), |p| format!("{:.1}", self.levels.shown(p)));
        let busy = st.and_then(|s| s.busy_pct()).map_or("–".to_string(), |b| format!("{b:.0} %"));
        let heard = match st {
            Some(s) if s.occupied_now => "now".to_string(),
            Some(s) => s.last_heard.map_or("–".to_string(), |end| self.times.long_label(end)),
            None => "–".to_string(),
        };
        let alarm = match ch.alarm_dbfs {
            Some(a) => format!("  alarm > {:.0}", self.levels.shown(a)),
            None => String::new(),
        };
        let name: String = ch.name.chars().take(10).collect();
        format!(
            "{:>2} {:<10} {:<16} {:>10} {:>8} {:>13}{alarm}",
            i + 1,
            name,
            format_hz(ch.center_hz),
            power,
            busy,
            heard
        )
    }
}

impl Widget for &ChannelPanel<'_> {
    fn render(self, area: Rect, buf: &mut Buffer) {
        if area.height == 0 || area.width == 0 {
            return;
        }
        render_frame(area, self.channels.len(), self.first, &self.header(), self.theme, buf);
        for (i, ch) in self.channels.iter().enumerate().skip(self.first) {
            let alarm = self.activity.channels.get(i).is_some_and(|s| s.alarm_on);
            let marked = self.marker_hz.is_some_and(|m| ch.contains(m));
            let style = if alarm {
                self.theme.warn
            } else if marked {
                self.theme.marker
            } else {
                self.theme.label
            };
            put_row(area, i - self.first, &self.row(i, ch), style, buf);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::pipeline::clock::Clock;
    use crate::tui::channels::testing::row;
    use crate::tui::colour::Depth;
    use crate::tui::widgets::text_lines;
    use time::format_description::well_known::Rfc3339;
    use time::OffsetDateTime;

    #[test]
    fn each_channel_shows_power_busy_and_last_heard() {
        let theme = Theme::new(Depth::Mono);
        let mut yard = ChannelMark::new("yard", 14.5e3, 10e3);
        yard.alarm_dbfs = Some(-30.0);
        let channels = [yard, ChannelMark::new("ferry-landing-west", -100e3, 10e3)];
        let mut act = ChannelActivity::new(2);
        // Four rows a second apart; the yard is busy in the first (−20 dBFS, 30 dB over its
        // noise of −50 dBFS), then quiet: 25 % busy, last heard at the end of the first row.
        for k in 0..4u64 {
            let extra = if k == 0 { 1e-6 } else { 0.0 };
            act.push(&row(extra, (k + 1) * 1_024_000), 1.024e6, &channels, Some(1e-9));
        }
        let start = OffsetDateTime::parse("2031-04-17T06:30:00Z", &Rfc3339).unwrap();
        let times = TimeBase::new(Clock::new(1.024e6, Some(start)), None);
        let panel = ChannelPanel {
            channels: &channels,
            first: 0,
            activity: &act,
            levels: Levels { top_dbfs: 0.0, range_db: 80.0, auto: true, offset_db: None },
            times: &times,
            marker_hz: None,
            theme: &theme,
        };
        let mut buf = Buffer::empty(Rect::new(0, 0, 80, 3));
        (&panel).render(buf.area, &mut buf);
        let lines = text_lines(&buf);
        assert_eq!(
            lines[0].trim_end(),
            " # Channel    Centre           Power dBFS  Busy 1m    Last heard"
        );
        // Power now: the noise alone in 10 kHz, 1e-5 FS² = −50.0 dBFS.
        assert_eq!(
            lines[1].trim_end(),
            " 1 yard       14.500 kHz            -50.0     25 %  06:30:01 UTC  alarm > -30"
        );
        assert!(lines[2].starts_with(" 2 ferry-land -100.000 kHz"), "{}", lines[2]);
        assert!(lines[2].trim_end().ends_with("0 %             –"), "{}", lines[2]);
    }
}
