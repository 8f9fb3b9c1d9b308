//! `--record FILE.sigmf-meta`: the raw input teed to a SigMF recording while `log` or `watch`
//! runs.
//!
//! **Datatype.** Blocks carry full-scale `Complex32` samples, not the input's bytes, so the
//! recording re-encodes them in the input's datatype (`cf32_le` for the demo scene). For `cu8`,
//! `ci8`, `ci16_*` and `cf32_*` that gives back the input's bytes exactly (each decoding is
//! inverted by the encoding, tested in [`crate::source::format`]); `ci32_le` and `cf64_le` keep
//! the 24-bit precision of the `f32` the pipeline measured, which is all bandwarden ever saw.
//!
//! **Time stays true.** Every capture segment carries `core:sample_start` (its index in the
//! dataset), `core:global_index` (its index in the stream read, lost samples counted),
//! `core:frequency` and `core:datetime` (to the microsecond, from the run's sample clock). A new
//! segment starts where samples are missing: dropped by a live source the DSP could not keep up
//! with, or dropped by the recorder because the disk could not keep up; also where the input's
//! own segments start (a SigMF input with several captures). Such a segment says how many samples
//! are missing before it and why (`bandwarden:lost_before`, `bandwarden:lost_cause`: `behind`,
//! `recorder_behind` or `behind_and_recorder_behind`), and the global object totals them.
//!
//! **Never blocking the DSP.** Samples go to a writer thread over a bounded queue (about a second
//! of samples, at most
//! [`QUEUE_BYTES`](crate::output::sigmf::writer_thread::QUEUE_BYTES)). Live input: when that queue is full the block is left
//! out of the recording, counted, and the next block starts a new segment, so the loss is
//! written down, never silent. File input is never dropped anywhere in bandwarden, so there the
//! DSP waits for the disk; so it does under `--no-drop`, where the reader waits too. A write error (full disk) ends the run with one clear line.
//!
//! The meta file is rewritten (whole, through a rename) at the start, at each new segment and at
//! the end, so a recording cut by a crash is still a valid SigMF pair up to its last write.

use crate::output::sigmf::write::{self as sigmf_write, NAMESPACE};
use crate::output::sigmf::writer_thread::WriterThread;
use crate::pipeline::{Clock, Consumer, GapCause, RunEnd, RunInfo};
use crate::source::reader::Block;
use crate::source::SampleFormat;
use crossbeam_channel::{Receiver, Sender, TrySendError};
use num_complex::Complex32;
use serde_json::{Map, Value};
use std::fs::File;
use std::io::{self, BufWriter, Write};
use std::path::PathBuf;
use std::sync::{Arc, Mutex};

/// What a recording came to, readable by the command after the run (also from another thread).
#[derive(Debug, Default, Clone)]
pub struct RecordStatus {
    pub samples_written: u64,
    pub segments: u64,
    /// Samples the source lost (the DSP fell behind a live source).
    pub lost_behind: u64,
    /// Samples left out because the disk could not keep up.
    pub lost_recorder: u64,
    pub error: Option<String>,
}

/// Where a new segment starts, and what went missing before it.
#[derive(Debug, Clone)]
struct SegmentStart {
    global_index: u64,
    center_hz: f64,
    datetime: Option<String>,
    lost_before: u64,
    lost_cause: Option<&'static str>,
}

enum Msg {
    Samples { samples: Vec<Complex32>, segment: Option<SegmentStart> },
    End { lost_at_end: u64, lost_behind: u64, lost_recorder: u64 },
}

/// The recording consumer.
pub struct Recorder {
    meta_path: PathBuf,
    data: Option<File>,
    format: SampleFormat,
    block_len: usize,
    writer: Option<WriterThread<Msg, io::Result<()>>>,
    status: Arc<Mutex<RecordStatus>>,
    clock: Option<Clock>,
    /// Where the input's own segments start (after the first), with their centres.
    source_segments: Vec<(u64, f64)>,
    center_hz: f64,
    live: bool,
    /// Wait for the disk even with live input (`--no-drop`: the reader waits too).
    wait: bool,
    /// The stream index the next recorded sample must have to continue the segment.
    expected: Option<u64>,
    lost_pending: (u64, Option<&'static str>),
}

impl Recorder {
    /// Creates the data file (replacing one that exists) so a bad path fails before the run.
    /// `format` is the input's datatype (`None`: `cf32_le`); `block_len` the reader's block size.
    pub fn create(
        path: &str,
        format: Option<SampleFormat>,
        block_len: usize,
    ) -> anyhow::Result<Recorder> {
        let (meta_path, data_path) = sigmf_write::pair(path).map_err(anyhow::Error::msg)?;
        let data = File::create(&data_path).map_err(|e| {
            anyhow::anyhow!(
                "cannot create the recording '{}': {e}; check the directory exists and is writable",
                crate::messages::sanitize(&data_path.to_string_lossy())
            )
        })?;
        Ok(Recorder {
            meta_path,
            data: Some(data),
            format: format.map(SampleFormat::complex_twin).unwrap_or(SampleFormat::Cf32Le),
            block_len: block_len.max(1),
            writer: None,
            status: Arc::default(),
            clock: None,
            source_segments: Vec::new(),
            center_hz: 0.0,
            live: false,
            wait: false,
            expected: None,
            lost_pending: (0, None),
        })
    }

