//! The two pieces of `--capture` that are not about emissions: the ring of recent samples the
//! pre-trigger part comes from, and the thread that writes capture files so the DSP never waits
//! for a disk.

use crate::output::sigmf::write as sigmf_write;
use crate::source::SampleFormat;
use crossbeam_channel::{Receiver, Sender};
use num_complex::Complex32;
use serde_json::Value;
use std::collections::HashMap;
use std::fs::File;
use std::io::{self, BufWriter, Write};
use std::path::PathBuf;
use std::sync::{Arc, Mutex};

/// The newest `capacity` samples of the stream, allocated once.
pub struct Ring {
    buf: Vec<Complex32>,
    /// Stream index one past the newest sample held.
    end: u64,
    len: usize,
}

impl Ring {
    pub fn new(capacity: usize) -> Ring {
        Ring { buf: vec![Complex32::default(); capacity.max(1)], end: 0, len: 0 }
    }

    /// Appends samples starting at stream index `start`; a jump forgets what was held.
    pub fn push(&mut self, start: u64, samples: &[Complex32]) {
        if start != self.end {
            self.len = 0;
        }
        let cap = self.buf.len();
        let take = &samples[samples.len().saturating_sub(cap)..];
        let skipped = (samples.len() - take.len()) as u64;
        let at = ((start + skipped) % cap as u64) as usize;
        let first = (cap - at).min(take.len());
        self.buf[at..at + first].copy_from_slice(&take[..first]);
        self.buf[..take.len() - first].copy_from_slice(&take[first..]);
        self.end = start + samples.len() as u64;
        self.len = (self.len + samples.len()).min(cap);
    }

    /// Oldest stream index held.
    pub fn first(&self) -> u64 {
        self.end - self.len as u64
    }

    pub fn end(&self) -> u64 {
        self.end
    }

    pub fn clear(&mut self) {
        self.len = 0;
    }

    /// Copies stream samples `[from, self.end())` (from at least `first()`) into `out`.
    pub fn copy_from(&self, from: u64, out: &mut Vec<Complex32>) {
        let cap = self.buf.len() as u64;
        let from = from.max(self.first());
        let a = (from % cap) as usize;
        let n = (self.end - from) as usize;
        let first = (self.buf.len() - a).min(n);
        out.extend_from_slice(&self.buf[a..a + first]);
        out.extend_from_slice(&self.buf[..n - first]);
    }
}

/// Work for the capture writer.
pub enum Job {
    Open {
        id: u64,
        data: PathBuf,
    },
    Samples {
        id: u64,
        samples: Vec<Complex32>,
    },
    /// The capture is complete: keep its first `samples` samples and write its meta file.
    Close {
        id: u64,
        samples: u64,
        meta_path: PathBuf,
        meta: Value,
    },
    /// The capture was given up (the queue was full): delete what was written.
    Abandon {
        id: u64,
    },
}

/// What the writer found wrong, for the consumer to report.
pub type WriterError = Arc<Mutex<Option<String>>>;

/// Runs the capture writer until the queue closes. Files not closed by then are deleted.
pub fn run(
    jobs: Receiver<Job>,
    spare: Sender<Vec<Complex32>>,
    format: SampleFormat,
    error: WriterError,
) {
    let mut open: HashMap<u64, (BufWriter<File>, PathBuf)> = HashMap::new();
    let mut bytes = Vec::new();
    let fail = |e: io::Error, what: &PathBuf| {
        if let Ok(mut slot) = error.lock() {
            slot.get_or_insert_with(|| {
                format!(
                    "cannot write the capture '{}': {e}",
                    crate::messages::sanitize(&what.to_string_lossy())
                )
            });
        }
    };
    for job in jobs {
        match job {
            Job::Open { id, data } => match File::create(&data) {
                Ok(f) => {
                    open.insert(id, (BufWriter::with_capacity(1 << 18, f), data));
                }
                Err(e) => fail(e, &data),
            },
            Job::Samples { id, samples } => {
                if let Some((w, path)) = open.get_mut(&id) {
                    bytes.clear();
                    format.encode(&samples, &mut bytes);
                    if let Err(e) = w.write_all(&bytes) {
                        let path = path.clone();
                        fail(e, &path);
                        discard(open.remove(&id));
                    }
                }
                let _ = spare.try_send(samples);
            }
            Job::Close { id, samples, meta_path, meta } => {
                if let Some((w, path)) = open.remove(&id) {
                    let len = samples * format.bytes_per_sample() as u64;
                    let done = w
                        .into_inner()
                        .map_err(|e| e.into_error())
                        .and_then(|f| f.set_len(len))
                        .and_then(|_| sigmf_write::write_meta(&meta_path, &meta));
                    if let Err(e) = done {
                        fail(e, &path);
                        let _ = std::fs::remove_file(&path);
                    }
                }
            }
            Job::Abandon { id } => discard(open.remove(&id)),
        }
    }
    for (_, file) in open.drain() {
        discard(Some(file));
    }
}

fn discard(file: Option<(BufWriter<File>, PathBuf)>) {
    if let Some((w, path)) = file {
        drop(w);
        let _ = std::fs::remove_file(path);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn c(i: u64) -> Complex32 {
        Complex32::new(i as f32, 0.0)
    }

    #[test]
    fn the_ring_keeps_the_newest_samples_in_order() {
        let mut r = Ring::new(10);
        r.push(0, &(0..7).map(c).collect::<Vec<_>>());
        r.push(7, &(7..15).map(c).collect::<Vec<_>>());
        assert_eq!((r.first(), r.end()), (5, 15));
        let mut out = Vec::new();
        r.copy_from(8, &mut out);
        assert_eq!(out, (8..15).map(c).collect::<Vec<_>>());
        out.clear();
        r.copy_from(0, &mut out);
        assert_eq!(out, (5..15).map(c).collect::<Vec<_>>(), "clipped to what is held");
        // A block longer than the ring leaves its own last samples.
        r.push(15, &(15..40).map(c).collect::<Vec<_>>());
        out.clear();
        r.copy_from(0, &mut out);
        assert_eq!(out, (30..40).map(c).collect::<Vec<_>>());
        // A jump in the stream (a gap) forgets the samples before it.
        r.push(100, &(100..103).map(c).collect::<Vec<_>>());
        assert_eq!(r.first(), 100);
    }
}
