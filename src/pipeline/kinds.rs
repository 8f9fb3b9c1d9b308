//! The kind of an emission (its modulation family, [`crate::measure::classify`]), from its own
//! samples: an [`IqHistory`] of the stream, cut where the emission lay and handed to the
//! classifier with its centre, occupied bandwidth and the noise density.
//!
//! **Cost.** One classification per emission, when it ends (never per row; the census takes a
//! long one while still open, see `output::census`), on at most
//! [`TAKE_S`] seconds or [`TAKE_MAX`] samples of it, whichever is fewer: its first samples while
//! they are still held, else (an emission longer than the history) its newest. The history's
//! memory is bounded by [`HISTORY_MAX_BYTES`](super::history::HISTORY_MAX_BYTES).

use super::history::{IqHistory, Part, HISTORY_SECONDS};
use super::{Consumer, RunInfo};
use crate::measure::classify::{
    classify, classify_shared, designator, Class, Classification, EmissionIq, Forward,
};
use crate::source::reader::Block;
use num_complex::Complex32;
use std::collections::VecDeque;
use std::io;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex, PoisonError};
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

/// Longest stretch of one emission classified, seconds.
pub const TAKE_S: f64 = 0.5;
/// Most samples of one emission classified.
pub const TAKE_MAX: usize = 1 << 18;

/// Where an emission lay, in the stream and in frequency.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Span {
    /// Stream samples `[start, end)`.
    pub start: u64,
    pub end: u64,
    /// Centre of its occupied band, absolute Hz.
    pub center_hz: f64,
    /// Its 99 % occupied bandwidth, Hz.
    pub obw_hz: f64,
    /// Noise density, FS²/Hz (= |x|² per Hz), when known.
    pub noise_psd: Option<f64>,
}

/// Classifies emissions from the newest samples of the stream. As a consumer it keeps the
/// samples of every block; a command then asks for the spans it found.
pub struct Kinds {
    history: IqHistory,
    rate_hz: f64,
    center_hz: f64,
    buf: Vec<Complex32>,
    /// Workers of [`Kinds::classify_later`], started on first use.
    pool: Option<Pool>,
    /// Classifications asked of the workers (or done at once when they could not start) and
    /// not yet handed back, oldest first. Each with its OBW, for the designator of one whose
    /// worker failed.
    later: VecDeque<(f64, Option<Classification>)>,
    /// How many were handed back before `later[0]` (the index of `later[0]` among all asked).
    base: usize,
}

impl Kinds {
    /// A history of [`HISTORY_SECONDS`] (within the byte cap) of a stream at `rate_hz` centred
    /// on `center_hz`.
    pub fn new(rate_hz: f64, center_hz: f64) -> Kinds {
        Kinds::with_history(IqHistory::for_rate(rate_hz, HISTORY_SECONDS), rate_hz, center_hz)
    }

    /// A history of only what one classification takes ([`Kinds::take_max`]), for
    /// [`Kinds::classify_newest`] at the end of the input.
    pub fn newest_only(rate_hz: f64, center_hz: f64) -> Kinds {
        let k = Kinds::with_history(IqHistory::new(1), rate_hz, center_hz);
        Kinds::with_history(IqHistory::new(k.take_max()), rate_hz, center_hz)
    }

    pub fn with_history(history: IqHistory, rate_hz: f64, center_hz: f64) -> Kinds {
        Kinds {
            history,
            rate_hz,
            center_hz,
            buf: Vec::new(),
            pool: None,
            later: VecDeque::new(),
            base: 0,
        }
    }

    pub fn push(&mut self, start: u64, samples: &[Complex32]) {
        self.history.push(start, samples);
    }

    pub fn history(&self) -> &IqHistory {
        &self.history
    }

    /// Most samples taken of one emission.
    pub fn take_max(&self) -> usize {
        ((TAKE_S * self.rate_hz).ceil() as usize).clamp(1, TAKE_MAX)
    }

