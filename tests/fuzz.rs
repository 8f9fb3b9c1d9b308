//! Mutation fuzzing of everything that reads what users type or what files hold: values with
//! units, RFC 3339 times, plan TOML, SigMF metadata and whole recordings, WAV files, every sample
//! format decoder and whole command lines.
//!
//! The oracle of every target is the same: no panic, no hang, and either success or an error
//! (from the binary: exit 0, or exit 1 with a `bandwarden:` line, or exit 2 with clap's `error:`).
//! Where a value is accepted, it must also lie within the program's documented limits
//! (`bandwarden::units`).
//!
//! Seeds live in `tests/corpus/<target>/`; files named `regress-*` are inputs that once broke a
//! limit, and each is run unmutated first. Inside `cargo test` every target runs a fixed number
//! of seeded mutations (a second or two each). `scripts/fuzz` runs the same targets for longer:
//! `BANDWARDEN_FUZZ_SECONDS` (seconds per target) and `BANDWARDEN_FUZZ_SEED` (a new seed finds
//! new inputs). An input that panics is saved under `target/fuzz-crashes/` and named in the
//! failure, ready to be added to the corpus as a `regress-*` file once fixed.

use bandwarden::cli::{Cli, Command};
use bandwarden::plan::Plan;
use bandwarden::source::{self, InputRequest, SampleFormat};
use bandwarden::testkit::Rng;
use bandwarden::units;
use clap::Parser;
use num_complex::Complex32;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::process::Stdio;
use std::time::{Duration, Instant};

// ---------------------------------------------------------------------------------------------
// The harness: budget, corpus, mutation, crash capture.

/// How long a target runs: a fixed count of mutations, or (with `BANDWARDEN_FUZZ_SECONDS`) a time.
struct Budget {
    deadline: Option<Instant>,
    iterations: usize,
    done: usize,
}

impl Budget {
    fn new(iterations: usize) -> Budget {
        let deadline = std::env::var("BANDWARDEN_FUZZ_SECONDS")
            .ok()
            .and_then(|s| s.parse::<f64>().ok())
            .filter(|s| s.is_finite() && *s > 0.0)
            .map(|s| Instant::now() + Duration::from_secs_f64(s));
        Budget { deadline, iterations, done: 0 }
    }

    fn more(&mut self) -> bool {
        self.done += 1;
        match self.deadline {
            Some(d) => Instant::now() < d,
            None => self.done <= self.iterations,
        }
    }
}

fn seed(target: &str) -> u64 {
    let base = std::env::var("BANDWARDEN_FUZZ_SEED")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(0x0b0a_d5ee_d000_0001u64);
    // Each target gets its own stream, so adding a target does not change the others' inputs.
    target.bytes().fold(base, |h, b| (h ^ b as u64).wrapping_mul(0x0100_0000_01b3))
}

fn corpus_dir(target: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/corpus").join(target)
}

/// The seeds of a target, sorted by name: (file name, bytes).
fn corpus(target: &str) -> Vec<(String, Vec<u8>)> {
    let mut files: Vec<_> = std::fs::read_dir(corpus_dir(target))
        .unwrap_or_else(|e| panic!("corpus of {target}: {e}"))
        .map(|e| e.unwrap().path())
        .filter(|p| p.is_file())
        .map(|p| {
            (p.file_name().unwrap().to_string_lossy().into_owned(), std::fs::read(&p).unwrap())
        })
        .collect();
    files.sort();
    assert!(!files.is_empty(), "no seeds in tests/corpus/{target}");
    files
}

/// Tokens that tend to reach edge cases in this program's inputs.
const TOKENS: &[&str] = &[
    "0",
    "-0",
    "1",
    "-1",
    "1e300",
    "-1e300",
    "1e-300",
    "1e-17",
    "1e19",
    "18446744073709551616",
    "9223372036854775807",
    "4294967295",
    "65536",
    "2.4",
    "nan",
    "NaN",
    "inf",
    "-inf",
    "1e",
    "e",
    ".",
    "-",
    "+",
    "k",
    "K",
    "M",
    "G",
    "m",
    "Hz",
    "S/s",
    "ms",
    "us",
    "µs",
    "s",
    "h",
    "min",
    " ",
    "\u{1b}[2J",
    "\u{0}",
    "\n",
    "\"",
    "'",
    ":",
    "=",
    ",",
    "[",
    "]",
    "{",
    "}",
    "\u{feff}",
    "é",
    "0x10",
    "1_000",
    "T",
    "Z",
    "+99:99",
    "9999",
    "0000",
];

