//! `bandwarden report` checked against occupancy computed here, independently, from the same log
//! records: ITU-R SM.1880's occupancy is occupied samples over measured samples, so summing the
//! interval records' counts per channel (and per UTC hour) must give what the report prints.

use serde_json::Value;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn bin() -> &'static str {
    env!("CARGO_BIN_EXE_bandwarden")
}

fn scratch(name: &str) -> PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("report");
    std::fs::create_dir_all(&dir).unwrap();
    dir.join(name)
}

fn run(args: &[&str]) -> Output {
    let out = Command::new(bin()).args(args).output().unwrap();
    assert!(out.status.success(), "{args:?}: {}", String::from_utf8_lossy(&out.stderr));
    out
}

fn report_json(logs: &[&Path]) -> (Value, String) {
    let mut args = vec!["report", "--json"];
    let paths: Vec<String> = logs.iter().map(|p| p.display().to_string()).collect();
    args.extend(paths.iter().map(String::as_str));
    let out = run(&args);
    (serde_json::from_slice(&out.stdout).unwrap(), String::from_utf8_lossy(&out.stderr).into())
}

fn channel<'a>(report: &'a Value, site: Option<&str>, name: &str) -> &'a Value {
    report["channels"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == name && site.map_or(true, |s| c["site"] == s))
        .unwrap_or_else(|| panic!("no channel {name} in {report}"))
}

#[test]
fn occupancy_matches_the_records_summed_independently() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let log = scratch("demo.jsonl");
    run(&[
        "log",
        root.join("recordings/wrenhollow-demo.sigmf-meta").to_str().unwrap(),
        "--plan",
        root.join("recordings/wrenhollow-plan.toml").to_str().unwrap(),
        "--interval",
        "1s",
        "--threads",
        "1",
        "-o",
        log.to_str().unwrap(),
    ]);
    // Independent sums: per channel, occupied and measured samples of every interval that was
    // measured, and the emission records.
    let text = std::fs::read_to_string(&log).unwrap();
    let mut sums: BTreeMap<String, (f64, u64, usize)> = BTreeMap::new();
    for line in text.lines() {
        let v: Value = serde_json::from_str(line).unwrap();
        let name = v["channel"].as_str().unwrap_or_default().to_string();
        match v["kind"].as_str() {
            Some("interval") if !v["occupancy_pct"].is_null() => {
                let e = sums.entry(name).or_default();
                e.0 += v["occupied_samples"].as_f64().unwrap();
                e.1 += v["samples"].as_u64().unwrap();
            }
            Some("emission") => sums.entry(name).or_default().2 += 1,
            _ => {}
        }
    }
    assert_eq!(sums.len(), 7, "{sums:?}");
    // A power cut mid-line: the report notes it and goes on.
    let mut cut = text.clone();
    cut.push_str("{\"kind\":\"interval\",\"chan");
    std::fs::write(&log, cut).unwrap();
    let (report, stderr) = report_json(&[&log]);
    assert!(stderr.contains("incomplete"), "{stderr}");
    for (name, (occ, samples, emissions)) in &sums {
        let c = channel(&report, None, name);
        let expect = 100.0 * *occ / *samples as f64;
        let got = c["occupancy_pct"].as_f64().unwrap();
        assert!((got - expect).abs() < 1e-3, "{name}: {got} vs {expect}");
        assert_eq!(c["emissions"].as_u64().unwrap() as usize, *emissions, "{name}");
        // The recording lies within one UTC hour (06:30:00–06:30:04, SigMF core:datetime).
        let hours = c["hours"].as_array().unwrap();
        assert_eq!(hours.len(), 1);
        assert_eq!(hours[0]["hour"], 6);
        assert!((hours[0]["occupancy_pct"].as_f64().unwrap() - expect).abs() < 1e-3);
    }
    // The same file twice (or a rotated copy of the same run) counts once.
    let (twice, _) = report_json(&[&log, &log]);
    assert_eq!(twice["channels"], report["channels"]);
}

