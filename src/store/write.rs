//! Records into the database, each once, in batched transactions.
//!
//! [`Writer::take`] knows at once whether a record is new or a copy: it keeps per run what was
//! stored ([`RunSeen`], read from the database the first time the run is met), so a copy costs
//! the database nothing. A new record gets its id from the writer ([`Dialect::record_ids`]) and
//! its rows wait in memory ([`Rows`]); they go in together when the transaction is committed,
//! every [`Batch::records`] records or [`Batch::age`] after its first, whichever comes first,
//! and at the end ([`Writer::commit`]): one statement a row on SQLite (in this process, no round
//! trip), one `COPY` a table on PostgreSQL (one round trip a table instead of two a record).
//! The collector acknowledges a message to the broker only after the commit that holds it.
//!
//! The database still holds each (run, `seq`) once by itself (`ON CONFLICT DO NOTHING`, and a
//! record's other rows only if the record went in): a second writer that stored a record since
//! this one read its run makes this one's copy a no-op, counted as a duplicate at the commit.
//!
//! The interval columns depend on the run's `start` record (its clock and sample rate): an
//! interval that arrives before its run's `start` (a resent start record) is stored with what
//! is known, and the run's intervals are worked out again when the start record comes.

use super::seen::RunSeen;
use super::{Backend, Dialect, Rows, Val};
use crate::output::summary::input::read_records_with_lines;
use crate::output::summary::site::site_of_file;
use crate::output::summary::zone::epoch_of;
use anyhow::{Context, Result};
use serde_json::Value;
use std::collections::{BTreeSet, HashMap, HashSet};
use std::io::BufRead;
use std::time::{Duration, Instant};

/// When a transaction is committed.
#[derive(Clone, Copy, Debug)]
pub struct Batch {
    pub records: usize,
    pub age: Duration,
}

impl Default for Batch {
    /// 1000 records or 200 ms: a few transactions a second at most, and a record waits at
    /// most 0.2 s for its commit (and the broker for its acknowledgement).
    fn default() -> Batch {
        Batch { records: 1000, age: Duration::from_millis(200) }
    }
}

/// A record of a site already stored: what a collector that starts again must know of it to
/// see holes and copies (its id, kind, and a start record's interval).
#[derive(Debug, Clone, PartialEq)]
pub struct Known {
    pub run: String,
    pub seq: u64,
    pub kind: String,
    pub interval_s: Option<f64>,
}

/// What became of one record.
#[derive(Debug, PartialEq, Eq, Clone, Copy)]
pub enum Stored {
    New,
    Duplicate,
    /// Not JSON, or without `kind`, `run` or `seq`.
    NotARecord,
}

struct RunState {
    id: i64,
    origin: Option<f64>,
    rate_hz: f64,
    has_start: bool,
    t_min: f64,
    t_max: f64,
    dirty: bool,
    /// The `seq`s of the run stored (or waiting in the open transaction).
    seen: RunSeen,
}

const RECORDS: &str = "id, run_id, seq, kind, t_start_s, t_end_s, t_epoch, line";
const INTERVALS: &str = "channel_id, clock, hour_key, t_key, record_id, t_epoch, span_s, valid, \
     samples, occupied, measured_s, lost_s, dropped, power_w, power_n, peak_dbfs, noise, \
     center_hz, width_hz";
const EMISSIONS: &str = "record_id, channel_id, t_epoch, end_epoch, duration_s, peak_dbfs, \
     mean_dbfs, obw_hz, class, designator";
const ALARMS: &str = "record_id, channel, kind, what, t_epoch, statistic, threshold, baseline, \
     present, unit, method";
const CAPTURES: &str = "record_id, channel, status, file, t_epoch, iq_samples, bytes, truncated";

/// The rows of the open transaction not yet sent, per table (records first: the others name
/// them).
struct Pending {
    records: Rows,
    intervals: Rows,
    emissions: Rows,
    alarms: Rows,
    captures: Rows,
}

impl Pending {
    fn new() -> Pending {
        Pending {
            records: Rows::new("records", RECORDS),
            intervals: Rows::new("intervals", INTERVALS),
            emissions: Rows::new("emissions", EMISSIONS),
            alarms: Rows::new("alarms", ALARMS),
            captures: Rows::new("captures", CAPTURES),
        }
    }

    fn tables(&mut self) -> [&mut Rows; 5] {
        [
            &mut self.records,
            &mut self.intervals,
            &mut self.emissions,
            &mut self.alarms,
            &mut self.captures,
        ]
    }
}