    /// The samples of `span` handed to the classifier: its first [`Kinds::take_max`] while its
    /// start is held, else its newest.
    pub fn cut(&self, span: &Span) -> Option<(u64, u64)> {
        let part = if span.start >= self.history.first() { Part::First } else { Part::Last };
        self.history.cut(span.start, span.end, self.take_max(), part)
    }

    /// Classifies the emission `span` from what the history holds of it (nothing held: the
    /// classifier says it had too little).
    pub fn classify(&mut self, span: &Span) -> Classification {
        let range = self.cut(span);
        self.classify_range(range, span)
    }

    /// Classifies what is on the air at `center_hz` (`obw_hz` wide) in the newest samples held
    /// (at most [`Kinds::take_max`]): for a listing made once the input is over.
    pub fn classify_newest(&mut self, center_hz: f64, obw_hz: f64) -> Classification {
        let (start, end) = (self.history.first(), self.history.end());
        let span = Span { start, end, center_hz, obw_hz, noise_psd: None };
        let range = self.history.cut(start, end, self.take_max(), Part::Last);
        self.classify_range(range, &span)
    }

    /// [`Kinds::classify_newest`] of every `(center_hz, obw_hz)`, shared among the workers (two
    /// at a time on two cores), answers in the order given: the listing made once the input is
    /// over waits for the slowest pair rather than the sum of them all. All are cut from the
    /// same newest samples, copied out once, and share one forward transform of them
    /// ([`Forward`]): each emission then costs only its band's short inverse transform and
    /// features.
    pub fn classify_newest_all(&mut self, emissions: &[(f64, f64)]) -> Vec<Classification> {
        // The newest `take_max` samples, as `classify_newest` takes them.
        let (first, end) = (self.history.first(), self.history.end());
        let mut samples = Vec::new();
        if let Some((a, b)) = self.history.cut(first, end, self.take_max(), Part::Last) {
            self.history.copy_range(a, b, &mut samples);
        }
        let shared = Arc::new(SharedIq { samples, forward: Forward::default() });
        for &(center_hz, obw_hz) in emissions {
            let span = Span { start: first, end, center_hz, obw_hz, noise_psd: None };
            self.send(&span, shared.clone());
        }
        self.collect()
    }

    /// As [`Kinds::classify`], on a worker thread: the samples are copied out now and the
    /// answer is collected, in the order asked, by [`Kinds::collect`]. The run's thread then only
    /// copies; the workers ([`WORKERS`]) overlap the transforms of the run, and the emissions
    /// that end together when the input does are shared among them.
    pub fn classify_later(&mut self, span: &Span) {
        let mut samples = Vec::new();
        if let Some((a, b)) = self.cut(span) {
            self.history.copy_range(a, b, &mut samples);
        }
        self.send(span, Arc::new(SharedIq { samples, forward: Forward::default() }));
    }

    /// Hands the emission `span`, whose samples are `iq`, to a worker (or classifies it here
    /// when no worker could start).
    fn send(&mut self, span: &Span, iq: Arc<SharedIq>) {
        if self.pool.is_none() {
            self.pool = Pool::start();
        }
        let job = Job {
            index: self.base + self.later.len(),
            iq,
            rate_hz: self.rate_hz,
            offset_hz: span.center_hz - self.center_hz,
            obw_hz: span.obw_hz,
            noise_psd: span.noise_psd,
        };
        let Some(pool) = self.pool.as_ref() else {
            // No thread could be started: classify here, as before.
            self.later.push_back((span.obw_hz, Some(job.classify())));
            return;
        };
        self.later.push_back((span.obw_hz, None));
        pool.send(job);
    }

    /// The answers to every [`Kinds::classify_later`] not yet handed back, in the order asked
    /// (waiting for the workers to finish them); the list starts again empty.
    pub fn collect(&mut self) -> Vec<Classification> {
        if let Some(pool) = self.pool.take() {
            for (i, c) in pool.finish() {
                self.fill(i, c);
            }
        }
        self.base += self.later.len();
        std::mem::take(&mut self.later)
            .into_iter()
            .map(|(obw, c)| c.unwrap_or_else(|| stopped(obw)))
            .collect()
    }

