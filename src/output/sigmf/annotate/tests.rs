use super::*;
use crate::dsp::{EngineConfig, WindowKind};
use crate::measure::occupancy::tests::{band, channel, run, Keyed, CENTER, FS};
use crate::pipeline::{Clock, TimeSource};
use crate::plan::parse_channel_flag;
use crate::source::SourceInfo;

fn run_info() -> RunInfo {
    let source =
        SourceInfo { format: Some(SampleFormat::Cf32Le), ..SourceInfo::synthetic(FS, CENTER) };
    let engine = EngineConfig {
        fft_size: 512,
        window: WindowKind::Hann,
        overlap: 0.5,
        frames_per_output: Some(8),
    };
    RunInfo { source, engine, clock: Clock::new(FS, None), time_source: TimeSource::None }
}

fn tmp(name: &str) -> PathBuf {
    let dir =
        std::env::temp_dir().join(format!("bandwarden-annotate-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

#[test]
fn stream_samples_map_to_dataset_samples_across_lost_stretches() {
    // Capture 0: stream [0, 30 000) at dataset 0; capture 1: stream [50 000, 80 000) at 30 000.
    let m = Mapping::Pieces { pieces: vec![(0, 0), (50_000, 30_000)], total: 60_000 };
    assert_eq!(m.span(10_000, 20_000), Some((10_000, 10_000)));
    assert_eq!(m.span(55_000, 60_000), Some((35_000, 5_000)));
    // Across the lost stretch: the samples held on either side, contiguous in the dataset.
    assert_eq!(m.span(25_000, 55_000), Some((25_000, 10_000)));
    assert_eq!(m.span(35_000, 45_000), None, "all lost");
    assert_eq!(Mapping::Offset(100).span(5, 10), Some((105, 5)));
}

/// A carrier keyed on from 0.25 s to 0.75 s, 20 kHz above the centre at −30 dBFS (the truth of
/// the synthetic band): one annotation at its time and in its band, in a file any SigMF reader
/// resolves to the raw dataset beside it.
#[test]
fn an_emission_becomes_an_annotation_over_the_raw_dataset() {
    let n = FS as usize;
    let on = |i: u64| (FS as u64 / 4..3 * FS as u64 / 4).contains(&i);
    let x = band(n, &[Keyed { offset_hz: 20e3, level_dbfs: -30.0, on: &on }], 7);
    let (events, _) = run(&x, 512, None, 1.0, 0.025, vec![channel(20e3, 10e3)]);
    let dir = tmp("raw");
    let data = dir.join("band.cf32");
    let mut bytes = Vec::new();
    SampleFormat::Cf32Le.encode(&x, &mut bytes);
    std::fs::write(&data, bytes).unwrap();
    let plan = Plan::from_parts(None, &[parse_channel_flag("gate=100.02M:10k").unwrap()]).unwrap();
    let path = dir.join("band.sigmf-meta");
    let writer = AnnotationWriter::new(
        path.to_str().unwrap(),
        Dataset::Raw { data: data.clone(), format: SampleFormat::Cf32Le },
    )
    .unwrap();
    let mut ann = LogAnnotations::new(writer, &plan);
    let info = run_info();
    for e in &events {
        ann.event(e, &info).unwrap();
    }
    let end = RunEnd {
        reason: crate::pipeline::StopReason::EndOfInput,
        end_sample: n as u64,
        dropped_samples: 0,
    };
    ann.finish(&end, &info).unwrap();
    assert_eq!(ann.summary.as_ref().unwrap().written, 1);
    let meta: Value = serde_json::from_slice(&std::fs::read(&path).unwrap()).unwrap();
    assert_eq!(meta["global"]["core:dataset"], "band.cf32");
    assert_eq!(meta["global"]["core:datatype"], "cf32_le");
    assert_eq!(meta["global"]["core:extensions"][0]["name"], NAMESPACE);
    let a = &meta["annotations"][0];
    // Start and end within a row's span (8 frames of 256 hop plus a frame: 2 560 samples) of the
    // truth (see the occupancy module's definitions).
    let slack = 2_560.0;
    let start = a["core:sample_start"].as_f64().unwrap();
    let count = a["core:sample_count"].as_f64().unwrap();
    assert!((start - FS / 4.0).abs() <= slack, "{a}");
    assert!((start + count - 3.0 * FS / 4.0).abs() <= slack, "{a}");
    // A pure carrier's 99 % band is narrow and holds the carrier's frequency.
    let (lo, hi) =
        (a["core:freq_lower_edge"].as_f64().unwrap(), a["core:freq_upper_edge"].as_f64().unwrap());
    assert!(lo < CENTER + 20e3 && CENTER + 20e3 < hi && hi - lo < 2e3, "{a}");
    assert_eq!(a["core:label"], "gate");
    // Mean level of the keyed carrier: −30 dBFS plus the channel's noise (−40 dBFS over 200 kHz
    // is −53 dBFS in 10 kHz, +0.02 dB); the rows at either end hold the carrier for part of
    // their span only, two of some 50 rows, which can lower the mean by up to about 0.2 dB.
    let mean = a["bandwarden:mean_dbfs"].as_f64().unwrap();
    assert!((-30.3..=-29.9).contains(&mean), "{a}");
    assert!((a["bandwarden:snr_db"].as_f64().unwrap() - 23.0).abs() < 1.0, "{a}");
    assert!(a["core:comment"].as_str().unwrap().contains("SNR"), "{a}");
    assert!(a.get("bandwarden:class").is_none(), "not classified, no class: {a}");
}

#[test]
fn a_classified_emission_names_its_class_and_designator() {
    let class = crate::measure::classify::Classification {
        class: crate::measure::classify::Class::Fsk,
        confidence: 0.75,
        params: crate::measure::classify::ClassParams {
            symbol_rate_hz: Some(1200.0),
            ..Default::default()
        },
        designator: "2K20F".into(),
        note: None,
    };
    let note = EmissionNote {
        sample_start: 10,
        sample_count: 20,
        freq_lower_edge_hz: 1e6,
        freq_upper_edge_hz: 1.0022e6,
        label: "gate".into(),
        comment: comment(Some(-30.0), None, None, Some(2.2e3)),
        mean_dbfs: Some(-30.0),
        peak_dbfs: None,
        snr_db: None,
        obw_hz: Some(2.2e3),
        channel_center_hz: None,
        partial: false,
        class: Some(Box::new(class)),
    };
    let a = Value::Object(annotation(&note, 10, 20));
    assert_eq!(a["bandwarden:class"], "fsk");
    assert_eq!(a["bandwarden:class_confidence"], 0.75);
    assert_eq!(a["bandwarden:class_params"]["symbol_rate_hz"], 1200.0);
    assert_eq!(a["bandwarden:designator"], "2K20F");
    let c = a["core:comment"].as_str().unwrap();
    assert!(c.starts_with("mean -30.0 dBFS") && c.ends_with("designator 2K20F"), "{c}");
}

#[test]
fn a_dataset_in_another_folder_is_refused_before_the_run() {
    let dir = tmp("elsewhere");
    let data = dir.join("x.cu8");
    std::fs::write(&data, [0u8; 4]).unwrap();
    let other = tmp("other").join("notes.sigmf-meta");
    let e = AnnotationWriter::new(
        other.to_str().unwrap(),
        Dataset::Raw { data, format: SampleFormat::Cu8 },
    )
    .err()
    .unwrap();
    assert!(e.to_string().contains("folder of the dataset"), "{e}");
}