/// The writer of one database.
pub struct Writer {
    db: Box<dyn Backend>,
    batch: Batch,
    sites: HashMap<String, i64>,
    runs: HashMap<(i64, String), RunState>,
    channels: HashMap<(i64, String), i64>,
    /// Records in the open transaction, and when it began.
    open: usize,
    since: Option<Instant>,
    /// The (channel, clock, hour) keys whose intervals changed in the open transaction.
    touched: BTreeSet<(i64, i64, i64)>,
    pending: Pending,
    /// Record ids to hand out, the next last (PostgreSQL: reserved from its sequence).
    ids: Vec<i64>,
    /// SQLite: the next record id in the open transaction.
    next_id: Option<i64>,
    pub stored: u64,
    pub duplicates: u64,
    pub not_records: u64,
}

/// An instant of a record: its own RFC 3339 field, else the run's clock plus its run time
/// (as `report` places it).
fn when(v: &Value, field: &str, t_field: &str, origin: Option<f64>) -> Option<f64> {
    v[field].as_str().and_then(epoch_of).or_else(|| Some(origin? + v[t_field].as_f64()?))
}

fn num(v: &Value, field: &str) -> f64 {
    v[field].as_f64().unwrap_or(0.0)
}

impl Writer {
    pub fn new(db: Box<dyn Backend>, batch: Batch) -> Writer {
        Writer {
            db,
            batch,
            sites: HashMap::new(),
            runs: HashMap::new(),
            channels: HashMap::new(),
            open: 0,
            since: None,
            touched: BTreeSet::new(),
            pending: Pending::new(),
            ids: Vec::new(),
            next_id: None,
            stored: 0,
            duplicates: 0,
            not_records: 0,
        }
    }

    /// Records taken but not yet committed.
    pub fn uncommitted(&self) -> usize {
        self.open
    }

    /// The records of `site` stored so far, run by run in `seq` order.
    pub fn known(&mut self, site: &str) -> Result<Vec<Known>> {
        self.flush()?;
        let rows = self.db.rows(
            "SELECT u.run, r.seq, r.kind, CASE WHEN r.kind = 'start' THEN r.line END \
             FROM records r JOIN runs u ON u.id = r.run_id JOIN sites s ON s.id = u.site_id \
             WHERE s.name = ?1 ORDER BY u.id, r.seq",
            &[site.into()],
        )?;
        let interval = |line: &str| {
            serde_json::from_str::<Value>(line).ok().and_then(|v| v["interval_s"].as_f64())
        };
        Ok(rows
            .iter()
            .filter_map(|r| {
                Some(Known {
                    run: r[0].text()?.to_string(),
                    seq: u64::try_from(r[1].i64()?).ok()?,
                    kind: r[2].text()?.to_string(),
                    interval_s: r[3].text().and_then(interval),
                })
            })
            .collect())
    }

    /// Stores one record line of `site` unless it is there already.
    pub fn take(&mut self, site: &str, line: &str) -> Result<Stored> {
        let Ok(v) = serde_json::from_str::<Value>(line) else {
            self.not_records += 1;
            return Ok(Stored::NotARecord);
        };
        let (Some(kind), Some(run), Some(seq)) =
            (v["kind"].as_str(), v["run"].as_str(), v["seq"].as_u64())
        else {
            self.not_records += 1;
            return Ok(Stored::NotARecord);
        };
        let site_id = self.site(site)?;
        let run_key = (site_id, run.to_string());
        let (run_id, origin, new) = {
            let r = self.run(site_id, run)?;
            (r.id, r.origin, r.seen.take(seq))
        };
        if !new {
            self.duplicates += 1;
            return Ok(Stored::Duplicate);
        }
        if self.open == 0 {
            self.begin()?;
        }
        self.open += 1;
        let id = self.record_id()?;
        let t_start = num(&v, "t_start_s");
        let t_end = v["t_end_s"].as_f64().unwrap_or(t_start);
        let t_epoch = when(&v, "start", "t_start_s", origin);
        self.pending.records.push([
            id.into(),
            run_id.into(),
            (seq as i64).into(),
            kind.into(),
            t_start.into(),
            t_end.into(),
            t_epoch.into(),
            line.into(),
        ]);
        self.stored += 1;
        let r = self.runs.get_mut(&run_key).expect("loaded above");
        r.t_min = r.t_min.min(t_start);
        r.t_max = r.t_max.max(t_end);
        r.dirty = true;
        match kind {
            "start" => self.start(run_key, &v)?,
            "stop" => {
                self.db.exec(
                    "UPDATE runs SET stop_reason = ?1 WHERE id = ?2",
                    &[v["reason"].as_str().into(), run_id.into()],
                )?;
            }
            "interval" => {
                let r = &self.runs[&run_key];
                let (origin, rate) = (r.origin, r.rate_hz);
                self.interval(site_id, id, &v, origin, rate)?;
            }
            "emission" => self.emission(site_id, id, &v, t_epoch)?,
            "alarm" | "clear" => self.alarm(id, kind, &v, t_epoch)?,
            "capture" => self.capture(id, &v, t_epoch)?,
            "channel" => {
                if let Some(name) = v["channel"].as_str() {
                    self.channel(site_id, name)?;
                }
            }
            _ => {}
        }
        Ok(Stored::New)
    }

