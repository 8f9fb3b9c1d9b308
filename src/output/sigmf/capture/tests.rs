use super::*;
use crate::dsp::{DspConfig, WindowKind};
use crate::measure::occupancy::tests::{band, Keyed, CENTER, FS};
use crate::output::log::{Record, CSV_COLUMNS};
use crate::pipeline::occupancy::{OccupancyRequest, OccupancySetup};
use crate::pipeline::{Run, RunSpec, StopReason};
use crate::plan::parse_channel_flag;
use crate::source::SourceInfo;
use serde_json::Value;

/// Bursts of a −30 dBFS carrier 20 kHz above the centre (the synthetic band's truth): on during
/// `[0.25 s, 0.75 s)` and `[1.25 s, 1.5 s)`.
fn on(i: u64) -> bool {
    let t = i as f64 / FS;
    (0.25..0.75).contains(&t) || (1.25..1.5).contains(&t)
}

fn captures_of(x: &[Complex32], set: CaptureSettings) -> (Captures, Vec<Record>) {
    let info =
        SourceInfo { format: Some(SampleFormat::Cf32Le), ..SourceInfo::synthetic(FS, CENTER) };
    let dsp = DspConfig { fft_size: 512, window: WindowKind::Hann, overlap: 0.5, threads: 1 };
    let plan = Plan::from_parts(None, &[parse_channel_flag("gate=100.02M:10k").unwrap()]).unwrap();
    let req = OccupancyRequest {
        dwell_s: None,
        threshold_db: crate::plan::DEFAULT_THRESHOLD_DB,
        interval_s: 1.0,
        hang_s: 0.025,
    };
    let setup = OccupancySetup::new(&info, &dsp, &plan, &req).unwrap();
    let mut caps = Captures::new(set, &plan, info.format, 10_000).unwrap();
    let mut mail = Mailbag::default();
    let mut spec = RunSpec::new(info, setup.engine.clone(), 1);
    spec.tracker = Some(setup.tracker());
    // The records' reader listed first: the post reaches it wherever it stands.
    let mut run = Run::new(spec, vec![&mut mail, &mut caps]);
    for (k, chunk) in x.chunks(10_000).enumerate() {
        run.feed(&Block::new(k as u64 * 10_000, chunk.to_vec())).unwrap();
    }
    run.finish(StopReason::EndOfInput).unwrap();
    drop(run);
    (caps, mail.0)
}

/// Keeps the capture records the captures send, as the log would write them.
#[derive(Default)]
struct Mailbag(Vec<Record>);

impl Consumer for Mailbag {
    fn mail(&mut self, letter: &Letter, _run: &RunInfo) -> io::Result<()> {
        if let Some(c) = letter.read::<CaptureRecord>() {
            self.0.push(Record::Capture(c.clone()));
        }
        Ok(())
    }
}

/// The `capture` records among `records`.
fn capture_records(records: &[Record]) -> Vec<&CaptureRecord> {
    records
        .iter()
        .filter_map(|r| match r {
            Record::Capture(c) => Some(c),
            _ => None,
        })
        .collect()
}

