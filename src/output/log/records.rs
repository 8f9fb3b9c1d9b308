//! Serialize-only record types of the occupancy log; the schema is documented in
//! [`crate::output::log`].

use crate::output::class_fields::ClassFields;
use serde::Serialize;

/// A record as written: the record, then its id. `run` names the run of `log` that wrote it
/// (UTC start time and process id, e.g. `20261202T090000Z-4821`) and `seq` counts its records
/// from 0, so (site, run, seq) tells every record apart: a consumer of published records drops
/// the duplicates that at-least-once delivery (MQTT QoS 1) may bring. The `start` and `channel`
/// records that open each file of a rotated log keep their first `seq`.
#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct Stamped {
    #[serde(flatten)]
    pub record: Record,
    pub run: String,
    pub seq: u64,
}

/// One line of the log. Serialized flat, with the variant name in `kind`.
#[derive(Serialize, Debug, Clone, PartialEq)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Record {
    Start(StartRecord),
    Channel(ChannelRecord),
    Interval(IntervalRecord),
    Emission(EmissionRecord),
    Dropped(DroppedRecord),
    Capture(CaptureRecord),
    Alarm(AlarmRecord),
    Clear(AlarmRecord),
    Stop(StopRecord),
}

/// The settings of the run, written once at the top.
#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct StartRecord {
    pub version: String,
    /// The monitoring site (`--site`), when named.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub site: Option<String>,
    pub source: String,
    pub sample_rate_hz: f64,
    pub center_hz: f64,
    pub fft_size: usize,
    pub window: String,
    pub overlap: f64,
    pub rbw_hz: f64,
    /// Duration of one measurement sample.
    pub dwell_s: f64,
    pub frames_per_sample: u64,
    pub interval_s: f64,
    /// Hang time actually used (a whole number of samples).
    pub hang_s: f64,
    /// The run's default threshold (channels may override it).
    pub threshold_db: f64,
    pub obw_percent: f64,
    pub floor_memory_s: f64,
    pub floor_smoothing_s: f64,
    pub t_start_s: f64,
    pub start: Option<String>,
    /// Where `start` comes from: `sigmf`, `option`, `wall_clock` or `none`.
    pub time_source: String,
    /// With a calibration: where it came from (`file cal.toml`, `--ref-offset -21.5`); then
    /// every level has a `_dbm` twin beside its `_dbfs` key.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub calibration: Option<String>,
    /// With a calibration: its offset at `center_hz`, dB (dBm = dBFS + this).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub level_offset_db: Option<f64>,
    /// Of a retuned input, the sweep stitched into a panorama (`center_hz` is then the first
    /// step's centre, where the receiver began).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub panorama: Option<PanoramaSetup>,
}

/// What a panorama run swept: its span, steps and their timing.
#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct PanoramaSetup {
    /// Outer edges of the stitched span.
    pub span_low_hz: f64,
    pub span_high_hz: f64,
    /// The distinct centres visited, lowest first.
    pub step_centers_hz: Vec<f64>,
    /// Each step's dwell in the order visited (the plan's, or the recording's captures); for
    /// a stream that reports its retunes, the plan's expected dwells.
    pub dwell_s: Vec<f64>,
    pub settle_s: f64,
    /// Share of each step's span stitched in.
    pub usable: f64,
    /// Where the dwells come from: `hop_plan`, `captures` or `stream` (VITA 49 retunes).
    pub timeline: String,
    /// The holes between the steps' bands, never in view (low and high edge each), lowest
    /// first; absent when the steps tile the span.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub holes_hz: Vec<[f64; 2]>,
}

/// One per channel of the plan, after the start record.
#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct ChannelRecord {
    pub channel: String,
    pub center_hz: f64,
    pub width_hz: f64,
    pub threshold_db: f64,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct IntervalRecord {
    pub channel: String,
    pub center_hz: f64,
    pub width_hz: f64,
    pub t_start_s: f64,
    pub t_end_s: f64,
    pub start: Option<String>,
    pub end: Option<String>,
    pub occupancy_pct: Option<f64>,
    pub mean_dbfs: Option<f64>,
    pub peak_dbfs: Option<f64>,
    pub noise_floor_dbfs_per_hz: Option<f64>,
    pub samples: u64,
    pub occupied_samples: f64,
    pub dropped_samples: u64,
    pub partial: bool,
    /// The channel's own floor: its mean power density over the samples no emission touched;
    /// `null` when every sample was occupied or none measured.
    pub channel_floor_dbfs_per_hz: Option<f64>,
    /// With a calibration: the levels above in dBm (dBm/Hz), beside them, never instead.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub mean_dbm: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub peak_dbm: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub noise_floor_dbm_per_hz: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub channel_floor_dbm_per_hz: Option<f64>,
    /// Of a panorama: seconds the channel was in view in this interval (ITU-R Report SM.2256's
    /// observation time, summed over its visits), and the time from one visit to the next
    /// (its revisit time). Absent for an input that stays at one centre (always in view).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub observation_s: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub revisit_s: Option<f64>,
    /// Of a panorama: `measured`, or `not_measured` for a channel that no step has whole in
    /// view (in a hole between steps, or beyond the span): its occupancy and levels are then
    /// `null` and its `observation_s` 0, never idle, never busy. Absent for an input that stays
    /// at one centre.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub state: Option<String>,
}

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct EmissionRecord {
    pub channel: String,
    pub center_hz: f64,
    pub t_start_s: f64,
    pub t_end_s: f64,
    pub start: Option<String>,
    pub end: Option<String>,
    pub duration_s: f64,
    pub peak_dbfs: f64,
    pub mean_dbfs: f64,
    /// With a calibration: the levels above in dBm, beside them.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub peak_dbm: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub mean_dbm: Option<f64>,
    pub obw_hz: Option<f64>,
    pub samples: u64,
    pub partial: bool,
    /// Its kind from its own samples ([`crate::pipeline::kinds`]): `class`,
    /// `class_confidence`, `class_params`, `designator`; absent when no OBW was measured.
    #[serde(flatten)]
    pub classified: Option<ClassFields>,
}