    /// Makes the recording wait for the disk with live input too, as the reader does under
    /// `--no-drop` (then nothing is left out, and a slow disk slows the source down).
    pub fn waiting(mut self, wait: bool) -> Recorder {
        self.wait = wait;
        self
    }

    /// A handle on the recording's figures, for the command to report after the run.
    pub fn status(&self) -> Arc<Mutex<RecordStatus>> {
        self.status.clone()
    }

    pub fn meta_path(&self) -> &std::path::Path {
        &self.meta_path
    }

    fn failed(&self) -> Option<String> {
        self.status.lock().ok()?.error.clone()
    }

    /// Sends one run of consecutive samples, starting a segment when needed.
    fn send(&mut self, start: u64, samples: &[Complex32]) -> io::Result<()> {
        let Some(w) = self.writer.as_ref() else { return Ok(()) };
        let boundary = self.source_segments.iter().find(|&&(at, _)| at == start);
        if let Some(&(_, c)) = boundary {
            self.center_hz = c;
        }
        let segment = (self.expected != Some(start) || boundary.is_some()).then(|| {
            let clock = self.clock.as_ref();
            SegmentStart {
                global_index: start,
                center_hz: self.center_hz,
                datetime: clock.and_then(|c| sigmf_write::datetime(c, start)),
                lost_before: self.lost_pending.0,
                lost_cause: self.lost_pending.1,
            }
        });
        let mut buf = w.buffer();
        buf.extend_from_slice(samples);
        let msg = Msg::Samples { samples: buf, segment };
        let sent = if self.live {
            match w.offer(msg) {
                Ok(()) => true,
                Err(TrySendError::Full(_)) => false,
                Err(TrySendError::Disconnected(_)) => return Err(self.writer_error()),
            }
        } else {
            w.send(msg).map_err(|_| self.writer_error())?;
            true
        };
        if sent {
            self.expected = Some(start + samples.len() as u64);
            self.lost_pending = (0, None);
        } else {
            // The disk is behind: these samples are not recorded, and the next segment says so.
            self.expected = None;
            self.lost(samples.len() as u64, "recorder_behind");
            if let Ok(mut s) = self.status.lock() {
                s.lost_recorder += samples.len() as u64;
            }
        }
        Ok(())
    }

    /// Notes `n` samples missing before the next segment; both causes may meet in one gap.
    fn lost(&mut self, n: u64, cause: &'static str) {
        self.lost_pending.0 += n;
        self.lost_pending.1 = match self.lost_pending.1 {
            Some(c) if c != cause => Some("behind_and_recorder_behind"),
            _ => Some(cause),
        };
    }

    fn writer_error(&self) -> io::Error {
        io::Error::other(self.failed().unwrap_or_else(|| "the recorder stopped".into()))
    }
}

impl Consumer for Recorder {
    fn start(&mut self, run: &RunInfo) -> io::Result<()> {
        let Some(data) = self.data.take() else { return Ok(()) };
        let src = &run.source;
        self.clock = Some(run.clock.clone());
        self.center_hz = src.segments.first().map_or(src.center_hz, |s| s.center_hz);
        self.source_segments =
            src.segments.iter().skip(1).map(|s| (s.sample_start, s.center_hz)).collect();
        self.live = src.live && !self.wait;
        let depth = WriterThread::<Msg, io::Result<()>>::depth_for(self.block_len).clamp(2, 4096);
        let depth = depth.min((src.sample_rate_hz / self.block_len as f64).ceil() as usize).max(2);
        let mut global = sigmf_write::global(
            self.format,
            src.sample_rate_hz,
            &format!("recorded by bandwarden from {}", src.label),
        );
        global.insert(format!("{NAMESPACE}:source"), src.label.clone().into());
        let writer = Writer {
            meta_path: self.meta_path.clone(),
            data: BufWriter::with_capacity(1 << 20, data),
            format: self.format,
            bytes: Vec::new(),
            global,
            captures: Vec::new(),
            written: 0,
            status: self.status.clone(),
        };
        let status = self.status.clone();
        self.writer = Some(WriterThread::spawn("recorder", depth, move |(rx, spare)| {
            let result = writer.run(rx, spare);
            if let (Err(e), Ok(mut s)) = (&result, status.lock()) {
                s.error.get_or_insert_with(|| format!("the recording stopped: {e}"));
            }
            result
        })?);
        Ok(())
    }