const START: &str = r#"{"kind":"start","version":"0.1.0","source":"x","sample_rate_hz":1000.0,"center_hz":0.0,"fft_size":16,"window":"hann","overlap":0.5,"rbw_hz":1.0,"dwell_s":0.1,"frames_per_sample":1,"interval_s":1.0,"hang_s":0.1,"threshold_db":10.0,"obw_percent":99.0,"floor_memory_s":1.0,"floor_smoothing_s":1.0,"t_start_s":0.0,"start":"2031-04-17T06:00:00.000Z","time_source":"option""#;

fn interval(t: u64, samples: u64, occupied: u64, dropped: u64) -> String {
    let hour = 6 + t / 3600;
    let (pct, mean) = if samples == 0 {
        ("null".to_string(), "null")
    } else {
        (format!("{}", 100.0 * occupied as f64 / samples as f64), "-40.0")
    };
    format!(
        r#"{{"kind":"interval","channel":"ops","center_hz":100.0,"width_hz":10.0,"t_start_s":{t}.0,"t_end_s":{}.0,"start":"2031-04-17T{hour:02}:00:{:02}.000Z","end":null,"occupancy_pct":{pct},"mean_dbfs":{mean},"peak_dbfs":{mean},"noise_floor_dbfs_per_hz":null,"samples":{samples},"occupied_samples":{occupied},"dropped_samples":{dropped},"partial":false}}"#,
        t + 1,
        t % 60
    )
}

/// Two sites, one named by its start record and one by its file's name; an interval whose
/// input was lost counts as not measured, never as idle.
#[test]
fn sites_side_by_side_and_lost_input_is_not_idle() {
    let north = scratch("a.jsonl");
    let body = [
        format!("{START},\"site\":\"north\"}}"),
        interval(0, 10, 5, 0),
        interval(1, 0, 0, 1000),
        interval(3600, 10, 10, 0),
    ];
    std::fs::write(&north, body.join("\n") + "\n").unwrap();
    let south = scratch("south.2031-04-17.jsonl");
    let body = [format!("{START}}}"), interval(0, 20, 2, 0)];
    std::fs::write(&south, body.join("\n") + "\n").unwrap();
    let (report, _) = report_json(&[&north, &south]);
    assert_eq!(report["sites"], serde_json::json!(["north", "south"]));
    // north: (5 + 10) / (10 + 10) = 75 % occupied; the lost second (no samples) adds nothing,
    // where counting it as a quiet sample of 10 would give 15/30 = 50 %.
    let n = channel(&report, Some("north"), "ops");
    assert!((n["occupancy_pct"].as_f64().unwrap() - 75.0).abs() < 1e-9, "{n}");
    assert_eq!(n["hours"].as_array().unwrap().len(), 2);
    // Each hour holds one second of measurement: thin hours, so no busy hour is named, where
    // 07h (100 %) would otherwise pass for the busy hour on one second of data.
    let hours = n["hours"].as_array().unwrap();
    assert!(hours.iter().all(|h| h["thin"] == true && h["measured_s"] == 1.0), "{hours:?}");
    assert!(n["busy_hour"].is_null(), "{n}");
    let s = channel(&report, Some("south"), "ops");
    assert!((s["occupancy_pct"].as_f64().unwrap() - 10.0).abs() < 1e-9, "{s}");
    // The CSV and the heat map come from the same sums.
    let csv = run(&["report", "--csv", north.to_str().unwrap(), south.to_str().unwrap()]);
    let csv = String::from_utf8(csv.stdout).unwrap();
    assert!(csv.starts_with("site,channel,"), "{csv}");
    assert!(csv.contains("\nnorth,ops,100,10,75,"), "{csv}");
    let png = scratch("heat.png");
    run(&["report", north.to_str().unwrap(), "--png", png.to_str().unwrap()]);
    let decoder = png::Decoder::new(std::fs::File::open(&png).unwrap());
    let info = decoder.read_info().unwrap();
    assert_eq!(info.info().width, 1200);
}

