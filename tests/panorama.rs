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
fn a_plan_channel_beyond_the_panorama_is_refused_and_a_hole_is_named() {
    let (_dir, data, plan) = sweep_files("bad", 1);
    // 449.5 MHz is never in view: refused, never reported idle.
    let o = on_sweep("measure", &data, &plan, &["--channel", "far=449.5M:12.5k"]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(!o.status.success() && err.contains("outside the captured span"), "{err}");
    // At 60 % usable the steps (800 kHz apart, 600 kHz kept) leave holes.
    let o = on_sweep("measure", &data, &plan, &["--usable", "0.6"]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        !o.status.success() && err.contains("never in view") && err.contains("--usable"),
        "{err}"
    );
    // A bad hop plan names its line.
    std::fs::write(&plan, "446M 50ms\n446.8M fifty\n").unwrap();
    let o = run(&["measure", &data, "--rate", "1M", "--hop-plan", &plan]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(!o.status.success() && err.contains("line 2") && err.contains("dwell"), "{err}");
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
