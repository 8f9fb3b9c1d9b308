//! The site's side of a [`ResendRequest`]: find the asked records in the spool (the newest
//! records, a short file read) or, when the spool no longer has them (acknowledged and deleted,
//! or evicted by its bounds), in the local log, which keeps every record of the run.
//!
//! A spool holds a contiguous tail of what was logged (it loses records only at its front), so
//! when it has the first record asked it has every later one too and the log need not be read.
//! The local log is read only as JSON Lines (a `--csv` log cannot answer; its records are
//! resent only while the spool still has them).

use crate::net::resend::ResendRequest;
use serde::Deserialize;
use std::collections::BTreeMap;
use std::fs::File;
use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};

/// The site's own log: its path (`-o`), and whether `--rotate` spreads it over several files
/// (`site.KEY.jsonl` beside `site.jsonl`, see [`crate::output::log::rotation::rotated_name`]).
#[derive(Clone, Debug, PartialEq)]
pub struct LocalLog {
    pub path: PathBuf,
    pub rotated: bool,
}

impl LocalLog {
    /// The files that may hold records, oldest first (rotated names sort as their times do).
    pub fn files(&self) -> Vec<PathBuf> {
        if !self.rotated {
            return vec![self.path.clone()];
        }
        let dir = match self.path.parent() {
            Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
            _ => PathBuf::from("."),
        };
        let name = self.path.file_name().and_then(|n| n.to_str()).unwrap_or_default();
        let (stem, ext) = match name.rsplit_once('.') {
            Some((s, e)) if !s.is_empty() => (format!("{s}."), format!(".{e}")),
            _ => (format!("{name}."), String::new()),
        };
        let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)
            .map(|entries| {
                entries
                    .filter_map(|e| e.ok())
                    .filter(|e| e.file_type().is_ok_and(|t| t.is_file()))
                    .filter(|e| {
                        let n = e.file_name().to_string_lossy().into_owned();
                        n.starts_with(&stem)
                            && n.ends_with(&ext)
                            && n.len() > stem.len() + ext.len()
                    })
                    .map(|e| e.path())
                    .collect()
            })
            .unwrap_or_default();
        files.sort();
        files
    }
}

/// The id of a record line.
#[derive(Deserialize)]
struct Id {
    #[allow(dead_code)]
    kind: String,
    run: String,
    seq: u64,
}

/// The asked records found, lowest `seq` first, at most `max`.
#[derive(Debug, Default)]
pub struct Found {
    pub lines: BTreeMap<u64, String>,
    max: usize,
}

impl Found {
    pub fn new(max: usize) -> Found {
        Found { lines: BTreeMap::new(), max }
    }

    /// Keeps `line` if it is an asked record and among the `max` lowest seen.
    fn offer(&mut self, req: &ResendRequest, line: &str) {
        // Most lines are of the asked run or of none; a cheap look first.
        if !line.contains(req.run.as_str()) {
            return;
        }
        let Ok(id) = serde_json::from_str::<Id>(line) else { return };
        if id.run != req.run || !req.wants(id.seq) || self.lines.contains_key(&id.seq) {
            return;
        }
        if self.lines.len() >= self.max {
            match self.lines.last_key_value() {
                Some((&last, _)) if last > id.seq => {
                    self.lines.pop_last();
                }
                _ => return,
            }
        }
        self.lines.insert(id.seq, line.to_string());
    }

    /// Reads `path` line by line for asked records; a missing or unreadable file holds none.
    pub fn read_file(&mut self, req: &ResendRequest, path: &Path) {
        let Ok(f) = File::open(path) else { return };
        for line in BufReader::new(f).lines() {
            let Ok(line) = line else { return };
            self.offer(req, line.trim_end_matches('\r'));
        }
    }

    pub fn has(&self, seq: u64) -> bool {
        self.lines.contains_key(&seq)
    }
}

/// Where the records of `req` came from.
#[derive(Debug, Default, PartialEq, Eq)]
pub struct Sources {
    pub from_spool: usize,
    pub from_log: usize,
}

