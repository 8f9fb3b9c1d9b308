//! What each channel of the plan is doing, for the channel panel: its power in the newest row,
//! how busy it was over the last minute and when it was last heard.
//!
//! "Busy" is the occupancy of ITU-R SM.1880 as `log` decides it, with the same function
//! ([`crate::measure::occupancy::read_channel`]): a row is occupied when the channel's power (the
//! PSD integrated over the channel) exceeds the noise in the channel (floor density × width) by
//! the channel's threshold (the plan's `threshold_db`, else 10 dB); busy % is occupied rows over
//! rows in the last [`BUSY_WINDOW_S`] seconds of input. The floor density is the monitor's own
//! estimate from its average trace, refreshed twice a second (`log` tracks its own floor with
//! [`crate::measure::noise::tracker`], so the two can differ by a fraction of a dB).
//!
//! An alarm threshold (dBFS of channel power, from the plan's `alarm_dbfs` or set with a key) is
//! watched here too. An alarm opens when the power passes the threshold from below (the onset,
//! which the monitor rings once) and ends when the power has stayed at or under it for the
//! hold-off ([`DEFAULT_ALARM_HOLD_S`] of input unless set): a voice channel's key-ups a few
//! seconds apart are one alarm, not one per transmission (the hang time of a squelch, common
//! practice). Its end is reported with how long it lasted and its highest power.

use super::state::ChannelMark;
use crate::dsp::Spectrum;
use crate::measure::occupancy::{read_channel, ChannelDef};
use crate::units::db;
use std::collections::VecDeque;

/// The window of input over which busy % is counted, seconds.
pub const BUSY_WINDOW_S: f64 = 60.0;

/// How long a channel's power must stay at or under its alarm threshold before the alarm ends,
/// seconds of input.
pub const DEFAULT_ALARM_HOLD_S: f64 = 5.0;

/// A channel alarm opening or ending with a row.
#[derive(Clone, Debug, PartialEq)]
pub enum AlarmEvent {
    /// The power passed the threshold from below, with no alarm open.
    Onset { channel: usize },
    /// The power stayed at or under the threshold for the hold-off (or the threshold was
    /// cleared): the alarm lasted from `start_s` to `end_s` (seconds of input, the end being
    /// the last row over the threshold) and peaked at `peak_dbfs`.
    End { channel: usize, start_s: f64, end_s: f64, peak_dbfs: f64 },
}

/// An open alarm: when it started, when the power was last over the threshold, its peak.
#[derive(Clone, Debug, PartialEq)]
struct OpenAlarm {
    start_s: f64,
    last_over_s: f64,
    peak_dbfs: f64,
}

/// One channel's recent activity.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ChannelState {
    /// Channel power in the newest row, dBFS.
    pub power_dbfs: Option<f64>,
    /// Whether the newest row was occupied.
    pub occupied_now: bool,
    /// Time (seconds of input) and occupation of each row in the window, oldest first.
    recent: VecDeque<(f64, bool)>,
    occupied_in_window: usize,
    /// End sample of the newest occupied row.
    pub last_heard: Option<u64>,
    /// An alarm is open on the channel (its power is over the threshold, or was within the
    /// hold-off).
    pub alarm_on: bool,
    open_alarm: Option<OpenAlarm>,
}

impl ChannelState {
    /// Occupancy over the window, percent; `None` before the first row.
    pub fn busy_pct(&self) -> Option<f64> {
        (!self.recent.is_empty())
            .then(|| 100.0 * self.occupied_in_window as f64 / self.recent.len() as f64)
    }

    /// Seconds of input the window covers so far.
    pub fn window_s(&self) -> f64 {
        match (self.recent.front(), self.recent.back()) {
            (Some(a), Some(b)) => b.0 - a.0,
            _ => 0.0,
        }
    }

    fn push(&mut self, time_s: f64, occupied: bool) {
        self.recent.push_back((time_s, occupied));
        self.occupied_in_window += usize::from(occupied);
        while self.recent.front().is_some_and(|(t, _)| *t <= time_s - BUSY_WINDOW_S) {
            if let Some((_, o)) = self.recent.pop_front() {
                self.occupied_in_window -= usize::from(o);
            }
        }
    }
}

/// Activity of every channel, in plan order.
#[derive(Clone, Debug, PartialEq)]
pub struct ChannelActivity {
    pub channels: Vec<ChannelState>,
    /// The alarm hold-off, seconds of input.
    pub hold_s: f64,
}

