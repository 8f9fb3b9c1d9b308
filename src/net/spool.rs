//! The on-disk queue between the log and the broker: every published record is appended here
//! first, and leaves only when the broker has acknowledged it (MQTT PUBACK). A broker restart,
//! a network outage of hours or a restart of `log` itself loses nothing: what was not
//! acknowledged is sent again, in order, by whoever opens the spool next.
//!
//! Layout of the directory: segment files `NNNNNNNNNNNN.jsonl` (one record per line) and
//! `acked`, the position (`SEGMENT OFFSET`) of the first line not yet acknowledged, replaced
//! atomically. Segments wholly before it are deleted.
//!
//! The spool is bounded by bytes and by age ([`SpoolLimits`]). When a record would take it past
//! its bytes, or when its oldest segment's newest line is older than its age, the oldest segment
//! is evicted whole, acknowledged or not: appending never waits for the network and never
//! refuses a new record for an old one. What an eviction took before the broker had it is
//! reported ([`Spool::take_evictions`]: which `seq` of which run); those records remain in the
//! local log, and the collector, seeing the hole in `seq`, asks the site to send them again
//! from there ([`crate::net::resend`]). Segments are an eighth of each bound (at most
//! [`SEGMENT_BYTES`]), so an eviction takes at most an eighth of the spool.

use anyhow::{Context, Result};
use serde::Deserialize;
use std::collections::VecDeque;
use std::fs::{File, OpenOptions};
use std::io::{BufRead, BufReader, Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};
use std::sync::{Condvar, Mutex, MutexGuard};
use std::time::{Duration, Instant, SystemTime};

/// Longest time an acknowledgement waits before the position is written to disk.
pub const SAVE_EVERY: Duration = Duration::from_millis(200);

/// Largest segment file.
pub const SEGMENT_BYTES: u64 = 1 << 20;

/// Segments per bound: a segment holds at most this fraction of the bytes, and a new one is
/// started when the current one's first line is this fraction of the age old.
pub const SEGMENTS_PER_BOUND: u32 = 8;

/// How much the spool may hold.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct SpoolLimits {
    pub max_bytes: u64,
    /// Records older than this leave the spool (they stay in the local log).
    pub max_age: Duration,
}

/// A place in the spool: segment number and byte offset.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, PartialOrd, Ord)]
pub struct Pos {
    pub segment: u64,
    pub offset: u64,
}

/// Which bound made room.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum EvictReason {
    Bytes,
    Age,
}

/// Records of one run, `seq` `from..=to`, that left the spool before the broker acknowledged
/// them.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Eviction {
    pub reason: EvictReason,
    pub run: String,
    pub from: u64,
    pub to: u64,
}

impl Eviction {
    /// What the user should hear.
    pub fn note(&self) -> String {
        let why = match self.reason {
            EvictReason::Bytes => "the spool was full (--spool-max-bytes)",
            EvictReason::Age => "they were older than --spool-max-age",
        };
        let which = if self.from == self.to {
            format!("record {}", self.from)
        } else {
            format!("records {}..{}", self.from, self.to)
        };
        format!(
            "{which} of run {} left the spool before the broker had them: {why}; the local log keeps them and they are resent from it when the collector asks",
            self.run
        )
    }
}

/// One segment file.
#[derive(Clone, Copy, Debug)]
struct Segment {
    n: u64,
    len: u64,
    /// When its first and its newest line were written.
    first: SystemTime,
    last: SystemTime,
}

struct Inner {
    /// Oldest first; the last is written to.
    segments: VecDeque<Segment>,
    writer: Option<File>,
    acked: Pos,
    /// When `acked` was last written to disk, and whether it has moved since.
    saved_at: Option<Instant>,
    dirty: bool,
    refused: u64,
    io_errors: u64,
    /// Evictions not yet taken by [`Spool::take_evictions`], and all records evicted unsent.
    evictions: Vec<Eviction>,
    evicted: u64,
}

impl Inner {
    fn used(&self) -> u64 {
        self.segments.iter().map(|s| s.len).sum()
    }
}

/// A bounded, append-only queue of lines on disk.
pub struct Spool {
    dir: PathBuf,
    limits: SpoolLimits,
    segment_bytes: u64,
    segment_span: Duration,
    inner: Mutex<Inner>,
    grew: Condvar,
}

fn segment_path(dir: &Path, n: u64) -> PathBuf {
    dir.join(format!("{n:012}.jsonl"))
}

