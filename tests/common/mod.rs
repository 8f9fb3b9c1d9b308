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

/// Checks `measure --json`'s `peaks` against tones of known frequency and power (Hz, dBFS): each
/// is found within `bin_hz` of its frequency and 0.5 dB of its power, and any other peak stays
/// 5 dB below the weakest tone. The truth is the caller's (name its source there).
pub fn assert_tones(report: &serde_json::Value, tones: &[(f64, f64)], bin_hz: f64, what: &str) {
    let span = report["panorama_span_hz"].as_f64();
    let peaks = report["peaks"].as_array().expect("measure --json lists peaks");
    let freq = |p: &serde_json::Value| p["freq_hz"].as_f64().unwrap();
    for &(f, l) in tones {
        let p = peaks.iter().find(|p| (freq(p) - f).abs() <= bin_hz).unwrap_or_else(|| {
            panic!("{what}: no peak at {f} Hz in {peaks:?} (panorama span {span:?} Hz)")
        });
        let got = p["power_dbfs"].as_f64().unwrap();
        assert!((got - l).abs() < 0.5, "{what}: tone at {f} Hz reads {got} dBFS, truth {l}");
    }
    let weakest = tones.iter().map(|t| t.1).fold(f64::INFINITY, f64::min);
    for p in peaks {
        if tones.iter().all(|(t, _)| (freq(p) - t).abs() > bin_hz) {
            assert!(p["power_dbfs"].as_f64().unwrap() < weakest - 5.0, "{what}: a stray peak {p}");
        }
    }
}

/// One dwell of a retuned receiver at `center` (rate `fs`): `n` samples of the `tones` (absolute
/// Hz, dBFS) its span holds, at their offset from `center`, and a −10 dBFS spur at `spur_hz`
/// during its first `settle` samples (the receiver settling), over white noise of power 1e-7.
pub fn dwell(
    center: f64,
    fs: f64,
    n: usize,
    tones: &[(f64, f64)],
    (spur_hz, settle): (f64, u64),
    seed: u64,
) -> Vec<num_complex::Complex32> {
    use bandwarden::testkit::{keyed_band, Keyed};
    let settling = move |i: u64| i < settle;
    let mut carriers: Vec<Keyed> = tones
        .iter()
        .filter(|(f, _)| (f - center).abs() < fs / 2.0)
        .map(|&(f, l)| Keyed::steady(f - center, l))
        .collect();
    if (spur_hz - center).abs() < fs / 2.0 {
        carriers.push(Keyed { offset_hz: spur_hz - center, level_dbfs: -10.0, on: &settling });
    }
    keyed_band(n, fs, 1e-7, &carriers, seed)
}
