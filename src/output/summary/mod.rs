//! Reading occupancy logs written by `log` (JSON Lines or CSV, see [`crate::output::log`]) and
//! summing them per site and channel: over the whole period, per hour, the emissions, the noise
//! floor, and the runs that measured it (the observation time and its gaps, [`coverage`]).
//!
//! The words are those of ITU-R SM.1880 and Report ITU-R SM.2256: **channel occupancy** is the
//! share of measured time a channel was occupied; **observation time** the time the channel was
//! actually measured; the **busy hour** the hour of the day with the highest occupancy.
//!
//! **Exact, sample-weighted occupancy.** A channel's occupancy over any stretch is its occupied
//! measurement samples over its measured samples (ITU-R SM.1880), summed from the interval
//! records' `occupied_samples` and `samples`, never an average of percentages. An interval counts
//! in the hour in which it starts (intervals of the default 60 s started on a whole minute never
//! straddle an hour), and in the window `--from`/`--to` when it starts inside it. Intervals whose
//! input was lost (`samples` 0, `occupancy_pct` null) and the `dropped_samples` of the others are
//! counted as *not measured*, never as idle; so are the intervals of a panorama's channel that
//! no step has in view (`state` "not_measured"), kept apart from lost input. A panorama's
//! intervals count the time their channel was in view (`observation_s`) as observed.
//!
//! **Many files.** Rotated files, files written with `--append` and the files of a daily loop are
//! read alike: each `start` record begins a run; a record already seen (the start record repeated
//! at the top of each rotated file, the same file given twice, a published copy) is counted once,
//! keyed by its `run` and `seq`, or its `id`. Records are grouped by *site* ([`site`]).
//!
//! **Damaged files.** A line that is not a record is skipped with a note ([`input`]); lines of
//! kinds this version does not know are ignored.

pub mod alarms;
pub mod change;
pub mod coverage;
pub mod export;
pub mod floor;
pub mod input;
pub mod site;
pub mod table;
pub mod zone;

use crate::measure::change::baseline::BaselineFile;
use crate::output::picture::snapshot::format_duration;
use coverage::{DropSpan, RunSum};
use serde_json::Value;
use site::SiteRules;
use std::collections::{BTreeMap, HashSet};
use std::io::BufRead;
use zone::{epoch_of, Zone};

/// What the report covers and how it tells time.
#[derive(Clone, Debug, Default)]
pub struct Settings {
    /// The zone of hours and times shown (`--tz`).
    pub zone: Zone,
    /// The window (`--from`, `--to`), seconds since the epoch; records outside it are left out.
    pub from: Option<f64>,
    pub to: Option<f64>,
    /// `--site`.
    pub sites: SiteRules,
}

/// An hour cell's key.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum HourKey {
    /// Hours since 1970-01-01T00:00 in the report's zone.
    Clock(i64),
    /// Hours from the start of the run, when the log has no clock times.
    FromStart(i64),
}

/// Measured and occupied samples (occupied ones may be fractional: a sample an emission fills in
/// part counts by its share, see the log's `occupied_samples`), and the seconds they cover.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Tally {
    pub samples: u64,
    pub occupied: f64,
    /// Seconds of input measured.
    pub seconds: f64,
}

impl Tally {
    pub fn add(&mut self, other: &Tally) {
        self.samples += other.samples;
        self.occupied += other.occupied;
        self.seconds += other.seconds;
    }

    /// Occupied / measured × 100, or `None` when nothing was measured.
    pub fn pct(&self) -> Option<f64> {
        (self.samples > 0).then(|| 100.0 * self.occupied / self.samples as f64)
    }
}

/// One emission, for the longest and the last heard.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Heard {
    pub duration_s: f64,
    /// Start and end, seconds since the epoch (when the log has clock times).
    pub start: Option<f64>,
    pub end: Option<f64>,
}

/// How many of the longest emissions each channel keeps.
pub const LONGEST: usize = 3;