/// Little-endian 32-bit values that sit on the edges of header fields.
const EDGE_U32: &[u32] =
    &[0, 1, 2, 3, 7, 8, 16, 17, 24, 32, 33, 64, 0x7fff_ffff, 0x8000_0000, u32::MAX];

fn mutate(rng: &mut Rng, data: &[u8], others: &[(String, Vec<u8>)]) -> Vec<u8> {
    let mut d = data.to_vec();
    for _ in 0..1 + rng.below(4) {
        let at = rng.below(d.len() + 1);
        match rng.below(9) {
            0 if !d.is_empty() => {
                let i = rng.below(d.len());
                d[i] ^= 1 << rng.below(8);
            }
            1 if !d.is_empty() => {
                let i = rng.below(d.len());
                d[i] = [0u8, 0xff, 0x7f, 0x80, b'-', b'.', b'e', b'9', b'0'][rng.below(9)];
            }
            2 | 3 => {
                let t = TOKENS[rng.below(TOKENS.len())].as_bytes();
                d.splice(at..at, t.iter().copied());
            }
            4 if at < d.len() => {
                let end = (at + 1 + rng.below(8)).min(d.len());
                d.drain(at..end);
            }
            5 if at < d.len() => {
                let end = (at + 1 + rng.below(16)).min(d.len());
                let copy = d[at..end].to_vec();
                d.splice(at..at, copy);
            }
            6 if at < d.len() => {
                let end = (at + 1 + rng.below(6)).min(d.len());
                let t = TOKENS[rng.below(TOKENS.len())].as_bytes();
                d.splice(at..end, t.iter().copied());
            }
            7 => {
                let other = &others[rng.below(others.len())].1;
                let from = rng.below(other.len() + 1);
                d.truncate(at);
                d.extend_from_slice(&other[from..]);
            }
            _ if d.len() >= 4 => {
                let i = rng.below(d.len() - 3);
                let v = EDGE_U32[rng.below(EDGE_U32.len())].to_le_bytes();
                d[i..i + 4].copy_from_slice(&v);
            }
            _ => d.push(rng.next_u64() as u8),
        }
    }
    d.truncate(1 << 16);
    d
}

/// Runs `f` on `input`; a panic fails the test with the input saved and shown.
fn no_panic(target: &str, input: &[u8], f: impl FnOnce()) {
    if catch_unwind(AssertUnwindSafe(f)).is_err() {
        let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("fuzz-crashes");
        std::fs::create_dir_all(&dir).unwrap();
        let hash = input
            .iter()
            .fold(0xcbf2_9ce4_8422_2325u64, |h, b| (h ^ *b as u64).wrapping_mul(0x0100_0000_01b3));
        let path = dir.join(format!("{}-{hash:016x}", target.replace('/', "-")));
        std::fs::write(&path, input).unwrap();
        panic!(
            "{target}: panic on input {:?} (saved as {})",
            String::from_utf8_lossy(&input[..input.len().min(400)]),
            path.display()
        );
    }
}

/// Seeds first (unmutated), then mutations of them until the budget is spent.
fn fuzz(target: &str, iterations: usize, mut check: impl FnMut(&[u8])) {
    let seeds = corpus(target);
    for (name, data) in &seeds {
        no_panic(&format!("{target}/{name}"), data, || check(data));
    }
    let mut rng = Rng::new(seed(target));
    let mut budget = Budget::new(iterations);
    while budget.more() {
        let base = &seeds[rng.below(seeds.len())].1;
        let input = mutate(&mut rng, base, &seeds);
        no_panic(target, &input, || check(&input));
    }
}

fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("bandwarden-fuzz-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir.join(name)
}

/// An error meant for a person: one bounded message without terminal controls.
fn assert_readable(what: &str, message: &str) {
    assert!(message.len() < 1000, "{what}: a message of {} bytes: {message}", message.len());
    assert!(
        !message.chars().any(|c| c.is_control() && c != '\n' && c != '\t'),
        "{what}: control characters in {message:?}"
    );
}

// ---------------------------------------------------------------------------------------------
// Values with units.

