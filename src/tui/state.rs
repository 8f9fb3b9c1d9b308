//! The small pieces of the monitor's state that widgets read: what is being watched, how levels
//! are shown, the plan's channel marks, the table's order and mode, the band between the
//! markers, where alarms are written and the frame and row counters. Plain data, so every layer
//! of the monitor (the app, its widgets, the painter) can share them without importing each
//! other.

use crate::measure::{Edges, Signal};
use crate::pipeline::clock::Clock;
use std::io::Write;
use std::time::Instant;

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Mode {
    Live,
    /// The display holds still (rows that arrive are kept in the history, not shown); the time
    /// cursor can then move back through the history.
    Frozen,
    Quit,
}

/// A named channel shown over the spectrum and in the table.
#[derive(Clone, Debug, PartialEq)]
pub struct ChannelMark {
    /// Shown as is; callers remove control characters first.
    pub name: String,
    pub center_hz: f64,
    pub width_hz: f64,
    /// Occupancy threshold over the noise in the channel, dB (the plan's, else 10).
    pub threshold_db: f64,
    /// Alarm when the channel's power exceeds this, dBFS.
    pub alarm_dbfs: Option<f64>,
}

impl ChannelMark {
    /// A channel with the default occupancy threshold and no alarm.
    pub fn new(name: &str, center_hz: f64, width_hz: f64) -> ChannelMark {
        ChannelMark {
            name: name.to_string(),
            center_hz,
            width_hz,
            threshold_db: crate::plan::DEFAULT_THRESHOLD_DB,
            alarm_dbfs: None,
        }
    }

    /// The plan's channels as the monitor marks them: names freed of control characters, each
    /// channel's own threshold (else the default) and power alarm.
    pub fn from_plan(plan: &crate::plan::Plan) -> Vec<ChannelMark> {
        plan.channels
            .iter()
            .map(|c| ChannelMark {
                threshold_db: c.threshold_db.unwrap_or(crate::plan::DEFAULT_THRESHOLD_DB),
                alarm_dbfs: c.alarm_dbfs,
                ..ChannelMark::new(&crate::messages::sanitize(&c.name), c.center_hz, c.width_hz)
            })
            .collect()
    }

    pub fn contains(&self, freq_hz: f64) -> bool {
        (freq_hz - self.center_hz).abs() <= 0.5 * self.width_hz
    }
}

/// Of a sweep (a retuned receiver's steps stitched into one panorama): what the header says,
/// and when a bin is drawn stale.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SweepSummary {
    /// Centre of the panorama (its middle bin), Hz.
    pub center_hz: f64,
    /// Dwells in one sweep.
    pub steps: usize,
    /// Time from one sweep's start to the next's, s.
    pub revisit_s: f64,
    /// A bin not seen for longer than this (one revisit time, in samples of the input) before
    /// its row's end is stale: its level is an older sweep's.
    pub stale_after: u64,
}

/// What the status line says about the input.
#[derive(Clone, Debug, PartialEq)]
pub struct SourceSummary {
    /// Free of control characters.
    pub label: String,
    pub sample_rate_hz: f64,
    pub center_hz: f64,
    pub total_samples: Option<u64>,
    pub live: bool,
    /// Playback speed for files (× real time).
    pub speed: Option<f64>,
    pub looping: bool,
    /// Times of the input's samples (a start time when known).
    pub clock: Clock,
}

/// The vertical scale shared by the spectrum and the waterfall colours.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Levels {
    /// Top of the scale, dBFS.
    pub top_dbfs: f64,
    pub range_db: f64,
    /// Follow the noise floor and the strongest signal.
    pub auto: bool,
    /// Added to every printed level: dBFS → dBm for a calibrated receiver.
    pub offset_db: Option<f64>,
}

impl Levels {
    pub fn bottom_dbfs(&self) -> f64 {
        self.top_dbfs - self.range_db
    }

