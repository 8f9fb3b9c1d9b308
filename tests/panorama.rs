//! Panoramas from retuned streams, as operators run them: the real binary on a generated hop
//! capture whose truth is computed analytically (each dwell holds exactly the tones that lie
//! inside its receiver's span, at their offset from that dwell's centre and their stated power,
//! over complex white noise), read as a raw stream with `--hop-plan` and as a SigMF recording
//! with one capture per dwell.
//!
//! Truth: a complex tone `A·e^{jωn}` has power A² (Parseval), so a tone stated at L dBFS must
//! read L dBFS of integrated power, at its own frequency within one bin.

mod common;

use bandwarden::source::SampleFormat;
use bandwarden::testkit::{keyed_band, Keyed};
use serde_json::{json, Value};
use std::path::PathBuf;
use std::process::{Command, Output};

const BIN: &str = env!("CARGO_BIN_EXE_bandwarden");
const FS: f64 = 1e6;
/// 1000-point FFT: 1 kHz bins; with the default 80 % usable each step keeps 800 kHz.
const FFT: &str = "1000";
/// Four steps of a Wrenhollow Ridge sweep, 800 kHz apart: they tile 445.6 .. 448.8 MHz.
const CENTRES: [f64; 4] = [446.0e6, 446.8e6, 447.6e6, 448.4e6];
const DWELL: usize = 50_000;
const SETTLE: usize = 2_000;
/// Tones (absolute Hz, dBFS): one 10 kHz below step 0's usable edge, one 3.5 kHz inside step
/// 2's (its Hann skirt falls across the boundary into step 1's bins), one in the last step.
const TONES: [(f64, f64); 3] = [(446.39e6, -30.0), (447.2035e6, -40.0), (448.7e6, -35.0)];
/// During the settling time after every retune a strong spur sits here; `--settle` must keep it
/// out of the panorama.
const SPUR_HZ: f64 = 447.5e6;

/// One dwell at `center`: the tones its receiver sees, the spur in its first `SETTLE` samples.
fn dwell(center: f64, seed: u64) -> Vec<num_complex::Complex32> {
    common::dwell(center, FS, DWELL, &TONES, (SPUR_HZ, SETTLE as u64), seed)
}

/// A scratch directory removed at the end of the test.
struct Scratch(PathBuf);

impl Scratch {
    fn new(name: &str) -> Scratch {
        let d = std::env::temp_dir().join(format!("bw-panorama-{name}-{}", std::process::id()));
        std::fs::create_dir_all(&d).unwrap();
        Scratch(d)
    }

    fn file(&self, name: &str) -> String {
        self.0.join(name).display().to_string()
    }
}