    /// Commits if the batch is full or old enough.
    pub fn tick(&mut self) -> Result<()> {
        let due = self.since.is_some_and(|s| s.elapsed() >= self.batch.age);
        if self.open >= self.batch.records || (self.open > 0 && due) {
            self.commit()?;
        }
        Ok(())
    }

    /// Opens the transaction of a batch.
    fn begin(&mut self) -> Result<()> {
        let d = self.db.dialect();
        self.db.batch(d.begin())?;
        self.since = Some(Instant::now());
        if d == Dialect::Sqlite {
            let max = self.db.rows(d.record_ids(), &[])?;
            self.next_id = Some(max[0][0].i64().unwrap_or(0) + 1);
        }
        Ok(())
    }

    /// A new record's id.
    fn record_id(&mut self) -> Result<i64> {
        if let Some(id) = self.next_id.as_mut() {
            *id += 1;
            return Ok(*id - 1);
        }
        if self.ids.is_empty() {
            let n = self.batch.records.clamp(100, 10_000) as i64;
            let rows = self.db.rows(self.db.dialect().record_ids(), &[n.into()])?;
            self.ids = rows.iter().rev().filter_map(|r| r[0].i64()).collect();
        }
        self.ids.pop().context("the database gave no record id")
    }

    /// Sends the rows waiting in memory (inside the open transaction), records first. A record
    /// the database already held (stored by another writer since this one read its run) is not
    /// stored again, nor its other rows: counted as a copy here.
    fn flush(&mut self) -> Result<()> {
        let [records, mut others @ ..] = self.pending.tables();
        let sent = records.len() as u64;
        let inserted = match sent {
            0 => 0,
            _ => self.db.insert(records).context("cannot store the records")?,
        };
        if inserted < sent {
            // The ids are this writer's alone (its transaction's or reserved from the sequence):
            // those of them found in the table are the records that went in.
            let ours: HashSet<i64> =
                records.values.chunks(records.width()).filter_map(|r| r[0].i64()).collect();
            let lo = ours.iter().min().copied().unwrap_or(0);
            let hi = ours.iter().max().copied().unwrap_or(0);
            let mut skipped = ours.clone();
            self.db.each(
                "SELECT id FROM records WHERE id >= ?1 AND id <= ?2",
                &[lo.into(), hi.into()],
                &mut |r| {
                    if let Some(id) = r[0].i64() {
                        skipped.remove(&id);
                    }
                    Ok(())
                },
            )?;
            for rows in others.iter_mut() {
                let at = rows.column("record_id").expect("rows of a record");
                rows.retain(|r| r[at].i64().is_some_and(|id| !skipped.contains(&id)));
            }
            self.stored -= sent - inserted;
            self.duplicates += sent - inserted;
        }
        records.values.clear();
        for rows in others {
            if !rows.is_empty() {
                self.db.insert(rows).with_context(|| format!("cannot store the {}", rows.table))?;
                rows.values.clear();
            }
        }
        Ok(())
    }

