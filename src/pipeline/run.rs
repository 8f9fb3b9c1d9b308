//! The drive loop, written once: blocks in, rows and occupancy events out to every consumer.
//!
//! [`Run`] holds the engine, the optional occupancy tracker and the consumers, and is fed block by
//! block, so tests drive it with any blocks, gaps included, without threads. [`run_input`] adds
//! the reader: it pumps blocks until the input ends, a signal comes or a consumer stops the run,
//! then applies the end-of-input rules (samples read but never delivered are a gap; the reader's
//! error ends the run as `input_error`) and finishes every consumer.

use super::input::Input;
use super::kinds::{Kinds, Span};
use super::outbox::Outbox;
use super::stitch::Stitch;
use super::stop::{StopReason, StopSignals};
use super::{Clock, Consumer, Flow, GapCause, Lost, RunEnd, RunInfo, TimeSource};
use crate::dsp::{Engine, EngineConfig, Spectrum};
use crate::kernels::Kernels;
use crate::measure::occupancy::{Event, Occupancy};
use crate::source::reader::Block;
use crate::source::{InputIssues, LinkLoss, SourceInfo};
use anyhow::Result;
use crossbeam_channel::{Receiver, RecvTimeoutError};
use num_complex::Complex32;
use std::collections::VecDeque;
use std::io;
use std::time::Duration;
use time::OffsetDateTime;

/// Longest wait for a block before the loop looks at signals and consumers again.
const POLL_INTERVAL: Duration = Duration::from_millis(50);

/// Everything a run is built from.
pub struct RunSpec {
    pub source: SourceInfo,
    pub engine: EngineConfig,
    /// Transform threads (one per core unless `--threads` says otherwise).
    pub threads: usize,
    /// Occupancy tracking, for the consumers that take events.
    pub tracker: Option<Occupancy>,
    /// Time of the first sample and where it came from. Live input without one is stamped with
    /// the wall clock at the first block.
    pub start_time: Option<OffsetDateTime>,
    pub time_source: TimeSource,
    /// Classify each emission of the tracker when it ends, from the run's own IQ history
    /// ([`Kinds`]): its [`EmissionSummary::class`](crate::measure::occupancy::EmissionSummary)
    /// is then set for every consumer.
    pub classify: bool,
}

impl RunSpec {
    /// Refuses settings whose work per second of input has no sane bound (see
    /// [`check_frame_rate`](crate::measure::occupancy::timing::check_frame_rate)).
    pub fn check_work(&self) -> Result<()> {
        crate::measure::occupancy::timing::check_frame_rate(
            self.source.sample_rate_hz,
            self.engine.hop(),
        )
        .map_err(anyhow::Error::msg)
    }

    /// A spec without tracker, timed from the source's own start time.
    pub fn new(source: SourceInfo, engine: EngineConfig, threads: usize) -> RunSpec {
        let time_source =
            if source.start_time.is_some() { TimeSource::Recording } else { TimeSource::None };
        RunSpec {
            start_time: source.start_time,
            time_source,
            source,
            engine,
            threads,
            tracker: None,
            classify: false,
        }
    }
}

/// One run: engine, tracker and consumers, fed block by block.
pub struct Run<'a> {
    info: RunInfo,
    engine: Engine,
    threads: usize,
    tracker: Option<Occupancy>,
    /// The samples the tracker's emissions are classified from (with `RunSpec::classify`).
    kinds: Option<Kinds>,
    events: Vec<Event>,
    /// Events waiting, in order, for the kind of an emission among them (true: this one's
    /// answer is still to be taken from `kinds`).
    held: VecDeque<(Event, bool)>,
    consumers: Vec<&'a mut dyn Consumer>,
    outbox: Outbox,
    started: bool,
    next_sample: u64,
    lost: Lost,
    stop_asked: bool,
    /// Why the run cannot go on (a row that is not finite), once found.
    failure: Option<String>,
    kernels: Kernels,
    /// A retuned input's dwells being stitched into a panorama (`None`: the input stays put).
    stitch: Option<Stitch>,
}