/// The README's daily loop over one night at one site, `ridge`, with no `--site`: the files are
/// named by date, as `--out "site-$day.jsonl"` names them. Three runs of `log` on 250 kS/s
/// input with one channel keyed 30 % of every second:
/// - 2026-12-03T22:00:00Z, live on stdin, stopped by SIGINT after its first full interval;
/// - 2026-12-03T23:30:00Z, 3 s from a file: the input ends;
/// - 2026-12-04T00:00:30Z, the same file with `--seconds 2`: the planned end.
struct Night {
    dir: PathBuf,
    logs: Vec<PathBuf>,
}

const FS: f64 = 250e3;

fn keyed_input(seconds: f64) -> Vec<u8> {
    use bandwarden::testkit::{keyed_band, Keyed};
    let n = (seconds * FS) as u64;
    let thirty = |i: u64| i % 250_000 < 75_000;
    let x = keyed_band(
        n as usize,
        FS,
        1e-4,
        &[Keyed { offset_hz: 40e3, level_dbfs: -30.0, on: &thirty }],
        5,
    );
    let mut bytes = Vec::new();
    bandwarden::source::SampleFormat::Cf32Le.encode(&x, &mut bytes);
    bytes
}

fn log_args<'a>(input: &'a str, out: &'a str, start: &'a str, csv: bool) -> Vec<&'a str> {
    let mut a = vec![
        "log",
        input,
        "--format",
        "cf32_le",
        "--rate",
        "250k",
        "--center",
        "145M",
        "--fft",
        "512",
        "--channel",
        "ops=145.04M:12.5k",
        "--interval",
        "1s",
        "--threads",
        "1",
        "--append",
        "--start",
        start,
        "-o",
        out,
    ];
    if csv {
        a.push("--csv");
    }
    a
}