impl Spool {
    /// Opens (or creates) the spool in `dir`, keeping what an earlier run left unacknowledged
    /// (less what has since grown older than `limits.max_age`).
    pub fn open(dir: &Path, limits: SpoolLimits) -> Result<Spool> {
        std::fs::create_dir_all(dir)
            .with_context(|| format!("cannot create the spool directory '{}'", dir.display()))?;
        let mut numbers: Vec<u64> = std::fs::read_dir(dir)?
            .filter_map(|e| e.ok())
            .filter_map(|e| {
                let name = e.file_name().into_string().ok()?;
                name.strip_suffix(".jsonl")?.parse::<u64>().ok()
            })
            .collect();
        numbers.sort_unstable();
        let acked = read_acked(dir)
            .unwrap_or(Pos { segment: numbers.first().copied().unwrap_or(0), offset: 0 });
        let now = SystemTime::now();
        let mut segments = VecDeque::new();
        for n in numbers {
            let path = segment_path(dir, n);
            if n < acked.segment {
                let _ = std::fs::remove_file(&path);
                continue;
            }
            let written = std::fs::metadata(&path).and_then(|m| m.modified()).unwrap_or(now);
            let len = complete_length(&path)?;
            segments.push_back(Segment { n, len, first: written, last: written });
        }
        if segments.is_empty() {
            segments.push_back(Segment { n: acked.segment, len: 0, first: now, last: now });
        }
        let spool = Spool {
            dir: dir.to_path_buf(),
            limits,
            segment_bytes: (limits.max_bytes / SEGMENTS_PER_BOUND as u64).clamp(1, SEGMENT_BYTES),
            segment_span: limits.max_age / SEGMENTS_PER_BOUND,
            inner: Mutex::new(Inner {
                segments,
                writer: None,
                acked,
                saved_at: None,
                dirty: false,
                refused: 0,
                io_errors: 0,
                evictions: Vec::new(),
                evicted: 0,
            }),
            grew: Condvar::new(),
        };
        spool.evict_old(&mut spool.lock(), now);
        Ok(spool)
    }

