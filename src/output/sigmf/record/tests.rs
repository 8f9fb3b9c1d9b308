use super::*;
use crate::dsp::{DspConfig, WindowKind};
use crate::pipeline::{Run, RunSpec, StopReason, TimeSource};
use crate::source::{Segment, SourceInfo};
use serde_json::Value;
use time::format_description::well_known::Rfc3339;
use time::OffsetDateTime;

const RATE: f64 = 100_000.0;

fn info(format: SampleFormat, live: bool, segments: Vec<Segment>) -> SourceInfo {
    SourceInfo {
        label: "synthetic".into(),
        format: Some(format),
        sample_rate_hz: RATE,
        center_hz: 433.92e6,
        start_time: segments.first().and_then(|s| s.start_time),
        total_samples: None,
        live,
        segments,
        reference_level_dbm: None,
        tuning: None,
    }
}

fn spec(info: SourceInfo, start: Option<OffsetDateTime>) -> RunSpec {
    let dsp = DspConfig { fft_size: 256, window: WindowKind::Hann, overlap: 0.5, threads: 1 };
    let mut spec = RunSpec::new(info, dsp.engine(Some(10)), 1);
    spec.start_time = start;
    spec.time_source = TimeSource::Option;
    spec
}

fn t(s: &str) -> OffsetDateTime {
    OffsetDateTime::parse(s, &Rfc3339).unwrap()
}

/// Samples a cu8 file can hold exactly: codes decoded as the reader decodes them.
fn cu8_samples(n: usize, seed: u64) -> Vec<Complex32> {
    let mut rng = crate::testkit::Rng::new(seed);
    let bytes: Vec<u8> = (0..2 * n).map(|_| rng.below(256) as u8).collect();
    let mut out = vec![Complex32::default(); n];
    SampleFormat::Cu8.decode(&bytes, &mut out);
    out
}