#[test]
fn values_with_units() {
    let check_text = |text: &str| {
        match units::parse_hz(text) {
            Ok(hz) => {
                assert!(hz.is_finite() && hz.abs() <= units::MAX_HZ, "{text:?} → {hz}");
                assert!(units::format_hz(hz).len() < 40, "{text:?} prints long");
            }
            Err(e) => assert_readable(text, &e),
        }
        if let Ok(r) = units::parse_rate(text) {
            assert!((units::MIN_RATE_HZ..=units::MAX_RATE_HZ).contains(&r), "{text:?} → {r}");
        }
        if let Ok(hz) = units::parse_positive_hz(text) {
            assert!(hz > 0.0, "{text:?} → {hz}");
        }
        match units::parse_duration(text) {
            Ok(d) => assert!(d.as_secs_f64() <= units::MAX_SECONDS, "{text:?} → {d:?}"),
            Err(e) => assert_readable(text, &e),
        }
        match bandwarden::cli::common::parse_seconds(text) {
            Ok(s) => assert!(s > 0.0 && s <= units::MAX_SECONDS, "{text:?} → {s}"),
            Err(e) => assert_readable(text, &e),
        }
        if let Ok(s) = bandwarden::cli::common::parse_seconds(text) {
            // Every accepted duration × every accepted rate counts in a u64 of samples.
            assert!(units::samples_in(s, units::MAX_RATE_HZ).is_ok(), "{text:?}");
        }
    };
    fuzz("hz", 20_000, |b| check_text(&String::from_utf8_lossy(b)));
    fuzz("duration", 20_000, |b| check_text(&String::from_utf8_lossy(b)));
}

#[test]
fn start_times() {
    fuzz("time", 20_000, |b| {
        let text = String::from_utf8_lossy(b);
        if let Err(e) = bandwarden::cli::common::parse_time(&text) {
            assert_readable(&text, &e);
        }
    });
}

// ---------------------------------------------------------------------------------------------
// Files: plans, SigMF, WAV, raw samples.

#[test]
fn plan_files() {
    fuzz("plan", 5000, |b| {
        let _ = Plan::parse(&String::from_utf8_lossy(b), "fuzz.toml");
    });
}

#[test]
fn sigmf_metadata() {
    fuzz("sigmf-meta", 5000, |b| {
        let _ = source::sigmf::parse_meta(&String::from_utf8_lossy(b), "fuzz.sigmf-meta");
    });
}

/// Opens `path` as bandwarden would and reads a few blocks; errors are fine, panics are not.
fn open_and_read(req: InputRequest) {
    let mut notes = Vec::new();
    let Ok(mut src) = source::open(&req, &mut notes) else { return };
    let info = src.info().clone();
    // Whatever a file says, what passes `source::open` lies within the documented limits.
    assert!((units::MIN_RATE_HZ..=units::MAX_RATE_HZ).contains(&info.sample_rate_hz), "{info:?}");
    assert!(info.center_hz.abs() <= units::MAX_HZ, "{info:?}");
    let mut buf = vec![Complex32::default(); 4096];
    for _ in 0..4 {
        match src.read(&mut buf) {
            Ok(0) | Err(_) => break,
            Ok(n) => assert!(n <= buf.len()),
        }
    }
    let _ = src.issues();
}

fn file_request(path: &Path) -> InputRequest {
    InputRequest { path: Some(path.to_string_lossy().into_owned()), ..InputRequest::default() }
}

#[test]
fn sigmf_recordings() {
    let meta = scratch("rec.sigmf-meta");
    let data = scratch("rec.sigmf-data");
    let mut rng = Rng::new(seed("sigmf-data"));
    fuzz("sigmf-meta", 500, |b| {
        std::fs::write(&meta, b).unwrap();
        let len = [0, 1, 7, 64, 4096][rng.below(5)];
        let bytes: Vec<u8> = (0..len).map(|_| rng.next_u64() as u8).collect();
        std::fs::write(&data, bytes).unwrap();
        open_and_read(file_request(&meta));
    });
}

#[test]
fn wav_files() {
    let path = scratch("fuzz.wav");
    fuzz("wav", 1000, |b| {
        std::fs::write(&path, b).unwrap();
        open_and_read(file_request(&path));
    });
}

#[test]
fn raw_files_of_every_format() {
    let mut rng = Rng::new(seed("raw"));
    fuzz("format", 1500, |b| {
        let format = SampleFormat::ALL[rng.below(SampleFormat::ALL.len())];
        let path = scratch(&format!("fuzz.{}", format.name()));
        std::fs::write(&path, b).unwrap();
        let rate = [1.0, 2.4, 1e6, units::MAX_RATE_HZ][rng.below(4)];
        let req = InputRequest {
            format: Some(format),
            sample_rate_hz: Some(rate),
            ..file_request(&path)
        };
        open_and_read(req);
    });
}

