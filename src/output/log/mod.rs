//! The occupancy log written by `bandwarden log`: JSON Lines (default) or CSV.
//!
//! Other programs read this file while it grows (`tail -f`, a database loader), possibly after a
//! power cut, so every line is built whole in memory, written with one `write` and flushed: a line
//! is either complete or absent, never half-written.
//!
//! # Records
//!
//! Every line is one flat JSON object with a `kind`. Times: `t_start_s`/`t_end_s` are seconds from
//! the first input sample, computed from sample counts (a replay of the same recording gives the
//! same numbers); `start`/`end` are the same instants in RFC 3339 UTC with milliseconds, or `null`
//! when the time of the first sample is unknown (raw file without `--start`). Levels are dBFS (a
//! complex sample of magnitude 1 is 0 dBFS), frequencies absolute hertz.
//!
//! Every record ends with its id, `run` (the run of `log` that wrote it) and `seq` (from 0), see
//! [`Stamped`]; the `start` record carries `site` when `--site` names one.
//!
//! - `start` (first line): the settings. `version, source, sample_rate_hz, center_hz, fft_size,
//!   window, overlap, rbw_hz, dwell_s` (one measurement sample), `frames_per_sample, interval_s,
//!   hang_s, threshold_db` (default threshold), `obw_percent, floor_memory_s, floor_smoothing_s,
//!   t_start_s, start, time_source` (`sigmf`, `option`, `wall_clock` or `none`); with a
//!   calibration (`--calibration`, `--ref-offset`) also `calibration` (where it came from) and
//!   `level_offset_db` (its offset at `center_hz`).
//! - Levels in dBm: with a calibration, every `_dbfs` level of `interval` and `emission` records
//!   gets a twin beside it (`mean_dbm`, `peak_dbm`, `noise_floor_dbm_per_hz`,
//!   `channel_floor_dbm_per_hz`) at the offset of the channel's centre. `_dbfs` keys always hold
//!   dBFS, so a reader never mistakes one unit for the other.
//! - `channel` (one per plan channel): `channel, center_hz, width_hz, threshold_db`.
//! - `interval` (one per channel per interval): `channel, center_hz, width_hz, t_start_s, t_end_s,
//!   start, end, occupancy_pct` (occupied samples / samples × 100, ITU-R SM.1880), `mean_dbfs`
//!   (mean channel power over the samples), `peak_dbfs` (highest channel power of one sample),
//!   `noise_floor_dbfs_per_hz` (mean tracked noise density), `samples` (measurement samples;
//!   0 when all the interval's input was lost, and then the levels and occupancy are `null`),
//!   `occupied_samples` (fractional: edge samples count by the share an emission filled),
//!   `dropped_samples` (input samples lost in the interval), `partial` (the
//!   interval was cut short by the end of the run), `channel_floor_dbfs_per_hz` (the channel's
//!   own floor: its mean power density over the samples no emission touched; `null` if none).
//! - `emission` (when an emission ends): `channel, center_hz, t_start_s, t_end_s, start, end,
//!   duration_s, peak_dbfs, mean_dbfs` (over its occupied samples), `obw_hz` (99 % occupied
//!   bandwidth of its noise-corrected average spectrum, ITU-R SM.328; `null` if nothing stood
//!   above the noise), `samples` (occupied samples), `partial` (cut short by the end of the run or
//!   by dropped input: it may have gone on), and its kind from its own samples (see
//!   [`crate::pipeline::kinds`]; absent without an OBW): `class` (`cw`, `am`, `fm`, `fsk`, `psk`,
//!   `qam`, `ofdm`, `pulsed`, `noise` or `unknown`), `class_confidence` (0..1), `class_params`
//!   (an object of the parameters that apply: `symbol_rate_hz`, `tones`, `shift_hz`,
//!   `psk_order`, `deviation_hz`, `mod_depth`, `subcarrier_spacing_hz`, `pulse_width_s`,
//!   `pri_s`; in CSV one cell of JSON text) and `designator` (ITU RR Appendix 1: the OBW's
//!   bandwidth code and the class's first symbol, `16K0F`).
//! - `dropped`: `t_start_s, t_end_s, start, end, dropped_samples, gaps, cause`: input samples
//!   missing from the measurement, `cause` `behind` (a live source outran the processing),
//!   `not_a_number` (NaN or infinite samples in the input) or `disconnected` (a network input's
//!   link was down: the time it was down × the sample rate, see [`crate::source::tcp`]). Gaps of
//!   one cause that begin within a second (of input) of the first are one record
//!   ([`occupancy::GAP_MERGE_S`]): `gaps` says how many, `dropped_samples` sums their samples
//!   (with more than one gap, measured samples lie between them, so it is less than the span
//!   `t_start_s`..`t_end_s`). A log therefore holds at most one `dropped` record per cause per
//!   second of input, whatever the input. Records follow the gaps by up to that second, so a
//!   `dropped` record may come after an `interval` record that counts its samples.
//! - `capture` (with `--capture`, when a capture is closed or skipped): `channel, status`
//!   (`saved` or `skipped`), `file` (the capture's `.sigmf-meta`), `cause` (of a skip: `disk_cap`
//!   or `disk_behind`), `t_start_s, t_end_s, start, end` (the IQ in the file), `iq_samples,
//!   bytes, truncated` (the emission outlasted `--capture-max-seconds`).
//! - `alarm` and `clear` (with `--alarms`, see [`alarms`] and [`crate::measure::change`]):
//!   `channel` (or `band`), `what` (`floor_up`, `floor_down`, `busier`, `quieter`,
//!   `new_signal`), `t_start_s, t_end_s, start, end` (the interval that decided it), `since_s,
//!   since` (the change's start by the test's estimate), `statistic, threshold, baseline,
//!   present, unit` (`dBFS/Hz` or `%`), `method` (`cusum` or `ewma`). Written right after that
//!   interval's record; in CSV, rows of their own kind.
//! - `stop` (last line of an orderly end): `t_end_s, end, reason` (`end_of_input`, `limit`,
//!   `interrupted`, `terminated`, `input_error`), `iq_samples` (read), `dropped_samples` (total).
//!
//! Worked example: the shipped demo recording (an invented site) logged with its plan,
//! `--interval 2s`; one line of each kind, for the `telem` channel (FSK bursts of 40 and 80 ms):
//!
//! ```text
//! {"kind":"start","version":"0.1.0","source":"recordings/wrenhollow-demo.sigmf-data","sample_rate_hz":1000000.0,"center_hz":433500000.0,"fft_size":4096,"window":"hann","overlap":0.5,"rbw_hz":366.211,"dwell_s":0.008192,"frames_per_sample":4,"interval_s":2.0,"hang_s":0.032768,"threshold_db":10.0,"obw_percent":99.0,"floor_memory_s":2.0,"floor_smoothing_s":0.5,"t_start_s":0.0,"start":"2031-04-17T06:30:00.000Z","time_source":"sigmf"}
//! {"kind":"channel","channel":"telem","center_hz":433637500.0,"width_hz":12500.0,"threshold_db":10.0}
//! {"kind":"emission","channel":"telem","center_hz":433637500.0,"t_start_s":1.647616,"t_end_s":1.729536,"start":"2031-04-17T06:30:01.648Z","end":"2031-04-17T06:30:01.730Z","duration_s":0.08192,"peak_dbfs":-33.88,"mean_dbfs":-34.1,"obw_hz":7185.5,"samples":10,"partial":false}
//! {"kind":"interval","channel":"telem","center_hz":433637500.0,"width_hz":12500.0,"t_start_s":0.0,"t_end_s":2.0,"start":"2031-04-17T06:30:00.000Z","end":"2031-04-17T06:30:02.000Z","occupancy_pct":6.531,"mean_dbfs":-45.59,"peak_dbfs":-33.88,"noise_floor_dbfs_per_hz":-94.8,"samples":245,"occupied_samples":15.964,"dropped_samples":0,"partial":false}
//! {"kind":"stop","t_end_s":4.0,"end":"2031-04-17T06:30:04.000Z","reason":"end_of_input","iq_samples":4000000,"dropped_samples":0}
//! ```
//!
//! CSV (`--csv`) has one header row naming every field of every kind ([`CSV_COLUMNS`]); each
//! record fills the columns it has and leaves the others empty, so one file holds every kind and
//! the `kind` column tells them apart.

