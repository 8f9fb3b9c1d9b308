//! SigMF recordings (an open standard): a JSON `.sigmf-meta` beside a `.sigmf-data`, a
//! `.sigmf` archive (an uncompressed tar holding `NAME/NAME.sigmf-meta` and its data), or a meta
//! file naming a non-conforming dataset (`core:dataset`).
//!
//! Read from the meta file: `core:datatype`, `core:sample_rate`, `core:num_channels`,
//! `core:trailing_bytes`, `core:dataset`, `core:metadata_only`, and of every capture segment
//! `core:sample_start`, `core:global_index`, `core:frequency`, `core:datetime` and
//! `core:header_bytes` (see [`layout`] for where samples lie). Every segment is read in order,
//! header and trailing bytes skipped; segments of different frequencies are the dwells of a
//! retuned receiver, stitched into a panorama ([`super::tuning`]) unless one is chosen
//! (`--segment`), and a multi-channel recording is refused unless one channel is
//! chosen (`--input-channel`). Command-line options override what the file says.
//!
//! `core:dataset` is resolved against the meta file's folder and must stay inside it: an
//! absolute path or one with `..` is refused, so a meta file received from elsewhere cannot
//! make bandwarden read an arbitrary file.

mod archive;
pub mod layout;
pub mod meta;
#[cfg(test)]
mod read_tests;
mod stream;

pub use meta::{parse_meta, Capture, Meta, MAX_META_BYTES};

use super::raw::RawSource;
use super::tuning::Tuning;
use super::{sanitize, InputRequest, SampleFormat, SampleSource, SourceInfo};
use anyhow::{bail, Context, Result};
use layout::{Choice, Overrides};
use serde_json::Value;
use std::fs::File;
use std::path::{Component, Path, PathBuf};
use stream::SpanStream;
use time::format_description::well_known::Rfc3339;
use time::OffsetDateTime;

/// Paths of the meta and data files for any of `x`, `x.sigmf-meta`, `x.sigmf-data`, `x.sigmf`.
pub fn paths(path: &str) -> (String, String) {
    let stem = path
        .strip_suffix(".sigmf-meta")
        .or_else(|| path.strip_suffix(".sigmf-data"))
        .or_else(|| path.strip_suffix(".sigmf"))
        .unwrap_or(path);
    (format!("{stem}.sigmf-meta"), format!("{stem}.sigmf-data"))
}

/// A recording found on disk: its metadata and where its dataset lies.
struct Located {
    /// The meta file, for messages (sanitized).
    meta_label: String,
    meta: Meta,
    /// The file holding the dataset, and the dataset's first byte and length in it.
    data_file: PathBuf,
    data_base: u64,
    data_len: u64,
    /// The dataset, for messages and the source label (sanitized).
    data_label: String,
}

pub fn open(path: &str, req: &InputRequest) -> Result<Box<dyn SampleSource>> {
    let is_archive = path.to_ascii_lowercase().ends_with(".sigmf") && Path::new(path).is_file();
    let rec = if is_archive { archive::locate(path)? } else { locate_pair(path)? };
    let Located { meta_label, meta, data_file, data_base, data_len, data_label } = rec;
    if meta.metadata_only {
        bail!("'{meta_label}' is a metadata-only recording (core:metadata_only): it has no samples to analyse");
    }
    let format = req.format.unwrap_or(meta.datatype);
    let Some(rate) = req.sample_rate_hz.or(meta.sample_rate_hz) else {
        bail!("'{meta_label}' gives no core:sample_rate: give --rate (e.g. --rate 2.4M)");
    };
    let bps = format.bytes_per_sample() as u64;
    let choice = Choice { segment: req.segment, channel: req.input_channel };
    let over = Overrides { center_hz: req.center_hz, start_time: req.start_time };
    let lay = layout::layout(&meta, data_len, bps, rate, choice, over, (&meta_label, &data_label))?;
    // Every span lies within the dataset, which lies within its file: no overflow.
    let spans = lay.spans.iter().map(|r| data_base + r.start..data_base + r.end).collect();
    let file = File::open(&data_file)
        .with_context(|| format!("cannot open SigMF data file '{data_label}'"))?;
    let stream = SpanStream::new(file, spans, lay.frame_bytes, lay.channel_offset, bps)
        .with_context(|| format!("cannot read SigMF data file '{data_label}'"))?;
    let first = &lay.segments[0];
    let info = SourceInfo {
        label: data_label,
        format: Some(format),
        sample_rate_hz: rate,
        center_hz: first.center_hz,
        start_time: first.start_time,
        total_samples: Some(lay.total_samples),
        live: false,
        tuning: Tuning::from_segments(
            &lay.segments.iter().map(|s| (s.sample_start, s.center_hz)).collect::<Vec<_>>(),
        ),
        segments: lay.segments,
        reference_level_dbm: None,
    };
    Ok(Box::new(RawSource::new(Box::new(stream), format, info)))
}