#[test]
fn sample_format_decoders() {
    fuzz("format", 5000, |b| {
        for format in SampleFormat::ALL {
            let bps = format.bytes_per_sample();
            let whole = &b[..b.len() / bps * bps];
            let mut out = vec![Complex32::default(); whole.len() / bps];
            let screened = format.decode(whole, &mut out);
            assert_eq!(screened.kept, out.len(), "{format}: every sample stays in place");
            let not_numbers = out.iter().filter(|s| !(s.re.is_finite() && s.im.is_finite()));
            assert_eq!(not_numbers.count() as u64, screened.non_finite, "{format}: counted");
            for s in &out {
                if !format.is_float() {
                    assert!(s.re.is_finite() && s.im.is_finite(), "{format}: {s}");
                    // The documented full scale of the integer formats (source::format): x / 2^(b−1),
                    // unsigned as (x − m) / m with m the midpoint, so no integer sample exceeds ±1.
                    assert!(s.re.abs() <= 1.0 && s.im.abs() <= 1.0, "{format}: {s}");
                }
            }
        }
    });
}

// ---------------------------------------------------------------------------------------------
// Whole command lines.

const FLAG_VALUES: &[&str] = &[
    "0",
    "1",
    "-1",
    "16",
    "15",
    "1048577",
    "4096",
    "0.95",
    "0.96",
    "1e300",
    "1e-300",
    "1e-17",
    "2.4",
    "2.4M",
    "1e11",
    "1.1e11",
    "3e12",
    "nan",
    "inf",
    "1us",
    "1ms",
    "20000000000000000000",
    "1e8",
    "1e9",
    "100",
    "1000",
    "1001",
    "a=0:1k",
    "a=0:0",
    "b=1e300:1k",
    "0:1e300",
    "x",
    "kaiser:1e300",
    "cu8",
    "cf64_le",
    "2026-05-01T08:00:00Z",
    "9999-12-31T23:59:59Z",
];

const FLAGS: &[&str] = &[
    "--rate",
    "--center",
    "--fft",
    "--overlap",
    "--window",
    "--threads",
    "--seconds",
    "--peaks",
    "--band",
    "--obw-percent",
    "--xdb",
    "--dwell",
    "--threshold-db",
    "--channel",
    "--interval",
    "--hang",
    "--fps",
    "--row-rate",
    "--speed",
    "--ref-offset",
    "--format",
    "--start",
    "--seed",
];

/// A command line from a seed: placeholders become paths, then tokens are mutated.
fn command_line(rng: &mut Rng, seed: &[u8], files: &Files) -> Vec<String> {
    let text = String::from_utf8_lossy(seed);
    let mut args: Vec<String> = text.lines().map(|l| files.fill(l)).collect();
    for _ in 0..rng.below(4) {
        // Token 0 is the subcommand and token 1 usually the input: mutate after them.
        let at = 1 + rng.below(args.len().max(2) - 1);
        match rng.below(6) {
            0 if at < args.len() => args[at] = FLAG_VALUES[rng.below(FLAG_VALUES.len())].into(),
            1 => {
                let flag = FLAGS[rng.below(FLAGS.len())];
                if !args.iter().any(|a| a == flag) {
                    args.insert(
                        at.min(args.len()),
                        FLAG_VALUES[rng.below(FLAG_VALUES.len())].into(),
                    );
                    args.insert(at.min(args.len()), flag.into());
                }
            }
            2 if at < args.len() && args.len() > 2 => {
                args.remove(at);
            }
            3 if at < args.len() => {
                let m = mutate(rng, args[at].as_bytes(), &[(String::new(), b"1e300".to_vec())]);
                args[at] = String::from_utf8_lossy(&m).replace('\0', "");
            }
            _ if at < args.len() => args[at] = FLAG_VALUES[rng.below(FLAG_VALUES.len())].into(),
            _ => {}
        }
    }
    args
}

/// Small files the command lines point at.
struct Files {
    input: PathBuf,
    plan: PathBuf,
    out: PathBuf,
}

impl Files {
    fn new() -> Files {
        let input = scratch("input.cf32");
        let samples = bandwarden::testkit::noise(16_384, 0.01, 7);
        let mut bytes = Vec::new();
        SampleFormat::Cf32Le.encode(&samples, &mut bytes);
        std::fs::write(&input, bytes).unwrap();
        let plan = corpus_dir("plan").join("site.toml");
        Files { input, plan, out: scratch("out.cf32") }
    }

    fn fill(&self, line: &str) -> String {
        let path = |p: &Path| p.to_string_lossy().into_owned();
        match line {
            "INPUT" => path(&self.input),
            "PLAN" => path(&self.plan),
            "OUT" => path(&self.out),
            other => other.to_string(),
        }
    }
}

