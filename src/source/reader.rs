//! The reader thread: pulls blocks from a source and sends them to the DSP over a bounded channel.
//!
//! File input is never dropped: when the queue is full the reader waits. A live source (stdin, the
//! paced demo) cannot wait without the samples piling up upstream, so when `drop_when_full` is set
//! a block that finds the queue full is counted in [`ReaderStats::dropped`] and discarded; the next
//! block's `start` index jumps by the gap, so time stays exact and the DSP knows to re-frame.
//! Only input that arrives at (about) its real rate is treated so: a pipe that has delivered more
//! than its sample rate allows (a recording sent through `cat` or `ssh`) waits instead.

use super::{InputIssues, SampleSource};
use anyhow::Result;
use crossbeam_channel::{bounded, Sender, TrySendError};
use num_complex::Complex32;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::{Arc, Mutex};
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

/// A run of consecutive samples; `start` counts samples from the beginning of the input,
/// dropped ones included.
///
/// A block from the reader goes back to it when dropped, so its buffer is filled again instead
/// of a new one being allocated (and faulted in) for every block.
#[derive(Debug)]
pub struct Block {
    pub start: u64,
    pub samples: Vec<Complex32>,
    /// Of the samples skipped just before `start`, how many the source lost to a disconnection
    /// (the rest of a jump was dropped because processing was behind).
    pub disconnected: u64,
    home: Option<Sender<Vec<Complex32>>>,
}

impl Block {
    pub fn new(start: u64, samples: Vec<Complex32>) -> Block {
        Block { start, samples, disconnected: 0, home: None }
    }
}

impl Drop for Block {
    fn drop(&mut self) {
        if let Some(home) = &self.home {
            // A full or closed return queue just means this buffer is freed.
            let _ = home.try_send(std::mem::take(&mut self.samples));
        }
    }
}

/// Returned buffers kept for reuse.
const SPARE_BLOCKS: usize = 4;

/// Counters shared with whoever displays or logs progress.
#[derive(Debug, Default)]
pub struct ReaderStats {
    /// Samples taken from the source (delivered or dropped).
    pub samples: AtomicU64,
    /// Samples discarded because the DSP was behind.
    pub dropped: AtomicU64,
    /// Set when the source reached its end.
    pub finished: AtomicBool,
    /// Why the reader stopped, when the input failed (a wrong format, a read error): for a screen
    /// that would otherwise go on waiting for samples.
    pub problem: Mutex<Option<String>>,
}

impl ReaderStats {
    /// Why the reader stopped, if the input failed.
    pub fn problem(&self) -> Option<String> {
        self.problem.lock().ok().and_then(|p| p.clone())
    }
}

#[derive(Clone, Debug)]
pub struct ReaderOptions {
    /// Samples per block.
    pub block_len: usize,
    /// Drop (and count) blocks when the queue is full instead of waiting.
    pub drop_when_full: bool,
    /// Deliver at `speed` × the sample rate (file playback in `watch`); `None` = as fast as the
    /// consumer takes them.
    pub pace: Option<f64>,
    /// Deliver at this multiple of the sample rate once the input shows itself to be a recording
    /// (a pipe running ahead of real time, as `cat file |` does); a receiver is never held back.
    pub pace_recordings: Option<f64>,
    /// Start again at the end (files only).
    pub loop_input: bool,
    /// Stop after this many samples (`--seconds`), counted after `skip_samples`.
    pub max_samples: Option<u64>,
    /// Read and discard this many samples first (`measure --skip`); the first sample delivered
    /// has index 0.
    pub skip_samples: u64,
}

impl Default for ReaderOptions {
    fn default() -> Self {
        ReaderOptions {
            block_len: 65536,
            drop_when_full: false,
            pace: None,
            pace_recordings: None,
            loop_input: false,
            max_samples: None,
            skip_samples: 0,
        }
    }
}

/// Runs `src` on a new thread. The thread ends (dropping `tx`, which ends the stream) at end of
/// input, when `stop` is set, or when the receiver hangs up. It returns the source's issues.
pub fn spawn(
    mut src: Box<dyn SampleSource>,
    opts: ReaderOptions,
    tx: Sender<Block>,
    stop: Arc<AtomicBool>,
    stats: Arc<ReaderStats>,
) -> JoinHandle<Result<InputIssues>> {
    std::thread::Builder::new()
        .name("reader".into())
        .spawn(move || {
            src.watch_stop(stop.clone());
            let result = run(&mut *src, &opts, &tx, &stop, &stats);
            if let (Err(e), Ok(mut p)) = (&result, stats.problem.lock()) {
                *p = Some(format!("{e:#}"));
            }
            stats.finished.store(true, Ordering::SeqCst);
            result.map(|_| src.issues())
        })
        .expect("spawning the reader thread")
}

