//! `--capture DIR`: the IQ of each emission, from `--pre` before its start to `--post` after its
//! end, saved as a SigMF recording of its own (data in the input's datatype, `cf32_le` for the
//! demo; metadata with rate, absolute frequency, the time of its first sample, and the emission
//! as an annotation, as `--annotate` writes it).
//!
//! **How it works.** The occupancy tracker announces an emission at its first occupied sample
//! ([`Event::Opened`]); the capture starts then, with the samples before it taken from a ring of
//! the newest samples (allocated once: `--pre` plus the delay of one row and one block), and the
//! samples after it streamed to the file as they arrive. When the emission's summary comes (it
//! ends after the hang time), `--post` more samples are written and the file is closed.
//!
//! **Bounds.** Memory: the ring and a writer queue of at most
//! [`QUEUE_BYTES`](crate::output::sigmf::writer_thread::QUEUE_BYTES). Length: an emission
//! longer than `--capture-max-seconds` is cut there (the file holds its first part, its annotation
//! says `bandwarden:truncated`). Disk: the bytes each capture writes are counted as they are
//! sent (with `META_BYTES` for its meta file); where the next samples would take the run's
//! captures past `--capture-max-bytes`, every open capture is cut there (saved, `truncated`,
//! `cause: "disk_cap"`) and capturing stops: later emissions are skipped (we keep the oldest,
//! which show how a problem began, and delete nothing the log already names). Each skip is a
//! `capture` record with `status: "skipped"` and a `cause`.
//!
//! **Never blocking the DSP.** Files are written by their own thread. With live input a capture
//! whose samples find the writer's queue full is given up (its partial file deleted) and logged
//! as skipped (`cause: "disk_behind"`): a capture is lost, never an input sample. File input is
//! never dropped anywhere in bandwarden, so there the DSP waits for the disk instead; so it does
//! under `--no-drop`.

use crate::measure::occupancy::Event;
use crate::output::log::CaptureRecord;
use crate::output::sigmf::annotate::{annotation, note_of, EmissionNote};
use crate::output::sigmf::capture_writer::{self, Job, WriterError};
use crate::output::sigmf::write::{self as sigmf_write, NAMESPACE};
use crate::output::sigmf::writer_thread::WriterThread;
use crate::pipeline::history::IqHistory;
use crate::pipeline::{Clock, Consumer, GapCause, Letter, Post, RunEnd, RunInfo};
use crate::plan::Plan;
use crate::source::reader::Block;
use crate::source::SampleFormat;
use num_complex::Complex32;
use std::io;
use std::path::PathBuf;

/// Bytes counted for each capture's meta file against the disk cap (they are about 1.5 kB).
const META_BYTES: u64 = 4096;

/// What `--capture` asks for.
#[derive(Clone, Debug, PartialEq)]
pub struct CaptureSettings {
    pub dir: String,
    pub pre_s: f64,
    pub post_s: f64,
    /// Longest emission kept, seconds from its start.
    pub max_s: f64,
    /// Most bytes all captures of the run may take.
    pub max_bytes: u64,
}

/// Figures of a run's captures, for the command's closing note.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct CaptureCounts {
    pub saved: u64,
    pub skipped_disk_cap: u64,
    pub skipped_disk_behind: u64,
    pub bytes: u64,
}

/// When to capture, for a command whose emissions are not the occupancy tracker's (the census):
/// its finder sends these through the run's post ([`crate::pipeline::outbox`]).
#[derive(Clone, Debug, PartialEq)]
pub enum Trigger {
    /// An emission began at stream sample `start`; `key` names it until it ends.
    Begin { key: u64, label: String, start: u64 },
    /// The emission `key` ended: `note` says where and how strong it was.
    End { key: u64, note: EmissionNote },
}

/// One capture being written.
struct Active {
    id: u64,
    /// The plan's channel index (log) or the finder's key ([`Trigger`]).
    key: u64,
    /// The channel's or emitter's name.
    label: String,
    emission_start: u64,
    /// Stream index of the file's first sample.
    file_start: u64,
    /// Next stream sample to write.
    next: u64,
    /// Write up to here (exclusive); lowered when the emission's end is known.
    stop: u64,
    /// The emission, once it has ended.
    note: Option<EmissionNote>,
    truncated: bool,
    /// Cut where `--capture-max-bytes` was reached.
    cut_by_cap: bool,
    meta_path: PathBuf,
}