/// The records of `req`, from the spool's files (`spool_files`, oldest first) and, if the spool
/// lacks the first asked, from the local log.
pub fn find(
    req: &ResendRequest,
    spool_files: &[PathBuf],
    log: Option<&LocalLog>,
    max: usize,
) -> (Vec<String>, Sources) {
    let mut found = Found::new(max);
    for f in spool_files {
        found.read_file(req, f);
    }
    let from_spool = found.lines.len();
    if !found.has(req.from) {
        for f in log.map(LocalLog::files).unwrap_or_default() {
            found.read_file(req, &f);
        }
    }
    let total = found.lines.len();
    let sources = Sources { from_spool, from_log: total.saturating_sub(from_spool) };
    (found.lines.into_values().collect(), sources)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn line(run: &str, seq: u64) -> String {
        format!("{{\"kind\":\"interval\",\"channel\":\"gate\",\"run\":\"{run}\",\"seq\":{seq}}}")
    }

    #[test]
    fn records_come_from_the_spool_first_and_from_the_log_for_the_rest() {
        let dir = std::env::temp_dir().join(format!("bw-lookup-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).unwrap();
        let log = dir.join("ridge.jsonl");
        let all: Vec<String> = (0..50).map(|s| line("r1", s)).collect();
        let other: Vec<String> = (0..5).map(|s| line("r0", s)).collect();
        std::fs::write(&log, format!("{}\n{}\n", other.join("\n"), all.join("\n"))).unwrap();
        // The spool kept only the newest 20 records.
        let spool = dir.join("000000000003.jsonl");
        std::fs::write(&spool, format!("{}\n", all[30..].join("\n"))).unwrap();
        let local = LocalLog { path: log, rotated: false };
        let spooled = [spool];

        let req = ResendRequest { run: "r1".into(), from: 35, to: Some(39) };
        let (got, src) = find(&req, &spooled, Some(&local), 100);
        assert_eq!(got, all[35..40]);
        assert_eq!(src, Sources { from_spool: 5, from_log: 0 });

        let req = ResendRequest { run: "r1".into(), from: 10, to: Some(34) };
        let (got, src) = find(&req, &spooled, Some(&local), 100);
        assert_eq!(got, all[10..35]);
        assert_eq!(src, Sources { from_spool: 5, from_log: 20 });

        // An open tail, bounded by `max`: the lowest first.
        let req = ResendRequest { run: "r1".into(), from: 45, to: None };
        assert_eq!(find(&req, &spooled, Some(&local), 3).0, all[45..48]);
        let req = ResendRequest { run: "r0".into(), from: 0, to: None };
        assert_eq!(find(&req, &spooled, Some(&local), 100).0, other);
        // A run nobody has: nothing, no error.
        let req = ResendRequest { run: "r9".into(), from: 0, to: None };
        assert!(find(&req, &spooled, None, 100).0.is_empty());
        let _ = std::fs::remove_dir_all(&dir);
    }

    #[test]
    fn a_rotated_log_is_read_across_its_files_in_time_order() {
        let dir = std::env::temp_dir().join(format!("bw-lookup-rot-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(dir.join("ridge.jsonl.spool")).unwrap();
        for (key, seqs) in [("2026-12-04", 0..3), ("2026-12-05", 3..6)] {
            let text: Vec<String> = seqs.map(|s| line("r1", s)).collect();
            std::fs::write(dir.join(format!("ridge.{key}.jsonl")), text.join("\n") + "\n").unwrap();
        }
        std::fs::write(dir.join("other.jsonl"), line("r1", 9)).unwrap();
        let local = LocalLog { path: dir.join("ridge.jsonl"), rotated: true };
        let names: Vec<String> = local
            .files()
            .iter()
            .map(|p| p.file_name().unwrap().to_string_lossy().into_owned())
            .collect();
        assert_eq!(names, ["ridge.2026-12-04.jsonl", "ridge.2026-12-05.jsonl"]);
        let req = ResendRequest { run: "r1".into(), from: 2, to: Some(4) };
        assert_eq!(
            find(&req, &[], Some(&local), 10).0,
            (2..5).map(|s| line("r1", s)).collect::<Vec<_>>()
        );
        let _ = std::fs::remove_dir_all(&dir);
    }
}
