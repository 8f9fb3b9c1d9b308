//! One pipeline, many consumers: sample blocks from the reader become rows (averaged spectra),
//! rows become occupancy events, and every consumer sees them in the same order.
//!
//! ```text
//!  reader thread ──blocks──► Run: Engine ──rows──► Occupancy tracker ──events──┐
//!  (input.rs)                  │ gaps, end rules     │                          │
//!                              ▼                     ▼                          ▼
//!                        Consumer::block       Consumer::row              Consumer::event
//! ```
//!
//! Everything that every command needs once lives here: starting the reader ([`input`]), driving
//! blocks through the engine with gap and drop accounting and the end-of-input rules ([`run`]),
//! why a run stopped and the signals that stop it ([`stop`]), sample-exact time ([`clock`]), and
//! the newest-wins hand-over to a screen ([`latest`]), letters between consumers ([`outbox`]),
//! and the set-up every command shares ([`session`]). A command opens its input with
//! [`open_input`], builds its consumers and calls [`run_to_end`]; adding a sink is one new type
//! implementing [`Consumer`].
//!
//! # Rules
//! - A **row** holds `frames_per_output` FFT frames. Only complete rows reach
//!   [`Consumer::row`] and the occupancy tracker; the incomplete row left at a gap or at the end of
//!   the input goes to [`Consumer::partial_row`] (a screen shows it, a log ignores it, a whole-input
//!   average adds it). With `frames_per_output = None` the single row emitted at the end covers the
//!   whole input and counts as complete.
//! - A **gap** is a jump in the blocks' sample indices (a live source dropped samples while the DSP
//!   was behind). The rows before it are finished first, then the tracker closes open emissions
//!   (partial), then [`Consumer::gap`] is told the exact range. Time stays exact: indices count the
//!   lost samples.
//! - [`Consumer::start`] is called once, before the first block is handed over (or at the end of an
//!   empty input), when the time of the first sample is settled: for live input without a known
//!   start, the wall clock at the first block's arrival less that block's length.

pub mod clock;
pub mod history;
pub mod input;
pub mod kinds;
pub mod latest;
pub mod occupancy;
pub mod outbox;
pub mod run;
pub mod session;
pub mod stitch;
pub mod stop;

pub use clock::Clock;
pub use input::Input;
pub use outbox::{Letter, Post};
pub use run::{run_input, Outcome, Run, RunSpec};
pub use session::{open_input, open_input_stoppable, run_to_end};
pub use stop::{StopReason, StopSignals};

use crate::dsp::{EngineConfig, Spectrum};
use crate::measure::occupancy::Event;
use crate::source::reader::Block;
use crate::source::SourceInfo;
use std::io;

/// What a consumer may ask of the pipeline after a row or a poll.
#[derive(Clone, Debug, PartialEq)]
pub enum Flow {
    Continue,
    /// End the run now (the reason recorded is [`StopReason::Limit`]).
    Stop,
    /// Rebuild the engine with new settings from the next block on (the live monitor's keys).
    Retune(EngineConfig),
}

/// Why samples are missing from the time line.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum GapCause {
    /// A live source outran the processing and its samples were dropped.
    Behind,
    /// The input held samples that are not numbers (NaN or infinity): a hole in the signal.
    NotANumber,
    /// A network input's connection was down (the time it was down × the sample rate).
    Disconnected,
    /// A packet input's packets never arrived (VITA 49: from packet counts and time stamps).
    PacketLost,
}

impl GapCause {
    pub fn as_str(self) -> &'static str {
        match self {
            GapCause::Behind => "behind",
            GapCause::NotANumber => "not_a_number",
            GapCause::Disconnected => "disconnected",
            GapCause::PacketLost => "packet_lost",
        }
    }

    /// What the cause means and what helps, for the closing note.
    pub fn meaning(self) -> &'static str {
        match self {
            GapCause::Behind => {
                "processing fell behind the input; a smaller --fft or a lower rate helps, --no-drop makes the reader wait instead"
            }
            GapCause::NotANumber => {
                "the input held NaN or infinite samples, left out as gaps; a fault upstream, or the input is not in the format it was read as: check --format"
            }
            GapCause::Disconnected => "a network input's link was down",
            GapCause::PacketLost => "packets of a network stream never arrived",
        }
    }
}

/// Input samples missing from the measurement, by cause.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Lost {
    pub behind: u64,
    pub not_a_number: u64,
    pub disconnected: u64,
    pub packet_lost: u64,
}

impl Lost {
    pub fn add(&mut self, cause: GapCause, samples: u64) {
        match cause {
            GapCause::Behind => self.behind += samples,
            GapCause::NotANumber => self.not_a_number += samples,
            GapCause::Disconnected => self.disconnected += samples,
            GapCause::PacketLost => self.packet_lost += samples,
        }
    }

