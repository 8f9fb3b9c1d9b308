//! The collector's side of the monitoring network: records that sites published arrive here
//! and are written to one JSON Lines file per site, `DIR/SITE.jsonl`, line for line as the site
//! wrote them locally, so `report` reads them as if the site had logged here.
//!
//! Delivery is at least once (MQTT QoS 1), so the same record may come twice: a record whose id
//! (site, `run`, `seq`) was written already is dropped. Records of a run arrive in order (one
//! client's messages are delivered in the order sent, MQTT 3.1.1 §4.6), so per run it is enough
//! to remember the highest `seq` written and the holes below it: a `seq` at or below the highest
//! that is no hole is a copy. (Mosquitto 2.0 keeps that order only while the subscriber
//! acknowledges what it gets: see [`crate::net::subscribe`].) A hole is a record that never came (the site's spool was full, or a
//! broker lost it in a crash); it is reported, and filled if the record comes late.
//! The files are read back at start, so a collector that restarts writes nothing twice.
//!
//! A broker that forgets (restarted without persistence) loses records it had acknowledged to
//! the site: holes that no MQTT acknowledgement mends. So the collector asks the site itself
//! ([`Collector::due_requests`], [`crate::net::resend`]): for each hole, and for the missing tail
//! of a run that fell quiet without its `stop` record (the last record of a run; its `seq` ends
//! the run). A site that sends nothing for longer than its rhythm allows is reported as silent
//! ([`Collector::silent_sites`]), never taken for idle: a live site sends every interval.
//!
//! With `--db` the records also go into the database ([`crate::store::write`]), which keeps
//! each (site, run, seq) once by itself; its transactions are committed in batches, and
//! [`Collector::uncommitted`] tells the link to the broker what it may not yet acknowledge.

use crate::net::metrics::collect::CollectGauges;
use crate::store::seen::RunSeen;
use crate::store::write::{Stored, Writer};
use anyhow::{bail, Context, Result};
use serde_json::Value;
use std::collections::HashMap;
use std::fs::{File, OpenOptions};
use std::io::{BufRead, BufReader, Write};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use crate::net::resend::{Ask, ResendRequest, MAX_RANGES};

/// How long a site may send nothing before it is reported silent when its interval is not
/// known (its start record never came).
pub const SILENT_UNKNOWN: Duration = Duration::from_secs(180);
/// At least this, and three of its intervals, before a site is reported silent.
pub const SILENT_AT_LEAST: Duration = Duration::from_secs(15);

/// One run of one site: what came, whether its end came, and when to ask for the rest.
#[derive(Debug, Default, Clone)]
struct RunState {
    seen: RunSeen,
    /// Its `stop` record came: nothing after it is missing.
    ended: bool,
    /// `interval_s` of its start record: how often a live run sends.
    interval_s: Option<f64>,
    /// When a record of it last came in this process (`None`: only read back from the file).
    last_record: Option<Instant>,
    ask: Ask,
}

impl RunState {
    /// Takes a record; `false` for a copy. Holes and fills move the request schedule.
    fn take(
        &mut self,
        seq: u64,
        kind: &str,
        interval_s: Option<f64>,
        now: Option<Instant>,
    ) -> bool {
        let next = self.seen.next();
        if !self.seen.take(seq) {
            return false;
        }
        if kind == "stop" {
            self.ended = true;
        }
        if interval_s.is_some() {
            self.interval_s = interval_s;
        }
        if let Some(now) = now {
            self.last_record = Some(now);
            if seq > next {
                self.ask.hole(now);
            } else if seq < next {
                self.ask.filled(now);
            }
            if kind == "stop" && !self.seen.holes().is_empty() {
                // The run is over: what is missing will not come by itself; ask now, while
                // the site still listens.
                self.ask.now(now);
            }
        }
        true
    }

    /// How long a live run may send nothing.
    fn quiet_after(&self) -> Duration {
        self.interval_s
            .filter(|i| i.is_finite() && *i > 0.0)
            .map_or(Duration::from_secs(10), |i| Duration::from_secs_f64(2.0 * i + 2.0))
    }

