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
//! With `--db` the records also go into the database ([`crate::store::write`]), which keeps
//! each (site, run, seq) once by itself; its transactions are committed in batches, and
//! [`Collector::uncommitted`] tells the link to the broker what it may not yet acknowledge.

use crate::store::write::{Stored, Writer};
use anyhow::{bail, Context, Result};
use serde_json::Value;
use std::collections::HashMap;
use std::fs::{File, OpenOptions};
use std::io::{BufRead, BufReader, Write};
use std::path::{Path, PathBuf};

/// What one run of one site has delivered.
#[derive(Debug, Default, Clone, PartialEq)]
pub struct RunSeen {
    /// Highest `seq` written plus one.
    next: u64,
    /// Ranges `[from, to)` below `next` never received.
    holes: Vec<(u64, u64)>,
}

impl RunSeen {
    /// Takes `seq` if new (true) or says it is a copy (false).
    pub fn take(&mut self, seq: u64) -> bool {
        if seq >= self.next {
            if seq > self.next {
                self.holes.push((self.next, seq));
            }
            self.next = seq + 1;
            return true;
        }
        let Some(i) = self.holes.iter().position(|&(a, b)| (a..b).contains(&seq)) else {
            return false;
        };
        let (a, b) = self.holes.remove(i);
        if seq + 1 < b {
            self.holes.insert(i, (seq + 1, b));
        }
        if a < seq {
            self.holes.insert(i, (a, seq));
        }
        true
    }

    pub fn holes(&self) -> &[(u64, u64)] {
        &self.holes
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
    file: File,
    runs: HashMap<String, RunSeen>,
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
}

/// The id of a record line: (`run`, `seq`).
fn record_id(line: &str) -> Option<(String, u64)> {
    let v: Value = serde_json::from_str(line).ok()?;
    v.get("kind")?.as_str()?;
    Some((v.get("run")?.as_str()?.to_string(), v.get("seq")?.as_u64()?))
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
        })
    }

    /// Opens a site's file for appending, learning the ids it already holds.
    fn site(&mut self, site: &str) -> Result<&mut SiteFile> {
        if !self.sites.contains_key(site) {
            let dir = self.dir.as_ref().expect("files only with --out");
            let path = dir.join(format!("{site}.jsonl"));
            let mut runs: HashMap<String, RunSeen> = HashMap::new();
            if let Ok(f) = File::open(&path) {
                for line in BufReader::new(f).lines() {
                    let line = line.with_context(|| format!("reading '{}'", path.display()))?;
                    if let Some((run, seq)) = record_id(&line) {
                        runs.entry(run).or_default().take(seq);
                    }
                }
            }
            let file = OpenOptions::new()
                .create(true)
                .append(true)
                .open(&path)
                .with_context(|| format!("cannot write '{}'", path.display()))?;
            self.sites.insert(site.to_string(), SiteFile { file, runs });
        }
        Ok(self.sites.get_mut(site).expect("inserted"))
    }

    /// Writes a record of `site` unless it is a copy; returns after the line is flushed (only
    /// then may the broker be told it arrived).
    pub fn take(&mut self, site: &str, payload: &[u8]) -> Result<Taken> {
        let (Ok(line), Ok(())) = (std::str::from_utf8(payload), crate::net::mqtt::check_site(site))
        else {
            self.malformed += 1;
            return Ok(Taken::Malformed);
        };
        let line = line.trim_end_matches('\n');
        let Some((run, seq)) = record_id(line).filter(|_| !line.contains('\n')) else {
            self.malformed += 1;
            return Ok(Taken::Malformed);
        };
        let stored = match &mut self.db {
            Some(db) => db.take(site, line)? == Stored::New,
            None => false,
        };
        if self.dir.is_none() {
            return Ok(self.count(stored));
        }
        let s = self.site(site)?;
        if !s.runs.entry(run).or_default().take(seq) {
            return Ok(self.count(stored));
        }
        let mut buf = Vec::with_capacity(line.len() + 1);
        buf.extend_from_slice(line.as_bytes());
        buf.push(b'\n');
        s.file.write_all(&buf)?;
        s.file.flush()?;
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
            for (run, seen) in &f.runs {
                for &(a, b) in seen.holes() {
                    out.push((site.clone(), run.clone(), a, b));
                }
            }
        }
        out.sort();
        out
    }

    /// Syncs every file to disk.
    pub fn sync(&mut self) {
        for f in self.sites.values_mut() {
            let _ = f.file.sync_data();
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn copies_are_dropped_and_late_records_fill_their_hole() {
        let mut r = RunSeen::default();
        assert!(r.take(0) && r.take(1) && !r.take(1) && !r.take(0));
        assert!(r.take(5));
        assert_eq!(r.holes(), [(2, 5)]);
        assert!(r.take(3));
        assert_eq!(r.holes(), [(2, 3), (4, 5)]);
        assert!(!r.take(3) && r.take(2) && r.take(4) && !r.take(4));
        assert!(r.holes().is_empty());
    }

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
}