    /// The answer to the oldest [`Kinds::classify_later`] not yet handed back: `None` while its
    /// worker is still at it (or when none is asked), unless `wait`, which waits for it. A run
    /// hands on its emissions in order as their answers come, without waiting on each.
    pub fn next_answer(&mut self, wait: bool) -> Option<Classification> {
        let (obw, ready) = self.later.front().map(|f| (f.0, f.1.is_some()))?;
        if !ready {
            if let Some(pool) = self.pool.as_ref() {
                let answers: Vec<(usize, Classification)> = pool.done.try_iter().collect();
                for (i, c) in answers {
                    self.fill(i, c);
                }
            }
            if wait && self.later.front().is_some_and(|f| f.1.is_none()) {
                // The workers finish what is queued and stop (a new pool starts if more is
                // asked); an answer still missing then will never come.
                if let Some(pool) = self.pool.take() {
                    for (i, c) in pool.finish() {
                        self.fill(i, c);
                    }
                }
                if let Some(front) = self.later.front_mut().filter(|f| f.1.is_none()) {
                    front.1 = Some(stopped(obw));
                }
            }
        }
        self.later.front()?.1.as_ref()?;
        self.base += 1;
        self.later.pop_front().and_then(|f| f.1)
    }

    /// Puts the answer to the `index`-th classification asked in its slot.
    fn fill(&mut self, index: usize, c: Classification) {
        if let Some(slot) = index.checked_sub(self.base).and_then(|i| self.later.get_mut(i)) {
            slot.1 = Some(c);
        }
    }

    fn classify_range(&mut self, range: Option<(u64, u64)>, span: &Span) -> Classification {
        self.buf.clear();
        if let Some((a, b)) = range {
            self.history.copy_range(a, b, &mut self.buf);
        }
        classify(&EmissionIq {
            samples: &self.buf,
            rate_hz: self.rate_hz,
            offset_hz: span.center_hz - self.center_hz,
            obw_hz: span.obw_hz,
            noise_psd: span.noise_psd,
        })
    }
}

/// What an emission is classified as when its worker stopped before it.
fn stopped(obw_hz: f64) -> Classification {
    Classification {
        class: Class::Unknown,
        confidence: 0.0,
        params: Default::default(),
        designator: designator(obw_hz, Class::Unknown),
        note: Some("the classifying thread stopped before this emission".into()),
    }
}

/// Worker threads of [`Kinds::classify_later`]: two, so that one overlaps the run's transforms
/// and the emissions left open at the end of input (all closed at once) are done two at a time.
pub const WORKERS: usize = 2;
/// Emissions waiting for a worker before the run's thread waits too (each holds at most
/// [`TAKE_MAX`] samples, 2 MiB).
const QUEUE: usize = 8;

/// Samples copied out of the history for one or more emissions, with their forward transform
/// once one of them has made it.
struct SharedIq {
    samples: Vec<Complex32>,
    forward: Forward,
}

/// One emission's samples and where it lay, for a worker.
struct Job {
    index: usize,
    iq: Arc<SharedIq>,
    rate_hz: f64,
    offset_hz: f64,
    obw_hz: f64,
    noise_psd: Option<f64>,
}

impl Job {
    fn classify(&self) -> Classification {
        let input = EmissionIq {
            samples: &self.iq.samples,
            rate_hz: self.rate_hz,
            offset_hz: self.offset_hz,
            obw_hz: self.obw_hz,
            noise_psd: self.noise_psd,
        };
        classify_shared(&input, &self.iq.forward)
    }
}

struct Pool {
    jobs: crossbeam_channel::Sender<Job>,
    done: crossbeam_channel::Receiver<(usize, Classification)>,
    threads: Vec<JoinHandle<()>>,
}

