//! The `log` command as operators run it: the real binary on recordings, pipes and signals.
//!
//! Recordings are synthetic: white noise plus carriers keyed with a known pattern, so the true
//! occupancy is known exactly (ITU-R SM.1880: occupied samples / samples).

use bandwarden::source::sigmf::meta_json;
use bandwarden::source::SampleFormat;
use bandwarden::testkit::{keyed_band, Keyed};
use num_complex::Complex32;
use serde_json::Value;
use std::io::{BufRead, BufReader, Write};
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::sync::mpsc;
use std::time::{Duration, Instant};
use time::OffsetDateTime;

const BIN: &str = env!("CARGO_BIN_EXE_bandwarden");
const FS: f64 = 250e3;
const CENTER: f64 = 145e6;

/// A scratch directory removed at the end of the test.
struct Scratch(PathBuf);

impl Scratch {
    fn new(name: &str) -> Scratch {
        let dir = std::env::temp_dir().join(format!("bw-log-{name}-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        Scratch(dir)
    }

    fn path(&self, file: &str) -> PathBuf {
        self.0.join(file)
    }
}

impl Drop for Scratch {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// Complex white noise of total power −40 dBFS plus carriers keyed on and off.
fn samples(n: usize, carriers: &[Keyed], seed: u64) -> Vec<Complex32> {
    keyed_band(n, FS, 1e-4, carriers, seed)
}

fn s(seconds: f64) -> u64 {
    (seconds * FS).round() as u64
}

/// A 6 s SigMF recording (ci16_le) starting 2026-05-01T08:00:00Z, with three channels:
/// `alpha` keyed 30 % (1 s period), `beta` always on, `gamma` never on.
fn recording(dir: &Scratch) -> PathBuf {
    let thirty = |i: u64| i % s(1.0) < s(0.3);
    let alpha = Keyed { offset_hz: 50e3, level_dbfs: -30.0, on: &thirty };
    let x = samples(s(6.0) as usize, &[alpha, Keyed::steady(-40e3, -30.0)], 42);
    let mut bytes = Vec::new();
    SampleFormat::Ci16Le.encode(&x, &mut bytes);
    std::fs::write(dir.path("ridge.sigmf-data"), bytes).unwrap();
    let t0 = OffsetDateTime::from_unix_timestamp(1_777_622_400).unwrap(); // 2026-05-01T08:00:00Z
    let meta = meta_json(SampleFormat::Ci16Le, FS, CENTER, Some(t0), "synthetic keyed carriers");
    std::fs::write(dir.path("ridge.sigmf-meta"), meta).unwrap();
    std::fs::write(
        dir.path("plan.toml"),
        "# Invented test site\n\
         [[channel]]\nname = \"alpha\"\ncenter = \"145.05M\"\nwidth = \"12.5k\"\n\n\
         [[channel]]\nname = \"beta\"\ncenter = 144960000\nwidth = 12500\n\n\
         [[channel]]\nname = \"gamma\"\ncenter = \"145.09M\"\nwidth = \"12.5k\"\nthreshold_db = 8\n",
    )
    .unwrap();
    dir.path("ridge.sigmf-meta")
}

fn run(args: &[&str]) -> Output {
    Command::new(BIN).args(args).output().expect("the binary runs")
}

fn parse_lines(text: &str) -> Vec<Value> {
    assert!(text.ends_with('\n'), "the log ends with a complete line");
    text.lines()
        .map(|l| serde_json::from_str(l).unwrap_or_else(|e| panic!("not JSON ({e}): {l}")))
        .collect()
}

fn of_kind<'a>(recs: &'a [Value], kind: &str) -> Vec<&'a Value> {
    recs.iter().filter(|r| r["kind"] == kind).collect()
}

#[test]
fn jsonl_log_of_a_recording_matches_its_keying() {
    let dir = Scratch::new("jsonl");
    let meta = recording(&dir);
    let plan = dir.path("plan.toml");
    let out =
        run(&["log", meta.to_str().unwrap(), "--plan", plan.to_str().unwrap(), "--interval", "2s"]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let recs = parse_lines(&String::from_utf8(out.stdout).unwrap());
    assert_eq!(recs[0]["kind"], "start");
    assert_eq!(recs[0]["time_source"], "sigmf");
    assert_eq!(recs[0]["start"], "2026-05-01T08:00:00.000Z");
    assert_eq!(of_kind(&recs, "channel").len(), 3);
    // Truth from the keying: alpha 30 %, beta 100 %, gamma 0 % (ITU-R SM.1880 definition);
    // each 2 s interval must read within ±2 points.
    for (name, truth) in [("alpha", 30.0), ("beta", 100.0), ("gamma", 0.0)] {
        let iv: Vec<&Value> =
            of_kind(&recs, "interval").into_iter().filter(|r| r["channel"] == name).collect();
        assert_eq!(iv.len(), 3, "{name}: three 2 s intervals in 6 s");
        for (k, i) in iv.iter().enumerate() {
            let pct = i["occupancy_pct"].as_f64().unwrap();
            assert!((pct - truth).abs() <= 2.0, "{name} interval {k}: {pct} % vs {truth} %");
            assert_eq!(i["t_start_s"], 2.0 * k as f64);
            assert_eq!(i["t_end_s"], 2.0 * (k + 1) as f64);
        }
        assert_eq!(iv[1]["start"], "2026-05-01T08:00:02.000Z");
        // The recording is exactly 6 s: the last interval ends with it (flagged partial: the
        // run ended there, whether or not the interval was full).
        assert_eq!(iv[2]["partial"], true);
    }
    // alpha's six bursts are six emissions, each starting within one dwell of a whole second.
    let dwell = recs[0]["dwell_s"].as_f64().unwrap();
    let em: Vec<&Value> =
        of_kind(&recs, "emission").into_iter().filter(|r| r["channel"] == "alpha").collect();
    assert_eq!(em.len(), 6, "{em:#?}");
    for (k, e) in em.iter().enumerate() {
        let t0 = e["t_start_s"].as_f64().unwrap();
        let t1 = e["t_end_s"].as_f64().unwrap();
        assert!((t0 - k as f64).abs() <= dwell, "start {t0}");
        assert!((t1 - (k as f64 + 0.3)).abs() <= dwell, "end {t1}");
    }
    // beta is one emission lasting the whole recording, cut by its end.
    let beta: Vec<&Value> =
        of_kind(&recs, "emission").into_iter().filter(|r| r["channel"] == "beta").collect();
    assert_eq!(beta.len(), 1);
    assert_eq!(beta[0]["partial"], true);
    let stop = recs.last().unwrap();
    assert_eq!(
        (stop["kind"].as_str(), stop["reason"].as_str()),
        (Some("stop"), Some("end_of_input"))
    );
    assert_eq!(stop["iq_samples"], s(6.0));
}

#[test]
fn csv_log_parses_with_a_csv_reader_and_append_keeps_one_header() {
    let dir = Scratch::new("csv");
    let meta = recording(&dir);
    let log = dir.path("out.csv");
    let args = |extra: &[&str]| {
        let mut a = vec![
            "log".to_string(),
            meta.to_str().unwrap().to_string(),
            "--plan".into(),
            dir.path("plan.toml").to_str().unwrap().into(),
            "--csv".into(),
            "--out".into(),
            log.to_str().unwrap().into(),
            "--seconds".into(),
            "3".into(),
        ];
        a.extend(extra.iter().map(|s| s.to_string()));
        a
    };
    let out = Command::new(BIN).args(args(&[])).output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    assert!(out.stdout.is_empty(), "--out takes the log off stdout");
    let out = Command::new(BIN).args(args(&["--append"])).output().unwrap();
    assert!(out.status.success());

    let mut reader = csv::Reader::from_path(&log).unwrap();
    let header: Vec<String> = reader.headers().unwrap().iter().map(String::from).collect();
    assert_eq!(header[0], "kind");
    let col = |name: &str| header.iter().position(|h| h == name).unwrap();
    let rows: Vec<csv::StringRecord> = reader.records().map(|r| r.expect("a CSV row")).collect();
    assert!(rows.iter().all(|r| r.len() == header.len()));
    let kinds: Vec<&str> = rows.iter().map(|r| r.get(0).unwrap()).collect();
    assert_eq!(kinds.iter().filter(|k| **k == "start").count(), 2, "two runs, one header");
    assert_eq!(kinds.iter().filter(|k| **k == "kind").count(), 0);
    let stop = rows.iter().rev().find(|r| &r[0] == "stop").unwrap();
    assert_eq!(&stop[col("reason")], "limit");
    assert_eq!(&stop[col("t_end_s")], "3.0");
    let interval =
        rows.iter().find(|r| &r[0] == "interval" && &r[col("channel")] == "beta").unwrap();
    assert_eq!(&interval[col("occupancy_pct")], "100.0");
    assert_eq!(&interval[col("obw_hz")], "", "intervals have no OBW column value");
}

/// Runs `log` on stdin with a steady carrier, sends `signal` after the first complete interval,
/// and returns the exit status and everything written to stdout.
fn log_live_then_signal(signal: &str, extra: &[&str]) -> (std::process::ExitStatus, String) {
    let mut args = vec![
        "log",
        "-",
        "--format",
        "cf32_le",
        "--rate",
        "250k",
        "--center",
        "145M",
        "--fft",
        "512",
        "--channel",
        "beta=144.96M:12.5k",
        "--interval",
        "1s",
    ];
    args.extend_from_slice(extra);
    let mut child = Command::new(BIN)
        .args(&args)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let stdout = child.stdout.take().unwrap();
    let (tx, rx) = mpsc::channel::<String>();
    let reader = std::thread::spawn(move || {
        for line in BufReader::new(stdout).split(b'\n') {
            let mut l = String::from_utf8(line.unwrap()).unwrap();
            l.push('\n');
            if tx.send(l).is_err() {
                break;
            }
        }
    });
    // 2.5 s of samples: intervals [0,1) and [1,2) complete, [2,3) open. stdin stays open.
    let x = samples(s(2.5) as usize, &[Keyed::steady(-40e3, -30.0)], 7);
    let mut bytes = Vec::new();
    SampleFormat::Cf32Le.encode(&x, &mut bytes);
    // Delivered at the sample rate, in 50 ms pieces, as a receiver would.
    let mut stdin = child.stdin.take().unwrap();
    let started = Instant::now();
    for (i, piece) in bytes.chunks(s(0.05) as usize * 8).enumerate() {
        stdin.write_all(piece).unwrap();
        stdin.flush().unwrap();
        let due = Duration::from_secs_f64(0.05 * (i + 1) as f64);
        if let Some(wait) = due.checked_sub(started.elapsed()) {
            std::thread::sleep(wait);
        }
    }
    let mut text = String::new();
    let deadline = Instant::now() + Duration::from_secs(30);
    while !text.contains("\"t_start_s\":1.0,") {
        let line = rx.recv_timeout(deadline - Instant::now()).expect("interval records arrive");
        text.push_str(&line);
    }
    // Give the DSP a moment to take in the rest of what was written.
    std::thread::sleep(Duration::from_millis(300));
    let kill = Command::new("kill").args([signal, &child.id().to_string()]).status().unwrap();
    assert!(kill.success());
    let status = loop {
        if let Some(st) = child.try_wait().unwrap() {
            break st;
        }
        if Instant::now() > deadline {
            let _ = child.kill();
            panic!("bandwarden did not stop after {signal}");
        }
        std::thread::sleep(Duration::from_millis(20));
    };
    drop(stdin);
    reader.join().unwrap();
    text.extend(rx.try_iter());
    (status, text)
}

fn check_stopped_log(text: &str, reason: &str) {
    let recs = parse_lines(text);
    assert_eq!(recs[0]["time_source"], "wall_clock");
    let stop = recs.last().unwrap();
    assert_eq!(stop["kind"], "stop");
    assert_eq!(stop["reason"], reason);
    let ivs = of_kind(&recs, "interval");
    let last = ivs.last().unwrap();
    assert_eq!(last["partial"], true, "the open interval is written, marked partial");
    assert_eq!(last["t_start_s"], 2.0);
    assert!(ivs[..ivs.len() - 1].iter().all(|i| i["partial"] == false));
    let em = of_kind(&recs, "emission");
    assert_eq!(em.last().unwrap()["partial"], true, "the open emission is written");
    let dropped: u64 =
        of_kind(&recs, "dropped").iter().map(|d| d["dropped_samples"].as_u64().unwrap()).sum();
    assert_eq!(stop["dropped_samples"].as_u64().unwrap(), dropped, "drops are logged, not hidden");
}

#[test]
fn sigterm_flushes_the_open_interval_and_emission() {
    let (status, text) = log_live_then_signal("-TERM", &["--no-drop"]);
    assert_eq!(status.code(), Some(0), "{text}");
    check_stopped_log(&text, "terminated");
}

#[test]
fn a_closed_ssh_session_flushes_the_log_too() {
    // SIGHUP: the terminal or SSH session that started the run went away (POSIX: the hangup
    // signal is sent to the session's processes); the log must still end complete.
    let (status, text) = log_live_then_signal("-HUP", &["--no-drop"]);
    assert_eq!(status.code(), Some(0), "{text}");
    check_stopped_log(&text, "terminated");
}

#[test]
fn ctrl_c_flushes_the_open_interval_and_emission() {
    let (status, text) = log_live_then_signal("-INT", &[]);
    assert_eq!(status.code(), Some(0), "{text}");
    check_stopped_log(&text, "interrupted");
}

fn plan_error(dir: &Scratch, meta: &Path, plan_text: &[u8]) -> String {
    let plan = dir.path("bad.toml");
    std::fs::write(&plan, plan_text).unwrap();
    let out = run(&["log", meta.to_str().unwrap(), "--plan", plan.to_str().unwrap()]);
    assert_eq!(out.status.code(), Some(1));
    assert!(out.stdout.is_empty(), "no log is started on a bad plan");
    let err = String::from_utf8(out.stderr).unwrap();
    assert_eq!(err.lines().count(), 1, "one line: {err}");
    assert!(err.starts_with("bandwarden: plan '"), "{err}");
    err
}

#[test]
fn bad_plan_files_are_refused_with_their_line() {
    let dir = Scratch::new("plans");
    let meta = recording(&dir);
    let good = std::fs::read_to_string(dir.path("plan.toml")).unwrap();
    // Truncated in the middle of a string of the third table.
    let cut = &good[..good.find("145.09M").unwrap() + 3];
    let e = plan_error(&dir, &meta, cut.as_bytes());
    assert!(e.contains("line 14"), "{e}");
    // Garbage.
    let e = plan_error(&dir, &meta, b"\x7fELF\x02\x01\x01\x00 garbage [[[ \n");
    assert!(e.contains("line 1"), "{e}");
    // A channel outside the 250 kHz captured around 145 MHz.
    let e = plan_error(&dir, &meta, good.replace("145.09M", "145.2M").as_bytes());
    assert!(e.contains("line 12") && e.contains("outside"), "{e}");
    // Overlap and a zero width.
    let e = plan_error(&dir, &meta, good.replace("145.09M", "145.055M").as_bytes());
    assert!(e.contains("overlaps"), "{e}");
    let e = plan_error(&dir, &meta, good.replace("width = 12500", "width = 0").as_bytes());
    assert!(e.contains("line 10") && e.contains("greater than zero"), "{e}");
}

#[test]
fn measure_reports_channels_over_the_whole_input() {
    let dir = Scratch::new("measure");
    let meta = recording(&dir);
    let out = run(&[
        "measure",
        meta.to_str().unwrap(),
        "--plan",
        dir.path("plan.toml").to_str().unwrap(),
        "--json",
    ]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    let ch = v["channels"].as_array().unwrap();
    assert_eq!(ch.len(), 3);
    let by = |name: &str| ch.iter().find(|c| c["name"] == name).unwrap();
    // Occupancy over 6 s (SM.1880) and the channel power of an always-on −30 dBFS carrier
    // plus the noise in 12.5 kHz (−40 dBFS over 250 kHz → −53 dBFS): −29.98 dBFS (Parseval).
    assert!((by("alpha")["occupancy_pct"].as_f64().unwrap() - 30.0).abs() <= 2.0);
    assert_eq!(by("beta")["occupancy_pct"], 100.0);
    assert_eq!(by("gamma")["occupancy_pct"], 0.0);
    assert!((by("beta")["power_dbfs"].as_f64().unwrap() + 29.98).abs() < 0.1);
    let table = run(&["measure", meta.to_str().unwrap(), "--channel", "beta=144.96M:12.5k"]);
    let text = String::from_utf8(table.stdout).unwrap();
    assert!(text.contains("beta") && text.contains("100.0 %"), "{text}");
}

#[test]
fn live_input_that_outruns_the_dsp_has_its_drops_logged() {
    // A deliberately heavy analysis (65536-point frames, 95 % overlap, one thread) on 2 s of
    // 32 MS/s input delivered at its real rate, as a receiver would (a quiet 2-core machine
    // analyses about 5 MS/s this way in a test build, so the load is six times what one core
    // can carry, not a matter of what else runs): the DSP cannot keep up, the
    // reader must drop blocks, and every dropped sample must be accounted for in `dropped`
    // records, the intervals and the stop record. (Input faster than real time is a recording
    // and waits instead: see tests/hardening.rs.)
    let rate = 32_000_000usize;
    let n = 2 * rate;
    let mut bytes = Vec::with_capacity(2 * n);
    let x = samples(n / 10, &[], 3);
    for _ in 0..10 {
        SampleFormat::Ci8.encode(&x, &mut bytes);
    }
    let mut child = Command::new(BIN)
        .args([
            "log",
            "-",
            "--format",
            "ci8",
            "--rate",
            "32M",
            "--center",
            "0",
            "--fft",
            "65536",
            "--overlap",
            "0.95",
            "--threads",
            "1",
            "--channel",
            "a=100k:20k",
            "--interval",
            "1s",
        ])
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut stdin = child.stdin.take().unwrap();
    let writer = std::thread::spawn(move || {
        // 10 ms pieces at the sample rate (2 bytes a sample), timed from when the reader took
        // the first one: a receiver does not catch up on the time bandwarden took to start (a
        // burst of more than half a second would make the input a recording, which waits).
        let mut started = Instant::now();
        for (i, piece) in bytes.chunks(rate / 100 * 2).enumerate() {
            if stdin.write_all(piece).is_err() {
                return;
            }
            if i == 0 {
                started = Instant::now();
            }
            let due = Duration::from_secs_f64(0.01 * (i + 1) as f64);
            if let Some(wait) = due.checked_sub(started.elapsed()) {
                std::thread::sleep(wait);
            }
        }
    });
    let out = child.wait_with_output().unwrap();
    writer.join().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let recs = parse_lines(&String::from_utf8(out.stdout).unwrap());
    let stop = recs.last().unwrap();
    assert_eq!(stop["reason"], "end_of_input");
    assert_eq!(stop["iq_samples"], n as u64);
    let total = stop["dropped_samples"].as_u64().unwrap();
    assert!(total > 0, "the DSP kept up after all; the test needs a heavier load");
    let in_records: u64 =
        of_kind(&recs, "dropped").iter().map(|d| d["dropped_samples"].as_u64().unwrap()).sum();
    let in_intervals: u64 =
        of_kind(&recs, "interval").iter().map(|d| d["dropped_samples"].as_u64().unwrap()).sum();
    assert_eq!(in_records, total);
    assert!(in_intervals <= total, "{in_intervals} > {total}");
    let stderr = String::from_utf8(out.stderr).unwrap();
    assert!(stderr.contains("processing fell behind"), "{stderr}");
}

#[test]
fn the_demo_recording_logs_the_scenes_keying() {
    // The shipped recording of the demo scene, logged with the shipped plan, against the scene's
    // own schedule (truth as data: `source::demo`). Occupancy per 2 s interval within ±2 points of
    // the keyed fraction (ITU-R SM.1880 definition); one emission per keyed run, each edge within
    // one measurement sample.
    use bandwarden::source::demo;
    let dir = env!("CARGO_MANIFEST_DIR");
    let meta = format!("{dir}/recordings/wrenhollow-demo.sigmf-meta");
    let plan = format!("{dir}/recordings/wrenhollow-plan.toml");
    let out = run(&["log", &meta, "--plan", &plan, "--interval", "2s"]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let recs = parse_lines(&String::from_utf8(out.stdout).unwrap());
    let start = &recs[0];
    assert_eq!(start["start"], "2031-04-17T06:30:00.000Z", "core:datetime of the recording");
    let rate = start["sample_rate_hz"].as_f64().unwrap();
    let dwell = start["dwell_s"].as_f64().unwrap();
    let n = recs.last().unwrap()["iq_samples"].as_u64().unwrap();
    assert_eq!(n, 4_000_000);
    let names: Vec<&str> =
        of_kind(&recs, "channel").iter().map(|c| c["channel"].as_str().unwrap()).collect();
    assert_eq!(names.len(), demo::channels().len());
    for name in names {
        let truth = demo::channel(name).unwrap_or_else(|| panic!("'{name}' is not in the scene"));
        for iv in of_kind(&recs, "interval").iter().filter(|r| r["channel"] == name) {
            let (t0, t1) = (iv["t_start_s"].as_f64().unwrap(), iv["t_end_s"].as_f64().unwrap());
            let want = 100.0 * truth.schedule.keyed_time(t0, t1) / (t1 - t0);
            let got = iv["occupancy_pct"].as_f64().unwrap();
            eprintln!("{name:>8} {t0}..{t1} s: logged {got:6.2} %, scene {want:6.2} %");
            assert!((got - want).abs() <= 2.0, "{name} {t0}..{t1}: {got} % vs {want} %");
        }
        let mut runs = Vec::new();
        truth.schedule.runs(rate, 0, n, &mut runs);
        let em: Vec<&Value> =
            of_kind(&recs, "emission").into_iter().filter(|r| r["channel"] == name).collect();
        assert_eq!(em.len(), runs.len(), "{name}: {em:#?} vs {runs:?}");
        for (e, &(a, b)) in em.iter().zip(&runs) {
            let (s0, s1) = (e["t_start_s"].as_f64().unwrap(), e["t_end_s"].as_f64().unwrap());
            let (a, b) = (a as f64 / rate, b as f64 / rate);
            assert!(
                (s0 - a).abs() <= dwell && (s1 - b).abs() <= dwell,
                "{name}: {s0}..{s1} vs {a}..{b}"
            );
        }
    }
}

#[test]
fn rotated_logs_lose_and_repeat_nothing() {
    // The shipped 4 s recording, stamped to cross midnight UTC at 2 s, logged once into one
    // file and once rotated daily and by size: the records after the headers, read in file
    // order, are the same records (so no record is lost or written twice, and the noise
    // tracker went on untouched: its floor figures are identical); each file opens with the
    // run's start and channel records.
    let dir = Scratch::new("rotate");
    let rec = concat!(env!("CARGO_MANIFEST_DIR"), "/recordings/wrenhollow-demo.sigmf-meta");
    let plan = concat!(env!("CARGO_MANIFEST_DIR"), "/recordings/wrenhollow-plan.toml");
    let common = ["--plan", plan, "--interval", "1s", "--start", "2026-05-01T23:59:58Z"];
    let single = dir.path("single.jsonl");
    let out = run(&[&["log", rec, "-o", single.to_str().unwrap()], &common[..]].concat());
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    // Each run has its own id (`run`) and numbers its records (`seq`); the records are compared
    // without them, and the numbers after the headers are checked to rise by one.
    let body = |text: &str| -> Vec<String> {
        text.lines()
            .filter(|l| !l.contains("\"kind\":\"start\"") && !l.contains("\"kind\":\"channel\""))
            .map(|l| {
                let mut v: serde_json::Value = serde_json::from_str(l).unwrap();
                let o = v.as_object_mut().unwrap();
                o.remove("run");
                o.remove("seq");
                v.to_string()
            })
            .collect()
    };
    let whole = body(&std::fs::read_to_string(&single).unwrap());
    for (policy, expect_files) in [("daily", Some(2)), ("3k", None)] {
        let sub = dir.path(policy);
        std::fs::create_dir_all(&sub).unwrap();
        let base = sub.join("site.jsonl");
        let args =
            [&["log", rec, "-o", base.to_str().unwrap(), "--rotate", policy], &common[..]].concat();
        let out = run(&args);
        assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
        let mut files: Vec<PathBuf> =
            std::fs::read_dir(&sub).unwrap().map(|e| e.unwrap().path()).collect();
        files.sort();
        if let Some(n) = expect_files {
            assert_eq!(files.len(), n, "{files:?}");
            assert!(files[0].to_str().unwrap().ends_with("site.2026-05-01.jsonl"));
            assert!(files[1].to_str().unwrap().ends_with("site.2026-05-02.jsonl"));
        } else {
            assert!(files.len() > 2, "a 3 kB limit makes several files: {files:?}");
        }
        let mut joined = Vec::new();
        let mut seqs = Vec::new();
        for f in &files {
            let text = std::fs::read_to_string(f).unwrap();
            let recs = parse_lines(&text);
            assert_eq!(recs[0]["kind"], "start", "{f:?} opens with the settings");
            assert_eq!(recs[1]["kind"], "channel");
            // Repeated headers keep the numbers they had in the run; the rest follow on.
            let rest = recs.iter().filter(|r| r["kind"] != "start" && r["kind"] != "channel");
            seqs.extend(rest.map(|r| r["seq"].as_u64().unwrap()));
            joined.extend(body(&text));
        }
        assert!(seqs.windows(2).all(|w| w[1] == w[0] + 1), "{policy}: seq {seqs:?}");
        // Within one second the stop record's `end` is the same; everything else is identical.
        assert_eq!(joined, whole, "{policy}");
    }
}

/// `--progress 1s` prints a status line every second even when stderr is a file, also while no
/// input arrives: a silent run shows it is alive, and that its input stalled.
#[test]
fn progress_lines_show_a_silent_run_is_alive() {
    let dir = Scratch::new("progress");
    let err_path = dir.0.join("stderr.txt");
    let mut child = Command::new(BIN)
        .args(["log", "-", "--format", "cf32_le", "--rate", "250k", "--center", "145M"])
        .args(["--fft", "512", "--channel", "beta=144.96M:12.5k", "--interval", "1s"])
        .args(["--progress", "1s", "-o", dir.0.join("log.jsonl").to_str().unwrap()])
        .stdin(Stdio::piped())
        .stdout(Stdio::null())
        .stderr(Stdio::from(std::fs::File::create(&err_path).unwrap()))
        .spawn()
        .unwrap();
    let mut stdin = child.stdin.take().unwrap();
    let x = samples(s(0.5) as usize, &[Keyed::steady(-40e3, -30.0)], 7);
    let mut bytes = Vec::new();
    SampleFormat::Cf32Le.encode(&x, &mut bytes);
    stdin.write_all(&bytes).unwrap();
    stdin.flush().unwrap();
    std::thread::sleep(Duration::from_millis(2600));
    let kill = Command::new("kill").args(["-INT", &child.id().to_string()]).status().unwrap();
    assert!(kill.success());
    assert!(child.wait().unwrap().success());
    drop(stdin);
    let err = std::fs::read_to_string(&err_path).unwrap();
    let lines: Vec<&str> = err.lines().filter(|l| l.contains(" running ")).collect();
    assert!(lines.len() >= 2, "{err}");
    assert!(lines.iter().all(|l| l.contains("dropped 0.0 s")), "{err}");
    let last = lines.last().unwrap();
    assert!(last.contains("0.5 s of input, none new since the last line"), "{err}");
}

/// `demo --realtime` at 1 MS/s (a paced source, as a receiver would deliver) piped into `log -`
/// told `--rate stated`, for `seconds` of samples at the stated rate; returns stderr.
fn paced_demo_into_log(stated: &str, seconds: &str) -> String {
    let mut demo = Command::new(BIN)
        .args(["demo", "--realtime", "--rate", "1M", "--format", "cu8", "--seconds", "8"])
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let log = Command::new(BIN)
        .args(["log", "-", "--format", "cu8", "--rate", stated, "--center", "433.5M"])
        .args(["--channel", "a=433.5M:25k", "--interval", "1s", "--threads", "1"])
        .args(["--seconds", seconds, "-o", "-"])
        .stdin(demo.stdout.take().unwrap())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .output()
        .unwrap();
    // The demo ends by itself (8 s) or on the closed pipe.
    let _ = demo.kill();
    let _ = demo.wait();
    assert!(log.status.success(), "{}", String::from_utf8_lossy(&log.stderr));
    String::from_utf8(log.stderr).unwrap()
}

#[test]
fn live_input_arriving_at_half_its_stated_rate_is_noted() {
    // 1 MS/s arriving with --rate 2M: --seconds 2.5 at the stated rate is 5 s of arrival, past
    // the settling time and the timing window (1 s + 3 s). The same pipe with the right rate
    // (5 s of it) gets no note. Both run at once to halve the wall time.
    let right = std::thread::spawn(|| paced_demo_into_log("1M", "5"));
    let wrong = paced_demo_into_log("2M", "2.5");
    // The delivered rate is measured (1 MS/s within a hair: "1.00 MS/s" or "999.98 kS/s").
    assert!(wrong.contains("stdin delivers "), "{wrong}");
    assert!(wrong.contains(", 0.50 × the 2.00 MS/s --rate gives"), "{wrong}");
    // The suggested rate is the measured one, to three figures: within 1 % of 1 MS/s (a loaded
    // machine delivers a little less than the pace, e.g. "999k").
    let suggested = wrong.split("(--rate ").nth(1).and_then(|t| t.split('?').next()).unwrap_or("");
    let hz = bandwarden::units::parse_hz(suggested).unwrap_or(0.0);
    assert!((hz - 1e6).abs() <= 1e4, "suggested --rate {suggested}: {wrong}");
    let right = right.join().unwrap();
    assert!(!right.contains("delivers"), "{right}");
}