/// The capture consumer.
pub struct Captures {
    set: CaptureSettings,
    plan: Plan,
    format: SampleFormat,
    block_len: usize,
    /// Where the capture records go (the log takes them).
    post: Post,
    ring: IqHistory,
    active: Vec<Active>,
    abandon: Vec<u64>,
    next_id: u64,
    /// Bytes the run's captures hold: samples sent to their files, and [`META_BYTES`] each.
    committed: u64,
    pre_n: u64,
    post_n: u64,
    max_n: u64,
    live: bool,
    /// Wait for the disk even with live input (`--no-drop`).
    wait: bool,
    clock: Option<Clock>,
    center_hz: f64,
    rate: f64,
    label: String,
    writer: Option<WriterThread<Job, ()>>,
    error: WriterError,
    pub counts: CaptureCounts,
}

impl Captures {
    /// Creates the directory (so a bad path fails before the run). `format` is the input's
    /// datatype (`None`: `cf32_le`); `block_len` the reader's block size. Each capture saved or
    /// skipped is sent as a [`CaptureRecord`] through the run's post, for the log. Emissions
    /// come from the occupancy tracker's events or from [`Trigger`] letters.
    pub fn new(
        set: CaptureSettings,
        plan: &Plan,
        format: Option<SampleFormat>,
        block_len: usize,
    ) -> anyhow::Result<Captures> {
        std::fs::create_dir_all(&set.dir).map_err(|e| {
            anyhow::anyhow!(
                "cannot create the capture directory '{}': {e}; check the path and its permissions",
                crate::messages::sanitize(&set.dir)
            )
        })?;
        Ok(Captures {
            set,
            plan: plan.clone(),
            format: format.map(SampleFormat::complex_twin).unwrap_or(SampleFormat::Cf32Le),
            block_len: block_len.max(1),
            post: Post::default(),
            ring: IqHistory::new(1),
            active: Vec::new(),
            abandon: Vec::new(),
            next_id: 0,
            committed: 0,
            pre_n: 0,
            post_n: 0,
            max_n: 0,
            live: false,
            wait: false,
            clock: None,
            center_hz: 0.0,
            rate: 1.0,
            label: String::new(),
            writer: None,
            error: WriterError::default(),
            counts: CaptureCounts::default(),
        })
    }

    /// Makes captures wait for the disk with live input too (`--no-drop`).
    pub fn waiting(mut self, wait: bool) -> Captures {
        self.wait = wait;
        self
    }

    fn failed(&self) -> Option<String> {
        self.error.lock().ok()?.clone()
    }

    /// Queues a job; `false` when the queue is full (live input) or the writer is gone.
    fn send(&self, job: Job) -> bool {
        let Some(w) = self.writer.as_ref() else { return false };
        if self.live {
            w.offer(job).is_ok()
        } else {
            w.send(job).is_ok()
        }
    }

    fn buffer(&self) -> Vec<Complex32> {
        self.writer.as_ref().map(WriterThread::buffer).unwrap_or_default()
    }

    fn file_names(&self, label: &str, start: u64) -> (PathBuf, PathBuf, String) {
        let clock = self.clock.as_ref();
        let when = clock
            .and_then(|c| sigmf_write::datetime(c, start))
            .map(|t| t.replace([':', '-'], "").replace('.', "_"))
            .unwrap_or_else(|| format!("s{:.6}", start as f64 / self.rate));
        let name: String = label
            .chars()
            .map(|c| if c.is_ascii_alphanumeric() || c == '-' || c == '_' { c } else { '_' })
            .collect();
        let stem = format!("{when}-{name}-{:05}", self.next_id);
        let dir = PathBuf::from(&self.set.dir);
        (dir.join(format!("{stem}.sigmf-meta")), dir.join(format!("{stem}.sigmf-data")), stem)
    }

    fn clock(&self) -> Clock {
        self.clock.clone().unwrap_or_else(|| Clock::new(self.rate, None))
    }

    /// An emission began at `start`: open its file with the samples held before it.
    fn begin(&mut self, key: u64, label: String, start: u64) {
        let id = self.next_id;
        let (meta_path, data_path, _) = self.file_names(&label, start);
        self.next_id += 1;
        let file_start = start.saturating_sub(self.pre_n).max(self.ring.contiguous_start());
        let mut buf = self.buffer();
        self.ring.copy_from(file_start, &mut buf);
        let pre_bytes = buf.len() as u64 * self.format.bytes_per_sample() as u64;
        if self.committed + META_BYTES + pre_bytes > self.set.max_bytes {
            self.skip(&label, start, "disk_cap");
            return;
        }
        let next = file_start + buf.len() as u64;
        if !self.send(Job::Open { id, data: data_path }) {
            self.skip(&label, start, "disk_behind");
            return;
        }
        if !self.send(Job::Samples { id, samples: buf }) {
            self.abandon.push(id);
            self.skip(&label, start, "disk_behind");
            return;
        }
        self.committed += META_BYTES + pre_bytes;
        self.active.push(Active {
            id,
            key,
            label,
            emission_start: start,
            file_start,
            next,
            stop: start + self.max_n,
            note: None,
            truncated: false,
            cut_by_cap: false,
            meta_path,
        });
    }