    /// Commits what was taken.
    pub fn commit(&mut self) -> Result<()> {
        if self.open == 0 {
            return Ok(());
        }
        self.flush()?;
        let d = self.db.dialect();
        let sql = format!(
            "UPDATE runs SET t_min = {least}(COALESCE(t_min, ?1), ?1), \
             t_max = {greatest}(COALESCE(t_max, ?2), ?2) WHERE id = ?3",
            least = d.least(),
            greatest = d.greatest()
        );
        for r in self.runs.values_mut().filter(|r| r.dirty) {
            self.db.exec(&sql, &[r.t_min.into(), r.t_max.into(), r.id.into()])?;
            r.dirty = false;
        }
        let touched: Vec<_> = std::mem::take(&mut self.touched).into_iter().collect();
        super::schema::refresh_hours(self.db.as_mut(), &touched)?;
        self.db.batch("COMMIT").context("cannot commit to the database")?;
        self.open = 0;
        self.since = None;
        self.next_id = None;
        Ok(())
    }

    fn site(&mut self, name: &str) -> Result<i64> {
        if let Some(id) = self.sites.get(name) {
            return Ok(*id);
        }
        self.db
            .exec("INSERT INTO sites (name) VALUES (?1) ON CONFLICT DO NOTHING", &[name.into()])?;
        let id = self.db.rows("SELECT id FROM sites WHERE name = ?1", &[name.into()])?[0][0]
            .i64()
            .context("a site without an id")?;
        self.sites.insert(name.to_string(), id);
        Ok(id)
    }

    fn run(&mut self, site_id: i64, run: &str) -> Result<&mut RunState> {
        let key = (site_id, run.to_string());
        if !self.runs.contains_key(&key) {
            let p = [site_id.into(), run.into()];
            self.db.exec(
                "INSERT INTO runs (site_id, run) VALUES (?1, ?2) ON CONFLICT DO NOTHING",
                &p,
            )?;
            let row = self.db.rows(
                "SELECT id, origin, rate_hz, has_start, t_min, t_max FROM runs \
                 WHERE site_id = ?1 AND run = ?2",
                &p,
            )?;
            let r = &row[0];
            let id = r[0].i64().context("a run without an id")?;
            let mut seen = RunSeen::default();
            self.db.each(
                "SELECT seq FROM records WHERE run_id = ?1 ORDER BY seq",
                &[id.into()],
                &mut |s| {
                    if let Some(seq) = s[0].i64().and_then(|s| u64::try_from(s).ok()) {
                        seen.take(seq);
                    }
                    Ok(())
                },
            )?;
            self.runs.insert(
                key.clone(),
                RunState {
                    id,
                    origin: r[1].f64(),
                    rate_hz: r[2].f64().unwrap_or(0.0),
                    has_start: r[3].i64() == Some(1),
                    t_min: r[4].f64().unwrap_or(f64::INFINITY),
                    t_max: r[5].f64().unwrap_or(f64::NEG_INFINITY),
                    dirty: false,
                    seen,
                },
            );
        }
        Ok(self.runs.get_mut(&key).expect("inserted"))
    }

    fn channel(&mut self, site_id: i64, name: &str) -> Result<i64> {
        let name = crate::messages::sanitize(name);
        let key = (site_id, name.clone());
        if let Some(id) = self.channels.get(&key) {
            return Ok(*id);
        }
        let p = [site_id.into(), name.as_str().into()];
        self.db.exec(
            "INSERT INTO channels (site_id, name) VALUES (?1, ?2) ON CONFLICT DO NOTHING",
            &p,
        )?;
        let id = self.db.rows("SELECT id FROM channels WHERE site_id = ?1 AND name = ?2", &p)?[0]
            [0]
        .i64()
        .context("a channel without an id")?;
        self.channels.insert(key, id);
        Ok(id)
    }

    /// A start record: the run's clock and rate; intervals stored before it are redone.
    fn start(&mut self, key: (i64, String), v: &Value) -> Result<()> {
        let origin = v["start"].as_str().and_then(epoch_of).map(|e| e - num(v, "t_start_s"));
        let rate = num(v, "sample_rate_hz");
        let r = self.runs.get_mut(&key).expect("loaded");
        let redo = !r.has_start;
        (r.origin, r.rate_hz, r.has_start) = (origin, rate, true);
        let id = r.id;
        self.db.exec(
            "UPDATE runs SET origin = ?1, rate_hz = ?2, has_start = 1 WHERE id = ?3",
            &[origin.into(), rate.into(), id.into()],
        )?;
        if redo {
            self.redo_intervals(key.0, id, origin, rate)?;
        }
        Ok(())
    }