impl Drop for Scratch {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// `sweeps` sweeps of the four steps, as cf32_le bytes.
fn capture(sweeps: usize) -> Vec<u8> {
    let mut bytes = Vec::new();
    for s in 0..sweeps {
        for (k, &c) in CENTRES.iter().enumerate() {
            SampleFormat::Cf32Le.encode(&dwell(c, (s * 4 + k) as u64 + 1), &mut bytes);
        }
    }
    bytes
}

/// A scratch folder named `name` holding `sweeps` sweeps of the capture and the hop plan:
/// (folder, capture path, plan path).
fn sweep_files(name: &str, sweeps: usize) -> (Scratch, String, String) {
    let dir = Scratch::new(name);
    let data = dir.file("sweep.cf32");
    std::fs::write(&data, capture(sweeps)).unwrap();
    let plan = hop_plan(&dir);
    (dir, data, plan)
}

fn hop_plan(dir: &Scratch) -> String {
    let path = dir.file("sweep.txt");
    let mut text = String::from("# Wrenhollow Ridge: four steps of 50 ms\n");
    for c in CENTRES {
        text.push_str(&format!("{}M 50ms\n", c / 1e6));
    }
    std::fs::write(&path, text).unwrap();
    path
}

fn run(args: &[&str]) -> Output {
    Command::new(BIN).args(args).output().unwrap()
}

/// `COMMAND DATA --rate 1M --fft FFT --hop-plan PLAN EXTRA…`: the sweep as the tests read it.
fn on_sweep(command: &str, data: &str, plan: &str, extra: &[&str]) -> Output {
    let mut all = vec![command, data, "--rate", "1M", "--fft", FFT, "--hop-plan", plan];
    all.extend_from_slice(extra);
    run(&all)
}

fn measure(args: &[&str]) -> Value {
    let mut all = vec!["measure", "--json", "--fft", FFT];
    all.extend_from_slice(args);
    let out = run(&all);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    serde_json::from_slice(&out.stdout).unwrap()
}

/// Every tone is found within one bin (1 kHz) of its frequency and 0.5 dB of its power, and
/// nothing stronger than the weakest tone is found elsewhere.
fn assert_tones(report: &Value, what: &str) {
    common::assert_tones(report, &TONES, 1e3, what);
}

#[test]
fn a_four_step_sweep_is_one_panorama_with_every_tone_right() {
    let (_dir, data, plan) = sweep_files("hop", 2);
    let v = measure(&[&data, "--rate", "1M", "--hop-plan", &plan, "--settle", "2ms"]);
    assert_tones(&v, "--hop-plan");
    // The panorama spans the four steps' usable bands: 445.6 .. 448.8 MHz (3200 bins of 1 kHz),
    // centred at 447.2 MHz; the sample rate stays the receiver's.
    assert_eq!(v["panorama_span_hz"].as_f64(), Some(3.2e6), "{v}");
    assert_eq!(v["center_hz"].as_f64(), Some(447.2e6), "{v}");
    assert_eq!(v["sample_rate_hz"].as_f64(), Some(1e6), "{v}");
    let rbw = v["rbw_hz"].as_f64().unwrap();
    assert!((rbw - 1.5e3).abs() < 1.0, "RBW stays the step's (Hann, 1.5 bins): {rbw}");
    let peaks = v["peaks"].as_array().unwrap();
    assert!(
        peaks.iter().all(|p| (p["freq_hz"].as_f64().unwrap() - SPUR_HZ).abs() > 2e3),
        "the spur in the settling time was measured: {peaks:?}"
    );
    // Without --settle the spur is in view: the same check can fail.
    let v = measure(&[&data, "--rate", "1M", "--hop-plan", &plan]);
    let peaks = v["peaks"].as_array().unwrap();
    assert!(peaks.iter().any(|p| (p["freq_hz"].as_f64().unwrap() - SPUR_HZ).abs() <= 1e3));
}

#[test]
fn a_sigmf_recording_with_one_capture_per_dwell_is_one_panorama() {
    let dir = Scratch::new("sigmf");
    std::fs::write(dir.file("sweep.sigmf-data"), capture(2)).unwrap();
    let captures: Vec<Value> = (0..8)
        .map(|k| json!({"core:sample_start": k * DWELL, "core:frequency": CENTRES[k % 4]}))
        .collect();
    let meta = json!({
        "global": {"core:datatype": "cf32_le", "core:sample_rate": FS, "core:version": "1.0.0"},
        "captures": captures,
        "annotations": []
    });
    std::fs::write(dir.file("sweep.sigmf-meta"), meta.to_string()).unwrap();
    let v = measure(&[&dir.file("sweep.sigmf-meta"), "--settle", "2ms"]);
    assert_tones(&v, "SigMF captures");
}

#[test]
fn a_sweep_refuses_what_it_cannot_give_and_a_hole_is_allowed() {
    let (dir, data, plan) = sweep_files("bad", 1);
    // A tone calibration needs one tuning: refused, saying why and what to do.
    let cal = dir.file("cal.toml");
    let o = on_sweep("calibrate", &data, &plan, &["--tone", "446.39M:-50dBm", "-o", &cal]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        !o.status.success() && err.contains("one tuning") && err.contains("--segment"),
        "{err}"
    );
    // A census capture would cut IQ from whatever dwell the receiver was in: refused.
    let o = on_sweep("census", &data, &plan, &["--capture", &dir.file("caps")]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(!o.status.success() && err.contains("--capture") && err.contains("sweep"), "{err}");
    // At 60 % usable the steps (800 kHz apart, 600 kHz kept) leave holes: measured all the
    // same, the floor read over the bins in view only (the holes' empty bins left out).
    let o = on_sweep("measure", &data, &plan, &["--usable", "0.6", "--json"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_floor(&v, "--usable 0.6");
    // A plan over a span too wide for the grid at this bin width: refused, saying what to do.
    std::fs::write(&plan, "446M 50ms\n40G 50ms\n").unwrap();
    let o = run(&["measure", &data, "--rate", "1M", "--fft", FFT, "--hop-plan", &plan]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(!o.status.success() && err.contains("grid bins") && err.contains("--fft"), "{err}");
    // A bad hop plan names its line.
    std::fs::write(&plan, "446M 50ms\n446.8M fifty\n").unwrap();
    let o = run(&["measure", &data, "--rate", "1M", "--hop-plan", &plan]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(!o.status.success() && err.contains("line 2") && err.contains("dwell"), "{err}");
}

/// The dwells' white noise, 1e-7 FS² over 1 MHz, is 1e-13 FS²/Hz: −130 dBFS/Hz, read within
/// 0.5 dB over the bins in view (a hole's empty bins would pull an FCME start to nothing).
fn assert_floor(v: &Value, what: &str) {
    let floor = v["noise_floor_dbfs_per_hz"].as_f64().unwrap();
    assert!((floor + 130.0).abs() < 0.5, "{what}: floor {floor} dBFS/Hz, truth -130: {v}");
}

/// Three steps over two separate sub-bands: 446.0 and 446.8 MHz tile 445.6 .. 447.2 MHz, then
/// a hole to 448.0 MHz, then 448.4 MHz sees 448.0 .. 448.8 MHz.
const HOLED: [f64; 3] = [446.0e6, 446.8e6, 448.4e6];

/// `sweeps` sweeps of [`HOLED`] with the [`TONES`] each step sees: folder, capture, hop plan.
fn holed_files(name: &str, sweeps: usize) -> (Scratch, String, String) {
    let dir = Scratch::new(name);
    let mut bytes = Vec::new();
    for s in 0..sweeps {
        for (k, &c) in HOLED.iter().enumerate() {
            SampleFormat::Cf32Le.encode(&dwell(c, (s * 3 + k) as u64 + 1), &mut bytes);
        }
    }
    let data = dir.file("holed.cf32");
    std::fs::write(&data, bytes).unwrap();
    let plan = dir.file("holed.txt");
    let text: String = HOLED.iter().map(|c| format!("{}M 50ms\n", c / 1e6)).collect();
    std::fs::write(&plan, format!("# Wrenhollow Ridge: two sub-bands\n{text}")).unwrap();
    (dir, data, plan)
}

#[test]
fn a_sweep_with_a_hole_reads_its_tones_and_logs_unseen_channels_not_measured() {
    let (dir, data, plan) = holed_files("holed", 4);
    // The tones in view (446.39 MHz in step 0, 448.7 MHz in step 2) read within one bin and
    // 0.5 dB (Parseval: A² for a stated level); 447.2035 MHz lies in the hole: not found, and
    // the hole's empty bins neither pull the floor down nor make peaks.
    let o = on_sweep("measure", &data, &plan, &["--settle", "2ms", "--json"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: Value = serde_json::from_slice(&o.stdout).unwrap();
    common::assert_tones(&v, &[TONES[0], TONES[2]], 1e3, "a plan with a hole");
    assert_floor(&v, "a plan with a hole");
    let channels = [
        "--channel",
        "gate=446.39M:12.5k",
        "--channel",
        "hole=447.6M:12.5k",
        "--channel",
        "far=449.5M:12.5k",
        "--channel",
        "edge=447.2M:12.5k",
        "--interval",
        "1s",
        "--settle",
        "2ms",
    ];
    // `measure` with the same channels: the unseen ones not measured (no level, no 0 %).
    let o = on_sweep(
        "measure",
        &data,
        &plan,
        &[&channels[..8], &["--settle", "2ms", "--json"]].concat(),
    );
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: Value = serde_json::from_slice(&o.stdout).unwrap();
    for c in v["channels"].as_array().unwrap() {
        let seen = c["name"] == "gate";
        assert_eq!(c["occupancy_pct"].as_f64(), seen.then_some(100.0), "{c}");
        assert_eq!(c["power_dbfs"].is_null(), !seen, "{c}");
    }
    let out = on_sweep("log", &data, &plan, &channels);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let lines: Vec<Value> = String::from_utf8_lossy(&out.stdout)
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    // The start record names the hole: 447.1995 .. 447.9995 MHz (outer bin edges).
    assert_eq!(lines[0]["panorama"]["holes_hz"], json!([[447.1995e6, 447.9995e6]]), "{}", lines[0]);
    let of = |kind: &str, name: &str| -> Vec<Value> {
        lines.iter().filter(|v| v["kind"] == kind && v["channel"] == name).cloned().collect()
    };
    // In a hole (447.6 MHz), beyond the span (449.5 MHz) and partly in view (447.2 MHz, half
    // over the hole): never idle, never busy: "not measured" in every interval, no emission.
    for name in ["hole", "far", "edge"] {
        let intervals = of("interval", name);
        assert!(!intervals.is_empty(), "{name}: {lines:?}");
        for r in &intervals {
            assert_eq!(r["state"], "not_measured", "{r}");
            assert!(r["occupancy_pct"].is_null() && r["mean_dbfs"].is_null(), "{r}");
            assert_eq!(r["observation_s"].as_f64(), Some(0.0), "{r}");
            assert_eq!(r["samples"].as_u64(), Some(0), "nothing of it measured: {r}");
        }
        assert!(of("emission", name).is_empty(), "{name}");
    }
    // ITU-R Report SM.2256 (from memory): observation time, the time on the channel. The gate
    // lies inside step 0: 48 ms a sweep (50 ms less 2 ms settling) × 4 sweeps, revisited every
    // 150 ms (one sweep of three 50 ms steps).
    let gate = of("interval", "gate");
    assert_eq!(gate.len(), 1, "{gate:?}");
    assert_eq!(gate[0]["state"], "measured", "{}", gate[0]);
    assert_eq!(gate[0]["occupancy_pct"].as_f64(), Some(100.0), "{}", gate[0]);
    assert!((gate[0]["observation_s"].as_f64().unwrap() - 0.192).abs() < 1e-9, "{}", gate[0]);
    assert_eq!(gate[0]["revisit_s"].as_f64(), Some(0.15), "{}", gate[0]);
    // `report`, from the JSON log and from the CSV one: the unseen rows say not measured (no
    // 0 %), and a channel's observed time is its observation time (sum of observation_s),
    // so that occupancy is busy over observed.
    let log = dir.file("holed.jsonl");
    std::fs::write(&log, &out.stdout).unwrap();
    let out = on_sweep("log", &data, &plan, &[&channels[..], &["--csv"]].concat());
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let csv = dir.file("holed.csv");
    std::fs::write(&csv, &out.stdout).unwrap();
    assert!(String::from_utf8_lossy(&out.stdout).contains("not_measured"));
    for file in [&log, &csv] {
        let report = run(&["report", file]);
        let text = String::from_utf8_lossy(&report.stdout);
        assert!(report.status.success(), "{}", String::from_utf8_lossy(&report.stderr));
        for name in ["hole", "far", "edge"] {
            let row =
                text.lines().find(|l| l.starts_with(name)).unwrap_or_else(|| panic!("{text}"));
            assert!(row.contains("not measured") && !row.contains(" 0.00 "), "{row}");
        }
        let report = run(&["report", file, "--json"]);
        assert!(report.status.success(), "{}", String::from_utf8_lossy(&report.stderr));
        let v: Value = serde_json::from_slice(&report.stdout).unwrap();
        let ch = |name: &str| {
            v["channels"].as_array().unwrap().iter().find(|c| c["name"] == name).unwrap().clone()
        };
        let g = ch("gate");
        assert!((g["observed_s"].as_f64().unwrap() - 0.192).abs() < 1e-6, "{g}");
        assert_eq!(g["occupancy_pct"].as_f64(), Some(100.0), "{g}");
        let h = ch("hole");
        assert!(h["occupancy_pct"].is_null() && h["not_measured_s"].as_f64() > Some(0.0), "{h}");
        assert_eq!(h["lost_s"].as_f64(), Some(0.0), "not measured is not lost: {h}");
    }
    // Stored in a database, the distinction stays: `report --db` gives the same channels (the
    // unseen ones not measured, the gate's observed time its observation time).
    let db = format!("sqlite:{}", dir.file("holed.db"));
    let o = run(&["import", "--db", &db, &log]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let from_db = run(&["report", "--json", "--db", &db]);
    let from_log = run(&["report", "--json", &log]);
    let (a, b): (Value, Value) = (
        serde_json::from_slice(&from_db.stdout).unwrap(),
        serde_json::from_slice(&from_log.stdout).unwrap(),
    );
    assert_eq!(a["channels"], b["channels"]);
    let text = String::from_utf8_lossy(&run(&["report", "--db", &db]).stdout).to_string();
    let row = text.lines().find(|l| l.starts_with("hole")).unwrap_or_else(|| panic!("{text}"));
    assert!(row.contains("not measured"), "{row}");
    // The snapshot draws the hole as a gap (its own grey), the census finds nothing in it.
    let svg = dir.file("holed.svg");
    let o = on_sweep("snapshot", &data, &plan, &["--settle", "2ms", "-o", &svg]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = std::fs::read_to_string(&svg).unwrap();
    assert!(text.contains("never in view, 447.199500 MHz .. 447.999500 MHz"), "{text}");
    let out = on_sweep("census", &data, &plan, &["--settle", "2ms", "--json", "--no-kinds"]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    for e in v["emitters"].as_array().unwrap() {
        let f = e["center_hz"].as_f64().unwrap();
        assert!(!(447.2e6..448.0e6).contains(&f), "an emitter in the hole: {e}");
    }
}

#[test]
fn log_follows_a_channel_across_the_panorama() {
    // A channel around the tone at 447.2035 MHz, which lies across a step boundary: on the air
    // in every sweep, so 100 % occupied; one at 448.2 MHz holds noise only: 0 %.
    let (dir, data, plan) = sweep_files("log", 4);
    let out = on_sweep(
        "log",
        &data,
        &plan,
        &[
            "--settle",
            "2ms",
            "--channel",
            "relay=447.2035M:12.5k",
            "--channel",
            "quiet=448.2M:12.5k",
            "--interval",
            "1s",
        ],
    );
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let lines: Vec<Value> = String::from_utf8_lossy(&out.stdout)
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    let interval = |name: &str| {
        lines
            .iter()
            .find(|v| v["kind"] == "interval" && v["channel"] == name)
            .unwrap_or_else(|| panic!("no interval of {name} in {lines:?}"))
            .clone()
    };
    // The start record describes the sweep: span, centres, dwells, settling, usable share.
    let start = &lines[0];
    let pano = &start["panorama"];
    assert_eq!(pano["span_low_hz"].as_f64(), Some(445.5995e6), "{start}");
    assert_eq!(pano["span_high_hz"].as_f64(), Some(448.7995e6), "{start}");
    let centres: Vec<f64> =
        pano["step_centers_hz"].as_array().unwrap().iter().map(|c| c.as_f64().unwrap()).collect();
    assert_eq!(centres, CENTRES, "{start}");
    assert_eq!(pano["dwell_s"], json!([0.05, 0.05, 0.05, 0.05]), "{start}");
    assert_eq!(pano["settle_s"].as_f64(), Some(0.002), "{start}");
    assert_eq!(pano["usable"].as_f64(), Some(0.8), "{start}");
    assert_eq!(pano["timeline"], "hop_plan", "{start}");
    assert!(pano.get("holes_hz").is_none(), "the steps tile the span: {start}");
    // Where the receiver began: the plan's first centre (the raw stream gave no --center).
    assert_eq!(start["center_hz"].as_f64(), Some(CENTRES[0]), "{start}");
    // `report` says the run was a sweep, and of what.
    let log = dir.file("sweep.jsonl");
    std::fs::write(&log, &out.stdout).unwrap();
    let report = run(&["report", &log]);
    let text = String::from_utf8_lossy(&report.stdout);
    assert!(report.status.success(), "{}", String::from_utf8_lossy(&report.stderr));
    assert!(text.contains("a sweep of 445.5995 .. 448.7995 MHz in 4 steps of 50 ms"), "{text}");
    let (relay, quiet) = (interval("relay"), interval("quiet"));
    assert_eq!(relay["occupancy_pct"].as_f64(), Some(100.0), "{relay}");
    assert_eq!(quiet["occupancy_pct"].as_f64(), Some(0.0), "{quiet}");
    // One measurement sample per sweep: 4 sweeps of 200 ms.
    assert_eq!(relay["samples"].as_u64(), Some(4), "{relay}");
    // ITU-R Report SM.2256 (from memory): observation time, the time on the channel; revisit
    // time, from one visit to the next. The quiet channel lies inside the last step only: 48 ms
    // a sweep (50 ms less 2 ms settling) × 4 sweeps, revisited every 200 ms. The relay straddles
    // the boundary of steps 1 and 2: each part is in view in its own dwell, so every bin of it
    // is seen 48 ms a sweep, once a sweep (its least observed bin's times).
    for ch in [&quiet, &relay] {
        assert!((ch["observation_s"].as_f64().unwrap() - 0.192).abs() < 1e-9, "{ch}");
        assert_eq!(ch["revisit_s"].as_f64(), Some(0.2), "{ch}");
    }
}

#[test]
fn a_snapshot_of_a_panorama_names_the_sweep_not_the_grid_as_an_fft() {
    let (dir, data, plan) = sweep_files("snapshot", 2);
    let svg = dir.file("sweep.svg");
    let o = on_sweep("snapshot", &data, &plan, &["--settle", "2ms", "-o", &svg]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = std::fs::read_to_string(&svg).unwrap();
    // The step's FFT (1000 at 1 MS/s), the grid (3200 bins of 1 kHz) and its span (3.2 MHz).
    assert!(text.contains("FFT 1000 a step"), "{text}");
    assert!(text.contains("3200 grid bins"), "{text}");
    assert!(text.contains("4 steps"), "{text}");
    assert!(!text.contains("FFT 3200"), "the grid size is no FFT size: {text}");
    // Frames a sweep: a 50 ms dwell less 2 ms settling is 48 000 samples, which hold
    // ⌊(48 000 − 1000) / 500⌋ + 1 = 95 frames of 1000 at the default hop of 500 (50 % overlap).
    assert!(text.contains("95 FFT frames a sweep"), "{text}");
    assert!(!text.contains("1 FFT frame "), "{text}");
}

/// A tone keyed on for the first two of four sweeps only, inside step 0's usable band.
const KEYED: (f64, f64) = (446.2e6, -35.0);

/// `capture(4)` plus [`KEYED`]: on the air in the dwells of sweeps 0 and 1 that see it.
fn census_capture() -> Vec<u8> {
    let mut bytes = Vec::new();
    for s in 0..4 {
        for (k, &c) in CENTRES.iter().enumerate() {
            let mut x = dwell(c, (s * 4 + k) as u64 + 1);
            if s < 2 && (KEYED.0 - c).abs() < FS / 2.0 {
                let tone = Keyed::steady(KEYED.0 - c, KEYED.1);
                let t = keyed_band(DWELL, FS, 0.0, &[tone], 99);
                x.iter_mut().zip(&t).for_each(|(a, b)| *a += b);
            }
            SampleFormat::Cf32Le.encode(&x, &mut bytes);
        }
    }
    bytes
}

#[test]
fn census_of_a_sweep_counts_airtime_over_the_time_in_view() {
    let dir = Scratch::new("census");
    let data = dir.file("sweep.cf32");
    std::fs::write(&data, census_capture()).unwrap();
    let plan = hop_plan(&dir);
    let plan_out = dir.file("found.toml");
    let out =
        on_sweep("census", &data, &plan, &["--settle", "2ms", "--json", "--plan-out", &plan_out]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    // The sweep is said: 445.6 .. 448.8 MHz in four steps, revisited every 200 ms.
    let sweep = &v["sweep"];
    assert_eq!(sweep["span_hz"], json!([445.5995e6, 448.7995e6]), "{v}");
    assert_eq!((sweep["steps"].as_u64(), sweep["revisit_s"].as_f64()), (Some(4), Some(0.2)));
    assert_eq!(v["fft_size"].as_u64(), Some(1000), "one step's FFT: {v}");
    let emitters = v["emitters"].as_array().unwrap();
    let find = |f: f64| {
        let found: Vec<&Value> = emitters
            .iter()
            .filter(|e| (e["center_hz"].as_f64().unwrap() - f).abs() <= 1e3)
            .collect();
        assert_eq!(found.len(), 1, "one emitter at {f} Hz (one bin): {emitters:?}");
        found[0].clone()
    };
    // Every tone is one row at its frequency and power (Parseval: A² for a stated level), the
    // one across the step 1/2 boundary included.
    for (f, l) in TONES.into_iter().chain([KEYED]) {
        let e = find(f);
        let p = e["power_dbfs"].as_f64().unwrap();
        assert!((p - l).abs() < 0.5, "{f} Hz reads {p} dBFS, truth {l}: {e}");
    }
    // A tone inside one step is in view 48 ms a sweep (50 ms dwell less 2 ms settling), four
    // sweeps: 0.192 s observed. The steady tones are on all of it; the keyed one half of it,
    // though the receiver was away from it three quarters of every sweep.
    for (f, on_s, pct) in [(TONES[2].0, 0.192, 100.0), (KEYED.0, 0.096, 50.0)] {
        let e = find(f);
        let obs = e["observation_s"].as_f64().unwrap();
        assert!((obs - 0.192).abs() < 1e-9, "{f} Hz observed {obs} s: {e}");
        let on = e["airtime_s"].as_f64().unwrap();
        assert!((on - on_s).abs() < 0.005, "{f} Hz on {on} s of view, truth {on_s}: {e}");
        let got = e["airtime_pct"].as_f64().unwrap();
        assert!((got - pct).abs() < 2.5, "{f} Hz duty {got} %, truth {pct}: {e}");
    }
    // Kinds need a dwell's samples: none are kept, and the reason is given.
    let e = find(TONES[0].0);
    assert_eq!(e["class"], "unknown", "{e}");
    assert!(e["class_reason"].as_str().unwrap().contains("sweep"), "{e}");
    // The plan written loads in `log` on the same input, and logs the tones as occupied.
    let out = on_sweep("log", &data, &plan, &["--settle", "2ms", "--plan", &plan_out]);
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.lines().any(|l| l.contains("\"interval\"")), "{text}");
    // The table says it was a sweep and gives each emitter's time in view.
    let out = on_sweep("census", &data, &plan, &["--settle", "2ms", "--no-kinds"]);
    let table = String::from_utf8_lossy(&out.stdout);
    assert!(
        out.status.success() && table.contains("a sweep: ") && table.contains("observed s"),
        "{table}"
    );
}