    fn lock(&self) -> MutexGuard<'_, Inner> {
        self.inner.lock().unwrap_or_else(|e| e.into_inner())
    }

    /// Appends one line (without its newline), making room by evicting the oldest records.
    /// `false` when a disk error refused it, or the line alone is larger than the bound
    /// (counted).
    pub fn append(&self, line: &str) -> bool {
        self.append_at(line, SystemTime::now())
    }

    /// [`Spool::append`] at a given time (tests step the clock).
    pub fn append_at(&self, line: &str, now: SystemTime) -> bool {
        let mut g = self.lock();
        self.evict_old(&mut g, now);
        let len = line.len() as u64 + 1;
        if len > self.limits.max_bytes {
            g.refused += 1;
            return false;
        }
        while g.used() + len > self.limits.max_bytes {
            self.evict_front(&mut g, EvictReason::Bytes, now);
        }
        match self.write_line(&mut g, line, now) {
            Ok(()) => {
                self.grew.notify_all();
                true
            }
            Err(_) => {
                g.io_errors += 1;
                g.refused += 1;
                g.writer = None;
                false
            }
        }
    }

    /// Evicts the oldest segments while their newest line is older than the age bound.
    fn evict_old(&self, g: &mut Inner, now: SystemTime) {
        while let Some(front) = g.segments.front().copied() {
            let age = now.duration_since(front.last).unwrap_or_default();
            if front.len == 0 || age < self.limits.max_age {
                break;
            }
            self.evict_front(g, EvictReason::Age, now);
        }
    }

    /// Deletes the oldest segment (starting a new one if it was the only one) and reports the
    /// records in it that the broker had not acknowledged.
    fn evict_front(&self, g: &mut Inner, reason: EvictReason, now: SystemTime) {
        if g.segments.len() == 1 {
            let n = g.segments[0].n + 1;
            g.segments.push_back(Segment { n, len: 0, first: now, last: now });
            g.writer = None;
        }
        let gone = g.segments.pop_front().expect("two segments at least");
        let path = segment_path(&self.dir, gone.n);
        let unsent_from = match g.acked.segment.cmp(&gone.n) {
            std::cmp::Ordering::Less => Some(0),
            std::cmp::Ordering::Equal => Some(g.acked.offset),
            std::cmp::Ordering::Greater => None,
        };
        if let Some(start) = unsent_from.filter(|&s| s < gone.len) {
            let ids = read_ids(&path, start, gone.len);
            g.evicted += ids.len() as u64;
            group_evictions(&mut g.evictions, reason, ids);
        }
        let _ = std::fs::remove_file(&path);
        let next = Pos { segment: g.segments[0].n, offset: 0 };
        if g.acked < next {
            g.acked = next;
            self.save_locked(g);
        }
    }

    fn write_line(&self, g: &mut Inner, line: &str, now: SystemTime) -> std::io::Result<()> {
        let cur = *g.segments.back().expect("one segment at least");
        let old = now.duration_since(cur.first).unwrap_or_default() >= self.segment_span;
        if cur.len >= self.segment_bytes || (cur.len > 0 && old) {
            g.segments.push_back(Segment { n: cur.n + 1, len: 0, first: now, last: now });
            g.writer = None;
        }
        let cur = *g.segments.back().expect("one segment at least");
        if g.writer.is_none() {
            let mut f = OpenOptions::new()
                .create(true)
                .append(true)
                .open(segment_path(&self.dir, cur.n))?;
            // An earlier crash may have left half a line: cut it off.
            f.set_len(cur.len)?;
            f.seek(SeekFrom::End(0))?;
            g.writer = Some(f);
        }
        let mut buf = Vec::with_capacity(line.len() + 1);
        buf.extend_from_slice(line.as_bytes());
        buf.push(b'\n');
        let w = g.writer.as_mut().expect("opened");
        w.write_all(&buf)?;
        w.flush()?;
        let seg = g.segments.back_mut().expect("one segment at least");
        if seg.len == 0 {
            seg.first = now;
        }
        seg.len += buf.len() as u64;
        seg.last = now;
        Ok(())
    }

    /// Up to `max` whole lines after `from`, each with the position just past it; waits up to
    /// `wait` for one when there is none.
    pub fn read_from(&self, from: Pos, max: usize, wait: Duration) -> Vec<(Pos, String)> {
        let mut g = self.lock();
        if self.end_of(&g) <= from && !wait.is_zero() {
            g = self.grew.wait_timeout(g, wait).unwrap_or_else(|e| e.into_inner()).0;
        }
        let segments: Vec<(u64, u64)> = g.segments.iter().map(|s| (s.n, s.len)).collect();
        drop(g);
        let mut out = Vec::new();
        for (n, len) in segments {
            if n < from.segment || out.len() >= max {
                continue;
            }
            let start = if n == from.segment { from.offset } else { 0 };
            if start >= len {
                continue;
            }
            if read_lines(&segment_path(&self.dir, n), n, start, len, max, &mut out).is_err() {
                break;
            }
        }
        out
    }

    /// The segment files, oldest first (acknowledged lines included, while their segment
    /// lasts): where a resend request looks first.
    pub fn segment_files(&self) -> Vec<PathBuf> {
        self.lock().segments.iter().map(|s| segment_path(&self.dir, s.n)).collect()
    }

    /// The position after the last line appended.
    pub fn end(&self) -> Pos {
        self.end_of(&self.lock())
    }

    fn end_of(&self, g: &Inner) -> Pos {
        let last = g.segments.back().expect("one segment at least");
        Pos { segment: last.n, offset: last.len }
    }

    /// Everything before `upto` was acknowledged: remember it, delete finished segments. The
    /// position reaches the disk at most every [`SAVE_EVERY`] (and on [`Spool::save`]): after a
    /// crash a few records are sent twice, which the collector drops by id.
    pub fn ack(&self, upto: Pos) {
        let mut g = self.lock();
        if upto <= g.acked {
            return;
        }
        g.acked = upto;
        g.dirty = true;
        while g.segments.len() > 1 && g.segments[0].n < upto.segment {
            let gone = g.segments.pop_front().expect("checked");
            let _ = std::fs::remove_file(segment_path(&self.dir, gone.n));
        }
        if !matches!(g.saved_at, Some(t) if t.elapsed() < SAVE_EVERY) {
            self.save_locked(&mut g);
        }
    }

    /// Writes the acknowledged position to disk now.
    pub fn save(&self) {
        let mut g = self.lock();
        if g.dirty {
            self.save_locked(&mut g);
        }
    }

    fn save_locked(&self, g: &mut Inner) {
        if write_acked(&self.dir, g.acked).is_err() {
            g.io_errors += 1;
        }
        g.saved_at = Some(Instant::now());
        g.dirty = false;
    }

    /// The first position not acknowledged.
    pub fn acked(&self) -> Pos {
        self.lock().acked
    }

    /// Records refused (larger than the bound, or a disk error).
    pub fn refused(&self) -> u64 {
        self.lock().refused
    }

    /// Records evicted before the broker acknowledged them, since the spool was opened.
    pub fn evicted(&self) -> u64 {
        self.lock().evicted
    }

    /// The evictions since the last call, oldest first.
    pub fn take_evictions(&self) -> Vec<Eviction> {
        std::mem::take(&mut self.lock().evictions)
    }

    /// Bytes waiting for acknowledgement.
    pub fn pending_bytes(&self) -> u64 {
        let g = self.lock();
        let first = g.segments[0];
        g.used().saturating_sub(if first.n == g.acked.segment { g.acked.offset } else { 0 })
    }
}