/// One channel at one site, summed over every file.
#[derive(Clone, Debug, Default)]
pub struct ChannelSum {
    pub site: String,
    pub name: String,
    pub center_hz: Option<f64>,
    pub width_hz: Option<f64>,
    pub total: Tally,
    pub dropped_samples: u64,
    /// Seconds of input lost (dropped samples, intervals without samples).
    pub lost_s: f64,
    /// Seconds of a panorama's intervals in which the channel was never in view (their
    /// `state` "not_measured"): not measured, not lost, never idle.
    pub not_measured_s: f64,
    pub hours: BTreeMap<HourKey, Tally>,
    /// Σ samples × linear mean power of each interval (for the sample-weighted mean).
    pub power_weighted: f64,
    pub power_samples: u64,
    pub peak_dbfs: Option<f64>,
    /// Durations of the emissions, seconds.
    pub durations_s: Vec<f64>,
    /// The longest emissions, longest first.
    pub longest: Vec<Heard>,
    /// The emission that ended last.
    pub last_heard: Option<Heard>,
    /// Noise floor of the intervals (dBFS/Hz): first and last in time, and how often each value.
    pub noise: NoiseTally,
}

/// The noise floors of a channel's intervals, kept as a count of each value (the log writes
/// them to 0.01 dB, so a month of intervals holds a few hundred values), with the first and the
/// last in time: enough for [`NoiseTrend`], and what a database can sum ([`crate::store`]).
#[derive(Clone, Debug, Default)]
pub struct NoiseTally {
    /// (time, value) of the earliest interval (the first read among equal times).
    pub first: Option<(f64, f64)>,
    /// (time, value) of the latest interval (the last read among equal times).
    pub last: Option<(f64, f64)>,
    /// How many intervals had each value.
    pub counts: BTreeMap<NoiseValue, u64>,
    /// The floor over time (from the intervals read from logs), for the picture's sparkline.
    pub series: floor::FloorSeries,
}

/// A noise floor value, ordered by [`f64::total_cmp`].
#[derive(Clone, Copy, Debug)]
pub struct NoiseValue(pub f64);

impl PartialEq for NoiseValue {
    fn eq(&self, other: &Self) -> bool {
        self.0.total_cmp(&other.0).is_eq()
    }
}
impl Eq for NoiseValue {}
impl PartialOrd for NoiseValue {
    fn partial_cmp(&self, other: &Self) -> Option<std::cmp::Ordering> {
        Some(self.cmp(other))
    }
}
impl Ord for NoiseValue {
    fn cmp(&self, other: &Self) -> std::cmp::Ordering {
        self.0.total_cmp(&other.0)
    }
}

impl NoiseTally {
    /// One interval's floor `value` at time `t`.
    pub fn push(&mut self, t: f64, value: f64) {
        self.count(value, 1);
        self.series.push(t, value);
        self.ends((t, value), (t, value));
    }

    /// `n` intervals of floor `value`.
    pub fn count(&mut self, value: f64, n: u64) {
        *self.counts.entry(NoiseValue(value)).or_default() += n;
    }

    /// Widens the first and last to these (a later read wins a tie for the last).
    pub fn ends(&mut self, first: (f64, f64), last: (f64, f64)) {
        if self.first.map_or(true, |f| first.0 < f.0) {
            self.first = Some(first);
        }
        if self.last.map_or(true, |l| last.0 >= l.0) {
            self.last = Some(last);
        }
    }

    /// The `p`-th percentile by nearest rank, as [`percentile`] over every value.
    pub fn percentile(&self, p: f64) -> Option<f64> {
        let n: u64 = self.counts.values().sum();
        if n == 0 {
            return None;
        }
        let rank = ((p / 100.0) * n as f64).ceil().max(1.0) as u64;
        let rank = rank.min(n);
        let mut seen = 0;
        for (v, c) in &self.counts {
            seen += c;
            if seen >= rank {
                return Some(v.0);
            }
        }
        None
    }
}

