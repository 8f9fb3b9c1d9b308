//! The `bandwarden` binary: parse arguments, run, and turn the outcome into an exit code.

use std::process::ExitCode;

fn main() -> ExitCode {
    bandwarden::app::main_with_args(std::env::args_os())
}