    /// The ranges to ask for at `now`: the holes, and everything after the last record of a
    /// run seen here that fell quiet before its `stop` record came.
    fn wanted(&self, run: &str, now: Instant) -> Vec<ResendRequest> {
        let mut out: Vec<ResendRequest> = self
            .seen
            .holes()
            .iter()
            .take(MAX_RANGES)
            .map(|&(a, b)| ResendRequest { run: run.to_string(), from: a, to: Some(b - 1) })
            .collect();
        let quiet = self.last_record.is_some_and(|t| now.duration_since(t) >= self.quiet_after());
        if !self.ended && quiet {
            out.push(ResendRequest { run: run.to_string(), from: self.seen.next(), to: None });
        }
        out
    }
}

/// A site that has sent nothing for longer than its rhythm allows.
#[derive(Debug, Clone, PartialEq)]
pub struct Silent {
    pub site: String,
    /// Since the last message of any kind from it (or since this collector first heard of it).
    pub silent_for: Duration,
    /// Its last status (`online`, `offline (lost)`, …), if one came.
    pub last_status: Option<String>,
}

impl Silent {
    pub fn note(&self) -> String {
        let status = self
            .last_status
            .as_deref()
            .map_or(String::new(), |s| format!("; its last status: {s}"));
        format!(
            "site {} has sent nothing for {:.0} s{status}: down or cut off, not idle (a live site sends every interval)",
            self.site,
            self.silent_for.as_secs_f64()
        )
    }
}

/// What became of one message.
#[derive(Debug, PartialEq, Eq)]
pub enum Taken {
    Written,
    Duplicate,
    /// Not a record of ours (no `run`/`seq`, not JSON, several lines): dropped.
    Malformed,
}

struct SiteFile {
    /// `DIR/SITE.jsonl` with `--out`; `None` with only a database.
    file: Option<File>,
    runs: HashMap<String, RunState>,
    /// When this collector last heard anything from the site (`None`: never, in this process).
    heard: Option<Instant>,
    /// The run of its newest record, its last status, and whether it said it stopped.
    current_run: Option<String>,
    status: Option<String>,
    said_stopped: bool,
    /// Reported silent, and not heard since.
    reported_silent: bool,
}

impl SiteFile {
    /// Stopped in an orderly way: its status said so, or its newest run's `stop` record came.
    fn stopped(&self) -> bool {
        self.said_stopped
            || self.current_run.as_ref().and_then(|r| self.runs.get(r)).is_some_and(|r| r.ended)
    }

    /// How long it may send nothing before it is silent: three of its intervals, at least
    /// [`SILENT_AT_LEAST`] ([`SILENT_UNKNOWN`] while its interval is not known).
    fn silent_after(&self) -> Duration {
        let interval = self.current_run.as_ref().and_then(|r| self.runs.get(r)?.interval_s);
        interval
            .filter(|i| i.is_finite() && *i > 0.0)
            .map_or(SILENT_UNKNOWN, |i| Duration::from_secs_f64(3.0 * i).max(SILENT_AT_LEAST))
    }
}

/// Per-site files and what each has seen, and the database.
pub struct Collector {
    /// `--out`: `None` with only a database.
    dir: Option<PathBuf>,
    db: Option<Writer>,
    sites: HashMap<String, SiteFile>,
    pub written: u64,
    pub duplicates: u64,
    pub malformed: u64,
    /// `collect --metrics`: told what became of every message.
    metrics: Option<CollectGauges>,
}

/// What the collector reads of a record: its id, kind, and a start record's interval.
struct Head {
    run: String,
    seq: u64,
    kind: String,
    interval_s: Option<f64>,
}

fn record_head(line: &str) -> Option<Head> {
    let v: Value = serde_json::from_str(line).ok()?;
    let kind = v.get("kind")?.as_str()?.to_string();
    let interval_s = v.get("interval_s").and_then(Value::as_f64).filter(|_| kind == "start");
    Some(Head {
        run: v.get("run")?.as_str()?.to_string(),
        seq: v.get("seq")?.as_u64()?,
        kind,
        interval_s,
    })
}

