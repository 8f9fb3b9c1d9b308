//! The groups of state the monitor keeps, each with the few methods that belong to it. Their
//! fields are visible to the `app` module only; widgets read plain views built from them
//! (`app::views`).

use super::super::channels::{AlarmEvent, ChannelActivity};
use super::super::colour::{Depth, MapKind, Palette, Theme};
use super::super::layout::Screen;
use super::super::state::{AlarmLog, BandReading, ChannelMark, SortKey, TableMode};
use crate::dsp::{Spectrum, Window};
use crate::measure::{Detection, Signal};
use crate::pipeline::clock::rfc3339_ms;
use crate::units::{db, round_dp, undb};
use std::time::Instant;

/// The two markers and what they read.
#[derive(Clone, Debug, Default)]
pub(super) struct Markers {
    /// The moving marker, Hz.
    pub(super) at: Option<f64>,
    /// The reference marker, Hz.
    pub(super) reference: Option<f64>,
    /// What the markers read (frequency, dBFS), refreshed with the measurements and whenever a
    /// marker moves.
    pub(super) reading: Option<(f64, f64)>,
    pub(super) ref_reading: Option<(f64, f64)>,
    /// The band between the markers, when both are set.
    pub(super) band: Option<BandReading>,
}

/// How the monitor is coloured.
#[derive(Clone, Debug)]
pub(super) struct Look {
    pub(super) depth: Depth,
    pub(super) palette: Palette,
    pub(super) theme: Theme,
}

impl Look {
    pub(super) fn new(depth: Depth) -> Look {
        Look { depth, palette: Palette::new(depth, MapKind::Viridis), theme: Theme::new(depth) }
    }

    pub(super) fn next_map(&mut self) {
        self.palette = Palette::new(self.depth, self.palette.map.next());
    }
}

/// The signal table (or channel panel) below the waterfall.
#[derive(Clone, Debug)]
pub(super) struct TableState {
    /// The signals, in the order of `sort`.
    pub(super) signals: Vec<Signal>,
    pub(super) sort: SortKey,
    pub(super) mode: TableMode,
    /// The first row on show when the rows do not all fit.
    pub(super) first_row: usize,
}

impl Default for TableState {
    fn default() -> TableState {
        TableState {
            signals: Vec::new(),
            sort: SortKey::Frequency,
            mode: TableMode::Signals,
            first_row: 0,
        }
    }
}

/// What the last measurement found, and how it looks for signals.
#[derive(Clone, Debug, Default)]
pub(super) struct Measured {
    /// How the signal list tells signals from noise (`--false-alarm`).
    pub(super) detection: Detection,
    /// Noise power in one RBW, dBFS.
    pub(super) floor_dbfs: Option<f64>,
    /// Noise density, FS²/Hz.
    pub(super) floor_density: Option<f64>,
    /// The window of the rows, kept for refining tone readings between bins.
    pub(super) window: Option<Window>,
    pub(super) last: Option<Instant>,
}

/// The time cursor while scrolled back through the history.
#[derive(Clone, Debug, Default)]
pub(super) struct TimeCursor {
    /// Absolute history index of the cursor's row; `None` live.
    pub(super) index: Option<u64>,
    /// The cursor's row as a spectrum, feeding the current trace and the table.
    pub(super) spectrum: Option<Spectrum>,
}

/// What the monitor tells the user besides the picture.
#[derive(Clone, Debug, Default)]
pub(super) struct Alerts {
    /// A short message on the marker line (a key that could not do what it says, a file
    /// written) and when it goes.
    pub(super) notice: Option<(String, Instant)>,
    /// Terminal bells to ring (alarm onsets).
    pub(super) bells: u32,
}

/// What the last frame drew, for the painter, mouse clicks and marker steps.
#[derive(Clone, Copy, Debug, Default)]
pub(super) struct FrameInfo {
    /// Bumped whenever every waterfall line must be drawn again (zoom, scale, colours).
    pub(super) epoch: u64,
    /// The waterfall is drawn by the scrolling painter, not through the cell buffer.
    pub(super) external: bool,
    pub(super) screen: Option<Screen>,
}

