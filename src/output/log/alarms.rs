//! `log --alarms`: every interval record goes through the change watch of its channel
//! ([`crate::measure::change`]); the alarms it raises and clears become `alarm` and `clear`
//! records of the log, written right after the interval that decided them and published like
//! every other record.
//!
//! Each plan channel follows its own floor (`channel_floor_dbfs_per_hz`) and occupancy; the
//! channel `band` follows the floor shared by the whole span (`noise_floor_dbfs_per_hz`, once
//! per interval). An interval cut short by the end of the run (`partial`) or with no sample
//! measured is not used. The hour of week comes from the interval's clock time; a log without
//! clock times compares with all hours alike.

use crate::measure::change::alarm::{Change, ChannelWatch, Observation, Settings};
use crate::measure::change::baseline::{hour_of_week, BaselineFile, SiteBaseline, BAND};
use crate::output::log::{AlarmRecord, IntervalRecord, Record};
use crate::pipeline::clock::Clock;
use crate::plan::Plan;
use anyhow::{Context, Result};

/// The watches of one run of `log`.
pub struct AlarmLog {
    settings: Settings,
    channels: Vec<(String, ChannelWatch)>,
    band: ChannelWatch,
}

impl AlarmLog {
    /// Watches for every channel of `plan`, seeded from `seed` where it knows the channel.
    pub fn new(settings: Settings, plan: &Plan, seed: Option<&SiteBaseline>) -> AlarmLog {
        let start = |name: &str| {
            let known = seed.and_then(|s| s.channels.get(name)).cloned().unwrap_or_default();
            ChannelWatch::new(settings, known)
        };
        AlarmLog {
            settings,
            channels: plan.channels.iter().map(|c| (c.name.clone(), start(&c.name))).collect(),
            band: start(BAND),
        }
    }

    /// The plan's channels the seed knew nothing of (they warm up from the log).
    pub fn unseeded(plan: &Plan, seed: &SiteBaseline) -> Vec<String> {
        let names = plan.channels.iter().map(|c| c.name.as_str()).chain([BAND]);
        names.filter(|n| !seed.channels.contains_key(*n)).map(str::to_string).collect()
    }

    pub fn settings(&self) -> &Settings {
        &self.settings
    }

    /// The alarm and clear records an interval record (whose first sample is `first`) decides.
    pub fn interval(&mut self, first: u64, r: &IntervalRecord, clock: &Clock) -> Vec<Record> {
        if r.partial || r.samples == 0 {
            return Vec::new();
        }
        let hour = clock.time(first).map(|t| hour_of_week(t.unix_timestamp_nanos() as f64 * 1e-9));
        let at = r.t_start_s;
        let mut changes: Vec<(String, Change)> = Vec::new();
        if let Some((name, watch)) = self.channels.iter_mut().find(|(n, _)| *n == r.channel) {
            let o = Observation {
                at,
                hour,
                floor_db: r.channel_floor_dbfs_per_hz,
                occupancy: Some(r.occupied_samples / r.samples as f64),
            };
            changes.extend(watch.observe(&o).into_iter().map(|c| (name.clone(), c)));
        }
        // The shared floor once per interval: with the plan's first channel.
        if self.channels.first().is_some_and(|(n, _)| *n == r.channel) {
            let o = Observation { at, hour, floor_db: r.noise_floor_dbfs_per_hz, occupancy: None };
            changes.extend(self.band.observe(&o).into_iter().map(|c| (BAND.to_string(), c)));
        }
        changes.into_iter().map(|(channel, c)| record(channel, &c, r, clock)).collect()
    }
}

fn record(channel: String, c: &Change, r: &IntervalRecord, clock: &Clock) -> Record {
    let round = |v: f64, digits: i32| {
        let f = 10f64.powi(digits);
        (v * f).round() / f
    };
    let a = AlarmRecord {
        channel,
        what: c.what.as_str().into(),
        t_start_s: r.t_start_s,
        t_end_s: r.t_end_s,
        start: r.start.clone(),
        end: r.end.clone(),
        since_s: c.since,
        since: clock.stamp((c.since * clock.rate).round() as u64),
        statistic: round(c.statistic, 3),
        threshold: round(c.threshold, 3),
        baseline: round(c.baseline, 2),
        present: round(c.present, 2),
        unit: c.what.unit().into(),
        method: c.method.into(),
    };
    if c.raised {
        Record::Alarm(a)
    } else {
        Record::Clear(a)
    }
}

/// Reads a baseline file for `site` (the only one in the file when `None`).
pub fn load_baseline(path: &str, site: Option<&str>) -> Result<SiteBaseline> {
    let shown = crate::messages::sanitize(path);
    let text = std::fs::read_to_string(path)
        .with_context(|| format!("cannot read the baseline '{shown}'; check the path"))?;
    let file =
        BaselineFile::parse(&text).map_err(|e| anyhow::anyhow!("the baseline '{shown}' {e}"))?;
    file.site(site).map_err(|e| anyhow::anyhow!("the baseline '{shown}' {e}"))
}
