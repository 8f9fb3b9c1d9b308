//! One exit path for the binary: parse, validate, dispatch, and map errors to exit codes.
//!
//! Exit codes: 0 success (also when the reader of our output went away: a broken pipe is the
//! normal end of `bandwarden … | head`); 1 the input or a setting was bad, or the run failed;
//! 2 the command line itself was malformed (clap's own code).

use crate::cli::{package, Cli, Command};
use crate::cmd;
use crate::messages::{mark_start, sanitize_message};
use clap::Parser;
use std::ffi::OsString;
use std::io::Write;
use std::process::ExitCode;

/// What the binary's `main` does before anything else. It is not started by the standard
/// library's runtime (see `src/main.rs`), which would put `/dev/null` on a closed standard
/// output, so that a report written there would vanish with exit 0; and it ignores SIGPIPE as
/// that runtime does, so a reader that goes away is an error (EPIPE) the program handles, not
/// a kill.
pub fn start_process() {
    mark_start();
    // SAFETY: the action does nothing, which is async-signal-safe.
    let _ = unsafe { signal_hook::low_level::register(signal_hook::consts::SIGPIPE, || {}) };
}

/// Runs the command line and returns the process's exit status (see the module docs).
pub fn exit_code(args: impl IntoIterator<Item = OsString>) -> u8 {
    mark_start();
    let cli = match Cli::try_parse_from(args) {
        Ok(cli) => cli,
        Err(e) => {
            // clap echoes the offending value: plain text, without control characters.
            let text = sanitize_message(&e.render().to_string());
            let _ = if e.use_stderr() {
                std::io::stderr().write_all(text.as_bytes())
            } else {
                std::io::stdout().write_all(text.as_bytes())
            };
            return if e.use_stderr() { 2 } else { 0 };
        }
    };
    match run(cli) {
        // Every command ends with success when it returns Ok.
        Ok(_) => 0,
        Err(err) => {
            if is_broken_pipe(&err) {
                return 0;
            }
            // A stop asked for before the input had said what it is: orderly, nothing read.
            if let Some(s) = err.downcast_ref::<crate::source::StoppedWhileOpening>() {
                crate::messages::line_to_stderr(&format!("bandwarden: {}", sanitize_message(&s.0)));
                return 0;
            }
            crate::messages::line_to_stderr(&format!(
                "bandwarden: {}",
                sanitize_message(&format!("{err:#}"))
            ));
            1
        }
    }
}

pub fn run(cli: Cli) -> anyhow::Result<ExitCode> {
    match cli.command {
        None => cmd::watch::run_default(),
        Some(Command::Measure(args)) => cmd::measure::run(args.validate()?),
        Some(Command::Demo(args)) => cmd::demo::run(args.validate()?),
        Some(Command::Watch(args)) => cmd::watch::run(args.validate()?),
        Some(Command::Log(args)) => cmd::log::run(args.validate()?),
        Some(Command::Census(args)) => cmd::census::run(args.validate()?),
        Some(Command::Snapshot(args)) => cmd::snapshot::run(args.validate()?),
        Some(Command::Report(args)) => cmd::report::run(args.validate()?),
        Some(Command::Collect(args)) => cmd::collect::run(args.validate()?),
        Some(Command::Calibrate(args)) => cmd::calibrate::run(args.validate()?),
        Some(Command::Import(args)) => cmd::import::run(args.validate()?),
        Some(Command::Completions(args)) => {
            package::write_completions(args.shell, &mut std::io::stdout().lock())?;
            Ok(ExitCode::SUCCESS)
        }
        Some(Command::Manual) => {
            package::write_manual(&mut std::io::stdout().lock())?;
            Ok(ExitCode::SUCCESS)
        }
    }
}

fn is_broken_pipe(err: &anyhow::Error) -> bool {
    err.chain().any(|e| {
        e.downcast_ref::<std::io::Error>()
            .is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe)
    })
}
