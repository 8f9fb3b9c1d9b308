//! What the binary-level tests share: the binary, a scratch folder per test file, running a
//! command line, reading a log back, a free loopback port. Each test file takes what it needs
//! (`mod common;`), so not every item is used by every file.
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// The bandwarden binary under test.
pub const BIN: &str = env!("CARGO_BIN_EXE_bandwarden");

/// A command for the binary under test.
pub fn bin() -> Command {
    Command::new(BIN)
}

/// A path for `name` in this test process's scratch folder for `area` (one folder per test
/// file and process, so parallel test files never meet).
pub fn scratch(area: &str, name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("bandwarden-{area}-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir.join(name)
}

/// Runs the binary with `args`, whatever the outcome.
pub fn run(args: &[&str]) -> Output {
    bin().args(args).output().expect("the binary runs")
}

/// Runs the binary with `args` and insists that it succeeds.
pub fn run_ok(args: &[&str]) -> Output {
    let o = run(args);
    assert!(o.status.success(), "{args:?}: {}", String::from_utf8_lossy(&o.stderr));
    o
}

/// What the binary wrote to stderr.
pub fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// The lines of a text file (empty when it does not exist yet).
pub fn lines(path: &Path) -> Vec<String> {
    std::fs::read_to_string(path)
        .map(|t| t.lines().map(str::to_string).collect())
        .unwrap_or_default()
}

/// A loopback port free at the time of asking.
pub fn free_port() -> u16 {
    std::net::TcpListener::bind("127.0.0.1:0").unwrap().local_addr().unwrap().port()
}

pub mod mqtt;