fn run(
    src: &mut dyn SampleSource,
    opts: &ReaderOptions,
    tx: &Sender<Block>,
    stop: &AtomicBool,
    stats: &ReaderStats,
) -> Result<()> {
    let rate = src.info().sample_rate_hz;
    // Buffers come back from dropped blocks. A consumer that keeps up needs only a couple; more
    // are freed on return, so a backlog that has cleared does not stay resident.
    let (home, spare) = bounded::<Vec<Complex32>>(SPARE_BLOCKS);
    let mut index = 0u64;
    let mut pacer = opts.pace.map(Pacer::new);
    let mut first_block: Option<Instant> = None;
    let mut recording = false;
    // Samples lost to a disconnection and not yet announced by a delivered block.
    let mut disconnected = 0u64;
    let mut skipped = 0u64;
    if opts.skip_samples > 0 {
        let mut scratch = vec![Complex32::default(); opts.block_len.max(1)];
        while skipped < opts.skip_samples && !stop.load(Ordering::Relaxed) {
            let want = scratch.len().min((opts.skip_samples - skipped) as usize);
            let n = src.read(&mut scratch[..want])?;
            if n == 0 {
                break;
            }
            skipped += n as u64;
        }
    }
    while !stop.load(Ordering::Relaxed) {
        let mut want = opts.block_len;
        if let Some(max) = opts.max_samples {
            if index >= max {
                break;
            }
            want = want.min((max - index) as usize);
        }
        let mut samples = spare.try_recv().unwrap_or_default();
        samples.resize(want, Complex32::default());
        let n = src.read(&mut samples)?;
        samples.truncate(n);
        let lost = src.take_lost();
        index += lost;
        disconnected += lost;
        stats.samples.fetch_add(lost, Ordering::Relaxed);
        if n == 0 {
            if opts.loop_input && index > 0 && src.rewind().is_ok() {
                continue;
            }
            break;
        }
        let first = *first_block.get_or_insert_with(Instant::now);
        // Seen once ahead of real time, the input is a recording: it may wait, never drop, and
        // from now on plays at its recorded rate when asked to.
        if !recording && ahead_of_real_time(index + n as u64, rate, first, opts) {
            recording = true;
            pacer = pacer.or(opts.pace_recordings.map(Pacer::new));
        }
        if let Some(p) = pacer.as_mut() {
            p.wait(n as u64, rate, stop);
        }
        let block = Block { start: index, samples, disconnected, home: Some(home.clone()) };
        index += n as u64;
        stats.samples.fetch_add(n as u64, Ordering::Relaxed);
        if opts.drop_when_full {
            match tx.try_send(block) {
                Ok(()) => disconnected = 0,
                Err(TrySendError::Full(b)) if recording => {
                    // A pipe that delivers faster than real time is a recording, not a
                    // receiver: it can wait (back-pressure), and must lose nothing.
                    if tx.send(b).is_err() {
                        break;
                    }
                    disconnected = 0;
                }
                Err(TrySendError::Full(b)) => {
                    stats.dropped.fetch_add(b.samples.len() as u64, Ordering::Relaxed);
                }
                Err(TrySendError::Disconnected(_)) => break,
            }
        } else if tx.send(block).is_err() {
            break;
        } else {
            disconnected = 0;
        }
    }
    Ok(())
}

/// How far ahead of real time an input may run before it counts as faster than a receiver: a
/// receiver's own buffering (and the pipe's) lets it burst a little ahead, never by this much.
pub const REAL_TIME_SLACK_S: f64 = 0.5;

/// True when more samples have arrived since the first block than the sample rate allows (with
/// [`REAL_TIME_SLACK_S`] of slack plus one block): the input is a recording played into a pipe,
/// not a live receiver.
fn ahead_of_real_time(samples: u64, rate: f64, first: Instant, opts: &ReaderOptions) -> bool {
    let due = rate * (first.elapsed().as_secs_f64() + REAL_TIME_SLACK_S) + opts.block_len as f64;
    samples as f64 > due
}

/// Holds delivery to `speed` × the sample rate from the moment it was made.
struct Pacer {
    origin: Instant,
    samples: u64,
    speed: f64,
}

impl Pacer {
    fn new(speed: f64) -> Pacer {
        Pacer { origin: Instant::now(), samples: 0, speed }
    }

    /// Counts `n` more samples and sleeps until they are due.
    fn wait(&mut self, n: u64, rate: f64, stop: &AtomicBool) {
        self.samples += n;
        let due = Duration::from_secs_f64(self.samples as f64 / (rate * self.speed));
        let elapsed = self.origin.elapsed();
        if due > elapsed {
            sleep_unless_stopped(due - elapsed, stop);
        }
    }
}

