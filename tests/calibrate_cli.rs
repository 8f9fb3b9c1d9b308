//! Levels in dBm: `calibrate` on generated recordings whose truth is known (a tone of stated
//! dBFS, noise of stated density), and the calibrated outputs of `measure`, `log` and `census`.

mod common;

use bandwarden::source::SampleFormat;
use bandwarden::testkit::{add_tone, noise64, to_f32, Rng};
use common::{run, run_ok, scratch, stderr};
use serde_json::Value;

const FS: f64 = 1e6;
const CENTRE: f64 = 433.92e6;
/// A tone 123.4567 kHz above the centre: off every bin centre, so scalloping would show.
const TONE_HZ: f64 = CENTRE + 123_456.7;
const TONE_DBFS: f64 = -30.0;
/// What the generator is said to deliver at the antenna port.
const TONE_DBM: f64 = -53.7;

/// `n` samples of white noise of density `n0_dbfs_per_hz` plus, if given, the tone; cf32_le.
fn recording(name: &str, n: usize, n0_dbfs_per_hz: f64, tone: bool, seed: u64) -> String {
    let power = 10f64.powf(n0_dbfs_per_hz / 10.0) * FS;
    let mut x = noise64(&mut Rng::new(seed), n, power);
    if tone {
        add_tone(&mut x, FS, TONE_HZ - CENTRE, TONE_DBFS, 0.3);
    }
    let mut bytes = Vec::new();
    SampleFormat::Cf32Le.encode(&to_f32(&x), &mut bytes);
    let path = scratch("calibrate", name);
    std::fs::write(&path, bytes).unwrap();
    path.display().to_string()
}

fn json(out: &std::process::Output) -> Value {
    serde_json::from_slice(&out.stdout).unwrap()
}

#[test]
fn a_tone_of_known_power_calibrates_every_output_to_dbm() {
    let rec = recording("tone.cf32", 500_000, -130.0, true, 1);
    let cal = scratch("calibrate", "ridge-cal.toml").display().to_string();
    let tone = format!("{TONE_HZ}:{TONE_DBM}dBm");
    let common = ["--rate", "1M", "--center", "433.92M"];
    let mut args = vec!["calibrate", rec.as_str(), "--tone", tone.as_str(), "-o", cal.as_str()];
    args.extend_from_slice(&common);
    let out = run_ok(&args);
    let table = String::from_utf8_lossy(&out.stdout).into_owned();
    let text = std::fs::read_to_string(&cal).unwrap();
    let file: toml::Value = toml::from_str(&text).unwrap();
    let offset = file["point"][0]["offset_db"].as_float().unwrap();
    // Truth: the tone was written at −30 dBFS and said to be −53.7 dBm, so dBm = dBFS − 23.7.
    // Flat-top scalloping is below 0.01 dB (Heinzel et al. 2002); the noise in the tone's bin
    // (−130 dBFS/Hz over a ~900 Hz ENBW, 70 dB down) adds nothing visible: 0.05 dB is room.
    assert!((offset - (TONE_DBM - TONE_DBFS)).abs() < 0.05, "offset {offset}\n{table}");

    // measure with the file: the tone reads its dBm (Hann window, its own scalloping
    // correction), within 0.1 dB; the dBFS keys still hold dBFS.
    let mut args = vec!["measure", rec.as_str(), "--json", "--calibration", cal.as_str()];
    args.extend_from_slice(&common);
    let r = json(&run_ok(&args));
    let peak = &r["peaks"][0];
    let dbm = peak["level_dbm"].as_f64().unwrap();
    assert!((dbm - TONE_DBM).abs() < 0.1, "{peak}");
    assert!((peak["level_dbfs"].as_f64().unwrap() - TONE_DBFS).abs() < 0.1, "{peak}");
    let floor_dbm = r["noise_floor_dbm_per_hz"].as_f64().unwrap();
    let floor_dbfs = r["noise_floor_dbfs_per_hz"].as_f64().unwrap();
    assert!((floor_dbm - floor_dbfs - offset).abs() < 0.011, "{r}");
    assert!(r["calibration"].as_str().unwrap().contains("ridge-cal.toml"));

    // The same offset typed by hand gives the same levels; the table says dBm.
    let typed = format!("{offset}");
    let mut args = vec!["measure", rec.as_str(), "--ref-offset", typed.as_str()];
    args.extend_from_slice(&common);
    let t = String::from_utf8_lossy(&run_ok(&args).stdout).into_owned();
    assert!(t.contains("power dBm") && t.contains("dBm/Hz") && !t.contains("dBFS"), "{t}");

    // log: every interval and emission level has a dBm twin at the channel's offset.
    let log = scratch("calibrate", "ridge.jsonl").display().to_string();
    let chan = format!("gen={TONE_HZ}:12.5k");
    let mut args = vec![
        "log",
        rec.as_str(),
        "--channel",
        chan.as_str(),
        "--calibration",
        cal.as_str(),
        "-o",
        log.as_str(),
        "--interval",
        "0.25s",
    ];
    args.extend_from_slice(&common);
    run_ok(&args);
    let recs: Vec<Value> = std::fs::read_to_string(&log)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    assert!((recs[0]["level_offset_db"].as_f64().unwrap() - offset).abs() < 0.001, "{}", recs[0]);
    let intervals: Vec<&Value> = recs.iter().filter(|r| r["kind"] == "interval").collect();
    assert!(!intervals.is_empty());
    for i in intervals {
        let (fs, m) = (i["mean_dbfs"].as_f64().unwrap(), i["mean_dbm"].as_f64().unwrap());
        assert!((m - fs - offset).abs() < 0.011, "{i}");
        assert!((m - TONE_DBM).abs() < 0.1, "the channel holds the tone: {i}");
    }

    // census: the emitter's levels in dBm in the JSON and the table.
    let mut args = vec!["census", rec.as_str(), "--json", "--calibration", cal.as_str()];
    args.extend_from_slice(&common);
    let c = json(&run_ok(&args));
    let e = &c["emitters"][0];
    assert!(
        (e["power_dbm"].as_f64().unwrap() - e["power_dbfs"].as_f64().unwrap() - offset).abs()
            < 0.011,
        "{e}"
    );
}

