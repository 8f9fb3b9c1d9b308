//! What every command does around its consumers, written once: open the input and say what
//! opening it found ([`open_input`]), start the reader and run to the end ([`run_to_end`],
//! over [`run_input_until`]), then say what the reader found wrong with the input and refuse an input
//! that could not be measured ([`Outcome::conclude`]). A command adds only its consumers, its
//! own closing words and its output.
//!
//! This is the one part of the pipeline that speaks to the user (through
//! [`crate::messages`]), on the command's behalf and in the same words for every command.

use super::input::Input;
use super::run::{run_input_until, Outcome, Run};
use super::stop::StopSignals;
use crate::messages::{note, notes};
use crate::source::reader::ReaderOptions;
use crate::source::{self, InputRequest, SampleSource};
use anyhow::Result;
use std::io::{IsTerminal, Write};

/// Opens the input a command was given, and prints the notes opening it gave (a SigMF field
/// ignored, a format taken from the file name…).
pub fn open_input(request: &InputRequest) -> Result<Box<dyn SampleSource>> {
    let mut opened = Vec::new();
    let src = source::open(request, &mut opened)?;
    notes(&opened);
    Ok(src)
}

/// [`open_input`] with the stop signals already caught, so that a signal while the input is
/// still opening (a VITA 49 stream's first context packet awaited) ends the command as an
/// orderly stop instead of killing it.
pub fn open_input_stoppable(
    request: &InputRequest,
    signals: &StopSignals,
) -> Result<Box<dyn SampleSource>> {
    let mut req = request.clone();
    req.stop = Some(signals.flag());
    open_input(&req)
}

/// Starts the reader on `src` and runs `run` over it to the end of the input, a signal or a
/// consumer's stop. What the reader finds about the rate live input arrives at
/// ([`ReaderStats::rate_note`](crate::source::reader::ReaderStats::rate_note)) is printed as
/// soon as it is known, once.
pub fn run_to_end(
    src: Box<dyn SampleSource>,
    opts: ReaderOptions,
    run: Run<'_>,
    signals: Option<&StopSignals>,
) -> Result<Outcome> {
    let input = Input::start(src, opts);
    let stats = input.stats.clone();
    let stop = || {
        if let Some(text) = stats.take_rate_note() {
            note_mid_run(&text);
        }
        signals.and_then(StopSignals::reason)
    };
    run_input_until(input, run, &stop)
}

/// A note printed while a progress line may stand on a terminal's last line: the line is
/// cleared first (the bar is drawn again below it).
fn note_mid_run(text: &str) {
    let mut err = std::io::stderr();
    if err.is_terminal() {
        let _ = write!(err, "\r\x1b[K");
    }
    note(text);
}

impl Outcome {
    /// The input's own notes (samples not numbers, values out of range, a short last sample),
    /// then [`Outcome::check`].
    pub fn conclude(&self, label: &str) -> Result<()> {
        if let Some(issues) = &self.issues {
            notes(&issues.notes());
        }
        self.check(label)
    }
}
