//! Reading occupancy logs written by `log` (JSON Lines, see [`crate::output::log`]) and summing them per
//! channel: over the whole period, per UTC hour, and the emissions.
//!
//! **Exact, sample-weighted occupancy.** A channel's occupancy over any stretch is its occupied
//! measurement samples over its measured samples (ITU-R SM.1880), summed from the interval
//! records' `occupied_samples` and `samples`, never an average of percentages. An interval counts
//! in the hour in which it starts (intervals of the default 60 s started on a whole minute never
//! straddle an hour). Intervals whose input was lost (`samples` 0, `occupancy_pct` null) and the
//! `dropped_samples` of the others are counted as *not measured*, never as idle.
//!
//! **Many files.** Rotated files and files written with `--append` are read alike: each `start`
//! record begins a run; a record already seen (the same run's `start` repeated at the top of each
//! rotated file, the same file given twice) is counted once, keyed by its `id` when it carries one
//! (published records) or else by its run, kind, channel and start. Records are grouped by *site*:
//! the `site` of the run's `start` record when present, else the file's name without its rotation
//! key and extension (`north.2026-12-02.jsonl` → `north`).
//!
//! **Damaged files.** A line that is not a JSON object (a power cut mid-write leaves a partial
//! last line) is skipped with a note naming the file and line; lines of kinds this version does
//! not know are ignored.

pub mod table;

use std::collections::{BTreeMap, HashSet};
use std::io::BufRead;

/// When an interval happened, to the hour.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum HourKey {
    /// Hours since 1970-01-01T00:00Z (UTC).
    Utc(i64),
    /// Hours from the start of the run, when the log has no clock times.
    FromStart(i64),
}

/// Measured and occupied samples (occupied ones may be fractional: a sample an emission fills in
/// part counts by its share, see the log's `occupied_samples`).
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Tally {
    pub samples: u64,
    pub occupied: f64,
}

impl Tally {
    pub fn add(&mut self, samples: u64, occupied: f64) {
        self.samples += samples;
        self.occupied += occupied;
    }

    /// Occupied / measured × 100, or `None` when nothing was measured.
    pub fn pct(&self) -> Option<f64> {
        (self.samples > 0).then(|| 100.0 * self.occupied / self.samples as f64)
    }
}

/// One channel at one site, summed over every file.
#[derive(Clone, Debug, Default)]
pub struct ChannelSum {
    pub site: String,
    pub name: String,
    pub center_hz: Option<f64>,
    pub width_hz: Option<f64>,
    pub total: Tally,
    pub dropped_samples: u64,
    /// Seconds of input measured, and lost (dropped samples, intervals without samples).
    pub measured_s: f64,
    pub lost_s: f64,
    pub hours: BTreeMap<HourKey, Tally>,
    /// Σ samples × linear mean power of each interval (for the sample-weighted mean).
    pub power_weighted: f64,
    pub power_samples: u64,
    pub peak_dbfs: Option<f64>,
    /// Durations of the emissions, seconds.
    pub durations_s: Vec<f64>,
}

/// Everything read from the logs.
#[derive(Clone, Debug, Default)]
pub struct LogSummary {
    /// Keyed by (site, channel).
    pub channels: BTreeMap<(String, String), ChannelSum>,
    pub sites: Vec<String>,
    /// Earliest and latest UTC times seen (RFC 3339), when the log has them.
    pub first: Option<String>,
    pub last: Option<String>,
    pub files: usize,
    pub records: u64,
    pub duplicates: u64,
    pub notes: Vec<String>,
}

/// The state of one file's reading: the run it is in.
struct Reading {
    site: String,
    run: String,
    /// The run's sample rate, to turn dropped samples into time.
    rate_hz: f64,
}

impl LogSummary {
    /// Reads one log from `reader`; `name` is its path, for notes and the default site.
    pub fn read(
        &mut self,
        name: &str,
        reader: impl BufRead,
        seen: &mut Seen,
    ) -> std::io::Result<()> {
        self.files += 1;
        let shown = crate::messages::sanitize(name);
        let mut state = Reading { site: site_of_file(name), run: String::new(), rate_hz: 0.0 };
        let mut bad: Option<(u64, usize)> = None;
        let mut bad_lines = 0u64;
        let mut reader = reader;
        let mut line = Vec::new();
        let mut number = 0u64;
        loop {
            line.clear();
            if reader.read_until(b'\n', &mut line)? == 0 {
                break;
            }
            number += 1;
            if let Some((n, len)) = bad.take() {
                bad_lines += 1;
                if bad_lines <= 3 {
                    self.notes.push(format!(
                        "{shown}: line {n} ({len} bytes) is not a log record; skipped"
                    ));
                }
            }
            let text = String::from_utf8_lossy(&line);
            let text = text.trim();
            if text.is_empty() {
                continue;
            }
            match serde_json::from_str::<serde_json::Value>(text) {
                Ok(v) if v.is_object() => self.record(&v, &mut state, seen),
                _ => bad = Some((number, line.len())),
            }
        }
        if bad_lines > 3 {
            self.notes.push(format!(
                "{shown}: {} more lines were not log records; skipped",
                bad_lines - 3
            ));
        }
        if let Some((n, len)) = bad {
            let note = format!(
                "{shown}: the last line ({n}, {len} bytes) is incomplete (cut off while written?); skipped"
            );
            if !self.notes.contains(&note) {
                self.notes.push(note);
            }
        }
        Ok(())
    }

