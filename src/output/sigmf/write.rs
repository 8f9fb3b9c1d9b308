//! What every SigMF file bandwarden writes shares: the global object, capture segments with
//! sample-exact times, the declaration of our extension namespace, and writing a meta file so
//! that a reader never sees half of it.
//!
//! Field names follow the SigMF specification (core namespace, v1.x). Fields of our own live in
//! the extension namespace [`NAMESPACE`], declared in `global.core:extensions` as optional, so
//! any SigMF tool may ignore them (the specification requires every namespace used to be
//! declared there).

use crate::pipeline::Clock;
use crate::source::SampleFormat;
use serde_json::{json, Map, Value};
use std::io::{self, Write};
use std::path::{Path, PathBuf};
use time::macros::format_description;
use time::{OffsetDateTime, UtcOffset};

/// Our extension namespace: `bandwarden:snr_db`, `bandwarden:lost_samples`, …
pub const NAMESPACE: &str = "bandwarden";
/// Version of the fields we write under [`NAMESPACE`] (documented in the README, "Writing SigMF").
pub const NAMESPACE_VERSION: &str = "1.0.0";
/// The SigMF version whose fields we write (every field used exists since 1.0.0).
pub const SIGMF_VERSION: &str = "1.0.0";

/// A global object: datatype, rate, version, description, recorder, and our namespace declared.
pub fn global(format: SampleFormat, sample_rate_hz: f64, description: &str) -> Map<String, Value> {
    let v = json!({
        "core:datatype": format.name(),
        "core:sample_rate": sample_rate_hz,
        "core:version": SIGMF_VERSION,
        "core:description": description,
        "core:recorder": format!("bandwarden {}", env!("CARGO_PKG_VERSION")),
        "core:extensions": [extension()],
    });
    match v {
        Value::Object(m) => m,
        _ => unreachable!("a JSON object literal"),
    }
}

/// The declaration of [`NAMESPACE`] for `core:extensions`.
pub fn extension() -> Value {
    json!({ "name": NAMESPACE, "version": NAMESPACE_VERSION, "optional": true })
}

/// Adds our namespace to a global object's `core:extensions` unless it is declared already
/// (for metadata that started as someone else's).
pub fn declare_extension(global: &mut Map<String, Value>) {
    let list = global.entry("core:extensions").or_insert_with(|| Value::Array(Vec::new()));
    if let Value::Array(items) = list {
        if !items.iter().any(|e| e["name"] == NAMESPACE) {
            items.push(extension());
        }
    } else {
        *list = Value::Array(vec![extension()]);
    }
}

/// A capture segment starting at dataset index `sample_start`, whose first sample was sample
/// `global_index` of the stream bandwarden read.
pub fn capture(
    sample_start: u64,
    global_index: u64,
    center_hz: f64,
    datetime: Option<String>,
) -> Map<String, Value> {
    let mut c = Map::new();
    c.insert("core:sample_start".into(), sample_start.into());
    c.insert("core:global_index".into(), global_index.into());
    c.insert("core:frequency".into(), center_hz.into());
    if let Some(t) = datetime {
        c.insert("core:datetime".into(), t.into());
    }
    c
}

/// The time of stream sample `sample` for a SigMF `core:datetime`: RFC 3339 UTC with
/// microseconds, computed from the clock's segment marks to the sample (the log's stamps are
/// rounded to milliseconds; a capture's start should not be).
pub fn datetime(clock: &Clock, sample: u64) -> Option<String> {
    let (at, t0) = match clock.marks.iter().rev().find(|(at, _)| *at <= sample) {
        Some(&mark) => mark,
        None => (0, clock.start?),
    };
    let ns = ((sample - at) as f64 / clock.rate * 1e9).round();
    let t = t0.checked_add(time::Duration::nanoseconds(ns as i64))?;
    rfc3339_us(t)
}

/// `2026-05-01T08:00:00.250000Z`; `None` outside years 0000..=9999.
pub fn rfc3339_us(t: OffsetDateTime) -> Option<String> {
    let fmt =
        format_description!("[year]-[month]-[day]T[hour]:[minute]:[second].[subsecond digits:6]Z");
    let utc = t.checked_to_offset(UtcOffset::UTC)?;
    (0..=9999).contains(&utc.year()).then(|| utc.format(&fmt).ok())?
}