impl Default for ChannelActivity {
    fn default() -> ChannelActivity {
        ChannelActivity::new(0)
    }
}

impl ChannelActivity {
    pub fn new(n: usize) -> ChannelActivity {
        ChannelActivity { channels: vec![ChannelState::default(); n], hold_s: DEFAULT_ALARM_HOLD_S }
    }

    /// Ends every open alarm now (the monitor closing, or a threshold cleared), at the last row
    /// over its threshold.
    pub fn end_alarms(&mut self, only: Option<usize>) -> Vec<AlarmEvent> {
        let mut ended = Vec::new();
        for (i, st) in self.channels.iter_mut().enumerate() {
            if only.is_some_and(|o| o != i) {
                continue;
            }
            if let Some(a) = st.open_alarm.take() {
                st.alarm_on = false;
                ended.push(AlarmEvent::End {
                    channel: i,
                    start_s: a.start_s,
                    end_s: a.last_over_s,
                    peak_dbfs: a.peak_dbfs,
                });
            }
        }
        ended
    }

    /// Takes one row. `floor_density` is the noise density (FS²/Hz); without it occupancy is
    /// not judged yet (power is still shown). Returns the alarms that opened or ended with
    /// this row. `rate_hz` is the input's sample rate, which times the row (a panorama's row
    /// has the sweep's span as its own rate).
    pub fn push(
        &mut self,
        row: &Spectrum,
        rate_hz: f64,
        marks: &[ChannelMark],
        floor_density: Option<f64>,
    ) -> Vec<AlarmEvent> {
        let time_s = row.end_sample as f64 / rate_hz;
        let hold_s = self.hold_s;
        let mut events = Vec::new();
        for (i, (st, ch)) in self.channels.iter_mut().zip(marks).enumerate() {
            let def = ChannelDef {
                low_hz: ch.center_hz - 0.5 * ch.width_hz,
                high_hz: ch.center_hz + 0.5 * ch.width_hz,
                threshold_db: ch.threshold_db,
            };
            // A panorama's channel never in view has no power and no occupancy to show.
            if row.never_saw(def.low_hz, def.high_hz) {
                st.power_dbfs = None;
                st.occupied_now = false;
                continue;
            }
            // Without a floor the power is still read; occupancy waits for one.
            let reading = read_channel(row, &def, floor_density.unwrap_or(f64::INFINITY));
            let p = reading.power;
            st.power_dbfs = (p > 0.0).then(|| db(p));
            if floor_density.is_some() {
                let occupied = reading.occupied;
                st.occupied_now = occupied;
                st.push(time_s, occupied);
                if occupied {
                    st.last_heard = Some(row.end_sample);
                }
            }
            let over = ch.alarm_dbfs.is_some_and(|a| st.power_dbfs.is_some_and(|p| p > a));
            let power = st.power_dbfs.unwrap_or(f64::NEG_INFINITY);
            match (&mut st.open_alarm, over) {
                (Some(a), true) => {
                    a.last_over_s = time_s;
                    a.peak_dbfs = a.peak_dbfs.max(power);
                }
                (Some(a), false) if time_s - a.last_over_s >= hold_s => {
                    let a = st.open_alarm.take().expect("matched Some");
                    events.push(AlarmEvent::End {
                        channel: i,
                        start_s: a.start_s,
                        end_s: a.last_over_s,
                        peak_dbfs: a.peak_dbfs,
                    });
                }
                (None, true) => {
                    st.open_alarm =
                        Some(OpenAlarm { start_s: time_s, last_over_s: time_s, peak_dbfs: power });
                    events.push(AlarmEvent::Onset { channel: i });
                }
                _ => {}
            }
            st.alarm_on = st.open_alarm.is_some();
        }
        events
    }
}

/// A row with a known channel power, for the tests of the channel tracking and its panel.
#[cfg(test)]
pub mod testing {
    use crate::dsp::{Spectrum, Window, WindowKind};

    /// 1024 bins of 1 kHz at 1.024 MS/s around 0 Hz, density 1e-9 FS²/Hz everywhere, and
    /// `extra` added (FS²/Hz) over 10..20 kHz; the row ends at sample `end`.
    pub fn row(extra: f64, end: u64) -> Spectrum {
        let w = Window::new(WindowKind::Rect, 1024);
        let mut s = Spectrum::from_power_sum(&[0.0; 1024], 1, 2.0, &w, 1.024e6, 0.0, 0, end);
        for (i, p) in s.psd.iter_mut().enumerate() {
            let f = s.geometry.freq_of_bin(i as f64);
            *p = 1e-9 + if (10e3..20e3).contains(&f) { extra } else { 0.0 };
        }
        s.end_sample = end;
        s
    }
}

