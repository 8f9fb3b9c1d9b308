//! bandwarden against the SigMF reference implementation (the `sigmf` package on PyPI; see
//! scripts/sigmf-reference.py for the version it was written with).
//!
//! The script writes recordings with the reference implementation (several captures with their
//! own datetimes, different frequencies, header and trailing bytes, two channels, an archive)
//! and a manifest of what each segment holds, measured on the samples as the reference reads
//! them. bandwarden must read the same: the tone of each segment at its absolute frequency and
//! level, each segment's time stamps in a `log` run, no header byte read as a sample, the
//! chosen channel. The reference implementation also validates what `bandwarden demo` writes.
//! CI installs the package (`.ci/run`); without it these tests fail, they never pass unchecked.

use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::sync::OnceLock;

const BIN: &str = env!("CARGO_BIN_EXE_bandwarden");

fn script() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("scripts/sigmf-reference.py")
}

fn python(args: &[&str]) -> Output {
    let probe = Command::new("python3").args(["-c", "import sigmf, numpy"]).output();
    match probe {
        Ok(o) if o.status.success() => {}
        _ => panic!(
            "these tests need python3 with the SigMF reference implementation: pip install sigmf"
        ),
    }
    Command::new("python3").arg(script()).args(args).output().expect("python3 runs")
}

/// The reference recordings, written once per test run, and their manifest.
fn manifest() -> &'static Value {
    static M: OnceLock<Value> = OnceLock::new();
    M.get_or_init(|| {
        let dir = std::env::temp_dir().join(format!("bandwarden-sigmf-ref-{}", std::process::id()));
        let o = python(&["write", dir.to_str().unwrap()]);
        assert!(
            o.status.success(),
            "the reference script failed: {}",
            String::from_utf8_lossy(&o.stderr)
        );
        serde_json::from_slice(&std::fs::read(dir.join("manifest.json")).unwrap()).unwrap()
    })
}

fn run(args: &[&str]) -> Output {
    Command::new(BIN).args(args).output().expect("the binary runs")
}

fn measure(path: &str, extra: &[&str]) -> (Value, String) {
    let mut args = vec!["measure", path, "--json", "--window", "flattop"];
    args.extend_from_slice(extra);
    let o = run(&args);
    let err = String::from_utf8_lossy(&o.stderr).into_owned();
    assert!(o.status.success(), "measure {path} {extra:?}: {err}");
    (serde_json::from_slice(&o.stdout).unwrap(), err)
}

/// The strongest peak must be the segment's tone: at its absolute frequency (within one bin of
/// the 4096-point FFT) and at the level the reference read (flat-top: ±0.1 dB scalloping, plus
/// noise far below; 0.2 dB allowed).
fn assert_tone(report: &Value, seg: &Value, what: &str) {
    let peak = &report["peaks"][0];
    let (f, l) = (peak["freq_hz"].as_f64().unwrap(), peak["level_dbfs"].as_f64().unwrap());
    let (tf, tl) = (seg["tone_hz"].as_f64().unwrap(), seg["tone_dbfs"].as_f64().unwrap());
    let bin = manifest()["rate_hz"].as_f64().unwrap() / 4096.0;
    assert!((f - tf).abs() <= bin, "{what}: peak at {f} Hz, the tone is at {tf} Hz");
    assert!((l - tl).abs() <= 0.2, "{what}: {l} dBFS, the reference reads {tl} dBFS");
    assert_eq!(report["center_hz"], seg["center_hz"], "{what}");
    assert_eq!(report["samples"], seg["samples"], "{what}");
}

fn recording(name: &str) -> (&'static str, &'static Vec<Value>) {
    let r = &manifest()["recordings"][name];
    let segs = r.get("segments").or(r.get("channels")).and_then(Value::as_array).unwrap();
    (r["path"].as_str().unwrap(), segs)
}

#[test]
fn each_segment_reads_its_own_tone() {
    for name in ["times", "freqs", "headers", "archive"] {
        let (path, segs) = recording(name);
        for seg in segs {
            let k = seg["index"].to_string();
            let (report, _) = measure(path, &["--segment", &k]);
            assert_tone(&report, seg, &format!("{name} segment {k}"));
        }
    }
}