impl<'a> Run<'a> {
    pub fn new(spec: RunSpec, consumers: Vec<&'a mut dyn Consumer>) -> Run<'a> {
        let engine = new_engine(&spec.engine, &spec.source, spec.threads);
        // Commands check the grid before they build a run (`stitch::span_of`); should one not,
        // its error stops the run at the first block.
        let (stitch, failure) = match Stitch::new(&spec.source, &spec.engine) {
            Ok(s) => (s, None),
            Err(e) => (None, Some(e.to_string())),
        };
        let time_source =
            if spec.start_time.is_some() { spec.time_source } else { TimeSource::None };
        let info = RunInfo {
            clock: Clock::for_source(&spec.source, spec.start_time),
            source: spec.source,
            engine: spec.engine,
            time_source,
        };
        let kinds = (spec.classify && spec.tracker.is_some())
            .then(|| Kinds::new(info.source.sample_rate_hz, info.source.center_hz));
        let outbox = Outbox::default();
        let mut consumers = consumers;
        for c in consumers.iter_mut() {
            c.connect(&outbox.post());
        }
        Run {
            info,
            engine,
            threads: spec.threads,
            tracker: spec.tracker,
            kinds,
            events: Vec::new(),
            held: VecDeque::new(),
            consumers,
            outbox,
            started: false,
            next_sample: 0,
            lost: Lost::default(),
            stop_asked: false,
            failure,
            kernels: Kernels::detect(),
            stitch,
        }
    }

    /// Why the run had to stop, when the input could not be measured.
    pub fn failure(&self) -> Option<&str> {
        self.failure.as_deref()
    }

    pub fn info(&self) -> &RunInfo {
        &self.info
    }

    /// One past the last input sample handled (delivered or known lost).
    pub fn next_sample(&self) -> u64 {
        self.next_sample
    }

    /// Input samples missing from the measurement so far, by cause.
    pub fn lost(&self) -> Lost {
        self.lost
    }

    /// Processes one block; a jump in `block.start` is a gap of lost samples. Returns a reason
    /// when a consumer asked to stop.
    pub fn feed(&mut self, block: &Block) -> io::Result<Option<StopReason>> {
        if !self.started && self.info.source.live && self.info.clock.start.is_none() {
            // Wall clock for live input: the arrival of the first block, less its length.
            let len = block.samples.len() as f64 / self.info.clock.rate;
            let arrived = OffsetDateTime::now_utc();
            if let Some(t) =
                time::Duration::checked_seconds_f64(len).and_then(|d| arrived.checked_sub(d))
            {
                self.info.clock.start = Some(t);
                self.info.time_source = TimeSource::WallClock;
            }
        }
        self.begin()?;
        self.retune(&block.retunes);
        if block.start > self.next_sample {
            // A disconnection is announced with the block after it; samples dropped while the
            // DSP was behind come first in the jump (they were read before the link went down).
            let off_line = block.disconnected.min(block.start - self.next_sample);
            let behind_end = block.start - off_line;
            if behind_end > self.next_sample {
                self.gap(self.next_sample, behind_end, GapCause::Behind)?;
            }
            if off_line > 0 {
                let cause = match block.lost_cause {
                    LinkLoss::Disconnected => GapCause::Disconnected,
                    LinkLoss::PacketLost => GapCause::PacketLost,
                };
                self.gap(behind_end, block.start, cause)?;
            }
        }
        for c in self.consumers.iter_mut() {
            c.block(block)?;
        }
        if let Some(k) = self.kinds.as_mut() {
            k.push(block.start, &block.samples);
        }
        let samples = &block.samples[..];
        if block.finite || !self.kernels.any_outside(samples, f32::MAX) {
            self.push(block.start, samples)?;
        } else {
            // Samples that are not numbers are a hole in the signal, not a shorter signal: the
            // time line keeps them, as a gap, so every later stamp stays exact.
            let finite = |s: &Complex32| s.re.is_finite() && s.im.is_finite();
            let mut at = 0;
            while at < samples.len() {
                let bad =
                    samples[at..].iter().position(|s| !finite(s)).map_or(samples.len(), |i| at + i);
                if bad > at {
                    self.push(block.start + at as u64, &samples[at..bad])?;
                }
                if bad == samples.len() {
                    break;
                }
                let good =
                    samples[bad..].iter().position(finite).map_or(samples.len(), |i| bad + i);
                let (from, to) = (block.start + bad as u64, block.start + good as u64);
                self.next_sample = from;
                self.gap(from, to, GapCause::NotANumber)?;
                self.next_sample = to;
                at = good;
            }
        }
        self.next_sample = block.start + samples.len() as u64;
        self.dispatch_events()?;
        self.deliver_mail()?;
        if self.failure.is_some() {
            return Ok(Some(StopReason::InputError));
        }
        Ok(self.stop_asked.then_some(StopReason::Limit))
    }

    /// Runs samples starting at index `start` through the engine (dwell by dwell for a retuned
    /// input).
    fn push(&mut self, start: u64, samples: &[Complex32]) -> io::Result<()> {
        if self.stitch.is_some() {
            return self.deliver_with(|engine, stitch, emit| {
                if let Some(s) = stitch {
                    s.push(engine, start, samples, emit);
                }
            });
        }
        self.drive(|engine, emit| engine.push(start, samples, emit))
    }

    /// Lets `step` work the engine, handing every row it emits on (see [`Delivery`]); a row is
    /// complete when it holds one output's worth of frames.
    fn drive(
        &mut self,
        step: impl FnOnce(&mut Engine, &mut dyn FnMut(&Spectrum)),
    ) -> io::Result<()> {
        let k = self.info.engine.frames_per_output;
        self.deliver_with(|engine, _, emit| {
            step(engine, &mut |row| emit(row, !matches!(k, Some(k) if row.frames != k)))
        })
    }

    /// Lets `step` work the engine (and the stitch), handing every row it emits, complete or
    /// not, on (see [`Delivery`]).
    fn deliver_with(
        &mut self,
        step: impl FnOnce(&mut Engine, &mut Option<Stitch>, &mut dyn FnMut(&Spectrum, bool)),
    ) -> io::Result<()> {
        let Run { engine, stitch, tracker, events, consumers, stop_asked, failure, info, .. } =
            self;
        let mut failed = None;
        step(engine, stitch, &mut |row: &Spectrum, complete| {
            let mut ctx = Delivery {
                consumers,
                tracker,
                events,
                stop_asked,
                failure,
                info,
                failed: &mut failed,
            };
            ctx.deliver(row, complete);
        });
        failed.map_or(Ok(()), Err)
    }

    /// Asks every consumer whether to go on; applies a new engine setting. Returns a reason when
    /// one asked to stop.
    pub fn poll(&mut self) -> Option<StopReason> {
        for i in 0..self.consumers.len() {
            match self.consumers[i].poll() {
                Flow::Continue => {}
                Flow::Stop => self.stop_asked = true,
                Flow::Retune(cfg) => self.reconfigure(cfg),
            }
        }
        self.stop_asked.then_some(StopReason::Limit)
    }

    /// At the end of input: samples read but never delivered (dropped at the very end).
    pub fn lost_tail(&mut self, samples_read: u64) -> io::Result<()> {
        self.begin()?;
        if samples_read > self.next_sample {
            self.gap(self.next_sample, samples_read, GapCause::Behind)?;
            self.next_sample = samples_read;
        }
        Ok(())
    }

    /// Ends the run: the rows still in the engine, the tracker's open interval and emissions,
    /// then every consumer's `finish`.
    pub fn finish(&mut self, reason: StopReason) -> io::Result<RunEnd> {
        self.begin()?;
        self.drain_rows()?;
        if let Some(t) = self.tracker.as_mut() {
            t.finish(self.next_sample, &mut self.events);
        }
        self.dispatch(true)?;
        self.deliver_mail()?;
        let end =
            RunEnd { reason, end_sample: self.next_sample, dropped_samples: self.lost.total() };
        for c in self.consumers.iter_mut() {
            c.ending(&end, &self.info)?;
        }
        self.deliver_mail()?;
        for c in self.consumers.iter_mut() {
            c.settle(&end, &self.info)?;
        }
        self.deliver_mail()?;
        for c in self.consumers.iter_mut() {
            c.finish(&end, &self.info)?;
        }
        Ok(end)
    }

    /// Moves blocks from `blocks` into the run until the input ends or `stop` gives a reason.
    pub fn pump(
        &mut self,
        blocks: &Receiver<Block>,
        stop: &dyn Fn() -> Option<StopReason>,
    ) -> io::Result<StopReason> {
        loop {
            if let Some(reason) = stop().or_else(|| self.poll()) {
                return Ok(reason);
            }
            match blocks.recv_timeout(POLL_INTERVAL) {
                Ok(block) => {
                    if let Some(reason) = self.feed(&block)? {
                        return Ok(reason);
                    }
                }
                Err(RecvTimeoutError::Timeout) => {}
                Err(RecvTimeoutError::Disconnected) => return Ok(StopReason::EndOfInput),
            }
        }
    }

    fn begin(&mut self) -> io::Result<()> {
        if self.started {
            return Ok(());
        }
        self.started = true;
        for c in self.consumers.iter_mut() {
            c.start(&self.info)?;
        }
        Ok(())
    }

    /// The retunes a stream reported with a block, before its samples: the stitch learns where
    /// its dwells begin. One to a centre the panorama has no place for stops the run.
    fn retune(&mut self, retunes: &[crate::source::tuning::Step]) {
        let Some(stitch) = self.stitch.as_mut() else { return };
        for r in retunes {
            if let Err(e) = stitch.retune(r) {
                self.failure.get_or_insert(format!(
                    "'{}': {e}",
                    crate::messages::sanitize(&self.info.source.label)
                ));
            }
        }
    }

    fn reconfigure(&mut self, cfg: EngineConfig) {
        if self.stitch.is_some() {
            // A panorama's grid follows the FFT size: stitched anew from the next dwell, or the
            // settings kept when the new size leaves no whole usable bin of a step.
            match Stitch::new(&self.info.source, &cfg) {
                Ok(Some(s)) => self.stitch = Some(s),
                _ => return,
            }
        }
        self.engine = new_engine(&cfg, &self.info.source, self.threads);
        self.info.engine = cfg;
    }

    /// Hands every row still inside the engine on: complete ones as rows, the last, shorter one
    /// as a partial row (it would be a shorter sample, or straddle a gap).
    fn drain_rows(&mut self) -> io::Result<()> {
        if self.stitch.is_some() {
            return self.deliver_with(|engine, stitch, emit| {
                if let Some(s) = stitch {
                    s.finish(engine, emit);
                }
            });
        }
        self.drive(|engine, emit| engine.finish(emit))
    }

    fn gap(&mut self, from: u64, to: u64, cause: GapCause) -> io::Result<()> {
        match self.stitch.as_mut() {
            // The dwell goes on after the gap; its sweep is not over.
            Some(s) => s.gap(&mut self.engine),
            None => self.drain_rows()?,
        }
        if let Some(t) = self.tracker.as_mut() {
            t.gap(from, to, &mut self.events);
        }
        self.dispatch_events()?;
        self.lost.add(cause, to - from);
        for c in self.consumers.iter_mut() {
            c.gap(from, to, cause, &self.info)?;
        }
        self.deliver_mail()
    }

    /// Hands every letter sent so far to every consumer, and the letters those send in turn,
    /// until none is left (see [`super::outbox`]).
    fn deliver_mail(&mut self) -> io::Result<()> {
        while let Some(letter) = self.outbox.next_letter() {
            for c in self.consumers.iter_mut() {
                c.mail(&letter, &self.info)?;
            }
        }
        Ok(())
    }

    /// Hands the tracker's new events on, in order. An emission is classified on the
    /// classifying workers ([`Kinds::classify_later`]) while the run goes on; it and every
    /// event after it wait until its answer has come (all of them, with `wait`, when the run
    /// ends).
    fn dispatch_events(&mut self) -> io::Result<()> {
        self.dispatch(false)
    }

    fn dispatch(&mut self, wait: bool) -> io::Result<()> {
        let noise_psd = self.tracker.as_ref().map(Occupancy::noise_density).filter(|d| *d > 0.0);
        for event in self.events.drain(..) {
            let mut asked = false;
            if let (Event::Emission(e), Some(k)) = (&event, self.kinds.as_mut()) {
                if let Some(edges) = e.obw {
                    k.classify_later(&Span {
                        start: e.start_sample,
                        end: e.end_sample,
                        center_hz: 0.5 * (edges.low_hz + edges.high_hz),
                        obw_hz: edges.width_hz(),
                        noise_psd,
                    });
                    asked = true;
                }
            }
            self.held.push_back((event, asked));
        }
        while let Some((_, asked)) = self.held.front() {
            if *asked {
                let Some(c) = self.kinds.as_mut().and_then(|k| k.next_answer(wait)) else {
                    break;
                };
                if let Some((Event::Emission(e), _)) = self.held.front_mut() {
                    e.class = Some(Box::new(c));
                }
            }
            let Some((event, _)) = self.held.pop_front() else { break };
            for c in self.consumers.iter_mut() {
                c.event(&event, &self.info)?;
            }
        }
        Ok(())
    }
}

/// What one row from the engine is handed to; the first error is kept.
struct Delivery<'r, 'a> {
    consumers: &'r mut [&'a mut dyn Consumer],
    tracker: &'r mut Option<Occupancy>,
    events: &'r mut Vec<Event>,
    stop_asked: &'r mut bool,
    failure: &'r mut Option<String>,
    info: &'r RunInfo,
    failed: &'r mut Option<io::Error>,
}

