//! What a careless user or a hostile file can do to the binary, and what must happen instead:
//! closed pipes and full disks end with a clear word (or quietly, for a reader that went away),
//! an output never overwrites the input, text from files and flags never reaches the terminal
//! with control characters, and float input in the wrong format is refused rather than logged as
//! meaningless levels.

mod common;

use bandwarden::source::SampleFormat;
use num_complex::Complex32;
use std::io::{BufRead, BufReader};
use std::path::PathBuf;
use std::process::{Command, Output, Stdio};

use common::{bin, stderr};

fn tmp(name: &str) -> PathBuf {
    common::scratch("hardening", name)
}

fn no_panic(o: &Output) {
    let e = stderr(o);
    assert!(!e.contains("panicked") && !e.contains("RUST_BACKTRACE"), "{e}");
}

/// ECMA-48: C0 controls (ESC, BEL) and the 8-bit CSI/OSC introducers act on a terminal; only
/// the line feed may reach it.
fn assert_no_control_characters(text: &str) {
    let bad: Vec<char> = text.chars().filter(|c| c.is_control() && *c != '\n').collect();
    assert!(bad.is_empty(), "control characters {bad:?} in: {text:?}");
}

fn sh(script: &str) -> Output {
    Command::new("sh")
        .args(["-c", script])
        .env("BW", env!("CARGO_BIN_EXE_bandwarden"))
        .output()
        .unwrap()
}

#[test]
fn a_reader_that_goes_away_ends_the_report_quietly() {
    let mut child = bin()
        .args(["measure", "--seconds", "0.2"])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut first = String::new();
    BufReader::new(child.stdout.take().unwrap()).read_line(&mut first).unwrap();
    assert!(first.starts_with("source"), "{first}");
    // The pipe is closed now (the reader was dropped), as `| head -1` does.
    let o = child.wait_with_output().unwrap();
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    no_panic(&o);
    let o = sh("\"$BW\" measure --seconds 0.2 | true; exit 0");
    no_panic(&o);
}

#[test]
fn a_full_disk_is_one_line_naming_the_output() {
    if !std::path::Path::new("/dev/full").exists() {
        panic!("this test needs /dev/full (Linux)");
    }
    for cmd in
        ["\"$BW\" measure --seconds 0.2 > /dev/full", "\"$BW\" demo --seconds 0.1 > /dev/full"]
    {
        let o = sh(cmd);
        assert_eq!(o.status.code(), Some(1), "{cmd}: {}", stderr(&o));
        no_panic(&o);
        let e = stderr(&o);
        assert_eq!(e.lines().count(), 1, "{e}");
        assert!(e.starts_with("bandwarden: ") && e.contains("standard output"), "{e}");
    }
    let o = sh("\"$BW\" log - --format cu8 --rate 1M --channel a=100k:10k < /dev/zero > /dev/full");
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    assert!(stderr(&o).contains("cannot write the log"), "{}", stderr(&o));
}

#[test]
fn a_closed_standard_output_is_refused() {
    let o = sh("\"$BW\" measure --seconds 0.1 >&-");
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    assert!(stderr(&o).contains("standard output is closed"), "{}", stderr(&o));
    // /dev/null opened read-write (as Python's subprocess.DEVNULL does) is an open output.
    let o = sh("\"$BW\" measure --seconds 0.1 1<>/dev/null");
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    // A panic-free run still flushes what it printed before exit (no runtime does it for us).
    let o = sh("\"$BW\" measure --seconds 0.1 --json | tail -c 2");
    assert_eq!(String::from_utf8_lossy(&o.stdout), "}\n");
}

#[test]
fn the_log_never_overwrites_its_input_or_plan() {
    let input = tmp("in.cf32");
    let tone: Vec<Complex32> = (0..50_000).map(|i| Complex32::from_polar(0.1, i as f32)).collect();
    let mut bytes = Vec::new();
    SampleFormat::Cf32Le.encode(&tone, &mut bytes);
    std::fs::write(&input, &bytes).unwrap();
    let plan = tmp("plan.toml");
    std::fs::write(&plan, "[[channel]]\nname = \"a\"\ncenter = 100000\nwidth = 10000\n").unwrap();
    let plan_text = std::fs::read(&plan).unwrap();
    for out in [&input, &plan] {
        let o = bin()
            .args(["log"])
            .arg(&input)
            .args(["--rate", "1M", "--plan"])
            .arg(&plan)
            .arg("-o")
            .arg(out)
            .output()
            .unwrap();
        assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
        assert!(stderr(&o).contains("is the input"), "{}", stderr(&o));
    }
    assert_eq!(std::fs::read(&input).unwrap(), bytes, "the input is intact");
    assert_eq!(std::fs::read(&plan).unwrap(), plan_text, "the plan is intact");
}