    pub fn total(&self) -> u64 {
        self.behind + self.not_a_number + self.disconnected + self.packet_lost
    }

    /// The closing note of a run that lost samples: how many, of each cause that happened, and
    /// what each means (`None` when nothing was lost).
    pub fn note(&self) -> Option<String> {
        let parts: Vec<String> = [
            (self.behind, GapCause::Behind),
            (self.not_a_number, GapCause::NotANumber),
            (self.disconnected, GapCause::Disconnected),
            (self.packet_lost, GapCause::PacketLost),
        ]
        .into_iter()
        .filter(|(n, _)| *n > 0)
        .map(|(n, cause)| format!("{n} {} ({})", cause.as_str(), cause.meaning()))
        .collect();
        (!parts.is_empty()).then(|| {
            format!(
                "{} input samples were missing from the measurement: {}",
                self.total(),
                parts.join("; ")
            )
        })
    }
}

/// Where the time of the first sample came from, as the log's `start` record says it.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum TimeSource {
    /// `--start` on the command line.
    Option,
    /// The recording's own metadata (SigMF `core:datetime`).
    Recording,
    /// Live input: the wall clock when the first block arrived.
    WallClock,
    None,
}

impl TimeSource {
    pub fn as_str(self) -> &'static str {
        match self {
            TimeSource::Option => "option",
            TimeSource::Recording => "sigmf",
            TimeSource::WallClock => "wall_clock",
            TimeSource::None => "none",
        }
    }
}

/// What every consumer is told when the run starts.
#[derive(Clone, Debug)]
pub struct RunInfo {
    pub source: SourceInfo,
    pub engine: EngineConfig,
    pub clock: Clock,
    pub time_source: TimeSource,
}

/// How a run ended.
#[derive(Clone, Debug, PartialEq)]
pub struct RunEnd {
    pub reason: StopReason,
    /// One past the last input sample handled (delivered or known lost).
    pub end_sample: u64,
    /// Input samples missing from the measurement: lost because processing fell behind a live
    /// source, or not numbers.
    pub dropped_samples: u64,
}

/// Whatever takes part in a run. Every method has a default that does nothing, so a consumer
/// implements only what it uses. An `Err` ends the run: the pipeline passes the first error on.
///
/// The end of a run comes in three stages, with the mail of each delivered to everyone before
/// the next begins, so that a chain such as finder → capture → log works whatever the order of
/// the consumer list: [`Consumer::ending`] (end what you follow and say so), [`Consumer::settle`]
/// (close your own work and post your last records), [`Consumer::finish`] (write your last
/// output).
pub trait Consumer {
    /// Once, when the run is built: where to send letters to the other consumers
    /// ([`outbox`]).
    fn connect(&mut self, _post: &Post) {}

    /// Once, before the first block (see the module's rules).
    fn start(&mut self, _run: &RunInfo) -> io::Result<()> {
        Ok(())
    }

    /// Raw IQ, for consumers that keep samples (capture, recording) or count them (progress).
    fn block(&mut self, _block: &Block) -> io::Result<()> {
        Ok(())
    }

    /// A complete row.
    fn row(&mut self, _row: &Spectrum) -> io::Result<Flow> {
        Ok(Flow::Continue)
    }

    /// The incomplete row cut off by a gap or the end of the input.
    fn partial_row(&mut self, _row: &Spectrum) -> io::Result<()> {
        Ok(())
    }

    /// An occupancy event (interval summary, emission) from the tracker, when the run has one.
    fn event(&mut self, _event: &Event, _run: &RunInfo) -> io::Result<()> {
        Ok(())
    }

    /// Samples `[from, to)` were lost, or were not numbers.
    fn gap(&mut self, _from: u64, _to: u64, _cause: GapCause, _run: &RunInfo) -> io::Result<()> {
        Ok(())
    }

    /// A letter another consumer (or this one) sent; every consumer gets every letter and reads
    /// the kinds it knows ([`Letter::read`]).
    fn mail(&mut self, _letter: &Letter, _run: &RunInfo) -> io::Result<()> {
        Ok(())
    }

    /// Asked between blocks and while waiting for one (at least every 100 ms).
    fn poll(&mut self) -> Flow {
        Flow::Continue
    }

    /// First stage of the end: no more samples will come. End what you follow (emissions) and
    /// send what that means to the others.
    fn ending(&mut self, _end: &RunEnd, _run: &RunInfo) -> io::Result<()> {
        Ok(())
    }

    /// Second stage: close your own work (files being written) and send your last letters.
    fn settle(&mut self, _end: &RunEnd, _run: &RunInfo) -> io::Result<()> {
        Ok(())
    }

    /// Last stage, once at the end of every run that started, whatever the reason: write your
    /// last output.
    fn finish(&mut self, _end: &RunEnd, _run: &RunInfo) -> io::Result<()> {
        Ok(())
    }
}