#[test]
fn frequencies_far_apart_are_one_panorama_with_a_hole_unless_its_grid_is_too_large() {
    // 433.92 MHz and 868.3 MHz at 100 kS/s: at the 4096-point FFT's 24.4 Hz bins the span
    // between them needs 17.8 million grid bins, more than a panorama holds (2^24): refused,
    // saying how to read it (a smaller FFT, or one segment).
    let (path, segs) = recording("freqs");
    let o = run(&["measure", path]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(!o.status.success() && err.starts_with("bandwarden:"), "{err}");
    assert!(err.contains("grid bins") && err.contains("--segment"), "{err}");
    // At 256 points (390.625 Hz bins) it is one panorama of 1.1 million bins, nearly all a
    // hole never in view: each segment's tone at its absolute frequency (within one bin) and
    // the level the reference read (flat-top, 0.2 dB), as when read segment by segment.
    let (report, _) = measure(path, &["--fft", "256"]);
    let peaks = report["peaks"].as_array().unwrap();
    for seg in segs {
        let (tf, tl) = (seg["tone_hz"].as_f64().unwrap(), seg["tone_dbfs"].as_f64().unwrap());
        let bin = manifest()["rate_hz"].as_f64().unwrap() / 256.0;
        let p = peaks
            .iter()
            .find(|p| (p["freq_hz"].as_f64().unwrap() - tf).abs() <= bin)
            .unwrap_or_else(|| panic!("no peak at {tf} Hz: {peaks:?}"));
        let l = p["level_dbfs"].as_f64().unwrap();
        assert!((l - tl).abs() <= 0.2, "{l} dBFS at {tf} Hz, the reference reads {tl} dBFS");
    }
}

#[test]
fn header_and_trailing_bytes_are_not_samples() {
    // The header and trailing bytes hold float32 1e9: read as samples they would raise the total
    // power by some 180 dB and be reported as beyond full scale.
    let (path, segs) = recording("headers");
    let (report, err) = measure(path, &[]);
    assert!(!err.contains("beyond"), "{err}");
    let total: usize = segs.iter().map(|s| s["samples"].as_u64().unwrap() as usize).sum();
    assert_eq!(report["samples"].as_u64().unwrap() as usize, total);
    let power: f64 = segs
        .iter()
        .map(|s| {
            10f64.powf(s["tone_dbfs"].as_f64().unwrap() / 10.0) * s["samples"].as_f64().unwrap()
        })
        .sum::<f64>()
        / total as f64;
    let got = report["total_power_dbfs"].as_f64().unwrap();
    assert!((got - 10.0 * power.log10()).abs() < 0.1, "total {got} dBFS");
}

#[test]
fn one_channel_is_chosen_of_two() {
    let (path, chans) = recording("channels");
    let o = run(&["measure", path]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(!o.status.success() && err.contains("--input-channel"), "{err}");
    for (c, seg) in chans.iter().enumerate() {
        let (report, _) = measure(path, &["--input-channel", &c.to_string()]);
        assert_tone(&report, seg, &format!("channel {c}"));
    }
}

/// With 0.2 s intervals, one per segment, interval k starts at segment k's `core:datetime`
/// (RFC 3339), although the segments were recorded minutes apart.
#[test]
fn log_stamps_follow_each_segment() {
    let (path, segs) = recording("times");
    let o = run(&["log", path, "--channel", "all=433.92M:99k", "--interval", "200ms"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let recs: Vec<Value> = String::from_utf8(o.stdout)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    let intervals: Vec<&Value> = recs.iter().filter(|r| r["kind"] == "interval").collect();
    assert_eq!(intervals.len(), segs.len());
    let t = |v: &Value| {
        time::OffsetDateTime::parse(
            v.as_str().unwrap(),
            &time::format_description::well_known::Rfc3339,
        )
        .unwrap()
    };
    for (i, seg) in intervals.iter().zip(segs) {
        assert_eq!(t(&i["start"]), t(&seg["datetime"]), "{i}");
    }
    assert_eq!(t(&recs[0]["start"]), t(&segs[0]["datetime"]));
}

#[test]
fn the_reference_validates_what_demo_writes() {
    let dir = std::env::temp_dir().join(format!("bandwarden-sigmf-demo-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let meta = dir.join("demo.sigmf-meta");
    let o = run(&[
        "demo",
        "--seconds",
        "0.05",
        "--format",
        "ci16_le",
        "--start",
        "2026-05-01T08:00:00Z",
        "-o",
        meta.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v = python(&["validate", meta.to_str().unwrap()]);
    assert!(
        v.status.success(),
        "the reference implementation refuses demo output: {}",
        String::from_utf8_lossy(&v.stderr)
    );
}

/// Every SigMF datatype (complex and real, float and integer, 8 to 64 bits, both byte orders)
/// written by the reference implementation reads as the same tone at the same level. A real
/// recording shows its positive half (README): the cosine's line of half its amplitude, at the
/// same absolute frequency, with half the samples.
#[test]
fn every_datatype_reads_as_the_reference_reads_it() {
    let types = manifest()["datatypes"].as_object().expect("the manifest lists datatypes");
    assert_eq!(types.len(), 28, "every SigMF datatype");
    let bin = manifest()["rate_hz"].as_f64().unwrap() / 4096.0;
    for (name, t) in types {
        let (report, _) = measure(t["path"].as_str().unwrap(), &[]);
        let peak = &report["peaks"][0];
        let (f, l) = (peak["freq_hz"].as_f64().unwrap(), peak["level_dbfs"].as_f64().unwrap());
        let (tf, tl) = (t["tone_hz"].as_f64().unwrap(), t["tone_dbfs"].as_f64().unwrap());
        assert!((f - tf).abs() <= bin, "{name}: peak at {f} Hz, the tone is at {tf} Hz");
        // Flat-top scalloping ±0.1 dB, plus the 8-bit formats' differing midpoints (bandwarden
        // maps cu8 around 127.5, the reference around 128: 0.03 dB).
        assert!((l - tl).abs() <= 0.2, "{name}: {l} dBFS, the reference reads {tl} dBFS");
        let samples = report["samples"].as_u64().unwrap();
        let want = if name.starts_with('r') { 10_000 } else { 20_000 };
        assert_eq!(samples, want, "{name}");
    }
}
