//! What bandwarden writes as SigMF (`--record`, `--annotate`, `--capture`), checked with the
//! standard's reference implementation (the `sigmf` package on PyPI, 1.14.0) through
//! scripts/sigmf-check-output.py: every file must pass its `validate()` and its JSON schema, and
//! the samples are read back by the reference reader, not by bandwarden.
//!
//! Round trips: `measure` on a recording made with `--record` gives the same report as `measure`
//! on the stream it recorded; a capture holds the emission (a generated carrier of known level
//! and frequency, measured by the script on the samples the reference reads); annotations name
//! the emissions the log found. CI installs the package (`.ci/run`); without it these tests fail
//! with the command to install it, they never pass unchecked.

use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};

const BIN: &str = env!("CARGO_BIN_EXE_bandwarden");

fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn tmp(name: &str) -> PathBuf {
    let dir =
        std::env::temp_dir().join(format!("bandwarden-sigmf-out-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

fn python(args: &[&str]) -> Output {
    let probe = Command::new("python3").args(["-c", "import sigmf, numpy, jsonschema"]).output();
    match probe {
        Ok(o) if o.status.success() => {}
        _ => panic!("these tests need python3 with the SigMF reference implementation: pip install sigmf==1.14.0"),
    }
    let script = root().join("scripts/sigmf-check-output.py");
    Command::new("python3").arg(script).args(args).output().expect("python3 runs")
}

/// Validates files with the reference implementation; returns what it read of each.
fn validate(files: &[&Path]) -> Vec<Value> {
    let mut args = vec!["validate"];
    let names: Vec<String> = files.iter().map(|f| f.to_string_lossy().into_owned()).collect();
    args.extend(names.iter().map(String::as_str));
    let o = python(&args);
    assert!(o.status.success(), "the reference refuses: {}", String::from_utf8_lossy(&o.stderr));
    String::from_utf8(o.stdout).unwrap().lines().map(|l| serde_json::from_str(l).unwrap()).collect()
}

fn run(args: &[&str], stdin: Option<&Path>) -> Output {
    let mut c = Command::new(BIN);
    c.args(args);
    if let Some(f) = stdin {
        c.stdin(Stdio::from(std::fs::File::open(f).unwrap()));
    }
    let o = c.output().expect("the binary runs");
    assert!(o.status.success(), "{args:?}: {}", String::from_utf8_lossy(&o.stderr));
    o
}

/// Writes `seconds` of the demo scene at 1 MS/s in `format` to `out` (extra flags in `more`).
fn demo(out: &Path, seconds: &str, format: &str, more: &[&str]) {
    let mut args = vec!["demo", "--rate", "1M", "--seconds", seconds, "--format", format];
    args.extend(more);
    args.extend(["-o", out.to_str().unwrap()]);
    run(&args, None);
}

/// The capture `meta` holds the generated −30 dBFS carrier at 100.02 MHz, as the script
/// measures it on the samples the reference reads: frequency to a tenth of a bin of the 0.4 s
/// analysed (0.25 Hz), level to 0.1 dB (noise in the fit: −40 dBFS spread over 80 000 samples is
/// −89 dBFS, far below).
fn assert_holds_carrier(meta: &Path) {
    let o = python(&["tone", meta.to_str().unwrap()]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let tone: Value = serde_json::from_slice(&o.stdout).unwrap();
    let (f, l) = (tone["freq_hz"].as_f64().unwrap(), tone["level_dbfs"].as_f64().unwrap());
    assert!((f - 100.02e6).abs() < 1.0, "{tone}");
    assert!((l + 30.0).abs() < 0.1, "{tone}");
}

/// On from 0.5 s to 1.0 s and from 2.0 s to 2.5 s: the keying of the generated test carriers.
fn keyed_twice(i: u64, fs: f64) -> bool {
    let t = i as f64 / fs;
    (0.5..1.0).contains(&t) || (2.0..2.5).contains(&t)
}

/// Writes samples as raw cf32_le.
fn write_cf32(path: &Path, x: &[num_complex::Complex32]) {
    let bytes: Vec<u8> =
        x.iter().flat_map(|s| [s.re.to_le_bytes(), s.im.to_le_bytes()]).flatten().collect();
    std::fs::write(path, bytes).unwrap();
}

fn records(log: &Path) -> Vec<Value> {
    std::fs::read_to_string(log)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect()
}

fn plan() -> String {
    root().join("recordings/wrenhollow-plan.toml").to_string_lossy().into_owned()
}

/// The demo scene (2 s, cu8) as a raw file, piped through `log` on standard input with
/// `--record`: the recording holds the input's bytes exactly, validates, and `measure` reads the
/// same from it as from the original.
#[test]
fn a_recording_of_standard_input_measures_like_the_original() {
    let dir = tmp("record");
    let orig = dir.join("scene.cu8");
    let rec = dir.join("rec.sigmf-meta");
    demo(&orig, "2", "cu8", &[]);
    let log = dir.join("log.jsonl");
    let args = [
        "log",
        "-",
        "--format",
        "cu8",
        "--rate",
        "1M",
        "--center",
        "433.5M",
        "--no-drop",
        "--plan",
        &plan(),
        "--record",
        rec.to_str().unwrap(),
        "-o",
        log.to_str().unwrap(),
    ];
    run(&args, Some(&orig));
    let read = validate(&[&rec]);
    assert_eq!(read[0]["samples"], 2_000_000);
    assert_eq!(read[0]["global"]["core:datatype"], "cu8");
    assert_eq!(read[0]["captures"][0]["core:frequency"], 433.5e6);
    // The log's own start time (wall clock for live input) is the recording's.
    let start = records(&log)[0]["start"].as_str().unwrap().to_string();
    let dt = read[0]["captures"][0]["core:datetime"].as_str().unwrap();
    assert_eq!(&dt[..23], &start[..23], "{dt} vs {start}");
    assert_eq!(
        std::fs::read(&orig).unwrap(),
        std::fs::read(dir.join("rec.sigmf-data")).unwrap(),
        "cu8 re-encoded gives back the input's bytes"
    );
    let measure = |extra: &[&str]| -> Value {
        let mut a = vec!["measure", "--json"];
        a.extend_from_slice(extra);
        serde_json::from_slice(&run(&a, None).stdout).unwrap()
    };
    let mut a =
        measure(&[orig.to_str().unwrap(), "--format", "cu8", "--rate", "1M", "--center", "433.5M"]);
    let mut b = measure(&[rec.to_str().unwrap()]);
    for r in [&mut a, &mut b] {
        r.as_object_mut().unwrap().remove("source");
    }
    assert_eq!(a, b, "measure on the recording differs from measure on the original");
}

/// `log --annotate` on a demo recording: the new file points at the recording's dataset, keeps
/// its annotations (the scene's truth), adds one per emission the log reported, and validates.
#[test]
fn annotations_name_the_emissions_the_log_found() {
    let dir = tmp("annotate");
    let scene = dir.join("scene.sigmf-meta");
    demo(&scene, "3", "ci16_le", &["--start", "2026-05-01T08:00:00Z"]);
    let truth = validate(&[&scene])[0]["annotations"].as_array().unwrap().len();
    let found = dir.join("found.sigmf-meta");
    let log = dir.join("log.jsonl");
    run(
        &[
            "log",
            scene.to_str().unwrap(),
            "--plan",
            &plan(),
            "--annotate",
            found.to_str().unwrap(),
            "-o",
            log.to_str().unwrap(),
        ],
        None,
    );
    let read = &validate(&[&found])[0];
    assert_eq!(read["global"]["core:dataset"], "scene.sigmf-data");
    assert_eq!(read["global"]["core:extensions"][0]["name"], "bandwarden");
    let anns = read["annotations"].as_array().unwrap();
    let ours: Vec<&Value> = anns.iter().filter(|a| a.get("bandwarden:partial").is_some()).collect();
    assert_eq!(anns.len() - ours.len(), truth, "the input's own annotations are kept");
    let emissions: Vec<Value> =
        records(&log).into_iter().filter(|r| r["kind"] == "emission").collect();
    assert_eq!(ours.len(), emissions.len());
    let rate = 1e6;
    for e in &emissions {
        let start = (e["t_start_s"].as_f64().unwrap() * rate).round() as u64;
        let a = ours
            .iter()
            .find(|a| a["core:sample_start"] == start && a["core:label"] == e["channel"])
            .unwrap_or_else(|| panic!("no annotation for {e}"));
        let count = a["core:sample_count"].as_f64().unwrap();
        assert!((count / rate - e["duration_s"].as_f64().unwrap()).abs() < 1e-6, "{a} {e}");
        // The occupied band lies in the channel.
        let (lo, hi) = (
            a["core:freq_lower_edge"].as_f64().unwrap(),
            a["core:freq_upper_edge"].as_f64().unwrap(),
        );
        let c = a["bandwarden:channel_center_hz"].as_f64().unwrap();
        assert!(lo < hi && lo >= c - 125e3 && hi <= c + 125e3, "{a}");
        assert_eq!(
            a["bandwarden:mean_dbfs"].as_f64().unwrap(),
            e["mean_dbfs"].as_f64().unwrap(),
            "{a} {e}"
        );
    }
}

/// Standard input has no dataset: `--annotate` needs `--record`, and then points at it.
#[test]
fn annotations_of_standard_input_point_at_the_recording() {
    let dir = tmp("stdin-annotate");
    let orig = dir.join("scene.cf32");
    demo(&orig, "2", "cf32_le", &[]);
    let base = [
        "log",
        "-",
        "--format",
        "cf32_le",
        "--rate",
        "1M",
        "--center",
        "433.5M",
        "--no-drop",
        "--plan",
    ];
    let notes = dir.join("notes.sigmf-meta");
    let mut args: Vec<String> = base.iter().map(|s| s.to_string()).collect();
    args.extend([
        plan(),
        "--annotate".into(),
        notes.to_string_lossy().into(),
        "-o".into(),
        "/dev/null".into(),
    ]);
    let o = Command::new(BIN).args(&args).stdin(Stdio::null()).output().unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(!o.status.success() && err.contains("--record"), "{err}");
    let rec = dir.join("rec.sigmf-meta");
    args.extend(["--record".into(), rec.to_string_lossy().into()]);
    let a: Vec<&str> = args.iter().map(String::as_str).collect();
    run(&a, Some(&orig));
    let read = validate(&[&rec, &notes]);
    assert_eq!(read[1]["global"]["core:dataset"], "rec.sigmf-data");
    assert!(!read[1]["annotations"].as_array().unwrap().is_empty());
}

/// A generated carrier (−30 dBFS, 20 kHz above 100 MHz, keyed on for 0.5 s twice, in −40 dBFS
/// noise over 200 kHz: the truth is the generator's): each capture validates and holds it at
/// its level and frequency, as the reference implementation reads the samples.
#[test]
fn captures_hold_the_emission() {
    let dir = tmp("capture");
    let fs = 200e3;
    let on = |i: u64| keyed_twice(i, fs);
    let carrier = bandwarden::testkit::Keyed { offset_hz: 20e3, level_dbfs: -30.0, on: &on };
    let x = bandwarden::testkit::keyed_band(3 * fs as usize, fs, 1e-4, &[carrier], 5);
    let raw = dir.join("burst.cf32");
    write_cf32(&raw, &x);
    let caps = dir.join("caps");
    let log = dir.join("log.jsonl");
    run(
        &[
            "log",
            raw.to_str().unwrap(),
            "--rate",
            "200k",
            "--center",
            "100M",
            "--channel",
            "link=100.02M:10k",
            "--capture",
            caps.to_str().unwrap(),
            "--pre",
            "0.2",
            "--post",
            "0.1",
            "-o",
            log.to_str().unwrap(),
        ],
        None,
    );
    let saved: Vec<Value> = records(&log).into_iter().filter(|r| r["kind"] == "capture").collect();
    assert_eq!(saved.len(), 2, "{saved:?}");
    for (c, t0) in saved.iter().zip([0.5, 2.0]) {
        assert_eq!(c["status"], "saved");
        let meta = PathBuf::from(c["file"].as_str().unwrap());
        let read = &validate(&[&meta])[0];
        assert_eq!(read["global"]["core:datatype"], "cf32_le");
        // From --pre before the start (within a row of 12.8 ms, see the occupancy docs).
        assert!((c["t_start_s"].as_f64().unwrap() - (t0 - 0.2)).abs() < 0.013, "{c}");
        assert_holds_carrier(&meta);
    }
}

/// `census` writes the same SigMF as `log`, without a plan: a generated carrier keyed twice
/// (−30 dBFS, 20 kHz above 100 MHz, on 0.5–1.0 s and 2.0–2.5 s) and a steady one (−45 dBFS,
/// 40 kHz below) in −40 dBFS noise over 200 kHz (the truth is the generator's). The annotations
/// validate, are labelled with the emitters the census names, and sit where the generator keyed;
/// each capture of the keyed carrier holds it at its level and frequency as the reference
/// implementation reads the samples; `--record` of standard input holds every sample.
#[test]
fn census_annotates_and_captures_what_it_finds() {
    let dir = tmp("census");
    let fs = 200e3;
    let keyed = |i: u64| keyed_twice(i, fs);
    let steady = |_: u64| true;
    let carriers = [
        bandwarden::testkit::Keyed { offset_hz: 20e3, level_dbfs: -30.0, on: &keyed },
        bandwarden::testkit::Keyed { offset_hz: -40e3, level_dbfs: -45.0, on: &steady },
    ];
    let x = bandwarden::testkit::keyed_band(3 * fs as usize, fs, 1e-4, &carriers, 7);
    let raw = dir.join("two.cf32");
    write_cf32(&raw, &x);
    let (found, caps, rec) =
        (dir.join("found.sigmf-meta"), dir.join("caps"), dir.join("rec.sigmf-meta"));
    let o = run(
        &[
            "census",
            "-",
            "--format",
            "cf32_le",
            "--rate",
            "200k",
            "--center",
            "100M",
            "--record",
            rec.to_str().unwrap(),
            "--annotate",
            found.to_str().unwrap(),
            "--capture",
            caps.to_str().unwrap(),
            "--pre",
            "0.2",
            "--post",
            "0.1",
            "--capture-max-seconds",
            "2",
            "--json",
            // Every sample recorded and captured however loaded the machine: the test checks
            // the files against the input, not what a busy machine can keep up with.
            "--no-drop",
        ],
        Some(&raw),
    );
    let census: Value = serde_json::from_slice(&o.stdout).unwrap();
    let emitters = census["emitters"].as_array().unwrap();
    let burst = emitters
        .iter()
        .find(|e| (e["center_hz"].as_f64().unwrap() - 100.02e6).abs() < 500.0)
        .unwrap_or_else(|| panic!("the keyed carrier is missing: {census}"));
    let name = burst["name"].as_str().unwrap();

    // The recording of standard input holds every sample (the reference reads them).
    let read = validate(&[&rec, &found]);
    assert_eq!(read[0]["samples"], 3 * fs as u64);
    assert_eq!(read[1]["global"]["core:dataset"], "rec.sigmf-data");
    let anns = read[1]["annotations"].as_array().unwrap();
    let mine: Vec<&Value> = anns.iter().filter(|a| a["core:label"] == name).collect();
    assert_eq!(mine.len(), 2, "{anns:?}");
    for (a, (t0, t1)) in mine.iter().zip([(0.5, 1.0), (2.0, 2.5)]) {
        let start = a["core:sample_start"].as_f64().unwrap() / fs;
        let end = start + a["core:sample_count"].as_f64().unwrap() / fs;
        // Timing to a few FFT hops (the census places edges inside rows, see its docs).
        assert!((start - t0).abs() < 0.005 && (end - t1).abs() < 0.005, "{a}");
        let (lo, hi) = (
            a["core:freq_lower_edge"].as_f64().unwrap(),
            a["core:freq_upper_edge"].as_f64().unwrap(),
        );
        assert!(lo < 100.02e6 && hi > 100.02e6 && hi - lo < 2e3, "{a}");
        // Mean power with the noise taken off: the carrier's level, to 0.2 dB.
        assert!((a["bandwarden:mean_dbfs"].as_f64().unwrap() + 30.0).abs() < 0.2, "{a}");
        assert!(a["bandwarden:snr_db"].as_f64().unwrap() > 20.0, "{a}");
    }

    // One capture per burst, from --pre before it; each holds the carrier.
    let list = census["captures"].as_array().unwrap();
    let bursts: Vec<&Value> = list
        .iter()
        .filter(|c| c["t_start_s"].as_f64().unwrap() > 0.1 && c["status"] == "saved")
        .collect();
    assert_eq!(bursts.len(), 2, "{list:?}");
    for (c, t0) in bursts.iter().zip([0.5, 2.0]) {
        // At least --pre before the start; the census announces an emission as early as it can
        // lie (a row before the row that found it), so up to two rows (of 10 ms) more.
        let pre = t0 - c["t_start_s"].as_f64().unwrap();
        assert!((0.2..0.2 + 0.021).contains(&pre), "{c}");
        let meta = PathBuf::from(c["file"].as_str().unwrap());
        validate(&[&meta]);
        // (The steady carrier at −45 dBFS lies 60 kHz away, far outside the fit's bin.)
        assert_holds_carrier(&meta);
    }
}
