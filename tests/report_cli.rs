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