/// Opens a site's file for appending, after reading the ids it holds into `runs`.
fn open_site_file(path: &Path, runs: &mut HashMap<String, RunState>) -> Result<File> {
    if let Ok(f) = File::open(path) {
        for line in BufReader::new(f).lines() {
            let line = line.with_context(|| format!("reading '{}'", path.display()))?;
            if let Some(h) = record_head(&line) {
                runs.entry(h.run).or_default().take(h.seq, &h.kind, h.interval_s, None);
            }
        }
    }
    OpenOptions::new()
        .create(true)
        .append(true)
        .open(path)
        .with_context(|| format!("cannot write '{}'", path.display()))
}

impl Collector {
    pub fn new(dir: &Path) -> Result<Collector> {
        Collector::open(Some(dir), None)
    }

    /// Files in `dir`, records in `db`, or both.
    pub fn open(dir: Option<&Path>, db: Option<Writer>) -> Result<Collector> {
        if let Some(dir) = dir {
            std::fs::create_dir_all(dir)
                .with_context(|| format!("cannot create the directory '{}'", dir.display()))?;
            if !dir.is_dir() {
                bail!("'{}' is not a directory", dir.display());
            }
        }
        Ok(Collector {
            dir: dir.map(Path::to_path_buf),
            db,
            sites: HashMap::new(),
            written: 0,
            duplicates: 0,
            malformed: 0,
            metrics: None,
        })
    }

    /// Counts what becomes of every message in `metrics` too.
    pub fn with_metrics(mut self, metrics: CollectGauges) -> Collector {
        self.metrics = Some(metrics);
        self
    }

    /// Records of `site` that never arrived (in the holes of its runs).
    pub fn missing(&self, site: &str) -> u64 {
        let Some(f) = self.sites.get(site) else { return 0 };
        f.runs.values().flat_map(|r| r.seen.holes()).map(|(a, b)| b - a).sum()
    }

    /// A site's state: its file opened for appending, learning the ids it already holds; with
    /// only a database, the ids the database holds (so holes are asked for either way).
    fn site(&mut self, site: &str) -> Result<&mut SiteFile> {
        if !self.sites.contains_key(site) {
            let mut runs: HashMap<String, RunState> = HashMap::new();
            let file = match (&self.dir, &mut self.db) {
                (Some(dir), _) => {
                    Some(open_site_file(&dir.join(format!("{site}.jsonl")), &mut runs)?)
                }
                (None, Some(db)) => {
                    for k in db.known(site)? {
                        let interval_s = k.interval_s;
                        runs.entry(k.run).or_default().take(k.seq, &k.kind, interval_s, None);
                    }
                    None
                }
                (None, None) => bail!("the collector has neither --out nor --db"),
            };
            let f = SiteFile {
                file,
                runs,
                heard: None,
                current_run: None,
                status: None,
                said_stopped: false,
                reported_silent: false,
            };
            self.sites.insert(site.to_string(), f);
        }
        Ok(self.sites.get_mut(site).expect("inserted"))
    }

    /// Writes a record of `site` unless it is a copy; returns after the line is flushed (only
    /// then may the broker be told it arrived).
    pub fn take(&mut self, site: &str, payload: &[u8]) -> Result<Taken> {
        self.take_at(site, payload, Instant::now())
    }

    /// [`Collector::take`] of a record that came at `now`; tells the metrics what became of it.
    pub fn take_at(&mut self, site: &str, payload: &[u8], now: Instant) -> Result<Taken> {
        let taken = self.store(site, payload, now)?;
        if let Some(m) = &self.metrics {
            m.taken(site, &taken, self.missing(site));
        }
        Ok(taken)
    }

    /// Writes a record of `site` unless it is a copy (the body of [`Collector::take_at`]).
    fn store(&mut self, site: &str, payload: &[u8], now: Instant) -> Result<Taken> {
        let (Ok(line), Ok(())) = (std::str::from_utf8(payload), crate::net::mqtt::check_site(site))
        else {
            self.malformed += 1;
            return Ok(Taken::Malformed);
        };
        let line = line.trim_end_matches('\n');
        let Some(h) = record_head(line).filter(|_| !line.contains('\n')) else {
            self.malformed += 1;
            return Ok(Taken::Malformed);
        };
        let stored = match &mut self.db {
            Some(db) => db.take(site, line)? == Stored::New,
            None => false,
        };
        let s = self.site(site)?;
        s.heard = Some(now);
        let state = s.runs.entry(h.run.clone()).or_default();
        let fresh = h.seq >= state.seen.next();
        if !state.take(h.seq, &h.kind, h.interval_s, Some(now)) {
            return Ok(self.count(stored));
        }
        if fresh {
            s.current_run = Some(h.run);
            s.said_stopped = false;
        }
        let Some(file) = &mut s.file else { return Ok(self.count(stored)) };
        let mut buf = Vec::with_capacity(line.len() + 1);
        buf.extend_from_slice(line.as_bytes());
        buf.push(b'\n');
        file.write_all(&buf)?;
        file.flush()?;
        self.written += 1;
        Ok(Taken::Written)
    }

