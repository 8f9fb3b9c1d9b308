//! Channel alarms: a threshold of channel power per channel (the plan's `alarm_dbfs`, or armed
//! with `A` on the marker's channel), watched row by row in [`super::channels`]. Each onset (the
//! power passing the threshold from below) rings the terminal bell once, highlights the channel
//! and, with `--alarm-log FILE`, appends one JSON Lines record:
//!
//! ```json
//! {"kind":"alarm","time":"2031-04-17T06:30:02.150Z","input_s":2.15,"channel":"gate",
//!  "center_hz":433262500.0,"width_hz":12500.0,"power_dbfs":-39.8,"threshold_dbfs":-80.1}
//! ```
//!
//! `time` is the UTC time of the row's end when the start of the input is known, else `null`;
//! `input_s` counts seconds from the first sample. Each record is flushed as it is written.

use super::app::App;
use crate::pipeline::clock::rfc3339_ms;
use crate::units::{db, undb};
use std::io::Write;

/// Where alarm records go, and the first error writing them.
pub struct AlarmLog {
    pub out: Box<dyn Write>,
    /// The write that failed, if any; no more records are attempted after it.
    pub failed: Option<String>,
}

impl AlarmLog {
    pub fn new(out: Box<dyn Write>) -> AlarmLog {
        AlarmLog { out, failed: None }
    }

    /// Writes one record and flushes it.
    fn record(&mut self, v: &serde_json::Value) {
        if self.failed.is_some() {
            return;
        }
        let r = writeln!(self.out, "{v}").and_then(|_| self.out.flush());
        if let Err(e) = r {
            self.failed = Some(format!("{e:#}"));
        }
    }
}

impl App {
    /// Records the alarm onsets of channels `onsets` at the row ending before sample `end`.
    pub(super) fn log_onsets(&mut self, onsets: &[usize], end: u64) {
        let Some(log) = self.alarm_log.as_mut() else { return };
        for &i in onsets {
            let (Some(ch), Some(st)) = (self.channels.get(i), self.activity.channels.get(i)) else {
                continue;
            };
            let time = self.times.utc_at(end).and_then(rfc3339_ms);
            let v = serde_json::json!({
                "kind": "alarm",
                "time": time,
                "input_s": self.times.clock.seconds(end),
                "channel": ch.name,
                "center_hz": ch.center_hz,
                "width_hz": ch.width_hz,
                "power_dbfs": st.power_dbfs,
                "threshold_dbfs": ch.alarm_dbfs,
            });
            log.record(&v);
        }
        let failed = log.failed.clone();
        if let Some(e) = failed {
            self.say(format!("alarm log: {e}; no more records are written"));
        }
    }

    /// `A`: arms the alarm of the marker's channel at its occupancy threshold (the noise in the
    /// channel plus its threshold, as `log` counts a channel busy), or clears an armed one.
    pub(super) fn toggle_alarm(&mut self) {
        let Some(m) = self.marker_hz else {
            self.say("put the marker on a channel first");
            return;
        };
        let Some(i) = self.channels.iter().position(|c| c.contains(m)) else {
            let why = if self.channels.is_empty() {
                super::app::NO_PLAN
            } else {
                "the marker is in no channel of the plan"
            };
            self.say(why);
            return;
        };
        let ch = &mut self.channels[i];
        if ch.alarm_dbfs.take().is_some() {
            let text = format!("alarm on {} cleared", ch.name);
            self.say(text);
            return;
        }
        let Some(d) = self.floor_density else {
            self.say("no noise floor yet; try again in a moment");
            return;
        };
        let level = db(d * ch.width_hz * undb(ch.threshold_db));
        ch.alarm_dbfs = Some(level);
        let text = format!("alarm on {} above {:.1} dBFS (A again clears)", ch.name, level);
        self.say(text);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tui::app::{ChannelMark, SourceSummary};
    use crate::tui::channels::testing::row;
    use crate::tui::colour::Depth;
    use crate::tui::input::Intent;
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
        let mut a = App::new(source, settings, Depth::Mono, None, vec![yard], Instant::now());
        a.alarm_log = Some(AlarmLog::new(Box::new(log)));
        a
    }

    #[test]
    fn an_armed_channel_rings_once_per_onset_and_logs_it() {
        let log = Shared::default();
        let mut a = app(log.clone());
        // Noise 1e-9 FS²/Hz: in the 10 kHz channel 1e-5 FS² (−50 dBFS); the threshold 10 dB
        // over it: −40 dBFS. A burst of 1e-6 FS²/Hz brings the channel to −20 dBFS.
        a.floor_density = Some(1e-9);
        a.marker_hz = Some(15e3);
        a.apply(Intent::ToggleAlarm);
        assert!((a.channels[0].alarm_dbfs.unwrap() + 40.0).abs() < 1e-9);
        let rate = 1.024e6;
        for (k, busy) in [false, true, true, false, true].into_iter().enumerate() {
            a.push_row(row(if busy { 1e-6 } else { 0.0 }, ((k + 1) as f64 * rate) as u64));
        }
        assert_eq!(a.bells, 2, "two onsets, one bell each");
        let text = String::from_utf8(log.0.lock().unwrap().clone()).unwrap();
        let recs: Vec<serde_json::Value> =
            text.lines().map(|l| serde_json::from_str(l).unwrap()).collect();
        assert_eq!(recs.len(), 2);
        assert_eq!(recs[0]["kind"], "alarm");
        assert_eq!(recs[0]["channel"], "yard");
        assert_eq!(recs[0]["time"], "2031-04-17T06:30:02.000Z");
        assert_eq!(recs[1]["input_s"], 5.0);
        let p = recs[0]["power_dbfs"].as_f64().unwrap();
        assert!((p - db(1e-2 + 1e-5)).abs() < 1e-9, "{p}");
        // A again clears it.
        a.apply(Intent::ToggleAlarm);
        assert_eq!(a.channels[0].alarm_dbfs, None);
    }
}
