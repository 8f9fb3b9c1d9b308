//! `measure` as operators run it: the real binary on synthetic recordings whose truth is known
//! (white noise of a stated power, carriers keyed on a schedule we wrote).

use bandwarden::source::SampleFormat;
use bandwarden::testkit::{keyed_band, Keyed};
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
        let dir = std::env::temp_dir().join(format!("bw-measure-{name}-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let x = keyed_band(n, FS, 1e-4, carriers, seed);
        let mut bytes = Vec::new();
        SampleFormat::Cf32Le.encode(&x, &mut bytes);
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