impl Delivery<'_, '_> {
    fn deliver(&mut self, row: &Spectrum, complete: bool) {
        if self.failed.is_some() || self.failure.is_some() {
            return;
        }
        if !row.psd.iter().all(|p| p.is_finite()) {
            *self.failure = Some(overflow_message(&self.info.source));
            return;
        }
        if complete {
            if let Some(t) = self.tracker.as_mut() {
                t.push(row, self.events);
            }
        }
        for c in self.consumers.iter_mut() {
            let result =
                if complete { c.row(row) } else { c.partial_row(row).map(|_| Flow::Continue) };
            match result {
                Ok(Flow::Stop) => *self.stop_asked = true,
                Ok(_) => {}
                Err(e) => {
                    *self.failed = Some(e);
                    return;
                }
            }
        }
    }
}

/// Float input far beyond full scale squares to infinity: no level, no occupancy can be read
/// from it, and a log of −300 dBFS and 0 % would be silently wrong.
fn overflow_message(source: &SourceInfo) -> String {
    format!(
        "the spectrum of '{}' overflowed: its samples are too large to square (float input should lie within ±1); the input is probably not {}; check --format",
        crate::messages::sanitize(&source.label),
        source.format.map_or("in the format it was read as".to_string(), |f| f.to_string())
    )
}