#[test]
fn text_from_files_and_flags_reaches_the_terminal_clean() {
    // ESC (a CSI sequence), BEL, and an OSC 52 request that would set the clipboard.
    let hostile = "\u{1b}[2J\u{7}\u{1b}]52;c;aGk=\u{7}";
    let plans = [
        format!("[[channel]]\nname = \"a\"\ncenter = \"{hostile}\"\nwidth = 10000\n"),
        format!("[[channel]]\nname = \"a\"\ncenter = 100000\nwidth = \"1{hostile}\"\n"),
        format!("[[channel]]\nname = \"a\"\ncenter = 100000\nwidth = 1000\n\"x{hostile}\" = 1\n"),
        format!("[[channel]]\nname = \"a{hostile}\"\ncenter = 100000\nwidth = 1000\n"),
    ];
    for (i, text) in plans.iter().enumerate() {
        let plan = tmp(&format!("hostile-{i}.toml"));
        std::fs::write(&plan, text).unwrap();
        let o = bin().args(["measure", "--plan"]).arg(&plan).output().unwrap();
        assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
        assert_no_control_characters(&stderr(&o));
    }
    // A flag's value echoed by the command-line parser, and a value refused after parsing.
    for args in [
        vec!["measure", "--format", hostile],
        vec!["measure", "--window", hostile],
        vec!["measure", "--band", hostile],
        vec!["log", hostile, "--channel", "a=1M:1k", "--rate", "1M", "--format", "cu8"],
    ] {
        let o = bin().args(&args).output().unwrap();
        assert_ne!(o.status.code(), Some(0));
        assert_no_control_characters(&stderr(&o));
    }
    // SigMF metadata: a datatype and a datetime with escapes.
    for (key, value) in [("core:datatype", hostile), ("core:datetime", hostile)] {
        let meta = tmp(&format!("hostile-{}.sigmf-meta", key.replace(':', "-")));
        let datatype = if key == "core:datatype" { value } else { "cf32_le" };
        let when = if key == "core:datetime" { value } else { "2026-05-01T08:00:00Z" };
        let json = serde_json::json!({
            "global": {"core:datatype": datatype, "core:sample_rate": 1e6, "core:version": "1.0.0"},
            "captures": [{"core:sample_start": 0, "core:datetime": when}],
            "annotations": []
        });
        std::fs::write(&meta, json.to_string()).unwrap();
        std::fs::write(meta.with_extension("sigmf-data"), [0u8; 8192]).unwrap();
        let o = bin().arg("measure").arg(&meta).output().unwrap();
        assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
        assert_no_control_characters(&stderr(&o));
    }
}

#[test]
fn float_input_in_the_wrong_format_is_refused_by_the_log_too() {
    // Components far beyond full scale (big-endian floats read as little-endian look so): the
    // reader's look at the input refuses it, or (the file being shorter than what the reader
    // judges, it is judged at its end) the overflowing spectrum stops the run first: either way
    // with the --format advice and input_error.
    let x: Vec<Complex32> =
        (0..200_000).map(|i| Complex32::new(3e38 * (i as f32).sin(), 3e38)).collect();
    refused_with(&x, &["does not look like", "overflowed"]);
}

fn refused_with(x: &[Complex32], says: &[&str]) {
    let mut bytes = Vec::new();
    SampleFormat::Cf32Le.encode(x, &mut bytes);
    let p = tmp("loud.cf32");
    std::fs::write(&p, bytes).unwrap();
    let o = bin()
        .arg("log")
        .arg(&p)
        .args(["--rate", "1M", "--channel", "a=100k:10k"])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let err = stderr(&o);
    assert!(says.iter().any(|s| err.contains(s)) && err.contains("--format"), "{err}");
    let log = String::from_utf8(o.stdout).unwrap();
    let last: serde_json::Value = serde_json::from_str(log.lines().last().unwrap()).unwrap();
    assert_eq!(last["reason"], "input_error", "the log says why it stopped");
    // No meaningless levels: nothing at the -300 dB floor of an overflowed or empty spectrum.
    for line in log.lines() {
        let r: serde_json::Value = serde_json::from_str(line).unwrap();
        for key in ["mean_dbfs", "peak_dbfs", "noise_floor_dbfs_per_hz"] {
            assert!(r[key].as_f64().map_or(true, |v| v > -299.0), "{key} in {line}");
        }
    }
}