    fn count(&mut self, new: bool) -> Taken {
        if new {
            self.written += 1;
            Taken::Written
        } else {
            self.duplicates += 1;
            Taken::Duplicate
        }
    }

    /// Records taken into the database but not yet committed (none without a database).
    pub fn uncommitted(&self) -> usize {
        self.db.as_ref().map_or(0, Writer::uncommitted)
    }

    /// Commits the database's batch if it is due; `now`: whatever its age (the link is idle,
    /// or the collector stops).
    pub fn commit(&mut self, now: bool) -> Result<()> {
        match &mut self.db {
            Some(db) if now => db.commit(),
            Some(db) => db.tick(),
            None => Ok(()),
        }
    }

    /// Records that never came, per site and run: `(site, run, from, to)`.
    pub fn holes(&self) -> Vec<(String, String, u64, u64)> {
        let mut out = Vec::new();
        for (site, f) in &self.sites {
            for (run, state) in &f.runs {
                for &(a, b) in state.seen.holes() {
                    out.push((site.clone(), run.clone(), a, b));
                }
            }
        }
        out.sort();
        out
    }

    /// A status message of `site` (`{"state":…,"reason":…}`) came at `now`.
    pub fn status(&mut self, site: &str, payload: &[u8], now: Instant) -> Result<()> {
        if crate::net::mqtt::check_site(site).is_err() {
            return Ok(());
        }
        let v: Value = serde_json::from_slice(payload).unwrap_or(Value::Null);
        let state = v["state"].as_str().unwrap_or("unknown");
        let reason = v["reason"].as_str().unwrap_or("");
        let s = self.site(site)?;
        s.heard = Some(now);
        s.said_stopped = state == "offline" && reason == "stopped";
        s.status = Some(crate::messages::sanitize(&format!("{state} ({reason})")));
        Ok(())
    }

    /// The requests due at `now`, per site: each asks for one range of one run. Only sites
    /// heard in this process and not silent are asked (a request to a site that is away is
    /// lost; asking starts again when it is heard).
    pub fn due_requests(&mut self, now: Instant) -> Vec<(String, ResendRequest)> {
        let mut out = Vec::new();
        for (site, f) in &mut self.sites {
            if !f.heard.is_some_and(|t| now.duration_since(t) < f.silent_after()) {
                continue;
            }
            for (run, state) in &mut f.runs {
                let wanted = state.wanted(run, now);
                if wanted.is_empty() {
                    state.ask.settle();
                } else if state.ask.due(now) {
                    state.ask.asked(now);
                    out.extend(wanted.into_iter().map(|r| (site.clone(), r)));
                }
            }
        }
        out.sort_by(|a, b| (&a.0, &a.1.run, a.1.from).cmp(&(&b.0, &b.1.run, b.1.from)));
        out
    }

    /// The sites heard in this process that have since sent nothing for longer than three of
    /// their intervals (at least [`SILENT_AT_LEAST`]) without saying they stopped.
    pub fn silent_sites(&self, now: Instant) -> Vec<Silent> {
        let mut out: Vec<Silent> = self
            .sites
            .iter()
            .filter_map(|(site, f)| {
                let silent_for = now.duration_since(f.heard?);
                (silent_for >= f.silent_after() && !f.stopped()).then(|| Silent {
                    site: site.clone(),
                    silent_for,
                    last_status: f.status.clone(),
                })
            })
            .collect();
        out.sort_by(|a, b| a.site.cmp(&b.site));
        out
    }