/// The channel plan: its marks, whether its row shows, what each channel is doing and where
/// alarm onsets are recorded.
///
/// Channel alarms: a threshold of channel power per channel (the plan's `alarm_dbfs`, or armed
/// with `A` on the marker's channel), watched row by row in [`ChannelActivity`]. Each onset (the
/// power passing the threshold from below) rings the terminal bell once, highlights the channel
/// and, with `--alarm-log FILE`, appends one JSON Lines record:
///
/// ```json
/// {"kind":"alarm","time":"2031-04-17T06:30:02.150Z","input_s":2.15,"channel":"gate",
///  "center_hz":433262500.0,"width_hz":12500.0,"power_dbfs":-39.8,"threshold_dbfs":-80.1}
/// ```
///
/// `time` is the UTC time of the row's end when the start of the input is known, else `null`;
/// `input_s` counts seconds from the first sample. Each record is flushed as it is written.
pub(super) struct PlanState {
    pub(super) marks: Vec<ChannelMark>,
    pub(super) visible: bool,
    pub(super) activity: ChannelActivity,
    pub(super) alarm_log: Option<AlarmLog>,
}

impl PlanState {
    pub(super) fn new(marks: Vec<ChannelMark>) -> PlanState {
        PlanState {
            visible: !marks.is_empty(),
            activity: ChannelActivity::new(marks.len()),
            marks,
            alarm_log: None,
        }
    }

    /// The channel a frequency falls in.
    pub(super) fn channel_at(&self, freq_hz: f64) -> Option<&ChannelMark> {
        self.marks.iter().find(|c| c.contains(freq_hz))
    }

    /// Records the alarm onsets and ends of `events`, at the row ending before sample `end`
    /// (`why_ended`: `quiet` when the hold-off passed, `cleared`, `closed`); returns the error of
    /// the log, once, when a write fails.
    pub(super) fn log_alarms(
        &mut self,
        events: &[AlarmEvent],
        end: u64,
        times: &super::super::timeline::TimeBase,
        why_ended: &str,
    ) -> Option<String> {
        let log = self.alarm_log.as_mut()?;
        let was_failed = log.failed.is_some();
        let hold_s = self.activity.hold_s;
        for e in events {
            let i = match e {
                AlarmEvent::Onset { channel } | AlarmEvent::End { channel, .. } => *channel,
            };
            let (Some(ch), Some(st)) = (self.marks.get(i), self.activity.channels.get(i)) else {
                continue;
            };
            let mut v = serde_json::json!({
                "kind": "alarm",
                "time": times.utc_at(end).and_then(rfc3339_ms),
                "input_s": times.clock.seconds(end),
                "channel": ch.name,
                "center_hz": ch.center_hz,
                "width_hz": ch.width_hz,
                "power_dbfs": st.power_dbfs.map(|p| round_dp(p, 2)),
                "threshold_dbfs": ch.alarm_dbfs.map(|p| round_dp(p, 2)),
            });
            if let AlarmEvent::End { start_s, end_s, peak_dbfs, .. } = e {
                let at = |s: f64| {
                    let sample = (s * times.clock.rate).round() as u64;
                    times.utc_at(sample).and_then(rfc3339_ms)
                };
                v = serde_json::json!({
                    "kind": "alarm_end",
                    "time": times.utc_at(end).and_then(rfc3339_ms),
                    "input_s": times.clock.seconds(end),
                    "channel": ch.name,
                    "center_hz": ch.center_hz,
                    "width_hz": ch.width_hz,
                    "started": at(*start_s),
                    "last_over": at(*end_s),
                    "duration_s": round_dp(end_s - start_s, 3),
                    "peak_power_dbfs": round_dp(*peak_dbfs, 2),
                    "hold_s": hold_s,
                    "ended": why_ended,
                });
            }
            log.record(&v);
        }
        (!was_failed).then(|| log.failed.clone()).flatten()
    }

    /// `A`: arms the alarm of the channel at `marker_hz` at its occupancy threshold (the noise
    /// in the channel plus its threshold, as `log` counts a channel busy), or clears an armed
    /// one. Returns what to tell the user.
    pub(super) fn toggle_alarm(
        &mut self,
        marker_hz: Option<f64>,
        floor_density: Option<f64>,
    ) -> String {
        let Some(m) = marker_hz else {
            return "put the marker on a channel first".into();
        };
        let Some(i) = self.marks.iter().position(|c| c.contains(m)) else {
            return if self.marks.is_empty() {
                super::NO_PLAN.into()
            } else {
                "the marker is in no channel of the plan".into()
            };
        };
        let ch = &mut self.marks[i];
        if ch.alarm_dbfs.take().is_some() {
            return format!("alarm on {} cleared", ch.name);
        }
        let Some(d) = floor_density else {
            return "no noise floor yet; try again in a moment".into();
        };
        let level = db(d * ch.width_hz * undb(ch.threshold_db));
        ch.alarm_dbfs = Some(level);
        format!("alarm on {} above {:.1} dBFS (A again clears)", ch.name, level)
    }
}