    fn block(&mut self, block: &Block) -> io::Result<()> {
        if let Some(e) = self.failed() {
            return Err(io::Error::other(e));
        }
        // Cut the block where the input's own segments start, so each gets its capture.
        let end = block.start + block.samples.len() as u64;
        let cuts: Vec<u64> = self
            .source_segments
            .iter()
            .map(|&(at, _)| at)
            .filter(|&at| at > block.start && at < end)
            .collect();
        let mut from = block.start;
        for to in cuts.into_iter().chain([end]) {
            let s = &block.samples[(from - block.start) as usize..(to - block.start) as usize];
            self.send(from, s)?;
            from = to;
        }
        Ok(())
    }

    fn gap(&mut self, from: u64, to: u64, cause: GapCause, _run: &RunInfo) -> io::Result<()> {
        // Samples that are not numbers were in the block and are recorded as they came.
        if cause == GapCause::Behind {
            self.lost(to - from, cause.as_str());
            if let Ok(mut s) = self.status.lock() {
                s.lost_behind += to - from;
            }
        }
        Ok(())
    }

    /// Closes the recording in the second stage of the end, so that annotations pointing at it
    /// (written in the last stage) read its finished metadata whatever the order of the list.
    fn settle(&mut self, _end: &RunEnd, _run: &RunInfo) -> io::Result<()> {
        let Some(mut w) = self.writer.take() else { return Ok(()) };
        let (behind, recorder) =
            self.status.lock().map(|s| (s.lost_behind, s.lost_recorder)).unwrap_or_default();
        let end = Msg::End {
            lost_at_end: self.lost_pending.0,
            lost_behind: behind,
            lost_recorder: recorder,
        };
        // At the end the DSP may wait for the disk: nothing is left to fall behind.
        let _ = w.send(end);
        w.close().unwrap_or_else(|| Err(io::Error::other("the recorder thread failed")))
    }
}

/// The writer thread's side: the data file, the segments so far, the meta file.
struct Writer {
    meta_path: PathBuf,
    data: BufWriter<File>,
    format: SampleFormat,
    bytes: Vec<u8>,
    global: Map<String, Value>,
    captures: Vec<Value>,
    written: u64,
    status: Arc<Mutex<RecordStatus>>,
}

impl Writer {
    fn run(mut self, rx: Receiver<Msg>, spare: Sender<Vec<Complex32>>) -> io::Result<()> {
        self.write_meta()?;
        for msg in rx {
            match msg {
                Msg::Samples { samples, segment } => {
                    if let Some(seg) = segment {
                        self.segment(seg)?;
                    }
                    self.bytes.clear();
                    self.format.encode(&samples, &mut self.bytes);
                    self.data.write_all(&self.bytes)?;
                    self.written += samples.len() as u64;
                    if let Ok(mut s) = self.status.lock() {
                        s.samples_written = self.written;
                    }
                    let _ = spare.try_send(samples);
                }
                Msg::End { lost_at_end, lost_behind, lost_recorder } => {
                    let g = &mut self.global;
                    g.insert(format!("{NAMESPACE}:lost_behind"), lost_behind.into());
                    g.insert(format!("{NAMESPACE}:lost_recorder"), lost_recorder.into());
                    g.insert(format!("{NAMESPACE}:lost_at_end"), lost_at_end.into());
                }
            }
        }
        self.data.flush()?;
        self.data.get_ref().sync_all()?;
        self.write_meta()
    }

    fn segment(&mut self, seg: SegmentStart) -> io::Result<()> {
        let mut c =
            sigmf_write::capture(self.written, seg.global_index, seg.center_hz, seg.datetime);
        if seg.lost_before > 0 {
            c.insert(format!("{NAMESPACE}:lost_before"), seg.lost_before.into());
            if let Some(cause) = seg.lost_cause {
                c.insert(format!("{NAMESPACE}:lost_cause"), cause.into());
            }
        }
        self.captures.push(Value::Object(c));
        if let Ok(mut s) = self.status.lock() {
            s.segments = self.captures.len() as u64;
        }
        // The samples before the new segment must be on disk before the meta names them.
        self.data.flush()?;
        self.write_meta()
    }

    fn write_meta(&self) -> io::Result<()> {
        let meta = serde_json::json!({
            "global": self.global,
            "captures": self.captures,
            "annotations": [],
        });
        sigmf_write::write_meta(&self.meta_path, &meta).map_err(|e| {
            io::Error::new(
                e.kind(),
                format!(
                    "cannot write the recording's meta file '{}': {e}",
                    crate::messages::sanitize(&self.meta_path.to_string_lossy())
                ),
            )
        })
    }
}

#[cfg(test)]
mod tests;