#[cfg(test)]
mod tests {
    use super::testing::row;
    use super::*;

    fn mark(alarm: Option<f64>) -> ChannelMark {
        ChannelMark {
            name: "yard".into(),
            center_hz: 15e3 - 500.0,
            width_hz: 10e3,
            threshold_db: 10.0,
            alarm_dbfs: alarm,
        }
    }

    #[test]
    fn power_busy_and_last_heard_follow_a_known_schedule() {
        // Channel 10..20 kHz (bins centred 10..19 kHz, exactly ten of them inside). Noise in it:
        // 1e-9 × 10 kHz = 1e-5 FS² (−50 dBFS). A burst adds 1e-6 FS²/Hz: 1e-2 FS² (−20 dBFS),
        // 30 dB over the noise, so occupied at a 10 dB threshold; without it the channel
        // holds the noise alone, 0 dB over, so quiet. Schedule: one row a second, busy in rows
        // 0..15 of every 60 → 25 % over any full minute (SM.1880: occupied / all samples).
        let m = [mark(None)];
        let mut a = ChannelActivity::new(1);
        let rate = 1.024e6;
        for k in 0..180u64 {
            let busy = k % 60 < 15;
            let end = ((k + 1) as f64 * rate) as u64;
            a.push(&row(if busy { 1e-6 } else { 0.0 }, end), rate, &m, Some(1e-9));
            let st = &a.channels[0];
            assert_eq!(st.occupied_now, busy);
            let want = if busy { -20.0 } else { -50.0 };
            let got = st.power_dbfs.unwrap();
            assert!(
                (got - crate::units::db(crate::units::undb(want) + if busy { 1e-5 } else { 0.0 }))
                    .abs()
                    < 1e-6,
                "{got}"
            );
        }
        let st = &a.channels[0];
        assert!((st.busy_pct().unwrap() - 25.0).abs() < 1e-9, "{:?}", st.busy_pct());
        assert!((st.window_s() - 59.0).abs() < 1e-6);
        // Last occupied row: k = 134 (120 + 14), ending at 135 s.
        assert_eq!(st.last_heard, Some((135.0 * rate) as u64));
    }

    #[test]
    fn an_alarm_holds_over_short_gaps_and_ends_after_the_hold_off() {
        // Rows one second apart (row k ends at k + 1 s); a 5 s hold-off. Over the threshold in
        // rows 1-2, under in 3-4 (2 s: within the hold), over in 5, then under: the last row
        // over ends at 6 s, so the alarm ends with row 10, the first to end 5 s after it. A
        // burst in row 20 opens a new alarm.
        let m = [mark(Some(-30.0))];
        let mut a = ChannelActivity::new(1);
        let rate = 1.024e6;
        let mut events = Vec::new();
        for k in 0..25u64 {
            let busy = matches!(k, 1 | 2 | 5 | 20);
            let end = ((k + 1) as f64 * rate) as u64;
            for e in a.push(&row(if busy { 1e-6 } else { 0.0 }, end), rate, &m, None) {
                events.push((k, e));
            }
        }
        assert_eq!(events.len(), 3, "{events:?}");
        assert_eq!(events[0], (1, AlarmEvent::Onset { channel: 0 }));
        let (k, AlarmEvent::End { start_s, end_s, peak_dbfs, .. }) = &events[1] else {
            panic!("{events:?}");
        };
        // The last row over ends at 6 s; the alarm ends with the row ending 5 s later (11 s).
        assert_eq!(*k, 10);
        assert!((start_s - 2.0).abs() < 1e-9 && (end_s - 6.0).abs() < 1e-9, "{start_s} {end_s}");
        assert!((peak_dbfs - db(1e-2 + 1e-5)).abs() < 1e-9);
        assert_eq!(events[2], (20, AlarmEvent::Onset { channel: 0 }));
        assert!(a.channels[0].alarm_on);
        // Closing ends it where it was last over.
        let ended = a.end_alarms(None);
        assert!(
            matches!(ended[..], [AlarmEvent::End { end_s, .. }] if (end_s - 21.0).abs() < 1e-9)
        );
        assert!(!a.channels[0].alarm_on);
        // Without a floor, occupancy is not judged.
        assert_eq!(a.channels[0].busy_pct(), None);
    }
}