    /// Works out again the intervals of a run stored before its start record.
    fn redo_intervals(
        &mut self,
        site_id: i64,
        run_id: i64,
        origin: Option<f64>,
        rate: f64,
    ) -> Result<()> {
        self.flush()?;
        let rows = self.db.rows(
            "SELECT r.id, r.line, i.channel_id, i.clock, i.hour_key FROM records r \
             JOIN intervals i ON i.record_id = r.id WHERE r.run_id = ?1 AND r.kind = 'interval'",
            &[run_id.into()],
        )?;
        for row in rows {
            let (Some(id), Some(line), Some(channel_id), Some(clock), Some(hour)) =
                (row[0].i64(), row[1].text(), row[2].i64(), row[3].i64(), row[4].i64())
            else {
                continue;
            };
            self.touched.insert((channel_id, clock, hour));
            let v: Value = serde_json::from_str(line)?;
            self.db.exec(
                "DELETE FROM intervals WHERE channel_id = ?1 AND record_id = ?2",
                &[channel_id.into(), id.into()],
            )?;
            self.db.exec(
                "UPDATE records SET t_epoch = ?1 WHERE id = ?2",
                &[when(&v, "start", "t_start_s", origin).into(), id.into()],
            )?;
            self.interval(site_id, id, &v, origin, rate)?;
        }
        Ok(())
    }

    /// An interval record's columns, as `report` counts it.
    fn interval(
        &mut self,
        site_id: i64,
        id: i64,
        v: &Value,
        origin: Option<f64>,
        rate: f64,
    ) -> Result<()> {
        let Some(name) = v["channel"].as_str() else { return Ok(()) };
        let channel_id = self.channel(site_id, name)?;
        let c = IntervalCols::of(v, origin, rate);
        self.touched.insert((channel_id, i64::from(c.t_epoch.is_some()), c.hour_key));
        self.pending.intervals.push([
            channel_id.into(),
            i64::from(c.t_epoch.is_some()).into(),
            c.hour_key.into(),
            c.t_key.into(),
            id.into(),
            c.t_epoch.into(),
            c.span_s.into(),
            i64::from(c.valid).into(),
            (c.samples as i64).into(),
            c.occupied.into(),
            c.measured_s.into(),
            c.lost_s.into(),
            (c.dropped as i64).into(),
            c.power_w.into(),
            (c.power_n as i64).into(),
            c.peak_dbfs.into(),
            c.noise.into(),
            v["center_hz"].as_f64().into(),
            v["width_hz"].as_f64().into(),
        ]);
        Ok(())
    }

    fn emission(&mut self, site_id: i64, id: i64, v: &Value, t_epoch: Option<f64>) -> Result<()> {
        let Some(name) = v["channel"].as_str() else { return Ok(()) };
        let channel_id = self.channel(site_id, name)?;
        let end = v["end"].as_str().and_then(epoch_of);
        self.pending.emissions.push([
            id.into(),
            channel_id.into(),
            t_epoch.into(),
            end.into(),
            v["duration_s"].as_f64().into(),
            v["peak_dbfs"].as_f64().into(),
            v["mean_dbfs"].as_f64().into(),
            v["obw_hz"].as_f64().into(),
            v["class"].as_str().into(),
            v["designator"].as_str().into(),
        ]);
        Ok(())
    }

    fn alarm(&mut self, id: i64, kind: &str, v: &Value, t_epoch: Option<f64>) -> Result<()> {
        let f = |k: &str| Val::from(v[k].as_f64());
        let s = |k: &str| Val::from(v[k].as_str());
        self.pending.alarms.push([
            id.into(),
            s("channel"),
            kind.into(),
            s("what"),
            t_epoch.into(),
            f("statistic"),
            f("threshold"),
            f("baseline"),
            f("present"),
            s("unit"),
            s("method"),
        ]);
        Ok(())
    }

    fn capture(&mut self, id: i64, v: &Value, t_epoch: Option<f64>) -> Result<()> {
        let n = |k: &str| v[k].as_u64().map_or(Val::Null, |x| Val::Int(x as i64));
        self.pending.captures.push([
            id.into(),
            v["channel"].as_str().into(),
            v["status"].as_str().into(),
            v["file"].as_str().into(),
            t_epoch.into(),
            n("iq_samples"),
            n("bytes"),
            v["truncated"].as_bool().map_or(Val::Null, |b| Val::Int(b.into())),
        ]);
        Ok(())
    }
}

