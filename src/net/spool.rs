//! The on-disk queue between the log and the broker: every published record is appended here
//! first, and leaves only when the broker has acknowledged it (MQTT PUBACK). A broker restart,
//! a network outage of hours or a restart of `log` itself loses nothing: what was not
//! acknowledged is sent again, in order, by whoever opens the spool next.
//!
//! Layout of the directory: segment files `NNNNNNNNNNNN.jsonl` (one record per line, a new
//! segment every [`SEGMENT_BYTES`]) and `acked`, the position (`SEGMENT OFFSET`) of the first
//! line not yet acknowledged, replaced atomically. Segments wholly before it are deleted.
//!
//! The spool is bounded ([`Spool::open`]'s `max_bytes`): a record that would take it beyond its
//! bound is not spooled (it stays in the local log) and is counted in [`Spool::refused`]; the
//! collector sees the hole as a jump in `seq`. Appending never waits for the network.

use anyhow::{Context, Result};
use std::collections::VecDeque;
use std::fs::{File, OpenOptions};
use std::io::{BufRead, BufReader, Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};
use std::sync::{Condvar, Mutex, MutexGuard};
use std::time::{Duration, Instant};

/// Longest time an acknowledgement waits before the position is written to disk.
pub const SAVE_EVERY: Duration = Duration::from_millis(200);

/// Size at which a new segment file is started.
pub const SEGMENT_BYTES: u64 = 1 << 20;

/// A place in the spool: segment number and byte offset.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, PartialOrd, Ord)]
pub struct Pos {
    pub segment: u64,
    pub offset: u64,
}

struct Inner {
    /// Segment numbers and lengths, oldest first; the last is written to.
    segments: VecDeque<(u64, u64)>,
    writer: Option<File>,
    acked: Pos,
    /// When `acked` was last written to disk, and whether it has moved since.
    saved_at: Option<Instant>,
    dirty: bool,
    refused: u64,
    io_errors: u64,
}

/// A bounded, append-only queue of lines on disk.
pub struct Spool {
    dir: PathBuf,
    max_bytes: u64,
    inner: Mutex<Inner>,
    grew: Condvar,
}

fn segment_path(dir: &Path, n: u64) -> PathBuf {
    dir.join(format!("{n:012}.jsonl"))
}

impl Spool {
    /// Opens (or creates) the spool in `dir`, keeping what an earlier run left unacknowledged.
    pub fn open(dir: &Path, max_bytes: u64) -> Result<Spool> {
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
        let mut segments = VecDeque::new();
        for n in numbers {
            let path = segment_path(dir, n);
            if n < acked.segment {
                let _ = std::fs::remove_file(&path);
                continue;
            }
            segments.push_back((n, complete_length(&path)?));
        }
        if segments.is_empty() {
            segments.push_back((acked.segment, 0));
        }
        let spool = Spool {
            dir: dir.to_path_buf(),
            max_bytes,
            inner: Mutex::new(Inner {
                segments,
                writer: None,
                acked,
                saved_at: None,
                dirty: false,
                refused: 0,
                io_errors: 0,
            }),
            grew: Condvar::new(),
        };
        Ok(spool)
    }

    fn lock(&self) -> MutexGuard<'_, Inner> {
        self.inner.lock().unwrap_or_else(|e| e.into_inner())
    }

    /// Appends one line (without its newline). `false` when the bound or a disk error refused it
    /// (counted).
    pub fn append(&self, line: &str) -> bool {
        let mut g = self.lock();
        let len = line.len() as u64 + 1;
        let used: u64 = g.segments.iter().map(|s| s.1).sum();
        if used + len > self.max_bytes {
            g.refused += 1;
            return false;
        }
        match self.write_line(&mut g, line) {
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

    fn write_line(&self, g: &mut Inner, line: &str) -> std::io::Result<()> {
        let &(last, len) = g.segments.back().expect("one segment at least");
        if len >= SEGMENT_BYTES {
            g.segments.push_back((last + 1, 0));
            g.writer = None;
        }
        let &(n, len) = g.segments.back().expect("one segment at least");
        if g.writer.is_none() {
            let mut f =
                OpenOptions::new().create(true).append(true).open(segment_path(&self.dir, n))?;
            // An earlier crash may have left half a line: cut it off.
            f.set_len(len)?;
            f.seek(SeekFrom::End(0))?;
            g.writer = Some(f);
        }
        let mut buf = Vec::with_capacity(line.len() + 1);
        buf.extend_from_slice(line.as_bytes());
        buf.push(b'\n');
        let w = g.writer.as_mut().expect("opened");
        w.write_all(&buf)?;
        w.flush()?;
        g.segments.back_mut().expect("one segment at least").1 += buf.len() as u64;
        Ok(())
    }

    /// Up to `max` whole lines after `from`, each with the position just past it; waits up to
    /// `wait` for one when there is none.
    pub fn read_from(&self, from: Pos, max: usize, wait: Duration) -> Vec<(Pos, String)> {
        let mut g = self.lock();
        if self.end_of(&g) <= from && !wait.is_zero() {
            g = self.grew.wait_timeout(g, wait).unwrap_or_else(|e| e.into_inner()).0;
        }
        let segments: Vec<(u64, u64)> = g.segments.iter().copied().collect();
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

    /// The position after the last line appended.
    pub fn end(&self) -> Pos {
        self.end_of(&self.lock())
    }

    fn end_of(&self, g: &Inner) -> Pos {
        let &(segment, offset) = g.segments.back().expect("one segment at least");
        Pos { segment, offset }
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
        while g.segments.len() > 1 && g.segments[0].0 < upto.segment {
            let (n, _) = g.segments.pop_front().expect("checked");
            let _ = std::fs::remove_file(segment_path(&self.dir, n));
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

    /// Records refused (bound reached or disk error).
    pub fn refused(&self) -> u64 {
        self.lock().refused
    }

    /// Bytes waiting for acknowledgement.
    pub fn pending_bytes(&self) -> u64 {
        let g = self.lock();
        let used: u64 = g.segments.iter().map(|s| s.1).sum();
        used.saturating_sub(if g.segments[0].0 == g.acked.segment { g.acked.offset } else { 0 })
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

    #[test]
    fn lines_come_back_in_order_and_survive_a_reopen_until_acked() {
        let d = dir("order");
        let s = Spool::open(&d, 1 << 30).unwrap();
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
        let s = Spool::open(&d, 1 << 30).unwrap();
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
    fn the_bound_refuses_and_counts() {
        let d = dir("bound");
        let s = Spool::open(&d, 1000).unwrap();
        let line = "y".repeat(99);
        let taken = (0..20).filter(|_| s.append(&line)).count();
        assert_eq!(taken, 10);
        assert_eq!(s.refused(), 10);
        let _ = std::fs::remove_dir_all(&d);
    }
}