/// Writes `meta` (pretty JSON) to `path` through a temporary file beside it and a rename, so the
/// file on disk is always a whole, valid meta file (the old one or the new one).
pub fn write_meta(path: &Path, meta: &Value) -> io::Result<()> {
    let tmp = temp_beside(path);
    let text = serde_json::to_vec_pretty(meta).map_err(io::Error::other)?;
    let mut f = std::fs::File::create(&tmp)?;
    f.write_all(&text)?;
    f.write_all(b"\n")?;
    f.sync_all()?;
    drop(f);
    std::fs::rename(&tmp, path)
}

fn temp_beside(path: &Path) -> PathBuf {
    let mut name = path.file_name().unwrap_or_default().to_os_string();
    name.push(".partial");
    path.with_file_name(name)
}

/// The meta and data paths of a recording named `path` (`x`, `x.sigmf-meta` or
/// `x.sigmf-data`); a `.sigmf` archive is not written.
pub fn pair(path: &str) -> Result<(PathBuf, PathBuf), String> {
    if path.to_ascii_lowercase().ends_with(".sigmf") {
        return Err(format!(
            "'{}': bandwarden writes SigMF as a .sigmf-meta/.sigmf-data pair, not an archive; name the .sigmf-meta",
            crate::messages::sanitize(path)
        ));
    }
    let (meta, data) = crate::source::sigmf::paths(path);
    Ok((meta.into(), data.into()))
}

/// A file name relative to a meta file's folder when the file lies in it (for `core:dataset`).
pub fn relative_name(meta: &Path, data: &Path) -> Option<String> {
    let folder = |p: &Path| {
        let parent = p.parent().filter(|d| !d.as_os_str().is_empty()).unwrap_or(Path::new("."));
        std::fs::canonicalize(parent).ok()
    };
    (folder(meta)? == folder(data)?).then(|| data.file_name()?.to_str().map(str::to_string))?
}

#[cfg(test)]
mod tests {
    use super::*;
    use time::format_description::well_known::Rfc3339;

    #[test]
    fn capture_times_are_exact_to_the_microsecond() {
        let t0 = OffsetDateTime::parse("2026-05-01T08:00:00Z", &Rfc3339).unwrap();
        let c = Clock::new(2.4e6, Some(t0));
        // 1 sample at 2.4 MS/s is 416.67 ns: 3 samples are 1.25 µs, shown as 0.000001 s.
        assert_eq!(datetime(&c, 3).unwrap(), "2026-05-01T08:00:00.000001Z");
        assert_eq!(datetime(&c, 2_400_000 * 90 + 1200).unwrap(), "2026-05-01T08:01:30.000500Z");
        assert_eq!(datetime(&Clock::new(1.0, None), 5), None);
        let t1 = OffsetDateTime::parse("2026-05-01T09:00:00Z", &Rfc3339).unwrap();
        let seg = Clock { rate: 1e3, start: Some(t0), marks: vec![(0, t0), (1000, t1)] };
        assert_eq!(datetime(&seg, 1500).unwrap(), "2026-05-01T09:00:00.500000Z");
    }

    #[test]
    fn our_namespace_is_declared_once() {
        let mut g = global(SampleFormat::Cu8, 1e6, "x");
        declare_extension(&mut g);
        assert_eq!(g["core:extensions"].as_array().unwrap().len(), 1);
        let mut other = Map::new();
        other.insert("core:extensions".into(), json!([{"name":"x","version":"1","optional":true}]));
        declare_extension(&mut other);
        assert_eq!(other["core:extensions"][1]["name"], NAMESPACE);
    }

    #[test]
    fn archives_are_not_written() {
        assert!(pair("a.sigmf").is_err());
        let (m, d) = pair("dir/a").unwrap();
        assert_eq!(
            (m.to_str().unwrap(), d.to_str().unwrap()),
            ("dir/a.sigmf-meta", "dir/a.sigmf-data")
        );
    }
}