    /// The emission `key` ended: the capture runs `--post` past its end, or stops at
    /// `--capture-max-seconds` from its start.
    fn end(&mut self, key: u64, note: EmissionNote) {
        let Some(k) = self.active.iter().position(|a| a.key == key && a.note.is_none()) else {
            return;
        };
        let end_sample = note.sample_start + note.sample_count;
        let a = &mut self.active[k];
        if end_sample > a.emission_start + self.max_n {
            a.truncated = true;
        } else if !a.cut_by_cap {
            a.stop = end_sample + self.post_n;
        }
        a.note = Some(note);
        if a.next >= a.stop {
            self.close(k);
        }
    }

    /// Logs a capture that was not saved, and counts it.
    fn skip(&mut self, label: &str, start: u64, cause: &str) {
        let clock = self.clock();
        match cause {
            "disk_cap" => self.counts.skipped_disk_cap += 1,
            _ => self.counts.skipped_disk_behind += 1,
        }
        self.post.send(CaptureRecord {
            channel: label.to_string(),
            status: "skipped".into(),
            file: None,
            cause: Some(cause.into()),
            t_start_s: clock.seconds(start),
            t_end_s: None,
            start: clock.stamp(start),
            end: None,
            iq_samples: 0,
            bytes: 0,
            truncated: false,
        });
    }

    /// Writes what `block` holds for capture `k`; true when the capture is complete.
    fn feed(&mut self, k: usize, block: &Block) -> bool {
        let end = block.start + block.samples.len() as u64;
        let bps = self.format.bytes_per_sample() as u64;
        let a = &mut self.active[k];
        let (from, mut to) = (a.next.max(block.start), a.stop.min(end));
        let room = (self.set.max_bytes.saturating_sub(self.committed)) / bps;
        if from < to && to - from > room {
            // The disk cap: this capture ends here, and no other starts.
            to = from + room;
            (a.stop, a.truncated, a.cut_by_cap) = (to, true, true);
        }
        let a = &self.active[k];
        if from < to {
            let mut buf = self.buffer();
            buf.extend_from_slice(
                &block.samples[(from - block.start) as usize..(to - block.start) as usize],
            );
            let id = a.id;
            if !self.send(Job::Samples { id, samples: buf }) {
                self.abandon.push(id);
                let a = self.active.swap_remove(k);
                self.committed -= META_BYTES + (a.next - a.file_start) * bps;
                self.skip(&a.label, a.emission_start, "disk_behind");
                return false;
            }
            self.committed += (to - from) * bps;
            self.active[k].next = to;
        }
        let a = &self.active[k];
        a.note.is_some() && a.next >= a.stop
    }

    /// Closes capture `k`: its meta file names the samples written and the emission.
    fn close(&mut self, k: usize) {
        let a = self.active.swap_remove(k);
        let clock = self.clock();
        let count = a.next.min(a.stop) - a.file_start;
        let meta = self.meta(&a, count, &clock);
        let bps = self.format.bytes_per_sample() as u64;
        let bytes = count * bps;
        // Samples sent past an end that came later are cut off the file by the writer.
        self.committed -= (a.next - a.file_start - count) * bps;
        let job = Job::Close { id: a.id, samples: count, meta_path: a.meta_path.clone(), meta };
        if !self.send(job) {
            self.abandon.push(a.id);
            self.committed -= META_BYTES + bytes;
            self.skip(&a.label, a.emission_start, "disk_behind");
            return;
        }
        self.counts.saved += 1;
        self.counts.bytes += bytes;
        let end = a.file_start + count;
        self.post.send(CaptureRecord {
            channel: a.label.clone(),
            status: "saved".into(),
            file: Some(a.meta_path.to_string_lossy().into_owned()),
            cause: a.cut_by_cap.then(|| "disk_cap".into()),
            t_start_s: clock.seconds(a.file_start),
            t_end_s: Some(clock.seconds(end)),
            start: clock.stamp(a.file_start),
            end: clock.stamp_end(end),
            iq_samples: count,
            bytes,
            truncated: a.truncated,
        });
    }

    fn meta(&self, a: &Active, count: u64, clock: &Clock) -> serde_json::Value {
        let desc = format!("emission {} captured by bandwarden from {}", a.label, self.label);
        let mut g = sigmf_write::global(self.format, self.rate, &desc);
        g.insert(format!("{NAMESPACE}:source"), self.label.clone().into());
        let cap = sigmf_write::capture(
            0,
            a.file_start,
            self.center_hz,
            sigmf_write::datetime(clock, a.file_start),
        );
        let mut annotations = Vec::new();
        if let Some(note) = &a.note {
            let start = a.emission_start - a.file_start;
            let end_sample = note.sample_start + note.sample_count;
            let end = (end_sample.min(a.file_start + count)).max(a.emission_start) - a.file_start;
            let mut ann = annotation(note, start, end - start);
            ann.insert(format!("{NAMESPACE}:truncated"), a.truncated.into());
            annotations.push(serde_json::Value::Object(ann));
        }
        serde_json::json!({ "global": g, "captures": [cap], "annotations": annotations })
    }