    fn record(&mut self, v: &serde_json::Value, st: &mut Reading, seen: &mut Seen) {
        let kind = v["kind"].as_str().unwrap_or("");
        if kind == "start" {
            if let Some(site) = v["site"].as_str() {
                st.site = crate::messages::sanitize(site);
            }
            st.run = without_id(v);
            st.rate_hz = v["sample_rate_hz"].as_f64().unwrap_or(0.0);
            if !self.sites.contains(&st.site) {
                self.sites.push(st.site.clone());
            }
            return;
        }
        let channel = v["channel"].as_str().map(crate::messages::sanitize);
        let key = match v.get("id").filter(|i| !i.is_null()) {
            Some(id) => format!("id {id}"),
            None => format!(
                "{}\u{1}{}\u{1}{kind}\u{1}{}\u{1}{}",
                st.site,
                st.run,
                channel.as_deref().unwrap_or(""),
                v["t_start_s"]
            ),
        };
        if matches!(kind, "interval" | "emission") && !seen.0.insert(key) {
            self.duplicates += 1;
            return;
        }
        let Some(name) = channel else { return };
        if !self.sites.contains(&st.site) {
            self.sites.push(st.site.clone());
        }
        self.records += 1;
        let ch = self
            .channels
            .entry((st.site.clone(), name.clone()))
            .or_insert_with(|| ChannelSum { site: st.site.clone(), name, ..Default::default() });
        ch.center_hz = v["center_hz"].as_f64().or(ch.center_hz);
        ch.width_hz = v["width_hz"].as_f64().or(ch.width_hz);
        match kind {
            "interval" => {
                let samples = v["samples"].as_u64().unwrap_or(0);
                let occupied =
                    v["occupied_samples"].as_f64().unwrap_or(0.0).clamp(0.0, samples as f64);
                let dropped = v["dropped_samples"].as_u64().unwrap_or(0);
                ch.dropped_samples += dropped;
                let span = (v["t_end_s"].as_f64().unwrap_or(0.0)
                    - v["t_start_s"].as_f64().unwrap_or(0.0))
                .max(0.0);
                if samples == 0 || v["occupancy_pct"].is_null() {
                    ch.lost_s += span;
                    return;
                }
                let lost =
                    if st.rate_hz > 0.0 { (dropped as f64 / st.rate_hz).min(span) } else { 0.0 };
                ch.lost_s += lost;
                ch.measured_s += span - lost;
                ch.total.add(samples, occupied);
                let start = v["start"].as_str();
                let hour = match start.and_then(epoch_hours) {
                    Some(h) => HourKey::Utc(h),
                    None => HourKey::FromStart(
                        (v["t_start_s"].as_f64().unwrap_or(0.0) / 3600.0).floor() as i64,
                    ),
                };
                ch.hours.entry(hour).or_default().add(samples, occupied);
                if let Some(m) = v["mean_dbfs"].as_f64() {
                    ch.power_weighted += samples as f64 * 10f64.powf(m / 10.0);
                    ch.power_samples += samples;
                }
                if let Some(p) = v["peak_dbfs"].as_f64() {
                    ch.peak_dbfs = Some(ch.peak_dbfs.map_or(p, |q| q.max(p)));
                }
                for t in [start, v["end"].as_str()].into_iter().flatten() {
                    if self.first.as_deref().map_or(true, |s| s > t) {
                        self.first = Some(t.to_string());
                    }
                    if self.last.as_deref().map_or(true, |s| s < t) {
                        self.last = Some(t.to_string());
                    }
                }
            }
            "emission" => {
                if let Some(d) = v["duration_s"].as_f64() {
                    ch.durations_s.push(d);
                }
            }
            _ => {}
        }
    }
}

