//! Bad input, run through the real binary: each case must give one clear `bandwarden:` line that
//! names the cause and the fix, a non-zero exit (or a warning and exit 0 where the data is still
//! usable), and never a panic.

mod common;

use bandwarden::source::SampleFormat;
use num_complex::Complex32;
use std::io::Write;
use std::path::PathBuf;
use std::process::{Output, Stdio};

use common::bin;

fn tmp(name: &str) -> PathBuf {
    common::scratch("errors", name)
}

fn tone(n: usize) -> Vec<Complex32> {
    (0..n).map(|i| Complex32::from_polar(0.3, i as f32 * 0.37)).collect()
}

fn write_samples(name: &str, fmt: SampleFormat, samples: &[Complex32], extra: &[u8]) -> PathBuf {
    let mut bytes = Vec::new();
    fmt.encode(samples, &mut bytes);
    bytes.extend_from_slice(extra);
    let p = tmp(name);
    std::fs::write(&p, bytes).unwrap();
    p
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// The common contract of a refused input.
fn assert_refused(o: &Output, needles: &[&str]) {
    let err = stderr(o);
    assert!(!o.status.success(), "expected failure, got success; stderr: {err}");
    assert!(!err.contains("panicked"), "panic: {err}");
    assert!(err.starts_with("bandwarden:") || err.starts_with("error:"), "unprefixed: {err}");
    for n in needles {
        assert!(err.contains(n), "stderr lacks '{n}': {err}");
    }
}

#[test]
fn unknown_format_names_the_choices() {
    let p = write_samples("a.bin", SampleFormat::Cu8, &tone(4096), &[]);
    let o =
        bin().args(["measure"]).arg(&p).args(["--format", "s16", "--rate", "1M"]).output().unwrap();
    assert_refused(&o, &["unknown sample format 's16'", "cf32_le"]);
}

#[test]
fn trailing_partial_sample_is_dropped_with_a_warning() {
    let p = write_samples("b.cs16", SampleFormat::Ci16Le, &tone(8192), &[1, 2, 3]);
    let o = bin().args(["measure"]).arg(&p).args(["--rate", "1M", "--json"]).output().unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(stderr(&o).contains("dropped 3 bytes at the end"), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["input_issues"]["trailing_bytes"], 3);
    assert_eq!(v["samples"], 8192);
}

#[test]
fn empty_input_is_refused() {
    let p = write_samples("c.cu8", SampleFormat::Cu8, &[], &[]);
    let o = bin().args(["measure"]).arg(&p).args(["--rate", "1M"]).output().unwrap();
    assert_refused(&o, &["holds no samples"]);
}

#[test]
fn input_shorter_than_a_frame_says_to_use_a_smaller_fft() {
    let p = write_samples("c2.cu8", SampleFormat::Cu8, &tone(100), &[]);
    let o = bin().args(["measure"]).arg(&p).args(["--rate", "1M"]).output().unwrap();
    assert_refused(&o, &["fewer than one FFT frame", "--fft"]);
}

#[test]
fn non_finite_samples_are_counted_and_left_out() {
    let mut s = tone(8192);
    s[100] = Complex32::new(f32::NAN, 0.0);
    s[200] = Complex32::new(0.0, f32::INFINITY);
    let p = write_samples("d.cf32", SampleFormat::Cf32Le, &s, &[]);
    let o = bin().args(["measure"]).arg(&p).args(["--rate", "1M", "--json"]).output().unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(stderr(&o).contains("2 samples hold NaN or infinity"), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["input_issues"]["non_finite_samples"], 2);
    assert!(v["total_power_dbfs"].as_f64().unwrap().is_finite());
}

#[test]
fn bytes_read_in_the_wrong_format_are_named_as_the_likely_cause() {
    // The shipped cu8 recording read as cf32_le: many floats near 3e38, whose squares overflow.
    let data = concat!(env!("CARGO_MANIFEST_DIR"), "/recordings/wrenhollow-demo.sigmf-data");
    let o = bin().args(["measure", data, "--format", "cf32_le", "--rate", "1M"]).output().unwrap();
    // Its bytes make NaN every few samples and values far beyond full scale in between: either
    // way the message names the format as the likely cause.
    assert_refused(&o, &["probably not cf32_le", "--format"]);
    assert!(stderr(&o).contains("beyond ±1e6 while full scale is ±1"), "{}", stderr(&o));
}

#[test]
fn missing_rate_is_refused() {
    let p = write_samples("e.cu8", SampleFormat::Cu8, &tone(4096), &[]);
    let o = bin().args(["measure"]).arg(&p).output().unwrap();
    assert_refused(&o, &["no sample rate", "--rate"]);
}

#[test]
fn unknown_extension_without_format_is_refused() {
    let p = write_samples("f.bin", SampleFormat::Cu8, &tone(4096), &[]);
    let o = bin().args(["measure"]).arg(&p).args(["--rate", "1M"]).output().unwrap();
    assert_refused(&o, &["cannot tell the sample format", "--format"]);
}

#[test]
fn malformed_sigmf_is_refused_with_the_position() {
    let p = tmp("g.sigmf-meta");
    std::fs::write(&p, "{\"global\": {\"core:datatype\": \"cu8\",\n \"core:sample_rate\": }")
        .unwrap();
    std::fs::write(tmp("g.sigmf-data"), [0u8; 8192]).unwrap();
    let o = bin().args(["measure"]).arg(&p).output().unwrap();
    assert_refused(&o, &["not valid SigMF JSON", "line 2"]);
}

#[test]
fn sigmf_without_rate_needs_the_option() {
    let p = tmp("h.sigmf-meta");
    std::fs::write(&p, r#"{"global":{"core:datatype":"cu8","core:version":"1.0.0"},"captures":[],"annotations":[]}"#)
        .unwrap();
    std::fs::write(tmp("h.sigmf-data"), [128u8; 16384]).unwrap();
    let o = bin().args(["measure"]).arg(&p).output().unwrap();
    assert_refused(&o, &["no core:sample_rate", "--rate"]);
    let o = bin().args(["measure"]).arg(&p).args(["--rate", "1M", "--json"]).output().unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
}

#[test]
fn fft_size_out_of_range_is_refused() {
    let p = write_samples("i.cu8", SampleFormat::Cu8, &tone(4096), &[]);
    for n in ["8", "2000000"] {
        let o =
            bin().args(["measure"]).arg(&p).args(["--rate", "1M", "--fft", n]).output().unwrap();
        assert_refused(&o, &["out of range", "16 ..= 1048576"]);
    }
}

#[test]
fn unreadable_file_is_refused() {
    let o = bin().args(["measure", "/nonexistent/dir/x.cu8", "--rate", "1M"]).output().unwrap();
    assert_refused(&o, &["cannot open '/nonexistent/dir/x.cu8'"]);
}

#[test]
fn stdin_needs_format_and_rate() {
    let o = bin().args(["measure", "-", "--rate", "1M"]).stdin(Stdio::null()).output().unwrap();
    assert_refused(&o, &["stdin needs --format"]);
    let o = bin().args(["measure", "-", "--format", "cu8"]).stdin(Stdio::null()).output().unwrap();
    assert_refused(&o, &["stdin needs --rate"]);
}

#[test]
fn stdin_pipe_is_measured() {
    let mut bytes = Vec::new();
    SampleFormat::Cu8.encode(&tone(65536), &mut bytes);
    let mut child = bin()
        .args([
            "measure", "-", "--format", "cu8", "--rate", "2.4M", "--center", "433.92M", "--json",
        ])
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    child.stdin.take().unwrap().write_all(&bytes).unwrap();
    let o = child.wait_with_output().unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["samples"], 65536);
    assert_eq!(v["center_hz"], 433.92e6);
}

#[test]
fn bad_option_values_are_refused() {
    let p = write_samples("j.cu8", SampleFormat::Cu8, &tone(8192), &[]);
    let cases: &[(&[&str], &str)] = &[
        (&["--overlap", "0.99"], "0 ..= 0.95"),
        (&["--window", "gauss"], "unknown window"),
        (&["--band", "5M:10k"], "outside the captured span"),
        (&["--obw-percent", "100"], "--obw-percent"),
    ];
    for (extra, needle) in cases {
        let o =
            bin().args(["measure"]).arg(&p).args(["--rate", "1M"]).args(*extra).output().unwrap();
        assert_refused(&o, &[needle]);
    }
    let o = bin().args(["measure"]).arg(&p).args(["--rate", "fast"]).output().unwrap();
    assert_refused(&o, &["not a frequency"]);
    assert_eq!(o.status.code(), Some(2), "a malformed command line exits 2");
}

#[test]
fn broken_pipe_is_a_normal_end() {
    let mut child = bin()
        .args(["demo", "--format", "cu8", "--rate", "1M"])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut out = child.stdout.take().unwrap();
    let mut buf = [0u8; 4096];
    std::io::Read::read_exact(&mut out, &mut buf).unwrap();
    drop(out);
    let o = child.wait_with_output().unwrap();
    assert!(o.status.success(), "exit {:?}: {}", o.status, stderr(&o));
    assert!(stderr(&o).is_empty(), "{}", stderr(&o));
}

/// Values far outside any sensible range: each is refused with the option to change, promptly,
/// and numbers are echoed in engineering form, never as hundreds of digits.
#[test]
fn absurd_values_are_refused_with_the_option_to_change() {
    let p = write_samples("limits.cf32", SampleFormat::Cf32Le, &tone(16_384), &[]);
    let cases: &[(&[&str], &[&str])] = &[
        (&["--rate", "1e300"], &["--rate", "beyond"]),
        (&["--rate", "1e-17"], &["--rate", "1.0e-17 Hz", "out of range"]),
        (&["--rate", "1M", "--center", "1e300"], &["--center", "beyond"]),
        (&["--rate", "1M", "--seconds", "1e300"], &["--seconds", "three years"]),
        (
            &["--rate", "1M", "--channel", "a=0:10k", "--dwell", "20000000000000000000"],
            &["--dwell"],
        ),
        (&["--rate", "1M", "--peaks", "18446744073709551615"], &["--peaks"]),
        (&["--rate", "1M", "--xdb", "inf"], &["--xdb"]),
        (&["--rate", "1M", "--xdb", "301"], &["--xdb", "300"]),
        (&["--rate", "1M", "--threshold-db", "1e300", "--channel", "a=0:10k"], &["--threshold-db"]),
        (&["--rate", "1M", "--overlap", "1e300"], &["--overlap"]),
        (
            &[
                "--rate",
                "2.4M",
                "--fft",
                "16",
                "--overlap",
                "0.95",
                "--dwell",
                "1us",
                "--channel",
                "a=0:10k",
            ],
            &["--dwell", "1 ms or longer"],
        ),
    ];
    for (extra, needles) in cases {
        let start = std::time::Instant::now();
        let o = bin().args(["measure"]).arg(&p).args(*extra).output().unwrap();
        assert_refused(&o, needles);
        assert!(stderr(&o).len() < 400, "{extra:?}: {}", stderr(&o));
        assert!(start.elapsed().as_secs() < 20, "{extra:?} took {:?}", start.elapsed());
    }
    let log = |extra: &[&str]| {
        bin()
            .args(["log"])
            .arg(&p)
            .args(["--rate", "1M", "--channel", "a=0:10k", "-o"])
            .arg(tmp("limits.jsonl"))
            .args(extra)
            .output()
            .unwrap()
    };
    assert_refused(&log(&["--interval", "20000000000000000000"]), &["--interval"]);
    assert_refused(&log(&["--hang", "1e30"]), &["--hang"]);
    let o = bin().args(["watch", "--speed", "1e-300"]).output().unwrap();
    assert_refused(&o, &["--speed", "1.0e-300"]);
    let o = bin().args(["demo", "--seconds", "1e5", "-o"]).arg(tmp("big.cf32")).output().unwrap();
    assert_refused(&o, &["1 TiB", "--seconds"]);
    assert!(!tmp("big.cf32").exists(), "nothing is written before the check");
}

/// A WAV header's rate goes through the same check as --rate, and --rate overrides it.
#[test]
fn a_wav_file_with_rate_zero_names_the_file_and_the_fix() {
    let wav = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/corpus/wav/regress-rate-0.wav");
    let o = bin().args(["measure", "--fft", "16"]).arg(&wav).output().unwrap();
    assert_refused(&o, &["regress-rate-0.wav", "0.0 Hz", "--rate"]);
    let o = bin().args(["measure", "--fft", "16", "--rate", "48k"]).arg(&wav).output().unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
}

/// A rate below 1 kHz is allowed but probably a missing suffix: the note says so.
#[test]
fn a_very_low_rate_gets_a_note() {
    let p = write_samples("low.cf32", SampleFormat::Cf32Le, &tone(4096), &[]);
    let o = bin().args(["measure", "--fft", "64", "--rate", "2.4"]).arg(&p).output().unwrap();
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(stderr(&o).contains("did you mean 2.4M"), "{}", stderr(&o));
}

/// OS errors name the file and what to check instead of reaching the user bare.
#[test]
fn os_errors_name_the_file() {
    let dir = tmp("a-directory");
    std::fs::create_dir_all(&dir).unwrap();
    let o = bin().args(["measure", "--rate", "1M"]).arg(&dir).output().unwrap();
    assert_refused(&o, &["a-directory", "is a directory"]);
    let o = bin()
        .args(["demo", "--seconds", "0.01", "-o"])
        .arg(dir.join("no/such/x.cf32"))
        .output()
        .unwrap();
    assert_refused(&o, &["no/such/x.cf32", "directory exists"]);
    if std::path::Path::new("/dev/full").exists() {
        // Linux's /dev/full fails every write with ENOSPC (null(4)/full(4) manual page).
        let o = bin().args(["demo", "--seconds", "0.01", "-o", "/dev/full"]).output().unwrap();
        assert_refused(&o, &["/dev/full", "disk has room"]);
        let p = write_samples("full.cf32", SampleFormat::Cf32Le, &tone(16_384), &[]);
        let o = bin()
            .args([
                "log",
                "--rate",
                "1M",
                "--channel",
                "a=0:10k",
                "--interval",
                "10ms",
                "-o",
                "/dev/full",
            ])
            .arg(&p)
            .output()
            .unwrap();
        assert_refused(&o, &["/dev/full", "disk has room"]);
    }
}

/// Every confusion that `source::plausible` catches, piped into `log -` as a receiver's stream
/// would come: the run must stop on its own with `input_error`, exit 1 and the `--format` advice,
/// having written a few records, not one per bad sample. The guard only keeps a hang from
/// blocking the suite; it asserts nothing about speed.
#[test]
fn wrong_format_streams_into_log_stop_with_input_error_and_a_small_log() {
    use SampleFormat::*;
    let pairs = [
        (Cu8, Cf32Le),
        (Cu8, Cf32Be),
        (Cu8, Cf64Le),
        (Ci16Le, Cf32Le),
        (Cf32Le, Cf32Be),
        (Cf64Le, Cf32Le),
        (Cu8, Ci8),
        (Ci8, Cu8),
        (Cu8, Ci16Le),
        (Cu8, Ci16Be),
        (Ci16Le, Cu8),
        (Ci16Le, Ci16Be),
        (Ci16Be, Ci16Le),
        (Ci32Le, Ci32Be),
    ];
    // Noise at a receiver's usual level (−30 dBFS), from the shared test kit.
    let x = bandwarden::testkit::noise(400_000, 1e-3, 21);
    for (written, read) in pairs {
        let mut bytes = Vec::new();
        written.encode(&x, &mut bytes);
        let out = tmp(&format!("wrong-{written}-as-{read}.jsonl"));
        let _ = std::fs::remove_file(&out);
        let mut child = bin()
            .args(["log", "-", "--format", read.name(), "--rate", "200k", "--center", "100M"])
            .args(["--channel", "a=100.02M:10k", "-o"])
            .arg(&out)
            .stdin(Stdio::piped())
            .stdout(Stdio::null())
            .stderr(Stdio::piped())
            .spawn()
            .unwrap();
        let mut stdin = child.stdin.take().unwrap();
        // The run may stop before taking it all: a closed pipe is expected.
        let feeder = std::thread::spawn(move || {
            let _ = stdin.write_all(&bytes);
        });
        let t0 = std::time::Instant::now();
        while child.try_wait().unwrap().is_none() {
            if t0.elapsed() > std::time::Duration::from_secs(60) {
                let _ = child.kill();
                panic!("{written} read as {read}: log did not stop on its own");
            }
            std::thread::sleep(std::time::Duration::from_millis(20));
        }
        let o = child.wait_with_output().unwrap();
        feeder.join().unwrap();
        let case = format!("{written} read as {read}");
        assert_refused(&o, &[&format!("probably not {read}"), "--format"]);
        assert_eq!(o.status.code(), Some(1), "{case}");
        let log = std::fs::read_to_string(&out).unwrap();
        assert!(log.len() < 16 * 1024, "{case}: {} bytes of log", log.len());
        let last: serde_json::Value = serde_json::from_str(log.lines().last().unwrap()).unwrap();
        assert_eq!(last["kind"], "stop", "{case}");
        assert_eq!(last["reason"], "input_error", "{case}");
    }
}