/// Input samples missing from the measurement: lost because the DSP fell behind a live source,
/// or not numbers (the time line keeps them, so later stamps stay exact).
#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct DroppedRecord {
    pub t_start_s: f64,
    pub t_end_s: f64,
    pub start: Option<String>,
    pub end: Option<String>,
    pub dropped_samples: u64,
    /// How many gaps of this cause the record gathers (those beginning within
    /// [`GAP_MERGE_S`](crate::output::log::occupancy::GAP_MERGE_S) of the first): with more than
    /// one, measured samples lie between them, and `dropped_samples` is less than the span.
    pub gaps: u64,
    /// `behind` (a live source outran the processing), `not_a_number` (NaN/infinite samples) or
    /// `disconnected` (a network input's link was down).
    pub cause: String,
}

/// An emission's IQ saved by `--capture` as a SigMF recording, or skipped.
#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct CaptureRecord {
    pub channel: String,
    /// `saved` or `skipped`.
    pub status: String,
    /// The capture's `.sigmf-meta` (its data is the `.sigmf-data` beside it); `null` if skipped.
    pub file: Option<String>,
    /// Why it was skipped: `disk_cap` (`--capture-max-bytes` reached) or `disk_behind` (the disk
    /// could not keep up with live input); for a saved capture, `disk_cap` when the cap cut it
    /// short (it is then `truncated`).
    pub cause: Option<String>,
    /// The span of IQ in the file (a skipped capture: the emission's start, no end).
    pub t_start_s: f64,
    pub t_end_s: Option<f64>,
    pub start: Option<String>,
    pub end: Option<String>,
    /// IQ samples in the file.
    pub iq_samples: u64,
    /// Bytes of samples in the file.
    pub bytes: u64,
    /// The emission was longer than `--capture-max-seconds`: the file holds its first part.
    pub truncated: bool,
}

/// A change alarm raised (`kind` `alarm`) or ended (`clear`) by `log --alarms`, see
/// [`crate::measure::change`].
#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct AlarmRecord {
    /// A plan channel, or `band` for the floor shared by the whole span.
    pub channel: String,
    /// `floor_up`, `floor_down`, `busier`, `quieter` or `new_signal`.
    pub what: String,
    /// The interval that raised (or cleared) it.
    pub t_start_s: f64,
    pub t_end_s: f64,
    pub start: Option<String>,
    pub end: Option<String>,
    /// The start of the interval with which the change began, by the test's estimate (the same
    /// in the `clear` record).
    pub since_s: f64,
    pub since: Option<String>,
    /// The test's statistic and the threshold it crossed (a clear: its return statistic).
    pub statistic: f64,
    pub threshold: f64,
    /// The usual value (hour-of-week baseline) and the interval's, in `unit`.
    pub baseline: f64,
    pub present: f64,
    /// `dBFS/Hz` (floor) or `%` (occupancy).
    pub unit: String,
    /// `cusum` or `ewma`.
    pub method: String,
}

/// The last line of a run that ended in an orderly way.
#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct StopRecord {
    pub t_end_s: f64,
    pub end: Option<String>,
    /// `end_of_input`, `limit` (`--seconds`), `interrupted` (SIGINT), `terminated` (SIGTERM) or
    /// `input_error`.
    pub reason: String,
    /// Input samples read (delivered or dropped).
    pub iq_samples: u64,
    pub dropped_samples: u64,
}

/// Every CSV column, in order: the union of all record fields.
pub const CSV_COLUMNS: &[&str] = &[
    "kind",
    "channel",
    "center_hz",
    "width_hz",
    "t_start_s",
    "t_end_s",
    "start",
    "end",
    "duration_s",
    "occupancy_pct",
    "samples",
    "occupied_samples",
    "mean_dbfs",
    "peak_dbfs",
    "noise_floor_dbfs_per_hz",
    "threshold_db",
    "obw_hz",
    "dropped_samples",
    "partial",
    "reason",
    "cause",
    "iq_samples",
    "source",
    "sample_rate_hz",
    "fft_size",
    "window",
    "overlap",
    "rbw_hz",
    "dwell_s",
    "frames_per_sample",
    "interval_s",
    "hang_s",
    "obw_percent",
    "floor_memory_s",
    "floor_smoothing_s",
    "time_source",
    "version",
    "site",
    "run",
    "seq",
    "status",
    "file",
    "bytes",
    "truncated",
    "gaps",
    "channel_floor_dbfs_per_hz",
    "what",
    "since_s",
    "since",
    "statistic",
    "threshold",
    "baseline",
    "present",
    "unit",
    "method",
    "class",
    "class_confidence",
    "class_params",
    "designator",
    "calibration",
    "level_offset_db",
    "mean_dbm",
    "peak_dbm",
    "noise_floor_dbm_per_hz",
    "channel_floor_dbm_per_hz",
    "observation_s",
    "revisit_s",
    "state",
];