/// Runs `log` on stdin until its first interval is written, then sends SIGINT.
fn log_until_signal(out: &Path, start: &str) {
    use std::io::Write;
    use std::process::Stdio;
    use std::time::{Duration, Instant};
    let out_s = out.to_str().unwrap();
    let mut child = Command::new(bin())
        .args(log_args("-", out_s, start, false))
        .stdin(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let mut stdin = child.stdin.take().unwrap();
    stdin.write_all(&keyed_input(2.5)).unwrap();
    stdin.flush().unwrap();
    let deadline = Instant::now() + Duration::from_secs(60);
    while !std::fs::read_to_string(out).unwrap_or_default().contains("\"t_start_s\":1.0,") {
        assert!(Instant::now() < deadline, "no interval records from the live run");
        std::thread::sleep(Duration::from_millis(50));
    }
    std::thread::sleep(Duration::from_millis(300));
    let pid = child.id().to_string();
    assert!(Command::new("kill").args(["-INT", &pid]).status().unwrap().success());
    let status = child.wait().unwrap();
    drop(stdin);
    assert!(status.success(), "{status:?}");
}

fn night(tag: &str, csv: bool) -> Night {
    let dir = scratch(tag);
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    let ext = if csv { "csv" } else { "jsonl" };
    let day1 = dir.join(format!("ridge-2026-12-03.{ext}"));
    let day2 = dir.join(format!("ridge-2026-12-04.{ext}"));
    let input = dir.join("keyed.cf32");
    std::fs::write(&input, keyed_input(3.0)).unwrap();
    let inp = input.to_str().unwrap();
    if csv {
        // A file run stands in for the live one: the CSV test compares the later runs only.
        run(&log_args(inp, day1.to_str().unwrap(), "2026-12-03T22:00:00Z", true));
    } else {
        log_until_signal(&day1, "2026-12-03T22:00:00Z");
    }
    run(&log_args(inp, day1.to_str().unwrap(), "2026-12-03T23:30:00Z", csv));
    let mut third = log_args(inp, day2.to_str().unwrap(), "2026-12-04T00:00:30Z", csv);
    third.extend(["--seconds", "2"]);
    run(&third);
    Night { dir, logs: vec![day1, day2] }
}

fn report_of(n: &Night, extra: &[&str]) -> Value {
    let mut args = vec!["report", "--json"];
    args.extend_from_slice(extra);
    let paths: Vec<String> = n.logs.iter().map(|p| p.display().to_string()).collect();
    args.extend(paths.iter().map(String::as_str));
    serde_json::from_slice(&run(&args).stdout).unwrap()
}

/// Every record of the night's JSON Lines logs.
fn records(n: &Night) -> Vec<Value> {
    n.logs
        .iter()
        .flat_map(|p| {
            std::fs::read_to_string(p)
                .unwrap()
                .lines()
                .map(|l| serde_json::from_str(l).unwrap())
                .collect::<Vec<Value>>()
        })
        .collect()
}

fn epoch(stamp: &Value) -> f64 {
    let t = time::OffsetDateTime::parse(
        stamp.as_str().unwrap(),
        &time::format_description::well_known::Rfc3339,
    )
    .unwrap();
    t.unix_timestamp_nanos() as f64 / 1e9
}

#[test]
fn a_night_of_daily_files_is_one_site_with_its_runs_and_gaps() {
    let n = night("night", false);
    let recs = records(&n);
    let report = report_of(&n, &[]);
    assert_eq!(
        report["sites"],
        serde_json::json!(["ridge"]),
        "dates in the file names are not sites"
    );
    // Independently from the records: each run from its start record's time to its stop
    // record's end; the gaps lie between them.
    let starts: Vec<f64> =
        recs.iter().filter(|r| r["kind"] == "start").map(|r| epoch(&r["start"])).collect();
    let stops: Vec<&Value> = recs.iter().filter(|r| r["kind"] == "stop").collect();
    let reasons: Vec<&str> = stops.iter().map(|s| s["reason"].as_str().unwrap()).collect();
    assert_eq!(reasons, ["interrupted", "end_of_input", "limit"]);
    let ends: Vec<f64> = stops.iter().map(|s| epoch(&s["end"])).collect();
    let cov = &report["coverage"][0];
    let runs = cov["runs"].as_array().unwrap();
    assert_eq!(runs.len(), 3);
    for (i, r) in runs.iter().enumerate() {
        assert_eq!(r["stop"], reasons[i]);
        assert!(
            (epoch(&r["start"]) - starts[i]).abs() < 1e-3
                && (epoch(&r["end"]) - ends[i]).abs() < 1e-3,
            "{r}"
        );
    }
    let measured: f64 = (0..3).map(|i| ends[i] - starts[i]).sum();
    let period = ends[2] - starts[0];
    assert!((cov["measured_s"].as_f64().unwrap() - measured).abs() < 0.01, "{cov}");
    assert!((cov["period_s"].as_f64().unwrap() - period).abs() < 0.01, "{cov}");
    let pct = 100.0 * measured / period;
    assert!((cov["measured_pct"].as_f64().unwrap() - pct).abs() < 1e-3, "{cov}");
    let gaps = cov["gaps"].as_array().unwrap();
    assert_eq!(gaps.len(), 2, "{gaps:?}");
    for (i, g) in gaps.iter().enumerate() {
        assert_eq!(g["cause"], "no_run");
        assert_eq!(g["after_stop"], reasons[i]);
        assert!((g["length_s"].as_f64().unwrap() - (starts[i + 1] - ends[i])).abs() < 0.01, "{g}");
    }
    // The table tells the operator's stop from the end of the input.
    let table = run(&["report", n.logs[0].to_str().unwrap(), n.logs[1].to_str().unwrap()]);
    let table = String::from_utf8(table.stdout).unwrap();
    assert!(table.contains("stopped by the operator (SIGINT"), "{table}");
    assert!(table.contains("the input ended"), "{table}");
    assert!(table.contains("planned end"), "{table}");
    // Occupancy summed here from the interval records (ITU-R SM.1880: occupied over measured
    // samples).
    let (mut occ, mut samples) = (0.0, 0u64);
    for r in recs.iter().filter(|r| r["kind"] == "interval" && !r["occupancy_pct"].is_null()) {
        occ += r["occupied_samples"].as_f64().unwrap();
        samples += r["samples"].as_u64().unwrap();
    }
    let ops = channel(&report, Some("ridge"), "ops");
    assert!((ops["occupancy_pct"].as_f64().unwrap() - 100.0 * occ / samples as f64).abs() < 1e-3);
    // Hours of the night in order: 22, 23, then 00 of the next day; every one thin (seconds
    // of an hour measured), so no busy hour is named.
    let hours: Vec<i64> =
        ops["hours"].as_array().unwrap().iter().map(|h| h["hour"].as_i64().unwrap()).collect();
    assert_eq!(hours, [22, 23, 0]);
    assert!(ops["hours"].as_array().unwrap().iter().all(|h| h["thin"] == true));
    assert!(ops["busy_hour"].is_null());
    let _ = std::fs::remove_dir_all(&n.dir);
}

#[test]
fn window_and_zone() {
    let n = night("night-window", false);
    let recs = records(&n);
    // --tz +01:00: the window 23:00–01:00 local is 22:00–00:00 UTC, the first two runs.
    let report = report_of(
        &n,
        &["--tz", "+01:00", "--from", "2026-12-03T23:00", "--to", "2026-12-04T01:00"],
    );
    let (from, to) =
        (epoch(&Value::from("2026-12-03T22:00:00Z")), epoch(&Value::from("2026-12-04T00:00:00Z")));
    let (mut occ, mut samples) = (0.0, 0u64);
    for r in recs.iter().filter(|r| r["kind"] == "interval" && !r["occupancy_pct"].is_null()) {
        let t = epoch(&r["start"]);
        if t >= from && t < to {
            occ += r["occupied_samples"].as_f64().unwrap();
            samples += r["samples"].as_u64().unwrap();
        }
    }
    let ops = channel(&report, None, "ops");
    assert_eq!(ops["samples"].as_u64().unwrap(), samples);
    assert!((ops["occupancy_pct"].as_f64().unwrap() - 100.0 * occ / samples as f64).abs() < 1e-3);
    let cov = &report["coverage"][0];
    assert_eq!(cov["period_s"], 7200.0);
    assert_eq!(cov["period"]["start"], "2026-12-03T23:00:00+01:00");
    assert_eq!(cov["runs"].as_array().unwrap().len(), 2);
    // Local hours: 23 (22:00Z) then 00 (23:30Z), in that order.
    let hours: Vec<i64> =
        ops["hours"].as_array().unwrap().iter().map(|h| h["hour"].as_i64().unwrap()).collect();
    assert_eq!(hours, [23, 0]);
    let _ = std::fs::remove_dir_all(&n.dir);
}

/// `log --csv` files give the figures the same runs give as JSON Lines; every number of
/// `report --csv` is rounded (at most three decimals).
#[test]
fn csv_logs_read_alike_and_numbers_are_rounded() {
    let j = night("night-jsonl", false);
    let c = night("night-csv", true);
    // The first run differs by design (live and stopped, or a file); compare the other two.
    let rj = report_of(&j, &["--from", "2026-12-03T23:00:00Z"]);
    let rc = report_of(&c, &["--from", "2026-12-03T23:00:00Z"]);
    assert_eq!(rc["sites"], serde_json::json!(["ridge"]));
    assert_eq!(rj["channels"], rc["channels"]);
    assert_eq!(rj["coverage"], rc["coverage"]);
    let csv = run(&["report", "--csv", c.logs[0].to_str().unwrap(), c.logs[1].to_str().unwrap()]);
    let csv = String::from_utf8(csv.stdout).unwrap();
    for field in csv.lines().skip(1).flat_map(|l| l.split(',')) {
        if let (Ok(_), Some((_, decimals))) = (field.parse::<f64>(), field.split_once('.')) {
            assert!(decimals.len() <= 3, "{field} in {csv}");
        }
    }
    let _ = std::fs::remove_dir_all(&j.dir);
    let _ = std::fs::remove_dir_all(&c.dir);
}