/// Everything read from the logs.
#[derive(Clone, Debug, Default)]
pub struct LogSummary {
    pub settings: Settings,
    /// Keyed by (site, channel).
    pub channels: BTreeMap<(String, String), ChannelSum>,
    /// Sites reported, in the order first seen.
    pub sites: Vec<String>,
    /// Sites the logs name, before `--site`.
    pub sites_seen: Vec<String>,
    /// The runs, keyed by (site, run).
    pub runs: BTreeMap<(String, String), RunSum>,
    /// Earliest start and latest end of a counted interval, seconds since the epoch.
    pub first: Option<f64>,
    pub last: Option<f64>,
    pub files: usize,
    pub records: u64,
    pub duplicates: u64,
    /// Records left out by `--from`/`--to` because they carry no clock time.
    pub unplaced: u64,
    pub notes: Vec<String>,
    seen: HashSet<String>,
    /// The `alarm` and `clear` records, in the order read.
    pub alarms: Vec<alarms::AlarmRow>,
    /// A baseline learnt from the intervals (`--save-baseline`), when asked for.
    pub baseline: Option<BaselineFile>,
    /// Intervals whose shared floor the baseline has learnt: (site, run, start).
    band_seen: HashSet<(String, String, String)>,
    /// The state of each run whose start record was read, by `run`: a record of an earlier run
    /// that comes after a later run's start (resent by a site at the collector's request, see
    /// `net::resend`) is counted in its own run, with its own clock.
    started: BTreeMap<String, Reading>,
    /// Records of runs whose start record has not been read yet, by `run`: counted when it
    /// comes (with its clock), or at the end of the file without one.
    waiting: BTreeMap<String, Vec<Value>>,
    /// (site, channel) with an alarm up, whose intervals the baseline does not learn.
    alarms_open: HashSet<(String, String)>,
    /// The database summed, when not files (`report --db`).
    pub database: Option<String>,
}

/// The state of one file's reading: the run it is in.
#[derive(Clone, Debug)]
pub struct Reading {
    /// The site the run counts under (`None`: left out by `--site`).
    site: Option<String>,
    run: String,
    /// Epoch of the run's time 0, when it has a clock.
    origin: Option<f64>,
    /// The run's sample rate, to turn dropped samples into time.
    rate_hz: f64,
}

impl LogSummary {
    pub fn new(settings: Settings) -> LogSummary {
        LogSummary { settings, ..Default::default() }
    }

    /// Reads one log from `reader`; `name` is its path, for notes and the default site.
    pub fn read(&mut self, name: &str, reader: impl BufRead) -> std::io::Result<()> {
        self.files += 1;
        let file_site = site::site_of_file(name);
        let mut st = Reading {
            site: self.site_named(&file_site),
            run: format!("file {name}"),
            origin: None,
            rate_hz: 0.0,
        };
        let mut notes = Vec::new();
        input::read_records(name, reader, &mut notes, |v| self.record(v, &mut st, &file_site))?;
        self.count_waiting(&st);
        for n in notes {
            if !self.notes.contains(&n) {
                self.notes.push(n);
            }
        }
        Ok(())
    }

    /// The reading of a run stored in a database ([`crate::store`]): its records, all but the
    /// intervals (which the database sums), go to [`LogSummary::stored_record`] in order.
    pub fn stored_run(
        &mut self,
        site: &str,
        run: &str,
        origin: Option<f64>,
        rate_hz: f64,
    ) -> Reading {
        Reading { site: self.site_named(site), run: run.to_string(), origin, rate_hz }
    }

    /// One record of a stored run; `site` is the run's site in the database.
    pub fn stored_record(&mut self, v: &Value, st: &mut Reading, site: &str) {
        self.record(v, st, site);
    }

    /// Records `raw` as seen and returns the site it counts under.
    pub fn site_named(&mut self, raw: &str) -> Option<String> {
        if !self.sites_seen.iter().any(|s| s == raw) {
            self.sites_seen.push(raw.to_string());
        }
        self.settings.sites.map(raw)
    }

    fn record(&mut self, v: &Value, st: &mut Reading, file_site: &str) {
        let kind = v["kind"].as_str().unwrap_or("");
        if kind == "start" {
            let raw = v["site"].as_str().map_or(file_site.to_string(), crate::messages::sanitize);
            st.site = self.site_named(&raw);
            st.run = v["run"].as_str().map_or_else(|| without_id(v), str::to_string);
            st.rate_hz = v["sample_rate_hz"].as_f64().unwrap_or(0.0);
            st.origin = v["start"].as_str().and_then(epoch_of).map(|e| e - num(v, "t_start_s"));
            self.started.insert(st.run.clone(), st.clone());
            self.record_in_run(v, kind, st);
            for early in self.waiting.remove(&st.run).unwrap_or_default() {
                let kind = early["kind"].as_str().unwrap_or("").to_string();
                self.record_in_run(&early, &kind, st);
            }
            return;
        } else if let Some(run) = v["run"].as_str().filter(|r| *r != st.run) {
            // A record of another run than the one being read (lines a collector stored when
            // they were resent, after later ones): read it in its own run, or keep it until its
            // run's start record comes.
            match self.started.get(run).cloned() {
                Some(mut other) => self.record_in_run(v, kind, &mut other),
                None => self.waiting.entry(run.to_string()).or_default().push(v.clone()),
            }
            return;
        }
        self.record_in_run(v, kind, st)
    }