#[test]
fn the_noise_figure_of_a_terminated_input_follows_from_kt() {
    // A receiver with NF 6 dB has an input-referred floor of kT0 + 6 = −167.98 dBm/Hz
    // (kT0 = −173.98 dBm/Hz at 290 K, Friis 1944). Written at −130 dBFS/Hz, that floor means an
    // offset of −37.98 dB.
    let rec = recording("load.cf32", 1_000_000, -130.0, false, 2);
    let run_nf = |offset: &str| {
        run(&[
            "calibrate",
            rec.as_str(),
            "--rate",
            "1M",
            "--center",
            "433.92M",
            "--terminated",
            "--ref-offset",
            offset,
        ])
    };
    let out = run_nf("-37.98");
    assert!(out.status.success(), "{}", stderr(&out));
    let text = String::from_utf8_lossy(&out.stdout).into_owned();
    let nf: f64 = text
        .lines()
        .find_map(|l| l.strip_prefix("noise figure "))
        .and_then(|l| l.split_whitespace().next())
        .and_then(|v| v.parse().ok())
        .unwrap_or_else(|| panic!("no noise figure in\n{text}"));
    // The floor of 1 M samples of noise (about 490 flat-top frames over 4096 bins) is known to
    // a few hundredths of a dB; 0.1 dB is the goal.
    assert!((nf - 6.0).abs() < 0.1, "NF {nf}\n{text}");
    // An offset 10 dB lower puts the floor below kT: refused, not reported as −4 dB.
    let bad = run_nf("-47.98");
    assert_eq!(bad.status.code(), Some(1));
    assert!(stderr(&bad).contains("no receiver has"), "{}", stderr(&bad));
}

#[test]
fn bad_calibration_input_is_refused_with_the_fix() {
    let rec = recording("short.cf32", 20_000, -130.0, true, 3);
    let base = ["calibrate", rec.as_str(), "--rate", "1M", "--center", "433.92M"];
    let with = |extra: &[&str]| {
        let mut a = base.to_vec();
        a.extend_from_slice(extra);
        run(&a)
    };
    // No task, a tone without a file, a tone outside the span, a terminated input without a
    // calibration, a file that is no calibration.
    let junk = scratch("calibrate", "junk.toml");
    std::fs::write(&junk, "[[point]]\nfreq = 1\n").unwrap();
    let junk = junk.display().to_string();
    for (args, says) in [
        (vec![], "--tone"),
        (vec!["--tone", "434M:-50dBm"], "-o FILE"),
        (vec!["--tone", "440M:-50", "-o", "/dev/null"], "outside"),
        (vec!["--terminated"], "--calibration"),
        (vec!["--terminated", "--calibration", junk.as_str()], "not one"),
    ] {
        let o = with(&args);
        assert!(!o.status.success(), "{args:?} succeeded");
        assert!(stderr(&o).contains(says), "{args:?}: {}", stderr(&o));
    }
}