/// Parses and validates a command line in-process, as `app::run` does before it runs anything.
/// Returns whether running it is cheap enough for the binary test (bounded input and output).
fn parse_and_validate(args: &[String]) -> bool {
    let argv = std::iter::once("bandwarden".to_string()).chain(args.iter().cloned());
    let Ok(cli) = Cli::try_parse_from(argv) else { return false };
    let refused = |e: anyhow::Error| {
        assert_readable(&format!("{args:?}"), &format!("{e:#}"));
        false
    };
    match cli.command {
        Some(Command::Measure(m)) => {
            let file = m.input.is_some();
            match m.validate() {
                // The demo scene runs for --seconds: keep those runs short.
                Ok(c) => file || c.seconds.is_some_and(|s| s <= 2.0),
                Err(e) => refused(e),
            }
        }
        Some(Command::Log(l)) => l.validate().map_or_else(refused, |_| true),
        Some(Command::Demo(d)) => match d.validate() {
            Ok(c) => c.total_samples.is_some_and(|n| n <= 1 << 20) && !c.realtime,
            Err(e) => refused(e),
        },
        // The monitor needs a terminal; its settings are checked here, it is not run.
        Some(Command::Watch(w)) => w.validate().map_or_else(refused, |_| false),
        _ => false,
    }
}

#[test]
fn command_lines_validate() {
    let files = Files::new();
    let mut rng = Rng::new(seed("args-validate"));
    fuzz("args", 5000, |b| {
        let args = command_line(&mut rng, b, &files);
        parse_and_validate(&args);
    });
}

/// Runs the binary with a time limit; the oracle of a whole run.
fn run_binary(args: &[String], limit: Duration) {
    // In a scratch directory: a mutated `-o` may name any relative path.
    let dir = scratch("cwd");
    std::fs::create_dir_all(&dir).unwrap();
    let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_bandwarden"))
        .current_dir(&dir)
        .args(args)
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let start = Instant::now();
    let status = loop {
        if let Some(s) = child.try_wait().unwrap() {
            break s;
        }
        if start.elapsed() > limit {
            let _ = child.kill();
            let _ = child.wait();
            panic!("hang: {args:?} ran longer than {limit:?}");
        }
        std::thread::sleep(Duration::from_millis(5));
    };
    let mut err = String::new();
    std::io::Read::read_to_string(&mut child.stderr.take().unwrap(), &mut err).unwrap();
    assert!(!err.contains("panicked"), "panic: {args:?}\n{err}");
    match status.code() {
        Some(0) => {}
        Some(1) => assert!(err.lines().any(|l| l.starts_with("bandwarden:")), "{args:?}\n{err}"),
        Some(2) => assert!(err.starts_with("error:"), "{args:?}\n{err}"),
        other => panic!("exit {other:?}: {args:?}\n{err}"),
    }
    assert_readable(&format!("{args:?}"), err.lines().last().unwrap_or(""));
}

#[test]
fn command_lines_through_the_binary() {
    let files = Files::new();
    // Every seed and regression as written, then mutations that validate to a bounded run.
    for (name, data) in corpus("args") {
        let args: Vec<String> =
            String::from_utf8_lossy(&data).lines().map(|l| files.fill(l)).collect();
        if name.starts_with("regress-") || parse_and_validate(&args) {
            run_binary(&args, Duration::from_secs(60));
        }
    }
    let seeds = corpus("args");
    let mut rng = Rng::new(seed("args-binary"));
    // Most mutated lines are refused before they run: try many, run a few.
    let mut budget = Budget::new(5000);
    let mut runs = 0;
    while budget.more() && (budget.deadline.is_some() || runs < 80) {
        let base = &seeds[rng.below(seeds.len())].1;
        let args = command_line(&mut rng, base, &files);
        if parse_and_validate(&args) {
            run_binary(&args, Duration::from_secs(60));
            runs += 1;
        }
    }
    eprintln!("{runs} mutated command lines run in {} tries", budget.done - 1);
    assert!(runs > 0, "no mutated command line got past validation");
}

#[test]
fn vita49_datagrams() {
    // Any datagram is a packet or a reason, never a panic; a packet's payload lies within it.
    fuzz("vita49", 5000, |b| {
        let whole = &b[..b.len() / 4 * 4];
        for bytes in [b, whole] {
            if let Ok(bandwarden::source::vita49::packet::Packet::Data { payload, .. }) =
                bandwarden::source::vita49::packet::parse(bytes)
            {
                assert!(payload.len() <= bytes.len());
            }
        }
    });
}
