//! Reading whole recordings: captures, header and trailing bytes, channels, archives, datasets.
//!
//! The expected byte layout is the SigMF specification's (captures, `core:header_bytes`,
//! `core:trailing_bytes`, `core:num_channels`, archives), as its reference implementation
//! computes it in `SigMFFile.get_capture_byte_boundaries`; `tests/sigmf_reference.rs` checks the
//! same against recordings that implementation writes.

use super::layout::{layout, segment_times, Choice, Overrides};
use super::*;
use crate::source::{InputIssues, Segment};
use num_complex::Complex32;
use serde_json::json;
use std::path::PathBuf;

fn dir(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("bandwarden-sigmf-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn ramp(n: usize, from: usize) -> Vec<Complex32> {
    (from..from + n).map(|i| Complex32::new(i as f32 / 1e4, -(i as f32) / 1e4)).collect()
}

fn read_all(src: &mut dyn SampleSource) -> Vec<Complex32> {
    let mut all = Vec::new();
    let mut buf = vec![Complex32::default(); 37];
    loop {
        let n = src.read(&mut buf).unwrap();
        if n == 0 {
            return all;
        }
        all.extend_from_slice(&buf[..n]);
    }
}

fn meta_text(global: Value, captures: Value) -> String {
    let mut g =
        json!({"core:datatype": "cf32_le", "core:sample_rate": 1000.0, "core:version": "1.0.0"});
    for (k, v) in global.as_object().unwrap() {
        g[k] = v.clone();
    }
    json!({"global": g, "captures": captures, "annotations": []}).to_string()
}

fn open_req(path: &std::path::Path, req: InputRequest) -> Result<Box<dyn SampleSource>> {
    open(path.to_str().unwrap(), &req)
}

/// Three captures with header bytes and trailing bytes: every sample and only samples arrive,
/// and the segments carry their frequencies and times.
#[test]
fn every_capture_is_read_and_header_bytes_are_skipped() {
    let d = dir("captures");
    let (a, b, c) = (ramp(100, 0), ramp(50, 100), ramp(70, 150));
    let mut bytes = Vec::new();
    bytes.extend_from_slice(&[0xAB; 16]); // header of capture 0
    SampleFormat::Cf32Le.encode(&a, &mut bytes);
    bytes.extend_from_slice(&[0xCD; 24]); // header of capture 1
    SampleFormat::Cf32Le.encode(&b, &mut bytes);
    SampleFormat::Cf32Le.encode(&c, &mut bytes); // capture 2: no header
    bytes.extend_from_slice(&[0xEF; 12]); // trailing bytes
    std::fs::write(d.join("r.sigmf-data"), &bytes).unwrap();
    let caps = json!([
        {"core:sample_start": 0, "core:header_bytes": 16, "core:frequency": 1e6, "core:datetime": "2026-01-01T00:00:00Z"},
        {"core:sample_start": 100, "core:header_bytes": 24, "core:frequency": 1e6, "core:datetime": "2026-01-01T01:00:00Z"},
        {"core:sample_start": 150, "core:frequency": 1e6}
    ]);
    std::fs::write(d.join("r.sigmf-meta"), meta_text(json!({"core:trailing_bytes": 12}), caps))
        .unwrap();
    let mut src = open_req(&d.join("r.sigmf-meta"), InputRequest::default()).unwrap();
    let got = read_all(src.as_mut());
    assert_eq!(got, [a, b, c].concat());
    assert_eq!(src.issues(), InputIssues::default(), "no trailing byte read as a sample");
    let info = src.info();
    assert_eq!(info.total_samples, Some(220));
    let t = |s: &str| OffsetDateTime::parse(s, &Rfc3339).unwrap();
    assert_eq!(
        info.segments,
        vec![
            Segment {
                sample_start: 0,
                center_hz: 1e6,
                start_time: Some(t("2026-01-01T00:00:00Z"))
            },
            Segment {
                sample_start: 100,
                center_hz: 1e6,
                start_time: Some(t("2026-01-01T01:00:00Z"))
            },
            // No datetime: 50 samples at 1 kS/s after the previous segment's.
            Segment {
                sample_start: 150,
                center_hz: 1e6,
                start_time: Some(t("2026-01-01T01:00:00.05Z"))
            },
        ]
    );
    // One segment alone, by its index.
    let req = InputRequest { segment: Some(1), ..Default::default() };
    let mut src = open_req(&d.join("r.sigmf-data"), req).unwrap();
    assert_eq!(read_all(src.as_mut()), ramp(50, 100));
    assert_eq!(src.info().start_time, Some(t("2026-01-01T01:00:00Z")));
    src.rewind().unwrap();
    assert_eq!(read_all(src.as_mut()).len(), 50);
}

#[test]
fn different_frequencies_make_a_tuning_timeline_unless_one_segment_is_chosen() {
    let d = dir("freqs");
    let mut bytes = Vec::new();
    SampleFormat::Cf32Le.encode(&ramp(20, 0), &mut bytes);
    std::fs::write(d.join("f.sigmf-data"), &bytes).unwrap();
    let caps = json!([
        {"core:sample_start": 0, "core:frequency": 433.92e6},
        {"core:sample_start": 10, "core:frequency": 434.5e6}
    ]);
    std::fs::write(d.join("f.sigmf-meta"), meta_text(json!({}), caps)).unwrap();
    let src = open_req(&d.join("f.sigmf-meta"), InputRequest::default()).unwrap();
    let t = src.info().tuning.clone().expect("two centres: a panorama");
    assert_eq!(t.dwell_at(9).center_hz, 433.92e6);
    assert_eq!((t.dwell_at(10).center_hz, t.dwell_at(10).start), (434.5e6, 10));
    let req = InputRequest { segment: Some(1), ..Default::default() };
    let mut src = open_req(&d.join("f.sigmf-meta"), req).unwrap();
    assert_eq!(src.info().center_hz, 434.5e6);
    assert!(src.info().tuning.is_none(), "one segment: one centre");
    assert_eq!(read_all(src.as_mut()), ramp(10, 10));
    let req = InputRequest { segment: Some(2), ..Default::default() };
    let e = open_req(&d.join("f.sigmf-meta"), req).err().unwrap().to_string();
    assert!(e.contains("--segment 2 does not exist"), "{e}");
}

#[test]
fn one_channel_of_several_is_read_when_chosen() {
    let d = dir("channels");
    let (ch0, ch1) = (ramp(30, 0), ramp(30, 500));
    let mut bytes = Vec::new();
    for i in 0..30 {
        SampleFormat::Ci16Le.encode(&[ch0[i], ch1[i]], &mut bytes); // interleaved sample by sample
    }
    std::fs::write(d.join("c.sigmf-data"), &bytes).unwrap();
    let g = json!({"core:datatype": "ci16_le", "core:num_channels": 2});
    std::fs::write(d.join("c.sigmf-meta"), meta_text(g, json!([{"core:sample_start": 0}])))
        .unwrap();
    let e = open_req(&d.join("c.sigmf-meta"), InputRequest::default()).err().unwrap().to_string();
    assert!(e.contains("2 channels") && e.contains("--input-channel"), "{e}");
    let decode = |x: &[Complex32]| {
        let mut b = Vec::new();
        SampleFormat::Ci16Le.encode(x, &mut b);
        let mut y = vec![Complex32::default(); x.len()];
        SampleFormat::Ci16Le.decode(&b, &mut y);
        y
    };
    for (c, want) in [(0, &ch0), (1, &ch1)] {
        let req = InputRequest { input_channel: Some(c), ..Default::default() };
        let mut src = open_req(&d.join("c.sigmf-meta"), req).unwrap();
        assert_eq!(src.info().total_samples, Some(30));
        assert_eq!(read_all(src.as_mut()), decode(want), "channel {c}");
    }
    let req = InputRequest { input_channel: Some(2), ..Default::default() };
    assert!(open_req(&d.join("c.sigmf-meta"), req).is_err());
}

#[test]
fn archives_are_read_in_place() {
    let d = dir("archive");
    let x = ramp(64, 3);
    let mut data = Vec::new();
    SampleFormat::Cf32Le.encode(&x, &mut data);
    let meta = meta_text(json!({}), json!([{"core:sample_start": 0, "core:frequency": 2e6}]));
    let mut tar = tar::Builder::new(File::create(d.join("a.sigmf")).unwrap());
    for (name, body) in [("a/a.sigmf-meta", meta.as_bytes()), ("a/a.sigmf-data", &data[..])] {
        let mut h = tar::Header::new_ustar();
        h.set_size(body.len() as u64);
        h.set_mode(0o644);
        h.set_cksum();
        tar.append_data(&mut h, name, body).unwrap();
    }
    tar.finish().unwrap();
    drop(tar);
    let mut src = open_req(&d.join("a.sigmf"), InputRequest::default()).unwrap();
    assert_eq!(src.info().center_hz, 2e6);
    assert_eq!(read_all(src.as_mut()), x);

    std::fs::write(d.join("junk.sigmf"), b"not a tar at all").unwrap();
    let e = open_req(&d.join("junk.sigmf"), InputRequest::default()).err().unwrap().to_string();
    assert!(e.contains("junk.sigmf") && e.contains("archive"), "{e}");
}

#[test]
fn a_dataset_is_found_beside_its_meta_and_never_outside() {
    let d = dir("dataset");
    let x = ramp(40, 9);
    let mut data = vec![0x55; 44]; // a foreign header, skipped by core:header_bytes
    SampleFormat::Cf32Le.encode(&x, &mut data);
    std::fs::write(d.join("capture.raw"), &data).unwrap();
    let caps = json!([{"core:sample_start": 0, "core:header_bytes": 44}]);
    let text = meta_text(json!({"core:dataset": "capture.raw"}), caps.clone());
    std::fs::write(d.join("n.sigmf-meta"), text).unwrap();
    let mut src = open_req(&d.join("n.sigmf-meta"), InputRequest::default()).unwrap();
    assert_eq!(read_all(src.as_mut()), x);
    for bad in ["../capture.raw", "/etc/hostname", ""] {
        let text = meta_text(json!({"core:dataset": bad}), caps.clone());
        std::fs::write(d.join("bad.sigmf-meta"), text).unwrap();
        let e = open_req(&d.join("bad.sigmf-meta"), InputRequest::default()).err().unwrap();
        assert!(e.to_string().contains("core:dataset"), "{bad}: {e}");
    }
}

fn meta_of(captures: Value, global: Value) -> Meta {
    parse_meta(&meta_text(global, captures), "m").unwrap()
}

#[test]
fn offsets_that_overflow_or_pass_the_end_are_refused() {
    let huge = json!([{"core:sample_start": 0}, {"core:sample_start": u64::MAX / 2}]);
    let m = meta_of(huge, json!({}));
    let e = layout(&m, 1 << 20, 8, 1e3, Choice::default(), Overrides::default(), ("m", "d"))
        .unwrap_err()
        .to_string();
    assert!(e.contains("captures[1]") && e.contains("overflows"), "{e}");
    let m = meta_of(json!([{"core:sample_start": 0, "core:header_bytes": u64::MAX}]), json!({}));
    assert!(layout(&m, 100, 8, 1e3, Choice::default(), Overrides::default(), ("m", "d")).is_err());
    let m = meta_of(json!([{"core:sample_start": 0}, {"core:sample_start": 1000}]), json!({}));
    let e = layout(&m, 800, 8, 1e3, Choice::default(), Overrides::default(), ("m", "d"))
        .unwrap_err()
        .to_string();
    assert!(e.contains("starts at byte 8000") && e.contains("up to byte 800"), "{e}");
    let m = meta_of(json!([]), json!({"core:trailing_bytes": 900}));
    let e = layout(&m, 800, 8, 1e3, Choice::default(), Overrides::default(), ("m", "d"))
        .unwrap_err()
        .to_string();
    assert!(e.contains("core:trailing_bytes 900"), "{e}");
    let e = parse_meta(&meta_text(json!({}), json!([{"core:sample_start": -4}])), "m")
        .unwrap_err()
        .to_string();
    assert!(e.contains("core:sample_start must be a whole number"), "{e}");
}

#[test]
fn oversized_meta_files_are_refused_before_reading() {
    let e = meta::read_capped(std::io::empty(), Some(100 << 20), "big.sigmf-meta")
        .unwrap_err()
        .to_string();
    assert!(e.contains("big.sigmf-meta") && e.contains("64 MiB"), "{e}");
}

#[test]
fn segment_times_follow_global_index_and_never_overflow() {
    let t = |s: &str| OffsetDateTime::parse(s, &Rfc3339).unwrap();
    // The global index says 2000 samples (2 s at 1 kS/s) passed between the two captures.
    let m = meta_of(
        json!([
            {"core:sample_start": 0, "core:global_index": 5000, "core:datetime": "2026-03-01T12:00:00Z"},
            {"core:sample_start": 500, "core:global_index": 7000}
        ]),
        json!({}),
    );
    let times = segment_times(&m, 1e3, 0, None);
    assert_eq!(times[1], Some(t("2026-03-01T12:00:02Z")));
    // --start moves every segment by the same amount.
    let times = segment_times(&m, 1e3, 0, Some(t("2026-03-01T13:00:00Z")));
    assert_eq!(times[1], Some(t("2026-03-01T13:00:02Z")));
    // Near the end of year 9999 a later segment has no time rather than a panic.
    let m = meta_of(
        json!([
            {"core:sample_start": 0, "core:datetime": "9999-12-31T23:59:59-23:59"},
            {"core:sample_start": 500, "core:global_index": 1}
        ]),
        json!({}),
    );
    let late = segment_times(&m, 1e-6, 0, None);
    assert!(late[0].is_some() && late[1].is_none(), "{late:?}");
    let far = segment_times(&m, 1e3, 0, Some(t("9999-12-31T23:59:59+23:59")));
    assert!(far[0].is_some());
}