    pub fn unit(&self) -> &'static str {
        if self.offset_db.is_some() {
            "dBm"
        } else {
            "dBFS"
        }
    }

    /// A dBFS level in printed units.
    pub fn shown(&self, dbfs: f64) -> f64 {
        dbfs + self.offset_db.unwrap_or(0.0)
    }
}

/// Counters for the status line, refreshed once a second so the figures are readable.
#[derive(Clone, Debug)]
pub struct Stats {
    pub fps: f64,
    pub rows_per_s: f64,
    /// Rows taken since the start.
    pub rows_total: u64,
    /// Rows the DSP threw away because the screen was behind.
    pub skipped: u64,
    /// Samples the reader threw away because the DSP was behind.
    pub dropped: u64,
    /// Input time of the newest row, seconds.
    pub position_s: Option<f64>,
    frames: u32,
    /// Rows taken since the last refresh of the figures.
    pub(super) rows: u32,
    since: Instant,
}

impl Stats {
    pub(super) fn new(now: Instant) -> Stats {
        Stats {
            fps: 0.0,
            rows_per_s: 0.0,
            rows_total: 0,
            skipped: 0,
            dropped: 0,
            position_s: None,
            frames: 0,
            rows: 0,
            since: now,
        }
    }

    pub fn count_frame(&mut self, now: Instant) {
        self.frames += 1;
        let dt = now.duration_since(self.since).as_secs_f64();
        if dt >= 1.0 {
            self.fps = self.frames as f64 / dt;
            self.rows_per_s = self.rows as f64 / dt;
            self.frames = 0;
            self.rows = 0;
            self.since = now;
        }
    }
}

/// The order of the signal table's rows.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SortKey {
    /// Lowest frequency first: rows stay put while levels change.
    Frequency,
    /// Largest integrated power first.
    Power,
}

impl SortKey {
    pub fn next(self) -> SortKey {
        match self {
            SortKey::Frequency => SortKey::Power,
            SortKey::Power => SortKey::Frequency,
        }
    }

    pub fn apply(self, signals: &mut [Signal]) {
        match self {
            SortKey::Frequency => signals.sort_by(|a, b| a.freq_hz.total_cmp(&b.freq_hz)),
            SortKey::Power => signals.sort_by(|a, b| b.power_dbfs.total_cmp(&a.power_dbfs)),
        }
    }
}

/// What the table area shows.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum TableMode {
    Signals,
    /// The channel panel (with a plan).
    Channels,
}

/// Power and occupied bandwidth of the band between the two markers.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BandReading {
    pub low_hz: f64,
    pub high_hz: f64,
    /// Integrated power less the noise in the band, dBFS; `None` when nothing stands above
    /// the noise.
    pub power_dbfs: Option<f64>,
    /// 99 % occupied bandwidth (ITU-R SM.328), if the band holds power.
    pub obw: Option<Edges>,
}

/// Where alarm records go (`--alarm-log`), and the first error writing them.
pub struct AlarmLog {
    out: Box<dyn Write>,
    /// The write that failed, if any; no more records are attempted after it.
    pub failed: Option<String>,
}

impl AlarmLog {
    pub fn new(out: Box<dyn Write>) -> AlarmLog {
        AlarmLog { out, failed: None }
    }

    /// Writes one record and flushes it.
    pub fn record(&mut self, v: &serde_json::Value) {
        if self.failed.is_some() {
            return;
        }
        let r = writeln!(self.out, "{v}").and_then(|_| self.out.flush());
        if let Err(e) = r {
            self.failed = Some(format!("{e:#}"));
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn plans_become_the_marks() {
        let plan = crate::plan::Plan::parse(
            "[[channel]]\nname = \"gate\"\ncenter = \"433.2625M\"\nwidth = \"12.5k\"\n",
            "t.toml",
        )
        .unwrap();
        assert_eq!(
            ChannelMark::from_plan(&plan),
            vec![ChannelMark::new("gate", 433.2625e6, 12.5e3)]
        );
    }
}
