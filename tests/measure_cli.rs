//! `measure` as operators run it: the real binary on synthetic recordings whose truth is known
//! (white noise of a stated power, carriers keyed on a schedule we wrote).

use bandwarden::source::SampleFormat;
use bandwarden::testkit::{band_limited_noise, keyed_band, to_f32, Keyed, Rng};
use num_complex::Complex32;
use serde_json::Value;
use std::path::PathBuf;
use std::process::Command;

const BIN: &str = env!("CARGO_BIN_EXE_bandwarden");
const FS: f64 = 250e3;

/// A recording in a scratch directory removed at the end of the test.
struct Recording(PathBuf);

impl Recording {
    /// `n` samples of complex white noise of total power −40 dBFS plus `carriers`, as cf32_le.
    fn new(name: &str, n: usize, carriers: &[Keyed], seed: u64) -> Recording {
        Recording::of(name, &keyed_band(n, FS, 1e-4, carriers, seed))
    }

    fn of(name: &str, x: &[Complex32]) -> Recording {
        let dir = std::env::temp_dir().join(format!("bw-measure-{name}-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let mut bytes = Vec::new();
        SampleFormat::Cf32Le.encode(x, &mut bytes);
        std::fs::write(dir.join("x.cf32"), bytes).unwrap();
        Recording(dir)
    }

    fn path(&self) -> String {
        self.0.join("x.cf32").display().to_string()
    }
}

impl Drop for Recording {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// Runs `measure --json` with `args` on the recording and parses its one object.
fn measure(rec: &Recording, args: &[&str]) -> Value {
    let rate = FS.to_string();
    let path = rec.path();
    let mut all = vec!["measure", path.as_str(), "--rate", rate.as_str(), "--json"];
    all.extend_from_slice(args);
    let out = Command::new(BIN).args(&all).output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    serde_json::from_slice(&out.stdout).unwrap()
}

#[test]
fn false_alarm_probability_sets_how_often_noise_is_listed() {
    // Noise alone, 4 frames of 4096 without overlap: each bin of the average is χ² with 8
    // degrees of freedom (Welch 1967), whose 99 % point is 20.09/8 = 2.51 times the mean
    // (scipy.stats.chi2.ppf(0.99, 8), from memory), above the 3 dB every run must reach. At
    // p = 1e-2 about p·N = 41 bins cross the threshold; neighbouring crossings merge into one
    // signal (Hann's bins are correlated and a run bridges small gaps), so fewer than that but
    // many are listed. At p = 1e-9 the expected count is 4·10⁻⁶: none.
    let rec = Recording::new("pfa", 4 * 4096, &[], 5);
    let common = ["--fft", "4096", "--overlap", "0", "--peaks", "1000"];
    let count = |p: &str| {
        let mut args = common.to_vec();
        args.extend_from_slice(&["--false-alarm", p]);
        measure(&rec, &args)["peaks"].as_array().unwrap().len()
    };
    let loose = count("1e-2");
    assert!((10..=82).contains(&loose), "{loose} signals at p = 1e-2, expected about 41 or fewer");
    assert_eq!(count("1e-9"), 0, "noise listed at p = 1e-9");
}

#[test]
fn false_alarm_outside_its_range_is_refused_with_the_range() {
    let rec = Recording::new("pfa-range", 4096, &[], 1);
    let path = rec.path();
    for bad in ["0.5", "0", "-1e-3", "1e-20"] {
        let out = Command::new(BIN)
            .args(["measure", path.as_str(), "--rate", "250000", &format!("--false-alarm={bad}")])
            .output()
            .unwrap();
        assert_eq!(out.status.code(), Some(1), "{bad}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains("--false-alarm") && err.contains("1e-6"), "{bad}: {err}");
    }
}

fn s(seconds: f64) -> u64 {
    (seconds * FS).round() as u64
}

#[test]
fn skip_and_seconds_select_the_stretch_measured() {
    // One tone keyed on for the first second only, another for the second second only: the
    // stretch 1.0 .. 1.5 s holds the second tone alone, 125 000 samples of it.
    let first = |i: u64| i < s(1.0);
    let second = |i: u64| i >= s(1.0);
    let rec = Recording::new(
        "skip",
        s(2.0) as usize,
        &[
            Keyed { offset_hz: 30e3, level_dbfs: -30.0, on: &first },
            Keyed { offset_hz: -60e3, level_dbfs: -30.0, on: &second },
        ],
        3,
    );
    let v = measure(&rec, &["--skip", "1", "--seconds", "0.5"]);
    assert_eq!(v["samples"].as_u64(), Some(s(0.5)));
    let peaks = v["peaks"].as_array().unwrap();
    assert!((peaks[0]["freq_hz"].as_f64().unwrap() + 60e3).abs() < 50.0, "{peaks:?}");
    assert!(peaks.iter().all(|p| (p["freq_hz"].as_f64().unwrap() - 30e3).abs() > 1e3));
    // Skipping past the end is an error that names the option.
    let path = rec.path();
    let out = Command::new(BIN)
        .args(["measure", path.as_str(), "--rate", "250000", "--skip", "5"])
        .output()
        .unwrap();
    assert!(!out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("--skip"));
}

#[test]
fn band_width_on_the_air_is_the_emissions_not_the_noises() {
    // Two flat 4.5 kHz blocks of Gaussian noise keyed together, 30 % of the time in 50 ms
    // bursts, each in its own 12.5 kHz band: a weak one (−40 dBFS, 13 dB over the noise in its
    // band) at +40 kHz and a strong one (−20 dBFS) at −40 kHz. ITU-R SM.328: the 99 % bandwidth
    // of a spectrum flat over B is 0.99·B. Averaged over the whole recording the weak band is
    // mostly receiver noise, whose flat spectrum spreads its 99 % OBW over most of the band;
    // over the samples on the air, with the noise taken off, it is the block's.
    let n = s(6.0) as usize;
    let width = 4.5e3;
    let mut rng = Rng::new(8);
    let mut block = |f: f64, power: f64| {
        to_f32(&band_limited_noise(&mut rng, n, FS, f - width / 2.0, f + width / 2.0, power))
    };
    let (weak, strong) = (block(40e3, 1e-4), block(-40e3, 1e-2));
    let noise = keyed_band(n, FS, 1e-4, &[], 9);
    // Bursts switched on and off over 5 ms raised-cosine ramps, so that the keying itself
    // spreads no power beyond the blocks' edges (a hard switch would: its sinc skirts reach
    // the 26 dB points).
    let ramp = s(0.005) as f64;
    let gain = |i: u64| {
        let t = (i % s(1.0 / 6.0)) as f64;
        let up = (t / ramp).min((s(0.05) as f64 - t) / ramp).clamp(0.0, 1.0);
        (0.5 - 0.5 * (std::f64::consts::PI * up).cos()) as f32
    };
    let x: Vec<Complex32> =
        (0..n).map(|i| noise[i] + (weak[i] + strong[i]) * gain(i as u64)).collect();
    let rec = Recording::of("on-air", &x);
    let v = measure(&rec, &["--band", "40k:12.5k", "--band=-40k:12.5k", "--xdb", "26"]);
    let rbw = v["rbw_hz"].as_f64().unwrap();
    let (weak, strong) = (&v["bands"][0], &v["bands"][1]);
    let get = |b: &Value, k: &str| b[k].as_f64().unwrap();
    eprintln!(
        "weak band: whole OBW {:.0} Hz, on air {:.0} Hz ({:.1} % of samples); strong: 26 dB width on air {:.0} Hz, OBW {:.0} Hz",
        get(weak, "obw_hz"),
        get(weak, "on_air_obw_hz"),
        get(weak, "on_air_pct"),
        get(strong, "on_air_xdb_bandwidth_hz"),
        get(strong, "on_air_obw_hz"),
    );
    for b in [weak, strong] {
        assert!((get(b, "on_air_obw_hz") / (0.99 * width) - 1.0).abs() < 0.03, "{b}");
        // 30 % keyed; a sample a burst fills in part counts whole here if it reads occupied:
        // up to one more per edge (+10 points), or, for the weak block, whose ramps stay under
        // the threshold for longer, a few less.
        assert!((24.0..41.0).contains(&get(b, "on_air_pct")), "{b}");
    }
    assert!(get(weak, "obw_hz") > 2.0 * width, "whole-recording OBW should be the noise's: {weak}");
    // The weak block's 26 dB points lie under the noise: not reported. The strong block's are
    // its edges, widened by the window's main lobe (a few RBW at 26 dB down).
    assert!(weak["on_air_xdb_bandwidth_hz"].is_null(), "{weak}");
    assert!((get(strong, "on_air_xdb_bandwidth_hz") - width).abs() < 3.0 * rbw, "{strong}");
}