fn sleep_unless_stopped(mut d: Duration, stop: &AtomicBool) {
    let slice = Duration::from_millis(20);
    while d > Duration::ZERO && !stop.load(Ordering::Relaxed) {
        let s = d.min(slice);
        std::thread::sleep(s);
        d -= s;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::source::demo::DemoSource;

    #[test]
    fn a_full_queue_drops_and_counts_live_blocks() {
        let src = Box::new(DemoSource::new(1e6, 0.0, false));
        let (tx, rx) = bounded(2);
        let stats = Arc::new(ReaderStats::default());
        let opts = ReaderOptions {
            block_len: 1000,
            drop_when_full: true,
            max_samples: Some(10_000),
            ..Default::default()
        };
        let h = spawn(src, opts, tx, Arc::new(AtomicBool::new(false)), stats.clone());
        h.join().unwrap().unwrap();
        let got: Vec<Block> = rx.try_iter().collect();
        assert_eq!(got.len(), 2);
        assert_eq!(stats.dropped.load(Ordering::SeqCst), 8000);
        assert_eq!(stats.samples.load(Ordering::SeqCst), 10_000);
        assert_eq!(got[1].start, 1000);
    }

    #[test]
    fn a_recording_on_a_pipe_is_paced_not_dropped() {
        // The non-realtime demo source delivers as fast as it is read, as `cat file |` does.
        // 1.5 s of samples at 100 kS/s: the first half second runs ahead (the slack), the rest
        // plays at the recorded rate, so the whole takes about a second (the schedule, not a
        // measurement) and, with a consumer that keeps up, nothing is dropped.
        let src = Box::new(DemoSource::new(1e5, 0.0, false));
        let (tx, rx) = bounded(2);
        let stats = Arc::new(ReaderStats::default());
        let opts = ReaderOptions {
            block_len: 1000,
            drop_when_full: true,
            pace_recordings: Some(1.0),
            max_samples: Some(150_000),
            ..Default::default()
        };
        let t0 = Instant::now();
        let h = spawn(src, opts, tx, Arc::new(AtomicBool::new(false)), stats.clone());
        let blocks: Vec<(u64, usize)> = rx.iter().map(|b| (b.start, b.samples.len())).collect();
        h.join().unwrap().unwrap();
        let took = t0.elapsed().as_secs_f64();
        // Before the input shows itself a recording (half a second of samples ahead, plus a
        // block) a full queue may drop, as for a receiver; after that nothing is dropped.
        let dropped = stats.dropped.load(Ordering::SeqCst);
        let known = 50_000 + 2 * 1000;
        assert!(dropped <= known, "dropped {dropped}");
        let late: Vec<&(u64, usize)> = blocks.iter().filter(|b| b.0 >= known).collect();
        for w in late.windows(2) {
            assert_eq!(w[0].0 + w[0].1 as u64, w[1].0, "a gap after the recording was known");
        }
        assert_eq!(late.last().map(|b| b.0 + b.1 as u64), Some(150_000));
        assert!((0.85..3.0).contains(&took), "took {took} s");
    }

    #[test]
    fn file_style_input_is_never_dropped() {
        let src = Box::new(DemoSource::new(1e6, 0.0, false));
        let (tx, rx) = bounded(1);
        let stats = Arc::new(ReaderStats::default());
        let opts =
            ReaderOptions { block_len: 1000, max_samples: Some(10_500), ..Default::default() };
        let h = spawn(src, opts, tx, Arc::new(AtomicBool::new(false)), stats.clone());
        let mut next = 0;
        for b in rx.iter() {
            assert_eq!(b.start, next);
            next += b.samples.len() as u64;
        }
        h.join().unwrap().unwrap();
        assert_eq!(next, 10_500);
        assert_eq!(stats.dropped.load(Ordering::SeqCst), 0);
    }

    #[test]
    fn a_dropped_block_sends_its_buffer_home() {
        let (home, spare) = bounded(1);
        let buf = vec![Complex32::new(0.5, 0.0); 1000];
        let ptr = buf.as_ptr();
        drop(Block { start: 0, samples: buf, disconnected: 0, home: Some(home.clone()) });
        let back = spare.try_recv().expect("the buffer came back");
        assert_eq!((back.as_ptr(), back.len()), (ptr, 1000));
        // With the return queue full the buffer is simply freed.
        home.try_send(Vec::new()).unwrap();
        drop(Block { start: 0, samples: back, disconnected: 0, home: Some(home) });
        assert!(spare.try_recv().unwrap().is_empty());
    }
}