/// The id of a spooled record.
#[derive(Deserialize)]
struct Id {
    run: String,
    seq: u64,
}

/// The ids of the records between `start` and `end` of a segment (lines that are no record
/// are skipped).
fn read_ids(path: &Path, start: u64, end: u64) -> Vec<(String, u64)> {
    let mut out = Vec::new();
    let mut lines = Vec::new();
    if read_lines(path, 0, start, end, usize::MAX, &mut lines).is_ok() {
        for (_, line) in lines {
            if let Ok(id) = serde_json::from_str::<Id>(&line) {
                out.push((id.run, id.seq));
            }
        }
    }
    out
}

/// Adds `ids` to `list` as ranges of consecutive `seq` per run.
fn group_evictions(list: &mut Vec<Eviction>, reason: EvictReason, ids: Vec<(String, u64)>) {
    for (run, seq) in ids {
        match list.last_mut() {
            Some(e) if e.run == run && e.reason == reason && e.to + 1 == seq => e.to = seq,
            _ => list.push(Eviction { reason, run, from: seq, to: seq }),
        }
    }
}

/// Length of a segment up to its last complete line.
fn complete_length(path: &Path) -> Result<u64> {
    let data = std::fs::read(path).with_context(|| format!("cannot read '{}'", path.display()))?;
    Ok(data.iter().rposition(|&b| b == b'\n').map_or(0, |i| i as u64 + 1))
}

fn read_lines(
    path: &Path,
    n: u64,
    start: u64,
    len: u64,
    max: usize,
    out: &mut Vec<(Pos, String)>,
) -> std::io::Result<()> {
    let mut f = File::open(path)?;
    f.seek(SeekFrom::Start(start))?;
    let mut r = BufReader::new(f.take(len - start));
    let mut at = start;
    let mut line = String::new();
    while out.len() < max {
        line.clear();
        let got = r.read_line(&mut line)?;
        if got == 0 || !line.ends_with('\n') {
            break;
        }
        at += got as u64;
        out.push((Pos { segment: n, offset: at }, line.trim_end_matches('\n').to_string()));
    }
    Ok(())
}

fn read_acked(dir: &Path) -> Option<Pos> {
    let text = std::fs::read_to_string(dir.join("acked")).ok()?;
    let mut it = text.split_whitespace().map(|w| w.parse::<u64>().ok());
    Some(Pos { segment: it.next()??, offset: it.next()?? })
}

