//! What every command does around its consumers, written once: open the input and say what
//! opening it found ([`open_input`]), start the reader and run to the end ([`run_to_end`],
//! over [`run_input`]), then say what the reader found wrong with the input and refuse an input
//! that could not be measured ([`Outcome::conclude`]). A command adds only its consumers, its
//! own closing words and its output.
//!
//! This is the one part of the pipeline that speaks to the user (through
//! [`crate::messages`]), on the command's behalf and in the same words for every command.

use super::input::Input;
use super::run::{run_input, Outcome, Run};
use super::stop::StopSignals;
use crate::messages::notes;
use crate::source::reader::ReaderOptions;
use crate::source::{self, InputRequest, SampleSource};
use anyhow::Result;

/// Opens the input a command was given, and prints the notes opening it gave (a SigMF field
/// ignored, a format taken from the file name…).
pub fn open_input(request: &InputRequest) -> Result<Box<dyn SampleSource>> {
    let mut opened = Vec::new();
    let src = source::open(request, &mut opened)?;
    notes(&opened);
    Ok(src)
}

/// Starts the reader on `src` and runs `run` over it to the end of the input, a signal or a
/// consumer's stop.
pub fn run_to_end(
    src: Box<dyn SampleSource>,
    opts: ReaderOptions,
    run: Run<'_>,
    signals: Option<&StopSignals>,
) -> Result<Outcome> {
    run_input(Input::start(src, opts), run, signals)
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