fn settings(name: &str, max_bytes: u64) -> CaptureSettings {
    let dir =
        std::env::temp_dir().join(format!("bandwarden-capture-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    CaptureSettings {
        dir: dir.to_string_lossy().into(),
        pre_s: 0.1,
        post_s: 0.05,
        max_s: 30.0,
        max_bytes,
    }
}

/// Level (dBFS) and frequency offset (Hz) of the strongest line of `x`: the magnitude of its
/// least-squares fit at each 10 Hz step between 19.9 and 20.1 kHz (a direct DFT, no windowing:
/// the known carrier is searched for, not found by our own DSP).
fn strongest_line(x: &[Complex32]) -> (f64, f64) {
    (0..=20)
        .map(|k| {
            let f = 19_900.0 + 10.0 * k as f64;
            let sum: num_complex::Complex64 = x
                .iter()
                .enumerate()
                .map(|(i, s)| {
                    let p = -2.0 * std::f64::consts::PI * f * i as f64 / FS;
                    num_complex::Complex64::new(s.re as f64, s.im as f64)
                        * num_complex::Complex64::from_polar(1.0, p)
                })
                .sum();
            (20.0 * (sum.norm() / x.len() as f64).log10(), f)
        })
        .fold((f64::MIN, 0.0), |a, b| if b.0 > a.0 { b } else { a })
}

#[test]
fn each_burst_is_saved_with_the_seconds_around_it() {
    let n = 2 * FS as usize;
    let x = band(n, &[Keyed { offset_hz: 20e3, level_dbfs: -30.0, on: &on }], 11);
    let (caps, records) = captures_of(&x, settings("bursts", 1 << 30));
    assert_eq!(caps.counts.saved, 2, "{records:?}");
    let saved = capture_records(&records);
    assert_eq!(saved.len(), 2);
    for (c, (t0, t1)) in saved.iter().zip([(0.25, 0.75), (1.25, 1.5)]) {
        assert_eq!(c.status, "saved");
        // From --pre (0.1 s) before the start to --post (0.05 s) after the end, within a row
        // (2 560 samples, 12.8 ms) of the truth.
        assert!((c.t_start_s - (t0 - 0.1)).abs() < 0.013, "{c:?}");
        assert!((c.t_end_s.unwrap() - (t1 + 0.05)).abs() < 0.013, "{c:?}");
        let meta_path = PathBuf::from(c.file.as_ref().unwrap());
        let meta: Value = serde_json::from_slice(&std::fs::read(&meta_path).unwrap()).unwrap();
        let data = std::fs::read(meta_path.with_extension("sigmf-data")).unwrap();
        assert_eq!(data.len() as u64, c.bytes);
        assert_eq!(meta["global"]["core:sample_rate"], FS);
        let cap = &meta["captures"][0];
        assert_eq!(cap["core:frequency"], CENTER);
        assert_eq!(cap["core:global_index"].as_f64().unwrap(), (c.t_start_s * FS).round());
        // The IQ is the input's, byte for byte (cf32_le).
        let first = cap["core:global_index"].as_u64().unwrap() as usize;
        let mut want = Vec::new();
        SampleFormat::Cf32Le.encode(&x[first..first + c.iq_samples as usize], &mut want);
        assert_eq!(data, want);
        // Within the annotation: the carrier at its power and frequency.
        let a = &meta["annotations"][0];
        let s = a["core:sample_start"].as_u64().unwrap() as usize;
        let k = a["core:sample_count"].as_u64().unwrap() as usize;
        let mut iq = vec![Complex32::default(); data.len() / 8];
        SampleFormat::Cf32Le.decode(&data, &mut iq);
        let (level, f) = strongest_line(&iq[s + 3000..s + k - 3000]);
        assert!((level + 30.0).abs() < 0.2, "carrier at {level} dBFS");
        assert!((f - 20e3).abs() <= 10.0, "carrier at {f} Hz");
        assert_eq!(a["core:label"], "gate");
        assert_eq!(a["bandwarden:truncated"], false);
    }
}

#[test]
fn the_disk_cap_cuts_the_capture_that_reaches_it_and_skips_the_rest() {
    let n = 2 * FS as usize;
    let x = band(n, &[Keyed { offset_hz: 20e3, level_dbfs: -30.0, on: &on }], 12);
    // The first capture is 0.65 s (0.1 s before the burst, 0.5 s of it, 0.05 s after) × 200 kS/s
    // × 8 bytes = 1.04 MB; a cap of 1.3 MB leaves the second (0.4 s, 640 kB) about 250 kB.
    let cap = 1_300_000;
    let (caps, records) = captures_of(&x, settings("cap", cap));
    let saved = capture_records(&records);
    assert_eq!(caps.counts.saved, 2, "{records:?}");
    assert!(!saved[0].truncated && saved[0].cause.is_none(), "{:?}", saved[0]);
    let cut = saved[1];
    assert!(cut.truncated && cut.cause.as_deref() == Some("disk_cap"), "{cut:?}");
    // Everything written, meta files counted as META_BYTES each, stays within the cap, and the
    // cut file holds what was left of it.
    let total = saved[0].bytes + cut.bytes + 2 * META_BYTES;
    assert!(total <= cap && total > cap - 8, "{total}");
    let data =
        std::fs::read(PathBuf::from(cut.file.as_ref().unwrap()).with_extension("sigmf-data"));
    assert_eq!(data.unwrap().len() as u64, cut.bytes);

    // A cap below the first capture's pre-trigger samples (0.1 s: 160 kB) skips both.
    let (caps, records) = captures_of(&x, settings("cap-small", 100_000));
    assert_eq!((caps.counts.saved, caps.counts.skipped_disk_cap), (0, 2), "{records:?}");
    let skipped = records.iter().find_map(|r| match r {
        Record::Capture(c) if c.status == "skipped" => Some(c),
        _ => None,
    });
    let s = skipped.expect("a skipped record");
    assert_eq!(s.cause.as_deref(), Some("disk_cap"));
    assert!((s.t_start_s - 0.25).abs() < 0.013);
}

#[test]
fn capture_records_have_csv_columns() {
    let r = Record::Capture(CaptureRecord {
        channel: "gate".into(),
        status: "saved".into(),
        file: Some("x.sigmf-meta".into()),
        cause: None,
        t_start_s: 0.0,
        t_end_s: Some(1.0),
        start: None,
        end: None,
        iq_samples: 1,
        bytes: 8,
        truncated: false,
    });
    for key in serde_json::to_value(&r).unwrap().as_object().unwrap().keys() {
        assert!(CSV_COLUMNS.contains(&key.as_str()), "no CSV column for '{key}'");
    }
}
