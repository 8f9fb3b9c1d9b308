//! SigMF recordings (an open standard): a JSON `.sigmf-meta` beside a raw `.sigmf-data`.
//!
//! We read `global.core:datatype`, `global.core:sample_rate`, and from the first capture
//! `core:frequency` and `core:datetime`, plus `core:sample_start` (samples to skip). Command-line
//! options override what the file says.

use super::raw::{file_stream, RawSource};
use super::{sanitize, InputRequest, SampleFormat, SampleSource, SourceInfo};
use anyhow::{bail, Context, Result};
use serde_json::Value;
use time::format_description::well_known::Rfc3339;
use time::OffsetDateTime;

/// What a `.sigmf-meta` file says, before options are applied.
#[derive(Clone, Debug, PartialEq)]
pub struct Meta {
    pub datatype: SampleFormat,
    pub sample_rate_hz: Option<f64>,
    pub center_hz: Option<f64>,
    pub datetime: Option<OffsetDateTime>,
    pub sample_start: u64,
}

/// Paths of the meta and data files for any of `x`, `x.sigmf-meta`, `x.sigmf-data`, `x.sigmf`.
pub fn paths(path: &str) -> (String, String) {
    let stem = path
        .strip_suffix(".sigmf-meta")
        .or_else(|| path.strip_suffix(".sigmf-data"))
        .or_else(|| path.strip_suffix(".sigmf"))
        .unwrap_or(path);
    (format!("{stem}.sigmf-meta"), format!("{stem}.sigmf-data"))
}

/// Parses the text of a `.sigmf-meta` file. `name` is used in error messages.
pub fn parse_meta(text: &str, name: &str) -> Result<Meta> {
    let v: Value = serde_json::from_str(text).map_err(|e| {
        anyhow::anyhow!("'{name}' is not valid SigMF JSON (line {}, column {}): {e}; fix or regenerate the .sigmf-meta file", e.line(), e.column())
    })?;
    let global = v.get("global").and_then(Value::as_object).with_context(|| {
        format!("'{name}' has no \"global\" object; a SigMF meta file needs global.core:datatype")
    })?;
    let dt = global.get("core:datatype").and_then(Value::as_str).with_context(|| {
        format!(
            "'{name}': global.core:datatype is missing; add e.g. \"core:datatype\": \"cf32_le\""
        )
    })?;
    let datatype: SampleFormat = dt.parse().map_err(|e: String| {
        anyhow::anyhow!("'{name}': core:datatype '{}' is not supported ({e}); bandwarden reads complex data only", sanitize(dt))
    })?;
    let sample_rate_hz = match global.get("core:sample_rate") {
        None | Some(Value::Null) => None,
        Some(r) => {
            let r = r
                .as_f64()
                .filter(|r| *r > 0.0 && r.is_finite())
                .with_context(|| format!("'{name}': core:sample_rate must be a positive number"))?;
            Some(r)
        }
    };
    let capture = v.get("captures").and_then(Value::as_array).and_then(|c| c.first());
    let center_hz = capture.and_then(|c| c.get("core:frequency")).and_then(Value::as_f64);
    let sample_start =
        capture.and_then(|c| c.get("core:sample_start")).and_then(Value::as_u64).unwrap_or(0);
    let datetime = match capture.and_then(|c| c.get("core:datetime")).and_then(Value::as_str) {
        None => None,
        Some(s) => Some(OffsetDateTime::parse(s, &Rfc3339).map_err(|e| {
            anyhow::anyhow!("'{name}': core:datetime '{}' is not RFC 3339 ({e})", sanitize(s))
        })?),
    };
    Ok(Meta { datatype, sample_rate_hz, center_hz, datetime, sample_start })
}

pub fn open(path: &str, req: &InputRequest) -> Result<Box<dyn SampleSource>> {
    let (meta_path, data_path) = paths(path);
    let text = std::fs::read_to_string(&meta_path)
        .with_context(|| format!("cannot read SigMF meta file '{}'", sanitize(&meta_path)))?;
    let meta = parse_meta(&text, &sanitize(&meta_path))?;
    let format = req.format.unwrap_or(meta.datatype);
    let Some(rate) = req.sample_rate_hz.or(meta.sample_rate_hz) else {
        bail!(
            "'{}' gives no core:sample_rate: give --rate (e.g. --rate 2.4M)",
            sanitize(&meta_path)
        );
    };
    let offset = meta.sample_start * format.bytes_per_sample() as u64;
    let stream = file_stream(&data_path, offset)?;
    let len = std::fs::metadata(&data_path).map(|m| m.len()).unwrap_or(0);
    let info = SourceInfo {
        label: sanitize(&data_path),
        format: Some(format),
        sample_rate_hz: rate,
        center_hz: req.center_hz.or(meta.center_hz).unwrap_or(0.0),
        start_time: req.start_time.or(meta.datetime),
        total_samples: Some(len.saturating_sub(offset) / format.bytes_per_sample() as u64),
        live: false,
    };
    Ok(Box::new(RawSource::new(Box::new(stream), format, info)))
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
            parse_meta(r#"{"global":{"core:datatype":"rf32_le"}}"#, "x").unwrap_err().to_string();
        assert!(e.contains("not supported"), "{e}");
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
            m,
            Meta {
                datatype: SampleFormat::Cu8,
                sample_rate_hz: Some(2.4e6),
                center_hz: Some(145e6),
                datetime: Some(t),
                sample_start: 0
            }
        );
    }

    #[test]
    fn paths_from_any_name() {
        assert_eq!(paths("a/b.sigmf-meta"), ("a/b.sigmf-meta".into(), "a/b.sigmf-data".into()));
        assert_eq!(paths("a/b.sigmf-data").0, "a/b.sigmf-meta");
    }
}