/// Records already counted, across files.
#[derive(Default)]
pub struct Seen(HashSet<String>);

/// The start record without the `id` a publisher adds: the same run read from a file and from a
/// published copy is one run.
fn without_id(v: &serde_json::Value) -> String {
    let mut v = v.clone();
    if let Some(o) = v.as_object_mut() {
        o.remove("id");
    }
    v.to_string()
}

/// Hours since the epoch of an RFC 3339 time.
fn epoch_hours(stamp: &str) -> Option<i64> {
    let t =
        time::OffsetDateTime::parse(stamp, &time::format_description::well_known::Rfc3339).ok()?;
    Some(t.unix_timestamp().div_euclid(3600))
}

/// A file's site when its runs do not name one: the name without directories, rotation key
/// (`.2026-12-02`, `.2026-12-02T06`, …) and extension.
pub fn site_of_file(path: &str) -> String {
    let name = std::path::Path::new(path)
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| path.to_string());
    let mut parts: Vec<&str> = name.split('.').collect();
    if parts.len() > 1 {
        parts.pop();
    }
    while parts.len() > 1
        && parts.last().is_some_and(|p| p.starts_with(|c: char| c.is_ascii_digit()))
    {
        parts.pop();
    }
    crate::messages::sanitize(&parts.join("."))
}

/// The `p`-th percentile of `values` by nearest rank (the smallest value with at least `p` % of
/// the values at or below it; common practice), or `None` for no values.
pub fn percentile(values: &[f64], p: f64) -> Option<f64> {
    if values.is_empty() {
        return None;
    }
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    let rank = ((p / 100.0) * v.len() as f64).ceil().max(1.0) as usize;
    Some(v[rank.min(v.len()) - 1])
}

impl ChannelSum {
    /// Sample-weighted mean of the intervals' mean power, dBFS.
    pub fn mean_dbfs(&self) -> Option<f64> {
        (self.power_samples > 0)
            .then(|| 10.0 * (self.power_weighted / self.power_samples as f64).log10())
    }

    /// Occupancy per hour of the day (UTC), 0..24, summed over days; or, without clock times, per
    /// hour from the start of the run.
    pub fn by_hour_of_day(&self) -> BTreeMap<i64, Tally> {
        let mut out: BTreeMap<i64, Tally> = BTreeMap::new();
        for (k, t) in &self.hours {
            let h = match k {
                HourKey::Utc(h) => h.rem_euclid(24),
                HourKey::FromStart(h) => *h,
            };
            out.entry(h).or_default().add(t.samples, t.occupied);
        }
        out
    }

    /// Occupancy per UTC day (days since the epoch).
    pub fn by_day(&self) -> BTreeMap<i64, Tally> {
        let mut out: BTreeMap<i64, Tally> = BTreeMap::new();
        for (k, t) in &self.hours {
            if let HourKey::Utc(h) = k {
                out.entry(h.div_euclid(24)).or_default().add(t.samples, t.occupied);
            }
        }
        out
    }

    /// The hour (of `by_hour_of_day`) with the highest occupancy, and that occupancy.
    pub fn busiest_hour(&self) -> Option<(i64, f64)> {
        self.by_hour_of_day().into_iter().filter_map(|(h, t)| Some((h, t.pct()?))).fold(
            None,
            |best: Option<(i64, f64)>, (h, p)| match best {
                Some((_, q)) if q >= p => best,
                _ => Some((h, p)),
            },
        )
    }
}

impl LogSummary {
    /// Whether every counted interval had a clock time (hours are then UTC hours of the day).
    pub fn has_clock(&self) -> bool {
        self.channels.values().all(|c| c.hours.keys().all(|k| matches!(k, HourKey::Utc(_))))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sites_come_from_file_names_without_rotation_keys() {
        assert_eq!(site_of_file("/var/log/north.2026-12-02.jsonl"), "north");
        assert_eq!(site_of_file("north.2026-12-02T06-48-59.001.jsonl"), "north");
        assert_eq!(site_of_file("ridge.jsonl"), "ridge");
        assert_eq!(site_of_file("ridge"), "ridge");
    }

    /// Nearest-rank percentiles of 1..=10: the median is 5, the 90th 9, the 100th 10.
    #[test]
    fn nearest_rank_percentiles() {
        let v: Vec<f64> = (1..=10).rev().map(f64::from).collect();
        assert_eq!(percentile(&v, 50.0), Some(5.0));
        assert_eq!(percentile(&v, 90.0), Some(9.0));
        assert_eq!(percentile(&v, 100.0), Some(10.0));
        assert_eq!(percentile(&[], 50.0), None);
    }
}