    /// At the end of a file: the records whose run's start never came count under the file's
    /// site, without a clock.
    fn count_waiting(&mut self, st: &Reading) {
        for (run, records) in std::mem::take(&mut self.waiting) {
            let mut own = Reading { run, origin: None, ..st.clone() };
            for v in records {
                let kind = v["kind"].as_str().unwrap_or("").to_string();
                self.record_in_run(&v, &kind, &mut own);
            }
        }
    }

    /// Counts a record in the run `st`.
    fn record_in_run(&mut self, v: &Value, kind: &str, st: &mut Reading) {
        let Some(site) = st.site.clone() else { return };
        if !self.is_new(v, kind, st, &site) {
            // The start and channel records open every rotated file: repeats by design.
            if !matches!(kind, "start" | "channel") {
                self.duplicates += 1;
            }
            return;
        }
        if !self.sites.contains(&site) {
            self.sites.push(site.clone());
        }
        let run = self.runs.entry((site.clone(), st.run.clone())).or_insert_with(|| RunSum {
            site: site.clone(),
            origin: st.origin,
            t_start_s: f64::MAX,
            ..Default::default()
        });
        // Records read before their run's start record had no clock.
        run.origin = run.origin.or(st.origin);
        run.reach(num(v, "t_start_s"), v["t_end_s"].as_f64());
        match kind {
            "start" => run.sweep = run.sweep.take().or_else(|| sweep_words(&v["panorama"])),
            "stop" => run.stop = v["reason"].as_str().map(str::to_string),
            "dropped" => run.drops.push(DropSpan {
                t_start_s: num(v, "t_start_s"),
                t_end_s: num(v, "t_end_s"),
                cause: v["cause"].as_str().unwrap_or("unknown").to_string(),
            }),
            "interval" | "emission" => self.channel_record(v, kind, st, site),
            "alarm" | "clear" => self.alarm_record(v, kind, &site),
            _ => {}
        }
    }

    /// False for a record already counted.
    fn is_new(&mut self, v: &Value, kind: &str, st: &Reading, site: &str) -> bool {
        let key = match (v["run"].as_str(), v["seq"].as_u64(), v.get("id").filter(|i| !i.is_null()))
        {
            (Some(run), Some(seq), _) => format!("{site}\u{1}{run}\u{1}{seq}"),
            (_, _, Some(id)) => format!("id {id}"),
            _ => format!(
                "{site}\u{1}{}\u{1}{kind}\u{1}{}\u{1}{}",
                st.run, v["channel"], v["t_start_s"]
            ),
        };
        self.seen.insert(key)
    }

    /// The time of a record's instant: its own RFC 3339 field, else the run's clock.
    fn when(v: &Value, field: &str, t_field: &str, st: &Reading) -> Option<f64> {
        v[field].as_str().and_then(epoch_of).or_else(|| Some(st.origin? + v[t_field].as_f64()?))
    }

    /// Whether an instant lies in the window; an instant without a clock lies in no window.
    fn in_window(&mut self, at: Option<f64>) -> bool {
        let s = &self.settings;
        if s.from.is_none() && s.to.is_none() {
            return true;
        }
        let inside =
            at.is_some_and(|t| s.from.map_or(true, |f| t >= f) && s.to.map_or(true, |e| t < e));
        if at.is_none() {
            self.unplaced += 1;
        }
        inside
    }

