//! One exit path for the binary: dispatch a parsed command line and map errors to exit codes.
//!
//! Exit codes: 0 success (also when the reader of our output went away: a broken pipe is the
//! normal end of `bandwarden … | head`); 1 the input or a setting was bad, or the run failed;
//! 2 the command line itself was malformed (clap's own code).

use crate::cli::{Cli, Command};
use crate::cmd;
use clap::Parser;
use std::ffi::OsString;
use std::process::ExitCode;

/// When the process started, for the start-up figure `watch` reports.
pub static STARTED: std::sync::OnceLock<std::time::Instant> = std::sync::OnceLock::new();

pub fn main_with_args(args: impl IntoIterator<Item = OsString>) -> ExitCode {
    STARTED.get_or_init(std::time::Instant::now);
    let cli = match Cli::try_parse_from(args) {
        Ok(cli) => cli,
        Err(e) => {
            let _ = e.print();
            return ExitCode::from(if e.use_stderr() { 2 } else { 0 });
        }
    };
    match run(cli) {
        Ok(code) => code,
        Err(err) => {
            if is_broken_pipe(&err) {
                return ExitCode::SUCCESS;
            }
            eprintln!("bandwarden: {err:#}");
            ExitCode::from(1)
        }
    }
}

pub fn run(cli: Cli) -> anyhow::Result<ExitCode> {
    match cli.command {
        None => cmd::watch::run_default(),
        Some(Command::Measure(args)) => cmd::measure::run(args),
        Some(Command::Demo(args)) => cmd::demo::run(args),
        Some(Command::Watch(args)) => cmd::watch::run(args),
        Some(Command::Log(args)) => cmd::log::run(args),
    }
}

fn is_broken_pipe(err: &anyhow::Error) -> bool {
    err.chain().any(|e| {
        e.downcast_ref::<std::io::Error>()
            .is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe)
    })
}

/// Prints a non-fatal note for the user on stderr, with the program's prefix.
pub fn note(text: &str) {
    eprintln!("bandwarden: {text}");
}

/// Tells the user what was wrong with the input but did not stop the run.
pub fn report_input_issues(issues: &crate::source::InputIssues) {
    if issues.non_finite > 0 {
        note(&format!("skipped {} samples holding NaN or infinity", issues.non_finite));
    }
    if issues.beyond_scale > 0 {
        note(&format!(
            "{} float samples lie beyond ±1e6 while full scale is ±1: the input is probably not in the format it was read as; check --format",
            issues.beyond_scale
        ));
    }
    if issues.trailing_bytes > 0 {
        note(&format!(
            "dropped {} bytes at the end that do not make a whole sample (wrong --format, or a cut file?)",
            issues.trailing_bytes
        ));
    }
}