impl Pool {
    /// None when not even one thread can be started.
    fn start() -> Option<Pool> {
        let (jobs, queue) = crossbeam_channel::bounded::<Job>(QUEUE);
        let (answer, done) = crossbeam_channel::unbounded();
        let threads: Vec<JoinHandle<()>> = (0..WORKERS)
            .filter_map(|i| {
                let (queue, answer) = (queue.clone(), answer.clone());
                std::thread::Builder::new()
                    .name(format!("kinds-{i}"))
                    .spawn(move || {
                        yield_to_the_run();
                        for job in queue {
                            if answer.send((job.index, job.classify())).is_err() {
                                return;
                            }
                        }
                    })
                    .ok()
            })
            .collect();
        (!threads.is_empty()).then_some(Pool { jobs, done, threads })
    }

    /// Waits while [`QUEUE`] emissions are waiting already.
    fn send(&self, job: Job) {
        // The workers end only when the queue closes, so a send fails only if they all died;
        // that emission is then reported unclassified by `collect`.
        let _ = self.jobs.send(job);
    }

    /// Closes the queue, waits for the workers and hands back every answer.
    fn finish(self) -> Vec<(usize, Classification)> {
        let Pool { jobs, done, threads } = self;
        drop(jobs);
        for t in threads {
            let _ = t.join();
        }
        done.try_iter().collect()
    }
}

/// How much lower than the run's threads the classifying threads are scheduled (added to the
/// nice value).
pub const KINDS_NICE: i32 = 10;

/// Lowers the calling thread's scheduling priority by [`KINDS_NICE`]. The run's thread measures
/// every row (the critical path of a census: it works all the time while the DSP helper idles
/// between batches); at equal priority a classification takes its core from it. Lowered, a
/// classification runs mostly in the helper's idle time, and at full speed once nothing else is
/// left to run. Answers do not depend on it. On Linux the nice value is the calling thread's own
/// (threads it starts inherit it); where it cannot be changed, nothing changes.
fn yield_to_the_run() {
    // SAFETY: nice only reads its argument; on Linux it changes the calling thread only.
    let _ = unsafe { libc::nice(KINDS_NICE) };
}

impl Consumer for Kinds {
    fn start(&mut self, run: &RunInfo) -> io::Result<()> {
        (self.rate_hz, self.center_hz) = (run.source.sample_rate_hz, run.source.center_hz);
        Ok(())
    }

    fn block(&mut self, block: &Block) -> io::Result<()> {
        self.push(block.start, &block.samples);
        Ok(())
    }
}

/// Seconds of the newest input the live monitor classifies a signal from.
pub const LIVE_TAKE_S: f64 = 0.1;
/// Most samples of it (0.1 s up to 20 MS/s).
pub const LIVE_TAKE_MAX: usize = 1 << 21;
/// Share of one core the live classifier may use: after each classification it rests three
/// times as long as it worked.
const LIVE_REST: u32 = 3;
/// How often each listed signal is classified again, at most.
const LIVE_CYCLE: Duration = Duration::from_secs(1);

/// What the live worker and the run's thread share.
struct LiveShared {
    history: Mutex<IqHistory>,
    /// Signals to classify: centre and OBW, Hz.
    want: Mutex<Vec<(f64, f64)>>,
    /// Their kinds as last found: centre, OBW, class.
    got: Mutex<Vec<(f64, f64, Class)>>,
    stop: AtomicBool,
    rate_hz: f64,
    center_hz: f64,
}

/// The run's side of the live classifier: keeps the newest samples of every block (a copy
/// under a lock the worker holds only while it copies out one signal's samples).
pub struct LiveTap(Arc<LiveShared>);

impl Consumer for LiveTap {
    fn block(&mut self, block: &Block) -> io::Result<()> {
        lock(&self.0.history).push(block.start, &block.samples);
        Ok(())
    }
}

/// The screen's side: says which signals are listed and reads their kinds. Classification
/// runs on a thread of its own, each listed signal about once a second from the newest
/// [`LIVE_TAKE_S`] of input, and rests three times as long as it works, so it takes at most a
/// quarter of one core whatever the rate (more signals are refreshed less often).
pub struct LiveKinds {
    shared: Arc<LiveShared>,
    thread: Option<JoinHandle<()>>,
}