    fn channel_record(&mut self, v: &Value, kind: &str, st: &Reading, site: String) {
        let Some(name) = v["channel"].as_str().map(crate::messages::sanitize) else { return };
        let start = Self::when(v, "start", "t_start_s", st);
        if !self.in_window(start) {
            return;
        }
        self.records += 1;
        let zone = &self.settings.zone;
        let ch = self.channels.entry((site.clone(), name.clone())).or_insert_with(|| ChannelSum {
            site,
            name,
            ..Default::default()
        });
        ch.center_hz = v["center_hz"].as_f64().or(ch.center_hz);
        ch.width_hz = v["width_hz"].as_f64().or(ch.width_hz);
        if kind == "emission" {
            let heard = Heard {
                duration_s: num(v, "duration_s"),
                start,
                end: Self::when(v, "end", "t_end_s", st),
            };
            ch.heard(heard);
            return;
        }
        let samples = v["samples"].as_u64().unwrap_or(0);
        let dropped = v["dropped_samples"].as_u64().unwrap_or(0);
        ch.dropped_samples += dropped;
        let span = (num(v, "t_end_s") - num(v, "t_start_s")).max(0.0);
        if v["state"] == "not_measured" {
            ch.not_measured_s += span;
            return;
        }
        if samples == 0 || v["occupancy_pct"].is_null() {
            ch.lost_s += span;
            return;
        }
        let lost = if st.rate_hz > 0.0 { (dropped as f64 / st.rate_hz).min(span) } else { 0.0 };
        ch.lost_s += lost;
        let occupied = v["occupied_samples"].as_f64().unwrap_or(0.0).clamp(0.0, samples as f64);
        let tally = Tally { samples, occupied, seconds: observed_s(v, span - lost) };
        ch.total.add(&tally);
        let hour = match start {
            Some(t) => HourKey::Clock(zone.hour_of(t)),
            None => HourKey::FromStart((num(v, "t_start_s") / 3600.0).floor() as i64),
        };
        ch.hours.entry(hour).or_default().add(&tally);
        let (site, name) = (ch.site.clone(), ch.name.clone());
        self.learn_interval(v, &site, &name, start);
        let ch = self.channels.get_mut(&(site, name)).expect("entered above");
        if let Some(m) = v["mean_dbfs"].as_f64() {
            ch.power_weighted += samples as f64 * 10f64.powf(m / 10.0);
            ch.power_samples += samples;
        }
        if let Some(p) = v["peak_dbfs"].as_f64() {
            ch.peak_dbfs = Some(ch.peak_dbfs.map_or(p, |q| q.max(p)));
        }
        if let Some(n) = v["noise_floor_dbfs_per_hz"].as_f64() {
            ch.noise.push(start.unwrap_or(num(v, "t_start_s")), n);
        }
        if let Some(t) = start {
            let end = t + span;
            self.first = Some(self.first.map_or(t, |f| f.min(t)));
            self.last = Some(self.last.map_or(end, |l| l.max(end)));
        }
    }
}

fn num(v: &Value, field: &str) -> f64 {
    v[field].as_f64().unwrap_or(0.0)
}

/// The seconds an interval record measured its channel: of a panorama, the time it was in view
/// (its `observation_s`, ITU-R Report SM.2256's observation time), so that occupancy is busy
/// over observed time; otherwise `input_s`, the interval's input less what was lost.
pub fn observed_s(v: &Value, input_s: f64) -> f64 {
    v["observation_s"].as_f64().filter(|o| o.is_finite() && *o >= 0.0).unwrap_or(input_s)
}

/// The start record without the `id` a publisher adds: the same run read from a file and from a
/// published copy is one run.
fn without_id(v: &Value) -> String {
    let mut v = v.clone();
    if let Some(o) = v.as_object_mut() {
        o.remove("id");
    }
    v.to_string()
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

/// A cell of the hour-of-day (or day) grid measured for less than this share of its length is
/// *thin*: shown as such, and never the busy hour.
pub const THIN_SHARE: f64 = 0.1;

/// Noise floor over the period: first interval, median, last interval (dBFS/Hz).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct NoiseTrend {
    pub start: f64,
    pub median: f64,
    pub end: f64,
}

impl ChannelSum {
    fn heard(&mut self, h: Heard) {
        self.durations_s.push(h.duration_s);
        let at = self.longest.partition_point(|l| l.duration_s >= h.duration_s);
        if at < LONGEST {
            self.longest.insert(at, h);
            self.longest.truncate(LONGEST);
        }
        let later = |a: &Heard, b: &Heard| a.end.or(a.start) > b.end.or(b.start);
        if self.last_heard.as_ref().map_or(true, |l| later(&h, l)) {
            self.last_heard = Some(h);
        }
    }

    /// Sample-weighted mean of the intervals' mean power, dBFS.
    pub fn mean_dbfs(&self) -> Option<f64> {
        (self.power_samples > 0)
            .then(|| 10.0 * (self.power_weighted / self.power_samples as f64).log10())
    }