#[cfg(test)]
mod tests {
    use super::super::App;
    use super::*;
    use crate::tui::channels::testing::row;
    use crate::tui::colour::Depth;
    use crate::tui::input::Intent;
    use crate::tui::state::SourceSummary;
    use std::io::Write;
    use std::sync::{Arc, Mutex};
    use std::time::Instant;

    /// A writer whose bytes the test can read afterwards.
    #[derive(Clone, Default)]
    struct Shared(Arc<Mutex<Vec<u8>>>);

    impl Write for Shared {
        fn write(&mut self, b: &[u8]) -> std::io::Result<usize> {
            self.0.lock().unwrap().extend_from_slice(b);
            Ok(b.len())
        }
        fn flush(&mut self) -> std::io::Result<()> {
            Ok(())
        }
    }

    fn app(log: Shared) -> App {
        use time::format_description::well_known::Rfc3339;
        let start = time::OffsetDateTime::parse("2031-04-17T06:30:00Z", &Rfc3339).unwrap();
        let source = SourceSummary {
            label: "t".into(),
            sample_rate_hz: 1.024e6,
            center_hz: 0.0,
            total_samples: None,
            live: false,
            speed: None,
            looping: false,
            clock: crate::pipeline::clock::Clock::new(1.024e6, Some(start)),
        };
        let settings = crate::pipeline::latest::RowSettings {
            fft_size: 1024,
            window: crate::dsp::WindowKind::Rect,
            overlap: 0.5,
            row_rate: 1.0,
            threads: 1,
        };
        let yard = ChannelMark::new("yard", 14.5e3, 10e3);
        let a = App::new(source, settings, Depth::Mono, None, vec![yard], Instant::now());
        a.with_alarm_log(AlarmLog::new(Box::new(log)))
    }

    #[test]
    fn an_armed_channel_rings_once_per_alarm_and_logs_its_onset_and_end() {
        let log = Shared::default();
        let mut a = app(log.clone());
        // Noise 1e-9 FS²/Hz: in the 10 kHz channel 1e-5 FS² (−50 dBFS); the threshold 10 dB
        // over it: −40 dBFS. A burst of 1e-6 FS²/Hz brings the channel to −20 dBFS.
        a.measured.floor_density = Some(1e-9);
        a.markers.at = Some(15e3);
        a.apply(Intent::ToggleAlarm);
        assert!((a.plan.marks[0].alarm_dbfs.unwrap() + 40.0).abs() < 1e-9);
        let rate = 1.024e6;
        // Rows of 1 s: over in rows 1, 2 and 4 (a 1 s gap, within the 5 s hold-off: one alarm),
        // quiet until row 9 (5 s after the last row over, which ends at 5 s), over again in 12.
        for k in 0..14u64 {
            let busy = matches!(k, 1 | 2 | 4 | 12);
            a.push_row(row(if busy { 1e-6 } else { 0.0 }, ((k + 1) as f64 * rate) as u64));
        }
        assert_eq!(a.alerts.bells, 2, "two alarms, one bell each");
        // The second alarm is still open when the monitor closes.
        a.close_alarms();
        let text = String::from_utf8(log.0.lock().unwrap().clone()).unwrap();
        let recs: Vec<serde_json::Value> =
            text.lines().map(|l| serde_json::from_str(l).unwrap()).collect();
        let kinds: Vec<&str> = recs.iter().map(|r| r["kind"].as_str().unwrap()).collect();
        assert_eq!(kinds, ["alarm", "alarm_end", "alarm", "alarm_end"], "{text}");
        assert_eq!(recs[0]["channel"], "yard");
        assert_eq!(recs[0]["time"], "2031-04-17T06:30:02.000Z");
        let p = recs[0]["power_dbfs"].as_f64().unwrap();
        // Rounded to 0.01 dB as every level in the logs.
        assert!((p - db(1e-2 + 1e-5)).abs() <= 0.005, "{p}");
        assert_eq!(p, (p * 100.0).round() / 100.0, "{p}");
        // First alarm: from the row ending at 2 s to the last row over, ending at 5 s; it ends
        // with the row ending at 10 s.
        assert_eq!(recs[1]["input_s"], 10.0);
        assert_eq!(recs[1]["duration_s"], 3.0);
        assert_eq!(recs[1]["started"], "2031-04-17T06:30:02.000Z");
        assert_eq!(recs[1]["ended"], "quiet");
        assert_eq!(recs[2]["input_s"], 13.0);
        assert_eq!(recs[3]["ended"], "closed");
        // A again clears the threshold.
        a.apply(Intent::ToggleAlarm);
        assert_eq!(a.plan.marks[0].alarm_dbfs, None);
    }
}