/// The two sides of a live classifier for a stream at `rate_hz` centred on `center_hz`.
pub fn live(rate_hz: f64, center_hz: f64) -> io::Result<(LiveTap, LiveKinds)> {
    let take = ((LIVE_TAKE_S * rate_hz).ceil() as usize).clamp(1, LIVE_TAKE_MAX);
    let shared = Arc::new(LiveShared {
        history: Mutex::new(IqHistory::new(take)),
        want: Mutex::new(Vec::new()),
        got: Mutex::new(Vec::new()),
        stop: AtomicBool::new(false),
        rate_hz,
        center_hz,
    });
    let worker = shared.clone();
    let thread = std::thread::Builder::new()
        .name("kinds".into())
        .spawn(move || live_worker(&worker, take))?;
    Ok((LiveTap(shared.clone()), LiveKinds { shared, thread: Some(thread) }))
}

impl LiveKinds {
    /// The signals listed now (centre and OBW, Hz).
    pub fn want(&self, signals: impl Iterator<Item = (f64, f64)>) {
        let mut w = lock(&self.shared.want);
        w.clear();
        w.extend(signals);
    }

    /// The kinds found so far: centre, OBW and class of each signal classified.
    pub fn latest(&self) -> Vec<(f64, f64, Class)> {
        lock(&self.shared.got).clone()
    }
}

impl Drop for LiveKinds {
    fn drop(&mut self) {
        self.shared.stop.store(true, Ordering::Relaxed);
        if let Some(t) = self.thread.take() {
            let _ = t.join();
        }
    }
}

fn lock<T>(m: &Mutex<T>) -> std::sync::MutexGuard<'_, T> {
    m.lock().unwrap_or_else(PoisonError::into_inner)
}

fn live_worker(s: &LiveShared, take: usize) {
    let mut buf = Vec::with_capacity(take);
    let stopped = || s.stop.load(Ordering::Relaxed);
    while !stopped() {
        let cycle = Instant::now();
        let want = lock(&s.want).clone();
        for &(center_hz, obw_hz) in &want {
            if stopped() {
                return;
            }
            let worked = Instant::now();
            buf.clear();
            {
                let h = lock(&s.history);
                if let Some((a, b)) = h.cut(h.first(), h.end(), take, Part::Last) {
                    h.copy_range(a, b, &mut buf);
                }
            }
            // On this thread only: its rest below bounds its share of one core.
            let input = EmissionIq {
                samples: &buf,
                rate_hz: s.rate_hz,
                offset_hz: center_hz - s.center_hz,
                obw_hz,
                noise_psd: None,
            };
            let c = classify_shared(&input, &Forward::one_thread());
            {
                let mut got = lock(&s.got);
                got.retain(|g| (g.0 - center_hz).abs() > 0.5 * obw_hz.max(g.1));
                got.push((center_hz, obw_hz, c.class));
            }
            rest(worked.elapsed() * LIVE_REST, &stopped);
        }
        lock(&s.got).retain(|g| want.iter().any(|w| (g.0 - w.0).abs() <= 0.5 * w.1.max(g.1)));
        rest(LIVE_CYCLE.saturating_sub(cycle.elapsed()), &stopped);
    }
}