/// A `.sigmf-meta` and its dataset: `NAME.sigmf-data` beside it, or the file `core:dataset` names.
fn locate_pair(path: &str) -> Result<Located> {
    let (meta_path, data_path) = paths(path);
    let meta_label = sanitize(&meta_path);
    let file = File::open(&meta_path).with_context(|| {
        format!("cannot open SigMF meta file '{meta_label}' (a recording is NAME.sigmf-meta beside NAME.sigmf-data, or a NAME.sigmf archive)")
    })?;
    let len = file.metadata().ok().map(|m| m.len());
    let text = meta::read_capped(file, len, &meta_label)?;
    let meta = parse_meta(&text, &meta_label)?;
    let data_file = match &meta.dataset {
        Some(ds) => {
            let dir = Path::new(&meta_path).parent().unwrap_or(Path::new(""));
            dir.join(dataset_path(ds, &meta_label)?)
        }
        None => PathBuf::from(&data_path),
    };
    let data_label = sanitize(&data_file.to_string_lossy());
    let data_len = std::fs::metadata(&data_file)
        .with_context(|| {
            format!("cannot open the data file '{data_label}' of '{meta_label}'; it must lie beside the meta file (or be named by core:dataset)")
        })?
        .len();
    Ok(Located { meta_label, meta, data_file, data_base: 0, data_len, data_label })
}

/// Checks a `core:dataset` name: relative, without `..`, so it stays in the meta file's folder.
fn dataset_path(ds: &str, meta_label: &str) -> Result<PathBuf> {
    let p = Path::new(ds);
    let inside = !ds.is_empty()
        && p.components().all(|c| matches!(c, Component::Normal(_) | Component::CurDir));
    if !inside {
        bail!(
            "'{meta_label}': core:dataset '{}' is not a file name inside the meta file's folder; bandwarden refuses absolute paths and '..' there: move the dataset beside the meta file and name it relative to it",
            sanitize(ds)
        );
    }
    Ok(p.to_path_buf())
}

/// Writes a minimal `.sigmf-meta` describing a recording (used by `bandwarden demo`).
pub fn meta_json(
    format: SampleFormat,
    sample_rate_hz: f64,
    center_hz: f64,
    datetime: Option<OffsetDateTime>,
    description: &str,
) -> String {
    let mut capture = serde_json::json!({ "core:sample_start": 0, "core:frequency": center_hz });
    if let Some(t) = datetime.and_then(|t| t.format(&Rfc3339).ok()) {
        capture["core:datetime"] = Value::String(t);
    }
    let v = serde_json::json!({
        "global": {
            "core:datatype": format.name(),
            "core:sample_rate": sample_rate_hz,
            "core:version": "1.0.0",
            "core:description": description,
            "core:recorder": "bandwarden demo",
        },
        "captures": [capture],
        "annotations": [],
    });
    serde_json::to_string_pretty(&v).expect("JSON of plain values")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_the_core_fields() {
        let m = parse_meta(
            r#"{"global":{"core:datatype":"ci16_le","core:sample_rate":2400000,"core:version":"1.0.0"},
                "captures":[{"core:sample_start":0,"core:frequency":433920000,"core:datetime":"2026-03-04T05:06:07Z"}],
                "annotations":[]}"#,
            "t",
        )
        .unwrap();
        assert_eq!(m.datatype, SampleFormat::Ci16Le);
        assert_eq!(m.sample_rate_hz, Some(2.4e6));
        assert_eq!(m.center_hz, Some(433.92e6));
        assert_eq!(m.datetime.unwrap().unix_timestamp(), 1772600767);
    }

    #[test]
    fn errors_name_the_problem() {
        let e = parse_meta("{\"global\": {", "x.sigmf-meta").unwrap_err().to_string();
        assert!(e.contains("not valid SigMF JSON") && e.contains("line"), "{e}");
        let e = parse_meta(r#"{"global":{}}"#, "x").unwrap_err().to_string();
        assert!(e.contains("core:datatype is missing"), "{e}");
        let e =
            parse_meta(r#"{"global":{"core:datatype":"rf16_le"}}"#, "x").unwrap_err().to_string();
        assert!(e.contains("not a SigMF datatype"), "{e}");
        let e = parse_meta(r#"{"global":{"core:datatype":"cu8","core:sample_rate":-1}}"#, "x")
            .unwrap_err()
            .to_string();
        assert!(e.contains("positive"), "{e}");
    }

    #[test]
    fn meta_round_trips() {
        let t = OffsetDateTime::from_unix_timestamp(1_800_000_000).unwrap();
        let text = meta_json(SampleFormat::Cu8, 2.4e6, 145e6, Some(t), "x");
        let m = parse_meta(&text, "t").unwrap();
        assert_eq!(
            (m.datatype, m.sample_rate_hz, m.center_hz, m.datetime, m.captures.len()),
            (SampleFormat::Cu8, Some(2.4e6), Some(145e6), Some(t), 1)
        );
    }

    #[test]
    fn paths_from_any_name() {
        assert_eq!(paths("a/b.sigmf-meta"), ("a/b.sigmf-meta".into(), "a/b.sigmf-data".into()));
        assert_eq!(paths("a/b.sigmf-data").0, "a/b.sigmf-meta");
    }
}
