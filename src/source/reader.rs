//! The reader thread: pulls blocks from a source and sends them to the DSP over a bounded channel.
//!
//! File input is never dropped: when the queue is full the reader waits. A live source (stdin, the
//! paced demo) cannot wait without the samples piling up upstream, so when `drop_when_full` is set
//! a block that finds the queue full is counted in [`ReaderStats::dropped`] and discarded; the next
//! block's `start` index jumps by the gap, so time stays exact and the DSP knows to re-frame.
//! Only input that arrives at (about) its real rate is treated so: a pipe that has delivered more
//! than its sample rate allows (a recording sent through `cat` or `ssh`) waits instead.
//!
//! Live input is also timed against its stated rate ([`RateCheck`]): a pipe that delivers half
//! the samples per second `--rate` claims is a wrong `--rate` (every frequency and time shown is
//! then off by that factor), and [`ReaderStats::rate_note`] says so for the command to show.

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
    /// What those samples were lost to.
    pub lost_cause: super::LinkLoss,
    /// Every sample is known to be finite (the source screened them); false when not known,
    /// and the run looks for itself.
    pub finite: bool,
    /// Retunes of a stream that reports them (see [`super::tuning`]), in order, each with the
    /// index of the first sample it applies to: none of them lies beyond this block's end
    /// unseen, so the DSP applies them before the block's samples.
    pub retunes: Vec<super::tuning::Step>,
    home: Option<Sender<Vec<Complex32>>>,
}

impl Block {
    #[cfg(test)]
    fn homed(mut self, home: Sender<Vec<Complex32>>) -> Block {
        self.home = Some(home);
        self
    }

    pub fn new(start: u64, samples: Vec<Complex32>) -> Block {
        Block {
            start,
            samples,
            disconnected: 0,
            lost_cause: super::LinkLoss::Disconnected,
            finite: false,
            retunes: Vec::new(),
            home: None,
        }
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
    /// Set once when live input was seen to arrive at a rate other than its stated one
    /// ([`RateCheck`]): for the command to print and a screen to show.
    pub rate_note: Mutex<Option<String>>,
}

impl ReaderStats {
    /// Why the reader stopped, if the input failed.
    pub fn problem(&self) -> Option<String> {
        self.problem.lock().ok().and_then(|p| p.clone())
    }

    /// What the reader found about the rate live input arrives at, if it is not the stated one;
    /// taken, so whoever shows it shows it once.
    pub fn take_rate_note(&self) -> Option<String> {
        self.rate_note.lock().ok().and_then(|mut n| n.take())
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
    let live = src.info().live;
    let mut rate_check: Option<RateCheck> = None;
    // Samples lost to a disconnection and not yet announced by a delivered block.
    let mut disconnected = 0u64;
    // Retunes not yet carried by a delivered block (one dropped while behind keeps them).
    let mut retunes: Vec<super::tuning::Step> = Vec::new();
    let mut skipped = 0u64;
    // Samples (and losses) up to the end of those the source read ahead before the run.
    let mut replayed = 0u64;
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
        // Samples the source read ahead before the run: delivered whole, not timed.
        let read_ahead = src.replaying();
        let n = src.read(&mut samples)?;
        samples.truncate(n);
        retunes.extend(src.take_retunes().into_iter().map(|mut r| {
            r.start = r.start.saturating_sub(skipped);
            r
        }));
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
        if read_ahead {
            replayed = index + n as u64;
        }
        let arrived = Instant::now();
        if live && !read_ahead {
            let check = rate_check.get_or_insert_with(|| RateCheck::new(rate, arrived));
            if lost > 0 {
                check.disturbed(arrived);
            } else if let Some(measured) = check.arrived(n as u64, arrived) {
                if let (Some(text), Ok(mut slot)) =
                    (rate_message(&src.info().label, measured, rate), stats.rate_note.lock())
                {
                    *slot = Some(text);
                }
            }
        }
        // Seen once ahead of real time, the input is a recording: it may wait, never drop, and
        // from now on plays at its recorded rate when asked to.
        let live_since = (!read_ahead).then(|| *first_block.get_or_insert(arrived));
        let since_replay = index + n as u64 - replayed;
        if !recording && live_since.is_some_and(|t| ahead_of_real_time(since_replay, rate, t, opts))
        {
            recording = true;
            pacer = pacer.or(opts.pace_recordings.map(Pacer::new));
        }
        let mut held = pacer.as_mut().is_some_and(|p| p.wait(n as u64, rate, stop));
        let block = Block {
            start: index,
            finite: src.last_read_finite(),
            samples,
            disconnected,
            lost_cause: src.lost_cause(),
            retunes: std::mem::take(&mut retunes),
            home: Some(home.clone()),
        };
        index += n as u64;
        stats.samples.fetch_add(n as u64, Ordering::Relaxed);
        match tx.try_send(block) {
            Ok(()) => disconnected = 0,
            Err(TrySendError::Full(mut b)) if opts.drop_when_full && !recording && !read_ahead => {
                stats.dropped.fetch_add(b.samples.len() as u64, Ordering::Relaxed);
                retunes = std::mem::take(&mut b.retunes);
            }
            Err(TrySendError::Full(b)) => {
                // File input, or a pipe that delivers faster than real time (a recording, not
                // a receiver): it can wait (back-pressure), and must lose nothing.
                held = true;
                if tx.send(b).is_err() {
                    break;
                }
                disconnected = 0;
            }
            Err(TrySendError::Disconnected(_)) => break,
        }
        if held {
            if let Some(check) = rate_check.as_mut() {
                check.disturbed(Instant::now());
            }
        }
    }
    Ok(())
}

/// Live input is timed only after it has run this long: a receiver's start-up burst and what
/// the pipe or socket buffered are read in that time.
pub const RATE_SETTLE_S: f64 = 1.0;
/// Live input's arrival rate is measured over this long.
pub const RATE_WINDOW_S: f64 = 3.0;
/// Arrival rates within this fraction of the stated rate pass: a window of 3 s read in blocks of
/// about 10 ms is exact to about 1 %, and the rest is room for the reader being scheduled late
/// at either end of the window (0.3 s in all) on a busy machine. Rates that differ by less
/// (2.4M given for 2.56 MS/s) are not seen.
pub const RATE_TOLERANCE: f64 = 0.10;

/// Times live input against its stated sample rate.
///
/// The rule: once the input has run [`RATE_SETTLE_S`], count the samples that arrive over the
/// next [`RATE_WINDOW_S`]; when their rate differs from the stated one by more than
/// [`RATE_TOLERANCE`], say so, once (one window decides, either way). A window in which the
/// reader itself held the input back (it waited on a full queue, or the pacer held a recording
/// to its rate) or lost samples to a disconnection says nothing about the source: it is dropped,
/// and timing starts again after another settling time (the backlog is read in it). So input
/// whose pace the processing sets (a recording piped in faster than the DSP can take it) is
/// never judged; a recording the processing keeps up with arrives faster than the stated rate,
/// and the message names that as a possible cause.
struct RateCheck {
    rate: f64,
    /// Samples read so far (lost ones not counted).
    arrived: u64,
    /// No window starts before this.
    settled_at: Instant,
    /// When the current window began and how many samples had arrived by then.
    window: Option<(Instant, u64)>,
    done: bool,
}

impl RateCheck {
    fn new(rate: f64, now: Instant) -> RateCheck {
        RateCheck { rate, arrived: 0, settled_at: settled(now), window: None, done: false }
    }