/// Sleeps `d`, waking every 50 ms to see whether to stop.
fn rest(d: Duration, stopped: &dyn Fn() -> bool) {
    let until = Instant::now() + d;
    while !stopped() {
        let now = Instant::now();
        if now >= until {
            return;
        }
        std::thread::sleep((until - now).min(Duration::from_millis(50)));
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_live_worker_classifies_each_listed_signal_and_forgets_the_others() {
        let (mut tap, kinds) = live(1e6, 100e6).unwrap();
        let x = crate::testkit::noise(20_000, 1e-4, 5);
        tap.block(&Block::new(0, x)).unwrap();
        kinds.want([(100.1e6, 10e3), (99.8e6, 20e3)].into_iter());
        let found = |k: &LiveKinds| k.latest().len();
        let t0 = Instant::now();
        while found(&kinds) < 2 && t0.elapsed() < Duration::from_secs(10) {
            std::thread::sleep(Duration::from_millis(10));
        }
        let got = kinds.latest();
        assert_eq!(got.len(), 2, "{got:?}");
        assert!(got.iter().any(|g| g.0 == 100.1e6) && got.iter().any(|g| g.0 == 99.8e6));
        kinds.want([(99.8e6, 20e3)].into_iter());
        let t0 = Instant::now();
        while found(&kinds) > 1 && t0.elapsed() < Duration::from_secs(10) {
            std::thread::sleep(Duration::from_millis(10));
        }
        assert_eq!(kinds.latest().iter().map(|g| g.0).collect::<Vec<_>>(), [99.8e6]);
    }

    #[test]
    fn classified_later_on_the_workers_is_classified_as_at_once() {
        // Noise with a carrier at +100 kHz and a second at -200 kHz, 1 MS/s.
        let mut x = crate::testkit::noise64(&mut crate::testkit::Rng::new(7), 300_000, 1e-5);
        crate::testkit::add_tone(&mut x, 1e6, 100e3, -20.0, 0.0);
        crate::testkit::add_tone(&mut x, 1e6, -200e3, -30.0, 1.0);
        let x = crate::testkit::to_f32(&x);
        let spans = [
            Span { start: 0, end: 200_000, center_hz: 100.1e6, obw_hz: 2e3, noise_psd: None },
            Span { start: 50_000, end: 300_000, center_hz: 99.8e6, obw_hz: 2e3, noise_psd: None },
            Span { start: 0, end: 300_000, center_hz: 100.4e6, obw_hz: 30e3, noise_psd: None },
        ];
        let mut now = Kinds::new(1e6, 100e6);
        now.push(0, &x);
        let at_once: Vec<Classification> = spans.iter().map(|s| now.classify(s)).collect();
        let mut later = Kinds::new(1e6, 100e6);
        later.push(0, &x);
        spans.iter().for_each(|s| later.classify_later(s));
        assert_eq!(later.collect(), at_once);
        assert_eq!(at_once[0].class, Class::Cw);
        // Collected: the list starts again.
        assert!(later.collect().is_empty());
        // Taken one by one, as a run takes them: in the order asked, whether or not it waits
        // (an answer not yet made is None, never another's).
        spans.iter().for_each(|s| later.classify_later(s));
        let mut got = Vec::new();
        while got.len() < spans.len() {
            match later.next_answer(got.len() == 2) {
                Some(c) => got.push(c),
                None => std::thread::sleep(Duration::from_millis(1)),
            }
        }
        assert_eq!(got, at_once);
        assert_eq!(later.next_answer(true), None);
        assert!(later.collect().is_empty());
    }

    #[test]
    fn an_emission_is_cut_from_its_start_or_its_newest_part() {
        // 1000 S/s: TAKE_S (0.5 s) is 500 samples.
        let mut k = Kinds::with_history(IqHistory::new(2000), 1000.0, 0.0);
        assert_eq!(k.take_max(), 500);
        let samples: Vec<Complex32> = (0..3000).map(|i| Complex32::new(i as f32, 0.0)).collect();
        k.push(0, &samples);
        let span = |start, end| Span { start, end, center_hz: 0.0, obw_hz: 1.0, noise_psd: None };
        // Held: 1000..3000. A short emission whole; a long one from its start.
        assert_eq!(k.cut(&span(1200, 1400)), Some((1200, 1400)));
        assert_eq!(k.cut(&span(1200, 2900)), Some((1200, 1700)));
        // Its start is gone: its newest samples.
        assert_eq!(k.cut(&span(500, 2900)), Some((2400, 2900)));
        assert_eq!(k.cut(&span(0, 900)), None);
    }
}