fn new_engine(cfg: &EngineConfig, source: &SourceInfo, threads: usize) -> Engine {
    let mut e = Engine::new(cfg.clone(), source.sample_rate_hz, source.center_hz);
    e.set_threads(threads);
    e
}

/// What a run over a reader's input came to.
#[derive(Debug)]
pub struct Outcome {
    pub end: RunEnd,
    /// What the reader found wrong with the input (`None` when a signal left it behind).
    pub issues: Option<InputIssues>,
    /// Samples taken from the source.
    pub samples_read: u64,
    /// Samples the reader discarded because processing was behind a live source.
    pub reader_dropped: u64,
    /// Why the input could not be measured, when the run stopped for that reason.
    pub failure: Option<String>,
    /// Input samples missing from the measurement, by cause (their sum is `end.dropped_samples`).
    pub lost: Lost,
}

impl Outcome {
    /// An input that held nothing, or could not be measured, is an error worth a clear word
    /// (after the consumers were finished and the input's own notes were printed).
    pub fn check(&self, label: &str) -> Result<()> {
        if let Some(f) = &self.failure {
            anyhow::bail!("{f}");
        }
        if self.samples_read == 0 && !self.end.reason.is_signal() {
            anyhow::bail!(
                "the input '{}' holds no samples; check the file, or that the pipe delivers data",
                crate::messages::sanitize(label)
            );
        }
        Ok(())
    }
}