pub mod alarms;
pub mod changes;
pub mod occupancy;
pub mod records;
pub mod rotation;

pub use crate::output::log::records::*;
use serde_json::Value;
use std::io::{self, Write};

/// How records are written.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum LogFormat {
    JsonLines,
    Csv,
}

/// Writes records, one complete line per `write` call, flushed at once.
pub struct LogWriter<W: Write> {
    out: W,
    format: LogFormat,
    line: String,
    /// Bytes written so far (for rotation by size).
    written: u64,
}

impl<W: Write> LogWriter<W> {
    /// Starts a log; a CSV log gets its header row unless `header` is false (appending to a file
    /// that already has one).
    pub fn new(out: W, format: LogFormat, header: bool) -> io::Result<LogWriter<W>> {
        let mut w = LogWriter { out, format, line: String::new(), written: 0 };
        if format == LogFormat::Csv && header {
            w.line = CSV_COLUMNS.join(",");
            w.line.push('\n');
            w.emit()?;
        }
        Ok(w)
    }

    pub fn write(&mut self, record: &Stamped) -> io::Result<()> {
        self.line = match self.format {
            LogFormat::JsonLines => {
                let mut s = serde_json::to_string(record).map_err(io::Error::other)?;
                s.push('\n');
                s
            }
            LogFormat::Csv => csv_line(record),
        };
        self.emit()
    }