fn tmp(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("bandwarden-record-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir.join("rec.sigmf-meta")
}

fn read(meta: &std::path::Path) -> (Value, Vec<u8>) {
    let v: Value = serde_json::from_slice(&std::fs::read(meta).unwrap()).unwrap();
    (v, std::fs::read(meta.with_extension("sigmf-data")).unwrap())
}

/// A live source dropped samples 30 000 .. 50 000: the recording holds the rest byte for byte in
/// the input's datatype, and its second capture says where it lies in the stream and when
/// (SigMF: `core:global_index`, `core:datetime` of the segment's first sample).
#[test]
fn a_gap_starts_a_new_capture_with_its_true_time() {
    let x = cu8_samples(80_000, 1);
    let path = tmp("gap");
    let mut rec =
        Recorder::create(path.to_str().unwrap(), Some(SampleFormat::Cu8), 10_000).unwrap();
    let start = t("2026-05-01T08:00:00Z");
    let mut run =
        Run::new(spec(info(SampleFormat::Cu8, true, Vec::new()), Some(start)), vec![&mut rec]);
    for s in (0..80_000).step_by(10_000) {
        if (30_000..50_000).contains(&s) {
            continue;
        }
        run.feed(&Block::new(s as u64, x[s..s + 10_000].to_vec())).unwrap();
    }
    run.finish(StopReason::EndOfInput).unwrap();
    drop(run);
    let (meta, data) = read(&path);
    let caps = meta["captures"].as_array().unwrap();
    assert_eq!(caps.len(), 2, "{meta}");
    assert_eq!(caps[0]["core:sample_start"], 0);
    assert_eq!(caps[0]["core:global_index"], 0);
    assert_eq!(caps[0]["core:datetime"], "2026-05-01T08:00:00.000000Z");
    assert_eq!(caps[1]["core:sample_start"], 30_000);
    assert_eq!(caps[1]["core:global_index"], 50_000);
    // 50 000 samples at 100 kS/s: half a second after the start.
    assert_eq!(caps[1]["core:datetime"], "2026-05-01T08:00:00.500000Z");
    assert_eq!(caps[1]["bandwarden:lost_before"], 20_000);
    assert_eq!(caps[1]["bandwarden:lost_cause"], "behind");
    assert_eq!(caps[1]["core:frequency"], 433.92e6);
    assert_eq!(meta["global"]["core:datatype"], "cu8");
    assert_eq!(meta["global"]["bandwarden:lost_behind"], 20_000);
    let mut want = Vec::new();
    SampleFormat::Cu8.encode(&x[..30_000], &mut want);
    SampleFormat::Cu8.encode(&x[50_000..], &mut want);
    assert_eq!(data, want, "the recording holds the input's bytes");
    let status = rec.status();
    let s = status.lock().unwrap();
    assert_eq!((s.samples_written, s.segments, s.lost_behind), (60_000, 2, 20_000));
}

/// An input made of segments recorded at different times keeps them as captures, each with its
/// own time.
#[test]
fn the_inputs_own_segments_become_captures() {
    let x = cu8_samples(30_000, 2);
    let seg = |at, s: &str| Segment { sample_start: at, center_hz: 145e6, start_time: Some(t(s)) };
    let src = info(
        SampleFormat::Cu8,
        false,
        vec![seg(0, "2026-05-01T08:00:00Z"), seg(15_000, "2026-05-01T09:00:00Z")],
    );
    let path = tmp("segments");
    let mut rec =
        Recorder::create(path.to_str().unwrap(), Some(SampleFormat::Cu8), 10_000).unwrap();
    let start = src.start_time;
    let mut run = Run::new(spec(src, start), vec![&mut rec]);
    for s in (0..30_000).step_by(10_000) {
        run.feed(&Block::new(s as u64, x[s..s + 10_000].to_vec())).unwrap();
    }
    run.finish(StopReason::EndOfInput).unwrap();
    drop(run);
    let (meta, data) = read(&path);
    let caps = meta["captures"].as_array().unwrap();
    assert_eq!(caps.len(), 2, "{meta}");
    assert_eq!(caps[1]["core:sample_start"], 15_000);
    assert_eq!(caps[1]["core:datetime"], "2026-05-01T09:00:00.000000Z");
    assert!(caps[1].get("bandwarden:lost_before").is_none());
    assert_eq!(data.len(), 60_000);
}

/// When the writer's queue is full, a live block is left out, counted, and the next block that
/// is recorded starts a capture saying how many samples the recorder lost before it.
#[test]
fn a_disk_that_falls_behind_is_written_down_as_a_gap() {
    let x = cu8_samples(40_000, 3);
    let path = tmp("behind");
    let mut rec =
        Recorder::create(path.to_str().unwrap(), Some(SampleFormat::Cu8), 10_000).unwrap();
    let mut run = Run::new(spec(info(SampleFormat::Cu8, true, Vec::new()), None), vec![&mut rec]);
    run.feed(&Block::new(0, x[..10_000].to_vec())).unwrap();
    let run_info = run.info().clone();
    drop(run);
    // Stand in for a stalled disk: a queue of one that nobody empties.
    let (stalled_tx, stalled_rx) = crossbeam_channel::bounded(1);
    let real = rec.writer.as_mut().unwrap().swap_jobs(stalled_tx).unwrap();
    rec.block(&Block::new(10_000, x[10_000..20_000].to_vec())).unwrap(); // queued
    rec.block(&Block::new(20_000, x[20_000..30_000].to_vec())).unwrap(); // queue full: left out
                                                                         // The disk recovers: what was queued reaches the writer, and recording goes on.
    rec.writer.as_mut().unwrap().swap_jobs(real.clone());
    for m in stalled_rx.try_iter() {
        real.send(m).unwrap();
    }
    drop(real);
    rec.block(&Block::new(30_000, x[30_000..].to_vec())).unwrap();
    let end = RunEnd { reason: StopReason::EndOfInput, end_sample: 40_000, dropped_samples: 0 };
    rec.settle(&end, &run_info).unwrap();
    let (meta, data) = read(&path);
    let caps = meta["captures"].as_array().unwrap();
    let last = caps.last().unwrap();
    assert_eq!(last["core:sample_start"], 20_000, "{meta}");
    assert_eq!(last["core:global_index"], 30_000);
    assert_eq!(last["bandwarden:lost_before"], 10_000);
    assert_eq!(last["bandwarden:lost_cause"], "recorder_behind");
    assert_eq!(meta["global"]["bandwarden:lost_recorder"], 10_000);
    assert_eq!(data.len(), 30_000 * 2);
}

#[test]
fn a_recording_that_cannot_be_created_is_a_clear_error() {
    let e = Recorder::create("/nonexistent-dir/x.sigmf-meta", None, 1024).err().unwrap();
    assert!(e.to_string().contains("cannot create the recording"), "{e}");
    assert!(Recorder::create("x.sigmf", None, 1024).is_err());
}