    /// What changed since the last call: sites newly silent, and silent sites heard again
    /// (whose missing records are then asked for at once).
    pub fn silence_notes(&mut self, now: Instant) -> Vec<String> {
        let silent = self.silent_sites(now);
        let mut notes = Vec::new();
        for (site, f) in &mut self.sites {
            let is_silent = silent.iter().any(|s| &s.site == site);
            if is_silent && !f.reported_silent {
                f.reported_silent = true;
                notes.extend(silent.iter().filter(|s| &s.site == site).map(Silent::note));
            } else if !is_silent && f.reported_silent {
                f.reported_silent = false;
                notes.push(format!("site {site} is heard again"));
                for state in f.runs.values_mut() {
                    state.ask.now(now);
                }
            }
        }
        notes.sort();
        notes
    }

    /// Requests sent for a run that filled nothing (how hard the collector tried).
    pub fn asks(&self, site: &str, run: &str) -> u32 {
        self.sites.get(site).and_then(|f| f.runs.get(run)).map_or(0, |r| r.ask.unanswered())
    }

    /// Syncs every file to disk.
    pub fn sync(&mut self) {
        for f in self.sites.values_mut().filter_map(|f| f.file.as_mut()) {
            let _ = f.sync_data();
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn files_are_continued_without_repeating_a_record() {
        let dir = std::env::temp_dir().join(format!("bw-collect-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        let line = |seq: u64| format!("{{\"kind\":\"interval\",\"run\":\"r1\",\"seq\":{seq}}}");
        let mut c = Collector::new(&dir).unwrap();
        for seq in [0, 1, 1, 2] {
            c.take("ridge", line(seq).as_bytes()).unwrap();
        }
        assert_eq!(c.take("ridge", b"not json").unwrap(), Taken::Malformed);
        drop(c);
        let mut c = Collector::new(&dir).unwrap();
        assert_eq!(c.take("ridge", line(2).as_bytes()).unwrap(), Taken::Duplicate);
        assert_eq!(c.take("ridge", line(3).as_bytes()).unwrap(), Taken::Written);
        let text = std::fs::read_to_string(dir.join("ridge.jsonl")).unwrap();
        let seqs: Vec<String> = text.lines().map(String::from).collect();
        assert_eq!(seqs, (0..4).map(line).collect::<Vec<_>>());
        let _ = std::fs::remove_dir_all(&dir);
    }

    /// A collector in a fresh folder of its own, and a clock for it.
    fn fresh(name: &str) -> (Collector, PathBuf, impl Fn(f64) -> Instant) {
        let dir = std::env::temp_dir().join(format!("bw-collect-{name}-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        let t0 = Instant::now();
        (Collector::new(&dir).unwrap(), dir, move |s: f64| t0 + Duration::from_secs_f64(s))
    }

    /// A record of run `r1`: a start record says its interval (1 s).
    fn rec(kind: &str, seq: u64) -> Vec<u8> {
        let extra = if kind == "start" { ",\"interval_s\":1.0" } else { "" };
        format!("{{\"kind\":\"{kind}\",\"run\":\"r1\",\"seq\":{seq}{extra}}}").into_bytes()
    }

    fn asked(c: &mut Collector, now: Instant) -> Vec<(u64, Option<u64>)> {
        c.due_requests(now).into_iter().map(|(_, r)| (r.from, r.to)).collect()
    }

    #[test]
    fn a_hole_is_asked_for_with_back_off_until_it_fills_and_a_quiet_run_for_its_tail() {
        let (mut c, dir, at) = fresh("ask");
        c.take_at("ridge", &rec("start", 0), at(0.0)).unwrap();
        for seq in 1..3 {
            c.take_at("ridge", &rec("interval", seq), at(0.0)).unwrap();
        }
        c.take_at("ridge", &rec("interval", 6), at(0.1)).unwrap();
        // Asked a second after the hole is seen (an answer to an earlier request may still
        // be on its way), then 1 s, 2 s, … later while nothing fills it.
        assert!(asked(&mut c, at(0.5)).is_empty());
        assert_eq!(asked(&mut c, at(1.1)), [(3, Some(5))]);
        assert!(asked(&mut c, at(1.5)).is_empty());
        assert_eq!(asked(&mut c, at(2.2)), [(3, Some(5))]);
        assert!(asked(&mut c, at(3.5)).is_empty());
        // A record of the answer: the rest is asked for a second after the last that came.
        assert_eq!(c.take_at("ridge", &rec("interval", 4), at(2.3)).unwrap(), Taken::Written);
        assert_eq!(c.take_at("ridge", &rec("interval", 4), at(2.3)).unwrap(), Taken::Duplicate);
        assert!(asked(&mut c, at(3.2)).is_empty());
        assert_eq!(asked(&mut c, at(3.4)), [(3, Some(3)), (5, Some(5))]);
        for seq in [3, 5] {
            c.take_at("ridge", &rec("interval", seq), at(3.5)).unwrap();
        }
        assert!(c.holes().is_empty());
        // No hole, but the run fell quiet (2 intervals + 2 s) before its stop record: its
        // tail is asked for, open-ended.
        assert!(asked(&mut c, at(7.0)).is_empty());
        assert_eq!(asked(&mut c, at(7.6)), [(7, None)]);
        // The stop record ends the run: nothing more is wanted.
        c.take_at("ridge", &rec("stop", 7), at(8.0)).unwrap();
        assert!(asked(&mut c, at(60.0)).is_empty());
        let _ = std::fs::remove_dir_all(&dir);
    }

    #[test]
    fn a_run_that_ends_with_holes_is_asked_at_once_and_given_up_on_after_max_asks() {
        let (mut c, dir, at) = fresh("end");
        c.take_at("ridge", &rec("start", 0), at(0.0)).unwrap();
        c.take_at("ridge", &rec("interval", 3), at(0.0)).unwrap();
        c.take_at("ridge", &rec("stop", 4), at(0.2)).unwrap();
        assert_eq!(asked(&mut c, at(0.2)), [(1, Some(2))]);
        // The site keeps sending its status (it is alive) but never the records.
        let mut t = 0.2;
        let mut asks = 1;
        while t < 600.0 {
            t += 0.5;
            c.status("ridge", br#"{"state":"online","reason":"connected"}"#, at(t)).unwrap();
            asks += asked(&mut c, at(t)).len();
        }
        assert_eq!(asks as u32, crate::net::resend::MAX_ASKS);
        assert_eq!(c.asks("ridge", "r1"), crate::net::resend::MAX_ASKS);
        assert_eq!(c.holes(), [("ridge".to_string(), "r1".to_string(), 1, 3)]);
        let _ = std::fs::remove_dir_all(&dir);
    }

    #[test]
    fn a_site_that_stops_sending_is_reported_silent_not_idle() {
        let (mut c, dir, at) = fresh("silent");
        c.take_at("ridge", &rec("start", 0), at(0.0)).unwrap();
        c.take_at("ridge", &rec("interval", 1), at(1.0)).unwrap();
        c.take_at("ridge", &rec("interval", 3), at(1.0)).unwrap();
        // An interval of 1 s: silent after 3 intervals, but at least 15 s.
        assert!(c.silent_sites(at(15.9)).is_empty());
        let silent = c.silent_sites(at(16.0));
        assert_eq!(silent.len(), 1);
        assert_eq!(
            (silent[0].site.as_str(), silent[0].silent_for),
            ("ridge", Duration::from_secs(15))
        );
        let notes = c.silence_notes(at(16.0));
        assert_eq!(notes.len(), 1);
        assert!(
            notes[0].contains("ridge has sent nothing for 15 s") && notes[0].contains("not idle")
        );
        assert!(c.silence_notes(at(17.0)).is_empty(), "said once");
        // A silent site is not asked (the request would be lost); heard again, it is at once.
        assert!(asked(&mut c, at(17.0)).is_empty());
        c.status("ridge", br#"{"state":"online","reason":"connected"}"#, at(40.0)).unwrap();
        assert_eq!(c.silence_notes(at(40.0)), ["site ridge is heard again"]);
        assert_eq!(asked(&mut c, at(40.0)), [(2, Some(2)), (4, None)]);
        // A site that said it stopped is not silent, however long it stays away.
        c.status("ridge", br#"{"state":"offline","reason":"stopped"}"#, at(41.0)).unwrap();
        assert!(c.silent_sites(at(4000.0)).is_empty());
        let _ = std::fs::remove_dir_all(&dir);
    }
}