    /// The writer, for tests that inspect what was written.
    pub fn into_inner(self) -> W {
        self.out
    }

    /// Bytes this writer has written.
    pub fn bytes_written(&self) -> u64 {
        self.written
    }

    fn emit(&mut self) -> io::Result<()> {
        self.written += self.line.len() as u64;
        self.out.write_all(self.line.as_bytes())?;
        self.out.flush()
    }
}

/// One CSV row (with its newline) for a record, quoting fields as RFC 4180 requires.
pub fn csv_line(record: &Stamped) -> String {
    let value = serde_json::to_value(record).unwrap_or(Value::Null);
    let fields: Vec<String> = CSV_COLUMNS
        .iter()
        .map(|col| match value.get(*col) {
            None | Some(Value::Null) => String::new(),
            Some(Value::String(s)) => csv_quote(s),
            // An object (`class_params`) is one cell of JSON text.
            Some(v @ (Value::Object(_) | Value::Array(_))) => csv_quote(&v.to_string()),
            Some(other) => other.to_string(),
        })
        .collect();
    let mut line = fields.join(",");
    line.push('\n');
    line
}

/// Quotes a text cell as RFC 4180 asks, after defusing a leading `= + - @` (or tab/CR), which a
/// spreadsheet would run as a formula: such a cell gets a leading `'` (common practice for CSV
/// meant to be opened in spreadsheets). Only text cells: numbers are written as numbers.
fn csv_quote(s: &str) -> String {
    let s = if s.starts_with(['=', '+', '-', '@', '\t', '\r']) {
        format!("'{s}")
    } else {
        s.to_string()
    };
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn samples() -> Vec<Stamped> {
        let records = vec![
            Record::Start(StartRecord {
                version: "0.1.0".into(),
                site: Some("wrenhollow-ridge".into()),
                source: "a, \"quoted\" file".into(),
                sample_rate_hz: 2.4e6,
                center_hz: 433.5e6,
                fft_size: 4096,
                window: "hann".into(),
                overlap: 0.5,
                rbw_hz: 878.9,
                dwell_s: 0.0094,
                frames_per_sample: 11,
                interval_s: 60.0,
                hang_s: 0.028,
                threshold_db: 10.0,
                obw_percent: 99.0,
                floor_memory_s: 2.0,
                floor_smoothing_s: 0.5,
                t_start_s: 0.0,
                start: None,
                time_source: "none".into(),
                calibration: Some("file wrenhollow-cal.toml".into()),
                level_offset_db: Some(-21.5),
                panorama: None,
            }),
            Record::Channel(ChannelRecord {
                channel: "north-gate".into(),
                center_hz: 433.1e6,
                width_hz: 25e3,
                threshold_db: 10.0,
            }),
            Record::Interval(IntervalRecord {
                channel: "north-gate".into(),
                center_hz: 433.1e6,
                width_hz: 25e3,
                t_start_s: 0.0,
                t_end_s: 60.0,
                start: Some("2026-05-01T08:00:00.000Z".into()),
                end: Some("2026-05-01T08:01:00.000Z".into()),
                occupancy_pct: Some(30.2),
                mean_dbfs: Some(-36.4),
                peak_dbfs: Some(-30.9),
                noise_floor_dbfs_per_hz: Some(-112.3),
                samples: 6392,
                occupied_samples: 1931.0,
                dropped_samples: 0,
                partial: false,
                channel_floor_dbfs_per_hz: Some(-112.1),
                mean_dbm: Some(-57.9),
                peak_dbm: Some(-52.4),
                noise_floor_dbm_per_hz: Some(-133.8),
                channel_floor_dbm_per_hz: Some(-133.6),
                observation_s: None,
                revisit_s: None,
                state: None,
            }),
            Record::Emission(EmissionRecord {
                channel: "north-gate".into(),
                center_hz: 433.1e6,
                t_start_s: 1.2,
                t_end_s: 1.5,
                start: None,
                end: None,
                duration_s: 0.3,
                peak_dbfs: -31.0,
                mean_dbfs: -31.4,
                peak_dbm: Some(-52.5),
                mean_dbm: Some(-52.9),
                obw_hz: None,
                samples: 32,
                partial: true,
                classified: Some(crate::output::class_fields::ClassFields {
                    class: "fsk".into(),
                    class_confidence: 0.8,
                    class_params: crate::measure::classify::ClassParams {
                        symbol_rate_hz: Some(1200.0),
                        tones: Some(2),
                        shift_hz: Some(1000.0),
                        ..Default::default()
                    },
                    designator: "2K20F".into(),
                }),
            }),
            Record::Dropped(DroppedRecord {
                t_start_s: 2.0,
                t_end_s: 2.1,
                start: None,
                end: None,
                dropped_samples: 240_000,
                gaps: 1,
                cause: "behind".into(),
            }),
            Record::Alarm(AlarmRecord {
                channel: "north-gate".into(),
                what: "floor_up".into(),
                t_start_s: 60.0,
                t_end_s: 120.0,
                start: None,
                end: None,
                since_s: 0.0,
                since: None,
                statistic: 11.5,
                threshold: 5.0,
                baseline: -112.3,
                present: -106.2,
                unit: "dBFS/Hz".into(),
                method: "cusum".into(),
            }),
            Record::Stop(StopRecord {
                t_end_s: 60.0,
                end: None,
                reason: "end_of_input".into(),
                iq_samples: 144_000_000,
                dropped_samples: 240_000,
            }),
        ];
        let stamp = |(seq, record)| Stamped { record, run: "20260501T080000Z-17".into(), seq };
        records.into_iter().enumerate().map(|(i, r)| stamp((i as u64, r))).collect()
    }

    #[test]
    fn json_lines_are_flat_objects_with_a_kind() {
        let mut w = LogWriter::new(Vec::new(), LogFormat::JsonLines, true).unwrap();
        for r in samples() {
            w.write(&r).unwrap();
        }
        let text = String::from_utf8(w.into_inner()).unwrap();
        let kinds: Vec<String> = text
            .lines()
            .map(|l| serde_json::from_str::<Value>(l).unwrap()["kind"].as_str().unwrap().into())
            .collect();
        assert_eq!(kinds, ["start", "channel", "interval", "emission", "dropped", "alarm", "stop"]);
        assert!(text
            .lines()
            .nth(2)
            .unwrap()
            .starts_with(r#"{"kind":"interval","channel":"north-gate""#));
    }

    #[test]
    fn every_field_has_a_csv_column() {
        // A field missing from the header would silently vanish from CSV logs.
        for r in samples() {
            let v = serde_json::to_value(&r).unwrap();
            for key in v.as_object().unwrap().keys() {
                assert!(CSV_COLUMNS.contains(&key.as_str()), "no CSV column for '{key}'");
            }
        }
    }

    #[test]
    fn csv_rows_parse_with_a_csv_reader() {
        let mut w = LogWriter::new(Vec::new(), LogFormat::Csv, true).unwrap();
        for r in samples() {
            w.write(&r).unwrap();
        }
        let bytes = w.into_inner();
        let mut reader = csv::Reader::from_reader(bytes.as_slice());
        let header: Vec<String> = reader.headers().unwrap().iter().map(String::from).collect();
        assert_eq!(header, CSV_COLUMNS);
        let rows: Vec<csv::StringRecord> = reader.records().map(Result::unwrap).collect();
        assert_eq!(rows.len(), 7);
        let source = CSV_COLUMNS.iter().position(|c| *c == "source").unwrap();
        assert_eq!(&rows[0][source], "a, \"quoted\" file");
        assert_eq!(&rows[2][0], "interval");
        assert_eq!(&rows[2][9], "30.2");
        assert_eq!(&rows[3][16], "", "a null OBW is an empty cell");
        assert_eq!(&rows[3][18], "true");
        // The class parameters are one cell holding a JSON object.
        let params = CSV_COLUMNS.iter().position(|c| *c == "class_params").unwrap();
        let cell: Value = serde_json::from_str(&rows[3][params]).unwrap();
        assert_eq!(cell["tones"], 2);
        assert!(cell.get("psk_order").is_none(), "parameters that do not apply are left out");
    }
}

#[cfg(test)]
mod csv_cells {
    use super::csv_quote;

    #[test]
    fn formula_like_text_is_defused_and_plain_text_is_not() {
        // Cells a spreadsheet would evaluate (common practice: prefix a single quote).
        assert_eq!(csv_quote("=HYPERLINK(\"x\")"), "\"'=HYPERLINK(\"\"x\"\")\"");
        assert_eq!(csv_quote("+1"), "'+1");
        assert_eq!(csv_quote("-gate"), "'-gate");
        assert_eq!(csv_quote("@site"), "'@site");
        assert_eq!(csv_quote("north-gate"), "north-gate");
        assert_eq!(csv_quote("a,b"), "\"a,b\"");
    }
}