    fn retry_abandons(&mut self) {
        while let Some(&id) = self.abandon.last() {
            let Some(w) = self.writer.as_ref() else { return };
            if w.offer(Job::Abandon { id }).is_err() {
                return;
            }
            self.abandon.pop();
        }
    }
}

impl Consumer for Captures {
    fn connect(&mut self, post: &Post) {
        self.post = post.clone();
    }

    fn start(&mut self, run: &RunInfo) -> io::Result<()> {
        let src = &run.source;
        self.rate = src.sample_rate_hz;
        self.center_hz = src.center_hz;
        self.label = src.label.clone();
        self.live = src.live && !self.wait;
        self.clock = Some(run.clock.clone());
        let n = |s: f64| (s * self.rate).ceil() as u64;
        (self.pre_n, self.post_n, self.max_n) =
            (n(self.set.pre_s), n(self.set.post_s), n(self.set.max_s).max(1));
        // The emission is announced when the tracker settles the row that found it (two rows
        // later) and after the block that completed that row: the ring holds those too.
        let e = &run.engine;
        let row = e.frames_per_output.unwrap_or(1) as usize * e.hop() + e.fft_size;
        self.ring = IqHistory::new(self.pre_n as usize + 4 * row + self.block_len);
        let depth = WriterThread::<Job, ()>::depth_for(self.block_len).clamp(4, 1024);
        let (format, error) = (self.format, self.error.clone());
        self.writer = Some(WriterThread::spawn("capture", depth, move |(rx, spare)| {
            capture_writer::run(rx, spare, format, error)
        })?);
        Ok(())
    }

    fn block(&mut self, block: &Block) -> io::Result<()> {
        if let Some(e) = self.failed() {
            return Err(io::Error::other(e));
        }
        self.retry_abandons();
        let mut k = 0;
        while k < self.active.len() {
            let before = self.active.len();
            if self.feed(k, block) {
                self.close(k);
            } else if self.active.len() == before {
                k += 1;
            }
        }
        self.ring.push(block.start, &block.samples);
        Ok(())
    }

    fn event(&mut self, event: &Event, run: &RunInfo) -> io::Result<()> {
        self.clock = Some(run.clock.clone());
        match event {
            Event::Opened(o) => {
                let label = self.plan.channels[o.channel].name.clone();
                self.begin(o.channel as u64, label, o.start_sample);
            }
            Event::Emission(e) => self.end(e.channel as u64, note_of(e, &self.plan)),
            Event::Interval(_) => {}
        }
        Ok(())
    }

    /// A finder's emissions ([`Trigger`]), when the run's emissions are not the tracker's.
    fn mail(&mut self, letter: &Letter, run: &RunInfo) -> io::Result<()> {
        let Some(t) = letter.read::<Trigger>() else { return Ok(()) };
        self.clock = Some(run.clock.clone());
        match t.clone() {
            Trigger::Begin { key, label, start } => self.begin(key, label, start),
            Trigger::End { key, note } => self.end(key, note),
        }
        Ok(())
    }

    fn gap(&mut self, _from: u64, _to: u64, cause: GapCause, _run: &RunInfo) -> io::Result<()> {
        if cause == GapCause::Behind {
            // What follows is not contiguous with what was written: every capture ends here.
            self.ring.clear();
            for a in &mut self.active {
                a.stop = a.stop.min(a.next);
            }
            while let Some(k) = self.active.iter().position(|a| a.note.is_some()) {
                self.close(k);
            }
        }
        Ok(())
    }

    /// Closes every capture still open (the finders ended their emissions a stage earlier)
    /// and waits for the writer, so the log gets the last capture records before it stops.
    fn settle(&mut self, _end: &RunEnd, _run: &RunInfo) -> io::Result<()> {
        while !self.active.is_empty() {
            let k = self.active.len() - 1;
            self.active[k].stop = self.active[k].stop.min(self.active[k].next);
            self.close(k);
        }
        self.live = false; // the end may wait for the disk
        for id in std::mem::take(&mut self.abandon) {
            self.send(Job::Abandon { id });
        }
        if let Some(w) = self.writer.as_mut() {
            w.close();
        }
        match self.failed() {
            Some(e) => Err(io::Error::other(e)),
            None => Ok(()),
        }
    }
}

#[cfg(test)]
mod tests;
