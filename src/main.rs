//! The `bandwarden` binary: parse arguments, run, and turn the outcome into an exit code.
//!
//! `main` is the C entry point rather than Rust's, so the standard library's start-up does not
//! run: that start-up quietly puts `/dev/null` on a standard output that was closed (`>&-`),
//! after which a report would vanish with exit 0. `app::start_process` does the rest of what it
//! did that matters here (SIGPIPE ignored). The arguments come from `std::env::args_os`, which
//! the standard library fills on Linux before `main` whatever the entry point.

#![no_main]

use std::ffi::{c_char, c_int};
use std::io::Write;

#[no_mangle]
pub extern "C" fn main(_argc: c_int, _argv: *const *const c_char) -> c_int {
    bandwarden::app::start_process();
    // A panic must not unwind out of a C function: report it as the runtime would (101).
    let code =
        std::panic::catch_unwind(|| bandwarden::app::exit_code(std::env::args_os())).unwrap_or(101);
    // The runtime flushed standard output at exit; so do we.
    let _ = std::io::stdout().flush();
    c_int::from(code)
}