    /// The reader held the input back or lost samples at `now`: what arrives next is a backlog
    /// or a gap, not the source's pace.
    fn disturbed(&mut self, now: Instant) {
        if !self.done {
            self.window = None;
            self.settled_at = settled(now);
        }
    }

    /// Counts `n` samples that arrived at `now`; returns their measured rate when a window is
    /// complete (once).
    fn arrived(&mut self, n: u64, now: Instant) -> Option<f64> {
        if self.done || self.rate <= 0.0 {
            return None;
        }
        self.arrived += n;
        if now < self.settled_at {
            return None;
        }
        let Some((t0, a0)) = self.window else {
            self.window = Some((now, self.arrived));
            return None;
        };
        let span = now.duration_since(t0).as_secs_f64();
        if span < RATE_WINDOW_S {
            return None;
        }
        self.done = true;
        Some((self.arrived - a0) as f64 / span)
    }
}

/// When input that started (or was last held back) at `now` may be timed.
fn settled(now: Instant) -> Instant {
    now + Duration::from_secs_f64(RATE_SETTLE_S)
}

/// What to tell the user when `label` delivers `measured` samples per second and `--rate` says
/// `stated` (`None` within [`RATE_TOLERANCE`]).
pub fn rate_message(label: &str, measured: f64, stated: f64) -> Option<String> {
    let ratio = measured / stated;
    if (ratio - 1.0).abs() <= RATE_TOLERANCE {
        return None;
    }
    let label = crate::messages::sanitize(label);
    let got = format_rate(measured);
    let said = format_rate(stated);
    let flag = rate_flag(measured);
    let window = RATE_WINDOW_S;
    Some(if ratio < 1.0 {
        format!(
            "{label} delivers {got}, {ratio:.2} × the {said} --rate gives (timed over {window} s in which bandwarden never held it back): with a wrong --rate every frequency, width and time shown is off by that factor; give the receiver's real rate (--rate {flag}?). A receiver that loses samples, or a slow link, also delivers less than its rate"
        )
    } else {
        format!(
            "{label} delivers {got}, {ratio:.2} × the {said} --rate gives (timed over {window} s while the processing kept up): if it is a receiver, --rate is wrong and every frequency, width and time shown is off by that factor (--rate {flag}?); a recording played into the pipe also arrives faster than real time, and is measured correctly"
        )
    })
}

/// `2.40 MS/s`, `250.00 kS/s`.
fn format_rate(sps: f64) -> String {
    let (value, prefix) = si(sps);
    format!("{value:.2} {prefix}S/s")
}

/// A measured rate as a `--rate` value to three significant figures (`2.4M`, `250k`).
fn rate_flag(sps: f64) -> String {
    let (value, prefix) = si(crate::units::round_significant(sps, 3));
    format!("{value}{prefix}")
}

/// A rate in the unit it reads best in: mega, kilo or none.
fn si(sps: f64) -> (f64, &'static str) {
    if sps >= 1e6 {
        (sps / 1e6, "M")
    } else if sps >= 1e3 {
        (sps / 1e3, "k")
    } else {
        (sps, "")
    }
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

    /// Counts `n` more samples and sleeps until they are due; true when it slept.
    fn wait(&mut self, n: u64, rate: f64, stop: &AtomicBool) -> bool {
        self.samples += n;
        let due = Duration::from_secs_f64(self.samples as f64 / (rate * self.speed));
        let elapsed = self.origin.elapsed();
        let early = due > elapsed;
        if early {
            sleep_unless_stopped(due - elapsed, stop);
        }
        early
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

    /// Feeds `check` blocks of `block` samples every `every` seconds of simulated time for
    /// `seconds`, calling `hold` on each block index to ask whether the reader waited after it.
    fn time_blocks(
        check: &mut RateCheck,
        t0: Instant,
        block: u64,
        every: f64,
        seconds: f64,
        hold: impl Fn(usize) -> bool,
    ) -> Option<f64> {
        let mut verdict = None;
        for i in 0..(seconds / every) as usize {
            let now = t0 + Duration::from_secs_f64(i as f64 * every);
            verdict = verdict.or(check.arrived(block, now));
            if hold(i) {
                check.disturbed(now);
            }
        }
        verdict
    }

    #[test]
    fn arrival_is_timed_after_settling_over_one_window() {
        // 2.4 MS/s arriving in 24 000-sample blocks every 10 ms, with 4.8 MS/s stated.
        let t0 = Instant::now();
        let mut check = RateCheck::new(4.8e6, t0);
        let got = time_blocks(&mut check, t0, 24_000, 0.01, 6.0, |_| false).unwrap();
        assert!((got - 2.4e6).abs() < 1.0, "{got}");
        // Decided once: later blocks say nothing more.
        assert_eq!(check.arrived(24_000, t0 + Duration::from_secs(7)), None);
        let note = rate_message("stdin", got, 4.8e6).unwrap();
        assert!(note.contains("stdin delivers 2.40 MS/s, 0.50 × the 4.80 MS/s"), "{note}");
        assert!(note.contains("--rate 2.4M?"), "{note}");
        // Not before settling plus a window have passed.
        let mut early = RateCheck::new(4.8e6, t0);
        let span = RATE_SETTLE_S + RATE_WINDOW_S - 0.1;
        assert_eq!(time_blocks(&mut early, t0, 24_000, 0.01, span, |_| false), None);
    }

    #[test]
    fn a_reader_that_held_the_input_back_does_not_judge_it() {
        // A recording the processing paces: the reader waits after every tenth block, so no
        // window is ever free of it and nothing is said however fast the blocks come.
        let t0 = Instant::now();
        let mut check = RateCheck::new(1e6, t0);
        assert_eq!(time_blocks(&mut check, t0, 100_000, 0.01, 20.0, |i| i % 10 == 9), None);
        // One wait, then steady arrival: timed again after settling.
        let mut once = RateCheck::new(1e6, t0);
        let got = time_blocks(&mut once, t0, 10_000, 0.01, 8.0, |i| i == 150).unwrap();
        assert!((got - 1e6).abs() < 1.0, "{got}");
        assert_eq!(rate_message("stdin", got, 1e6), None);
    }

    #[test]
    fn rates_within_the_tolerance_pass() {
        assert_eq!(rate_message("stdin", 2.4e6 * 0.91, 2.4e6), None);
        assert_eq!(rate_message("stdin", 2.4e6 * 1.09, 2.4e6), None);
        let fast = rate_message("tcp://rx:1234", 2.4e6, 1e6).unwrap();
        assert!(fast.contains("2.40 × the 1.00 MS/s --rate gives"), "{fast}");
        assert!(fast.contains("a recording played into the pipe"), "{fast}");
        let slow = rate_message("stdin", 2.048e6, 2.4e6).unwrap();
        assert!(slow.contains("--rate 2.05M?"), "{slow}");
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
        drop(Block::new(0, buf).homed(home.clone()));
        let back = spare.try_recv().expect("the buffer came back");
        assert_eq!((back.as_ptr(), back.len()), (ptr, 1000));
        // With the return queue full the buffer is simply freed.
        home.try_send(Vec::new()).unwrap();
        drop(Block::new(0, back).homed(home));
        assert!(spare.try_recv().unwrap().is_empty());
    }
}