/// An interval's columns: what `report` adds up for it ([`crate::output::summary`]).
#[derive(Debug, PartialEq)]
pub struct IntervalCols {
    pub t_epoch: Option<f64>,
    /// The time the noise floor is ordered by: the clock, else the run time.
    pub t_key: f64,
    /// Hours since the epoch (UTC), or from the run's start without a clock.
    pub hour_key: i64,
    pub span_s: f64,
    pub valid: bool,
    pub samples: u64,
    pub occupied: f64,
    pub measured_s: f64,
    pub lost_s: f64,
    pub dropped: u64,
    pub power_w: Option<f64>,
    pub power_n: u64,
    pub peak_dbfs: Option<f64>,
    pub noise: Option<f64>,
}

impl IntervalCols {
    pub fn of(v: &Value, origin: Option<f64>, rate_hz: f64) -> IntervalCols {
        let t_epoch = when(v, "start", "t_start_s", origin);
        let t_run = num(v, "t_start_s");
        let samples = v["samples"].as_u64().unwrap_or(0);
        let dropped = v["dropped_samples"].as_u64().unwrap_or(0);
        let span_s = (num(v, "t_end_s") - t_run).max(0.0);
        let valid = samples > 0 && !v["occupancy_pct"].is_null();
        let hour_key = match t_epoch {
            Some(t) => (t / 3600.0).floor() as i64,
            None => (t_run / 3600.0).floor() as i64,
        };
        let mut c = IntervalCols {
            t_epoch,
            t_key: t_epoch.unwrap_or(t_run),
            hour_key,
            span_s,
            valid,
            samples: 0,
            occupied: 0.0,
            measured_s: 0.0,
            lost_s: span_s,
            dropped,
            power_w: None,
            power_n: 0,
            peak_dbfs: None,
            noise: None,
        };
        if v["state"] == "not_measured" {
            // A panorama's channel never in view: not measured and not lost either (the only
            // invalid interval with no lost time: what `report --db` counts as not measured).
            c.valid = false;
            c.lost_s = 0.0;
            return c;
        }
        if !valid {
            return c;
        }
        let lost = if rate_hz > 0.0 { (dropped as f64 / rate_hz).min(span_s) } else { 0.0 };
        c.lost_s = lost;
        c.measured_s = crate::output::summary::observed_s(v, span_s - lost);
        c.samples = samples;
        c.occupied = v["occupied_samples"].as_f64().unwrap_or(0.0).clamp(0.0, samples as f64);
        if let Some(m) = v["mean_dbfs"].as_f64() {
            c.power_w = Some(samples as f64 * 10f64.powf(m / 10.0));
            c.power_n = samples;
        }
        c.peak_dbfs = v["peak_dbfs"].as_f64();
        c.noise = v["noise_floor_dbfs_per_hz"].as_f64();
        c
    }
}

/// What an import read.
#[derive(Debug, Default, PartialEq)]
pub struct Imported {
    pub stored: u64,
    pub duplicates: u64,
    /// Records without `run` and `seq` (written before records had ids): not stored.
    pub without_id: u64,
    pub notes: Vec<String>,
}

/// Loads the log `name` (JSON Lines or `log --csv`) into the database. A run's site is the one
/// its start record names, else the file's (as `report` reads it, [`site_of_file`]).
pub fn import(w: &mut Writer, name: &str, reader: impl BufRead) -> Result<Imported> {
    let file_site = site_of_file(name);
    let mut sites: HashMap<String, String> = HashMap::new();
    let mut out = Imported::default();
    let (stored, duplicates) = (w.stored, w.duplicates);
    let mut failed = None;
    read_records_with_lines(name, reader, &mut out.notes, |v, line| {
        if failed.is_some() {
            return;
        }
        let Some(run) = v["run"].as_str() else {
            out.without_id += 1;
            return;
        };
        if v["kind"] == "start" {
            let site = v["site"].as_str().map_or(file_site.clone(), crate::messages::sanitize);
            sites.insert(run.to_string(), site);
        }
        let site = sites.get(run).unwrap_or(&file_site).clone();
        let text = line.map_or_else(|| v.to_string(), str::to_string);
        match w.take(&site, &text).and_then(|s| w.tick().map(|()| s)) {
            Ok(Stored::NotARecord) => out.without_id += 1,
            Ok(_) => {}
            Err(e) => failed = Some(e),
        }
    })?;
    if let Some(e) = failed {
        return Err(e);
    }
    w.commit()?;
    out.stored = w.stored - stored;
    out.duplicates = w.duplicates - duplicates;
    Ok(out)
}