#[test]
fn a_recording_piped_faster_than_real_time_loses_nothing() {
    // 4 s at 1 MS/s, read back through a pipe far faster than real time, with settings that make
    // the DSP the slow side (many small overlapping frames), so the reader's queue fills.
    let n = 4_000_000;
    let x: Vec<Complex32> = (0..n).map(|i| Complex32::from_polar(0.1, i as f32 * 0.3)).collect();
    let mut bytes = Vec::new();
    SampleFormat::Cf32Le.encode(&x, &mut bytes);
    let p = tmp("fast.cf32");
    std::fs::write(&p, bytes).unwrap();
    let script = format!(
        "cat '{}' | \"$BW\" log - --format cf32_le --rate 1M --channel a=100k:10k --fft 64 --overlap 0.9 --threads 1 --interval 1s",
        p.display()
    );
    let o = sh(&script);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let log = String::from_utf8(o.stdout.clone()).unwrap();
    let stop: serde_json::Value = serde_json::from_str(log.lines().last().unwrap()).unwrap();
    assert_eq!(stop["iq_samples"], n as u64);
    assert_eq!(stop["dropped_samples"], 0, "{}", stderr(&o));
    assert!(!log.contains("\"kind\":\"dropped\""));
}

#[test]
fn samples_that_are_not_numbers_keep_their_place_in_time() {
    // 3 s at 100 kS/s with 0.25 s of NaN starting at 1.0 s, and a whole 10 ms block of NaN at
    // 2.5 s: the gaps are logged where they are (not_a_number) and every later stamp still
    // counts them; the run does not take a block of NaN for the end of the input.
    let rate = 100_000usize;
    let mut x: Vec<Complex32> =
        (0..3 * rate).map(|i| Complex32::from_polar(0.1, i as f32 * 0.7)).collect();
    let nan = Complex32::new(f32::NAN, 0.0);
    x[rate..rate + rate / 4].iter_mut().for_each(|s| *s = nan);
    x[5 * rate / 2..5 * rate / 2 + rate / 100].iter_mut().for_each(|s| *s = nan);
    let mut bytes = Vec::new();
    SampleFormat::Cf32Le.encode(&x, &mut bytes);
    let p = tmp("holes.cf32");
    std::fs::write(&p, bytes).unwrap();
    let o = bin()
        .arg("log")
        .arg(&p)
        .args(["--rate", "100k", "--fft", "256", "--channel", "a=20k:5k", "--interval", "1s"])
        .args(["--start", "2026-05-01T08:00:00Z"])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let recs: Vec<serde_json::Value> = String::from_utf8(o.stdout.clone())
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    let holes: Vec<&serde_json::Value> = recs.iter().filter(|r| r["kind"] == "dropped").collect();
    assert_eq!(holes.len(), 2, "{holes:?}");
    assert_eq!(holes[0]["cause"], "not_a_number");
    assert_eq!(holes[0]["t_start_s"], 1.0);
    assert_eq!(holes[0]["start"], "2026-05-01T08:00:01.000Z");
    assert_eq!(holes[0]["dropped_samples"], rate as u64 / 4);
    assert_eq!(holes[1]["t_start_s"], 2.5);
    assert_eq!(holes[1]["dropped_samples"], rate as u64 / 100);
    let stop = recs.last().unwrap();
    assert_eq!(stop["iq_samples"], 3 * rate as u64, "the whole input, holes included");
    assert_eq!(stop["end"], "2026-05-01T08:00:03.000Z");
    let last = recs.iter().rfind(|r| r["kind"] == "interval").unwrap();
    assert_eq!(last["t_start_s"], 2.0);
    assert!(stderr(&o).contains("NaN or infinity"), "{}", stderr(&o));
}

#[test]
fn a_closed_standard_error_loses_no_record_and_is_no_panic() {
    // `2>&1 | head -1` closes stderr under a running log: its notes can no longer be shown, but
    // the log must still be written whole and the exit status must say the run succeeded (a
    // panic while printing a note would exit 101 and skip the log's last records).
    let dir = env!("CARGO_MANIFEST_DIR");
    let out = tmp("closed-stderr.jsonl");
    let _ = std::fs::remove_file(&out);
    let mut child = bin()
        .args([
            "log",
            &format!("{dir}/recordings/wrenhollow-demo.sigmf-meta"),
            "--plan",
            &format!("{dir}/recordings/wrenhollow-plan.toml"),
            "-o",
            out.to_str().unwrap(),
        ])
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    drop(child.stderr.take());
    let status = child.wait().unwrap();
    assert_eq!(status.code(), Some(0));
    let text = std::fs::read_to_string(&out).unwrap();
    let last = text.lines().last().unwrap_or_default();
    assert!(last.contains("\"kind\":\"stop\"") && last.contains("end_of_input"), "{last}");
    // The same for an error: exit 1, not a panic's 101.
    let mut child =
        bin().args(["measure", "/nonexistent.cf32"]).stderr(Stdio::piped()).spawn().unwrap();
    drop(child.stderr.take());
    assert_eq!(child.wait().unwrap().code(), Some(1));
}