/// Runs `run` over the reader's blocks until the end of the input, a signal or a consumer's stop,
/// and finishes it. A reader error finishes the run as `input_error`, then is returned; so is a
/// consumer's error (a full disk), after the others were given their `finish`.
pub fn run_input(input: Input, run: Run<'_>, signals: Option<&StopSignals>) -> Result<Outcome> {
    run_input_until(input, run, &|| signals.and_then(StopSignals::reason))
}

/// [`run_input`] stopped by whatever `stop` says (the live monitor's thread: the operator
/// closed it).
pub fn run_input_until(
    input: Input,
    mut run: Run<'_>,
    stop: &dyn Fn() -> Option<StopReason>,
) -> Result<Outcome> {
    let reason = match run.pump(&input.blocks, stop) {
        Ok(reason) => reason,
        Err(e) => {
            input.request_stop();
            let _ = run.finish(StopReason::InputError);
            return Err(e.into());
        }
    };
    if reason.is_signal() {
        input.request_stop();
        let end = run.finish(reason)?;
        let samples_read = input.samples_read();
        let reader_dropped = input.stats.dropped.load(std::sync::atomic::Ordering::SeqCst);
        // A file reader stops at its next block; stdin may sit in a read that no flag
        // interrupts, so it is left behind (the process exits now).
        let issues = if input.info.live { None } else { input.finish().ok() };
        return Ok(Outcome {
            end,
            issues,
            samples_read,
            reader_dropped,
            failure: None,
            lost: run.lost(),
        });
    }
    input.request_stop();
    // A consumer's stop leaves the reader running: what it read after that was never wanted.
    let samples_read = if matches!(reason, StopReason::Limit | StopReason::InputError) {
        run.next_sample()
    } else {
        input.samples_read()
    };
    let limit = input.max_samples();
    let reader_dropped = input.stats.dropped.load(std::sync::atomic::Ordering::SeqCst);
    match input.finish() {
        Ok(issues) => {
            let reason = if reason == StopReason::InputError {
                reason
            } else {
                run.lost_tail(samples_read)?;
                if limit.is_some_and(|m| samples_read >= m) {
                    StopReason::Limit
                } else {
                    reason
                }
            };
            let end = run.finish(reason)?;
            let failure = run.failure().map(str::to_string);
            Ok(Outcome {
                end,
                issues: Some(issues),
                samples_read,
                reader_dropped,
                failure,
                lost: run.lost(),
            })
        }
        Err(e) => {
            run.finish(StopReason::InputError)?;
            Err(e)
        }
    }
}

#[cfg(test)]
mod tests;