fn write_acked(dir: &Path, pos: Pos) -> std::io::Result<()> {
    let tmp = dir.join("acked.tmp");
    std::fs::write(&tmp, format!("{} {}\n", pos.segment, pos.offset))?;
    std::fs::rename(tmp, dir.join("acked"))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn dir(name: &str) -> PathBuf {
        let d = std::env::temp_dir().join(format!("bw-spool-{name}-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&d);
        d
    }

    const ROOMY: SpoolLimits =
        SpoolLimits { max_bytes: 1 << 30, max_age: Duration::from_secs(7 * 86_400) };

    /// A record of run `r1` exactly 99 bytes long (100 with its newline).
    fn record(seq: u64) -> String {
        let head = format!("{{\"kind\":\"interval\",\"run\":\"r1\",\"seq\":{seq},\"pad\":\"");
        format!("{head}{}\"}}", "x".repeat(99 - head.len() - 2))
    }

    /// Every line still to be sent, from the first unacknowledged one.
    fn unsent(s: &Spool) -> Vec<String> {
        s.read_from(s.acked(), usize::MAX, Duration::ZERO).into_iter().map(|l| l.1).collect()
    }

    #[test]
    fn lines_come_back_in_order_and_survive_a_reopen_until_acked() {
        let d = dir("order");
        let s = Spool::open(&d, ROOMY).unwrap();
        let lines: Vec<String> =
            (0..5000).map(|i| format!("{{\"seq\":{i},\"pad\":\"{}\"}}", "x".repeat(300))).collect();
        for l in &lines {
            assert!(s.append(l));
        }
        let first = s.read_from(Pos::default(), 100, Duration::ZERO);
        assert_eq!(first.len(), 100);
        assert_eq!(first[0].1, lines[0]);
        s.ack(first[99].0);
        s.save();
        drop(s);
        // A new run finds the rest, from the first unacknowledged line, across segments.
        let s = Spool::open(&d, ROOMY).unwrap();
        let mut at = s.acked();
        let mut got = Vec::new();
        loop {
            let batch = s.read_from(at, 700, Duration::ZERO);
            let Some(last) = batch.last() else { break };
            at = last.0;
            got.extend(batch.into_iter().map(|b| b.1));
        }
        assert_eq!(got, lines[100..]);
        s.ack(at);
        assert_eq!(s.pending_bytes(), 0);
        let left = std::fs::read_dir(&d).unwrap().count();
        assert!(left <= 3, "finished segments are deleted ({left} files left)");
        let _ = std::fs::remove_dir_all(&d);
    }

    #[test]
    fn a_full_spool_evicts_the_oldest_and_says_which_records_went_unsent() {
        let d = dir("bytes");
        let limits = SpoolLimits { max_bytes: 1000, ..ROOMY };
        let s = Spool::open(&d, limits).unwrap();
        let all: Vec<String> = (0..30).map(record).collect();
        assert!(all.iter().all(|l| l.len() == 99));
        // The broker acknowledged the first three before it went away.
        for l in &all[..3] {
            assert!(s.append(l));
        }
        let sent = s.read_from(Pos::default(), 3, Duration::ZERO);
        s.ack(sent[2].0);
        for l in &all[3..] {
            assert!(s.append(l), "a new record is never refused for an old one");
        }
        assert_eq!(s.refused(), 0);
        let on_disk: u64 = s.segment_files().iter().map(|f| f.metadata().unwrap().len()).sum();
        assert!(on_disk <= 1000, "{on_disk} bytes on disk");
        // Oldest first: what is left is the newest records, in order, and what went is
        // reported as one range that starts after the acknowledged ones.
        let left = unsent(&s);
        assert!(left.len() >= 8, "at most an eighth of the bound per eviction: {}", left.len());
        let first_left = 30 - left.len() as u64;
        assert_eq!(left, all[first_left as usize..]);
        let ev = s.take_evictions();
        let want =
            Eviction { reason: EvictReason::Bytes, run: "r1".into(), from: 3, to: first_left - 1 };
        assert_eq!(ev, [want]);
        assert_eq!(s.evicted(), first_left - 3);
        assert!(ev[0].note().contains("--spool-max-bytes") && ev[0].note().contains("3.."));
        assert!(s.take_evictions().is_empty(), "each eviction is reported once");
        // A line larger than the whole bound cannot be spooled: refused and counted.
        assert!(!s.append(&"z".repeat(1000)));
        assert_eq!(s.refused(), 1);
        let _ = std::fs::remove_dir_all(&d);
    }

    #[test]
    fn records_older_than_the_age_bound_leave_and_are_reported() {
        let d = dir("age");
        let limits = SpoolLimits { max_bytes: 1 << 20, max_age: Duration::from_secs(3600) };
        let s = Spool::open(&d, limits).unwrap();
        let t0 = SystemTime::now();
        let at = |min: u64| t0 + Duration::from_secs(60 * min);
        // One record every 10 minutes: a segment per 7.5 minutes of the hour's bound.
        for seq in 0..10 {
            assert!(s.append_at(&record(seq), at(10 * seq)));
        }
        // At minute 90, records of minute 30 and before are older than an hour.
        let ev = s.take_evictions();
        assert_eq!(ev, [Eviction { reason: EvictReason::Age, run: "r1".into(), from: 0, to: 3 }]);
        assert!(ev[0].note().contains("--spool-max-age"));
        assert_eq!(unsent(&s), (4..10).map(record).collect::<Vec<_>>());
        // Reopened two hours after the last record, the spool keeps none of them.
        drop(s);
        let s = Spool::open(&d, limits).unwrap();
        assert!(s.append_at(&record(10), at(90 + 121)));
        assert_eq!(s.take_evictions()[0].from, 4);
        assert_eq!(unsent(&s), [record(10)]);
        let _ = std::fs::remove_dir_all(&d);
    }
}
