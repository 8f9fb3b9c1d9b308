//! The change alarms of the logs (`log --alarms`): each `alarm` with its `clear`, if one came,
//! listed in the text report and in `--json`; and the baseline file (`--save-baseline`) learnt
//! from the interval records read, in the format of [`crate::measure::change::baseline`].

use super::LogSummary;
use crate::measure::change::baseline::{hour_of_week, Quantity, BAND};
use serde_json::{json, Value};
use std::fmt::Write;

/// One alarm record (or its clear) as read, with the site it counts under.
#[derive(Clone, Debug, PartialEq)]
pub struct AlarmRow {
    pub site: String,
    /// `alarm` or `clear`.
    pub kind: String,
    pub record: Value,
}

/// The fields of a record the report shows (the rest are the log's bookkeeping).
const FIELDS: &[&str] = &[
    "channel",
    "what",
    "start",
    "t_start_s",
    "since",
    "since_s",
    "statistic",
    "threshold",
    "baseline",
    "present",
    "unit",
    "method",
];

impl LogSummary {
    /// Notes an `alarm` or `clear` record.
    pub(super) fn alarm_record(&mut self, v: &Value, kind: &str, site: &str) {
        let mut record = serde_json::Map::new();
        for f in FIELDS {
            record.insert(f.to_string(), v[*f].clone());
        }
        let record = Value::Object(record);
        let key = (site.to_string(), v["channel"].as_str().unwrap_or("").to_string());
        if kind == "alarm" {
            self.alarms_open.insert(key);
        } else {
            self.alarms_open.remove(&key);
        }
        self.alarms.push(AlarmRow { site: site.into(), kind: kind.into(), record });
    }

    /// Learns one interval record into the baseline being built (`--save-baseline`).
    pub(super) fn learn_interval(&mut self, v: &Value, site: &str, name: &str, start: Option<f64>) {
        let Some(file) = self.baseline.as_mut() else { return };
        let hour = start.map(hour_of_week);
        let samples = v["samples"].as_u64().unwrap_or(0);
        if samples == 0 || v["partial"].as_bool() == Some(true) {
            return;
        }
        // What an alarm was up for is not the usual.
        let open = |n: &str| self.alarms_open.contains(&(site.to_string(), n.to_string()));
        let (skip_channel, skip_band) = (open(name), open(BAND));
        let channels = &mut file.sites.entry(site.to_string()).or_default().channels;
        let ch = channels.entry(name.to_string()).or_default();
        if skip_channel {
            return;
        }
        let p = (v["occupied_samples"].as_f64().unwrap_or(0.0) / samples as f64).clamp(0.0, 1.0);
        ch.learn(hour, Quantity::Occupancy, p.sqrt().asin());
        if let Some(f) = v["channel_floor_dbfs_per_hz"].as_f64() {
            ch.learn(hour, Quantity::Floor, f);
        }
        // The shared floor once per interval (every channel's record carries it).
        let key = (site.to_string(), v["run"].to_string(), v["t_start_s"].to_string());
        if let Some(f) = v["noise_floor_dbfs_per_hz"].as_f64() {
            if self.band_seen.insert(key) && !skip_band {
                channels.entry(BAND.to_string()).or_default().learn(hour, Quantity::Floor, f);
            }
        }
    }
}

/// The alarms for `--json`: each record's fields with `site` and `kind`.
pub fn alarms_json(summary: &LogSummary) -> Vec<Value> {
    let row = |a: &AlarmRow| {
        let mut v = a.record.clone();
        v["site"] = json!(a.site);
        v["kind"] = json!(a.kind);
        v
    };
    summary.alarms.iter().map(row).collect()
}

/// The text section: one line per alarm or clear, in the order logged.
pub fn alarms_text(out: &mut String, summary: &LogSummary) {
    if summary.alarms.is_empty() {
        return;
    }
    let raised = summary.alarms.iter().filter(|a| a.kind == "alarm").count();
    let _ = writeln!(
        out,
        "Change alarms ({raised} raised; a lead for an investigation, not proof of a fault):"
    );
    for a in &summary.alarms {
        let r = &a.record;
        let text = |f: &str| r[f].as_str().map(str::to_string);
        let num = |f: &str| r[f].as_f64().map_or("-".into(), |x| format!("{x}"));
        let when = text("start").unwrap_or_else(|| format!("{} s", num("t_start_s")));
        let since = text("since").unwrap_or_else(|| format!("{} s", num("since_s")));
        let _ = writeln!(
            out,
            "  {when}  {:<5}  {}  {}  {}  since {since}: usual {} {unit}, now {} {unit} ({} {} vs {})",
            a.kind,
            a.site,
            text("channel").unwrap_or_default(),
            text("what").unwrap_or_default(),
            num("baseline"),
            num("present"),
            text("method").unwrap_or_default(),
            num("statistic"),
            num("threshold"),
            unit = text("unit").unwrap_or_default(),
        );
    }
}