    /// The noise floor's trend, in time order.
    pub fn noise_trend(&self) -> Option<NoiseTrend> {
        Some(NoiseTrend {
            start: self.noise.first?.1,
            median: self.noise.percentile(50.0)?,
            end: self.noise.last?.1,
        })
    }

    /// Occupancy per hour of the day (in the report's zone), 0..24, summed over days; or, without
    /// clock times, per hour from the start of the run.
    pub fn by_hour_of_day(&self) -> BTreeMap<i64, Tally> {
        let mut out: BTreeMap<i64, Tally> = BTreeMap::new();
        for (k, t) in &self.hours {
            let h = match k {
                HourKey::Clock(h) => h.rem_euclid(24),
                HourKey::FromStart(h) => *h,
            };
            out.entry(h).or_default().add(t);
        }
        out
    }

    /// Occupancy per day (days since the epoch, in the report's zone).
    pub fn by_day(&self) -> BTreeMap<i64, Tally> {
        let mut out: BTreeMap<i64, Tally> = BTreeMap::new();
        for (k, t) in &self.hours {
            if let HourKey::Clock(h) = k {
                out.entry(h.div_euclid(24)).or_default().add(t);
            }
        }
        out
    }

    /// The busy hour (of `by_hour_of_day`) and its occupancy: only when one hour, measured for
    /// at least [`THIN_SHARE`] of an hour, is busier than every other such hour (to the 0.1 %
    /// the table shows).
    pub fn busy_hour(&self) -> Option<(i64, f64)> {
        let mut hours: Vec<(i64, f64)> = self
            .by_hour_of_day()
            .into_iter()
            .filter(|(_, t)| !is_thin(t.seconds, 3600.0))
            .filter_map(|(h, t)| Some((h, t.pct()?)))
            .collect();
        hours.sort_by(|a, b| b.1.total_cmp(&a.1));
        match hours.as_slice() {
            [first, second, ..] if first.1 - second.1 >= 0.05 => Some(*first),
            _ => None,
        }
    }
}

/// Whether a cell of `length_s` measured for `seconds` is thin.
pub fn is_thin(seconds: f64, length_s: f64) -> bool {
    seconds < THIN_SHARE * length_s
}

impl LogSummary {
    /// Whether every counted interval had a clock time (hours are then hours of the day).
    pub fn has_clock(&self) -> bool {
        self.channels.values().all(|c| c.hours.keys().all(|k| matches!(k, HourKey::Clock(_))))
    }

    /// The hours of the day in the order shown (see [`zone::hour_order`]); without clock times,
    /// every hour from the start of the run.
    pub fn hour_axis(&self) -> Vec<i64> {
        let mut measured = [false; 24];
        let mut last = 0;
        for c in self.channels.values() {
            for (h, t) in c.by_hour_of_day() {
                if t.samples > 0 {
                    measured[h.rem_euclid(24) as usize] = true;
                    last = last.max(h);
                }
            }
        }
        if self.has_clock() {
            zone::hour_order(&measured)
        } else {
            (0..=last).collect()
        }
    }
}

