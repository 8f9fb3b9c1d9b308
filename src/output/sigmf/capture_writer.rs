//! The piece of `--capture` that is not about emissions: the thread that writes capture files
//! so the DSP never waits for a disk. (The pre-trigger samples come from the stream's
//! [`IqHistory`](crate::pipeline::history::IqHistory).)

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