/// A start record's `panorama` in words ("a sweep of 445.5995 .. 448.7995 MHz in 4 steps of
/// 50 ms"); `None` for a run at one centre.
fn sweep_words(p: &Value) -> Option<String> {
    let lo = p["span_low_hz"].as_f64()?;
    let hi = p["span_high_hz"].as_f64()?;
    let steps = p["step_centers_hz"].as_array().map_or(0, Vec::len);
    let dwells: Vec<f64> = p["dwell_s"].as_array()?.iter().filter_map(Value::as_f64).collect();
    let dwell = match dwells.first() {
        Some(&d) if dwells.iter().all(|&x| x == d) => format!(" of {}", format_duration(d)),
        _ => String::new(),
    };
    Some(format!("a sweep of {:.4} .. {:.4} MHz in {steps} steps{dwell}", lo / 1e6, hi / 1e6))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Nearest-rank percentiles of 1..=10: the median is 5, the 90th 9, the 100th 10.
    #[test]
    fn nearest_rank_percentiles() {
        let v: Vec<f64> = (1..=10).rev().map(f64::from).collect();
        assert_eq!(percentile(&v, 50.0), Some(5.0));
        assert_eq!(percentile(&v, 90.0), Some(9.0));
        assert_eq!(percentile(&v, 100.0), Some(10.0));
        assert_eq!(percentile(&[], 50.0), None);
    }

    fn hour(pct: f64, seconds: f64) -> Tally {
        Tally { samples: 1000, occupied: pct * 10.0, seconds }
    }

    /// The busy hour must be busier than the others, and measured for more than a few seconds.
    #[test]
    fn a_busy_hour_only_when_one_hour_is_busier() {
        let mut c = ChannelSum::default();
        c.hours.insert(HourKey::Clock(22), hour(10.0, 3600.0));
        assert_eq!(c.busy_hour(), None, "one hour is not busier than another");
        c.hours.insert(HourKey::Clock(23), hour(10.0, 3600.0));
        assert_eq!(c.busy_hour(), None, "a tie");
        c.hours.insert(HourKey::Clock(24), hour(90.0, 12.0));
        assert_eq!(c.busy_hour(), None, "12 s of data is a thin hour");
        c.hours.insert(HourKey::Clock(25), hour(20.0, 1800.0));
        assert_eq!(c.busy_hour(), Some((1, 20.0)));
    }

    #[test]
    fn longest_and_last_heard() {
        let mut c = ChannelSum::default();
        for (d, t) in [(1.0, 10.0), (5.0, 20.0), (2.0, 30.0), (4.0, 5.0)] {
            c.heard(Heard { duration_s: d, start: Some(t), end: Some(t + d) });
        }
        let longest: Vec<f64> = c.longest.iter().map(|h| h.duration_s).collect();
        assert_eq!(longest, [5.0, 4.0, 2.0]);
        assert_eq!(c.last_heard.unwrap().start, Some(30.0));
    }

    /// Two runs of one site as a collector may store them after resending lost records: lines
    /// of the first run after the second's start, and the second's start after its intervals.
    /// The summary must be that of the log as the site wrote it (in order).
    #[test]
    fn records_stored_out_of_order_count_in_their_own_run() {
        let start = |run: &str, at: &str| {
            format!(
                r#"{{"kind":"start","site":"ridge","run":"{run}","seq":0,"sample_rate_hz":1e6,"start":"{at}","t_start_s":0.0,"interval_s":1.0}}"#
            )
        };
        let interval = |run: &str, seq: u64, pct: f64| {
            let t = (seq - 1) as f64;
            format!(
                r#"{{"kind":"interval","channel":"gate","center_hz":433.5e6,"width_hz":25e3,"t_start_s":{t},"t_end_s":{},"duration_s":1.0,"samples":100,"occupied_samples":{},"occupancy_pct":{pct},"mean_dbfs":-60.0,"dropped_samples":0,"run":"{run}","seq":{seq}}}"#,
                t + 1.0,
                pct as u64
            )
        };
        let stop = |run: &str, seq: u64| {
            format!(
                r#"{{"kind":"stop","t_end_s":3.0,"reason":"end_of_input","iq_samples":3000000,"dropped_samples":0,"run":"{run}","seq":{seq}}}"#
            )
        };
        // A run: its start, three intervals of these occupancies, its stop.
        let run = |name: &str, at: &str, pcts: [f64; 3]| -> Vec<String> {
            let intervals = (1..).zip(pcts).map(|(seq, pct)| interval(name, seq, pct));
            std::iter::once(start(name, at)).chain(intervals).chain([stop(name, 4)]).collect()
        };
        let r1 = run("r1", "2026-12-04T20:00:00Z", [10.0, 20.0, 30.0]);
        let r2 = run("r2", "2026-12-04T21:00:00Z", [50.0, 60.0, 70.0]);
        let in_order: Vec<&String> = r1.iter().chain(&r2).collect();
        let as_stored: Vec<&String> = [&r1[0], &r1[1], &r2[1], &r2[2], &r2[0], &r1[2], &r2[3]]
            .into_iter()
            .chain([&r1[3], &r2[4], &r1[4]])
            .collect();
        let summary = |lines: &[&String]| {
            let text: String = lines.iter().map(|l| format!("{l}\n")).collect();
            let mut s = LogSummary::new(Settings::default());
            s.read("ridge.jsonl", text.as_bytes()).unwrap();
            export::to_json(&s)
        };
        let want = summary(&in_order);
        let stops = want.to_string().matches(r#""stop":"end_of_input""#).count();
        assert_eq!(stops, 2, "two runs, each stopped: {want:#}");
        assert_eq!(summary(&as_stored), want);
    }
}
