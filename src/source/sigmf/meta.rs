//! The `.sigmf-meta` JSON: the global fields bandwarden uses and every capture segment.
//!
//! Field names and meanings follow the SigMF specification (v1.x, "core" namespace).

use super::super::{sanitize, SampleFormat};
use anyhow::{anyhow, bail, Context, Result};
use serde_json::{Map, Value};
use std::io::Read;
use time::format_description::well_known::Rfc3339;
use time::OffsetDateTime;

/// Largest `.sigmf-meta` read: real ones are kilobytes (megabytes with many annotations); a
/// bigger one is refused before it is read, so a huge file cannot take the memory.
pub const MAX_META_BYTES: u64 = 64 << 20;

/// One entry of `captures`.
#[derive(Clone, Debug, PartialEq)]
pub struct Capture {
    /// `core:sample_start`: index of its first sample in the dataset (header bytes not counted).
    pub sample_start: u64,
    /// `core:global_index`: index of that sample in the original stream, when given.
    pub global_index: Option<u64>,
    /// `core:frequency`, Hz.
    pub center_hz: Option<f64>,
    /// `core:datetime`: time of its first sample.
    pub datetime: Option<OffsetDateTime>,
    /// `core:header_bytes`: bytes before its samples in the dataset file that are not samples.
    pub header_bytes: u64,
}

/// What a `.sigmf-meta` file says, before options are applied.
#[derive(Clone, Debug, PartialEq)]
pub struct Meta {
    pub datatype: SampleFormat,
    pub sample_rate_hz: Option<f64>,
    /// `core:frequency` of the first capture.
    pub center_hz: Option<f64>,
    /// `core:datetime` of the first capture.
    pub datetime: Option<OffsetDateTime>,
    /// `core:num_channels` (1 when absent); channels are interleaved sample by sample.
    pub num_channels: u64,
    /// `core:trailing_bytes`: bytes at the end of the dataset file that are not samples.
    pub trailing_bytes: u64,
    /// `core:dataset`: the file holding the samples of a non-conforming dataset.
    pub dataset: Option<String>,
    /// `core:metadata_only`: the recording has no samples.
    pub metadata_only: bool,
    /// Every capture segment, in order (at least one: an absent list means one at sample 0).
    pub captures: Vec<Capture>,
}

/// Reads a meta file of at most [`MAX_META_BYTES`] from `r`; `len` is its size when known.
pub fn read_capped(mut r: impl Read, len: Option<u64>, name: &str) -> Result<String> {
    let too_big = |n: u64| {
        anyhow!(
            "'{name}' is {n} bytes; a SigMF meta file larger than {} MiB is refused (is it really the .sigmf-meta, not the data?)",
            MAX_META_BYTES >> 20
        )
    };
    if let Some(n) = len.filter(|&n| n > MAX_META_BYTES) {
        return Err(too_big(n));
    }
    let mut bytes = Vec::new();
    (&mut r)
        .take(MAX_META_BYTES + 1)
        .read_to_end(&mut bytes)
        .with_context(|| format!("cannot read SigMF meta file '{name}'"))?;
    if bytes.len() as u64 > MAX_META_BYTES {
        return Err(too_big(bytes.len() as u64));
    }
    String::from_utf8(bytes).map_err(|e| {
        anyhow!(
            "'{name}' is not UTF-8 text (byte {}); a .sigmf-meta file is JSON: fix or regenerate it",
            e.utf8_error().valid_up_to()
        )
    })
}

/// Parses the text of a `.sigmf-meta` file. `name` (already sanitized) is used in messages.
pub fn parse_meta(text: &str, name: &str) -> Result<Meta> {
    let v: Value = serde_json::from_str(text).map_err(|e| {
        anyhow!("'{name}' is not valid SigMF JSON (line {}, column {}): {e}; fix or regenerate the .sigmf-meta file", e.line(), e.column())
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
        anyhow!("'{name}': core:datatype '{}' is not a SigMF datatype ({e})", sanitize(dt))
    })?;
    let sample_rate_hz = match global.get("core:sample_rate") {
        None | Some(Value::Null) => None,
        Some(r) => Some(r.as_f64().filter(|r| *r > 0.0 && r.is_finite()).with_context(|| {
            format!("'{name}': core:sample_rate must be a positive number; fix it or give --rate")
        })?),
    };
    let num_channels = count(global, "core:num_channels", name, "global")?.unwrap_or(1);
    if num_channels == 0 {
        bail!("'{name}': core:num_channels is 0; a recording holds at least one channel: fix the meta file");
    }
    let trailing_bytes = count(global, "core:trailing_bytes", name, "global")?.unwrap_or(0);
    let dataset = match global.get("core:dataset") {
        None | Some(Value::Null) => None,
        Some(Value::String(s)) => Some(s.clone()),
        Some(_) => {
            bail!("'{name}': core:dataset must be a file name (a string); fix the meta file")
        }
    };
    let metadata_only = global.get("core:metadata_only").and_then(Value::as_bool).unwrap_or(false);

    let captures = match v.get("captures") {
        None | Some(Value::Null) => Vec::new(),
        Some(Value::Array(list)) => {
            list.iter().enumerate().map(|(k, c)| capture(c, k, name)).collect::<Result<Vec<_>>>()?
        }
        Some(_) => {
            bail!("'{name}': \"captures\" must be a list of capture segments; fix the meta file")
        }
    };
    let mut captures = captures;
    if captures.is_empty() {
        captures.push(Capture {
            sample_start: 0,
            global_index: None,
            center_hz: None,
            datetime: None,
            header_bytes: 0,
        });
    }
    for (k, pair) in captures.windows(2).enumerate() {
        if pair[1].sample_start <= pair[0].sample_start {
            bail!(
                "'{name}': captures[{}] starts at sample {} but captures[{k}] at {}; SigMF captures must be in increasing core:sample_start order: fix the meta file",
                k + 1,
                pair[1].sample_start,
                pair[0].sample_start
            );
        }
    }
    Ok(Meta {
        datatype,
        sample_rate_hz,
        center_hz: captures[0].center_hz,
        datetime: captures[0].datetime,
        num_channels,
        trailing_bytes,
        dataset,
        metadata_only,
        captures,
    })
}

fn capture(c: &Value, k: usize, name: &str) -> Result<Capture> {
    let obj = c
        .as_object()
        .with_context(|| format!("'{name}': captures[{k}] is not an object; fix the meta file"))?;
    let at = format!("captures[{k}]");
    let sample_start = match count(obj, "core:sample_start", name, &at)? {
        Some(s) => s,
        None if k == 0 => 0,
        None => bail!("'{name}': {at} has no core:sample_start; every capture after the first needs one: fix the meta file"),
    };
    let center_hz = match obj.get("core:frequency") {
        None | Some(Value::Null) => None,
        Some(f) => Some(f.as_f64().filter(|f| f.is_finite()).with_context(|| {
            format!("'{name}': {at}.core:frequency must be a number of Hz; fix it or give --center")
        })?),
    };
    let datetime = match obj.get("core:datetime") {
        None | Some(Value::Null) => None,
        Some(Value::String(s)) => Some(OffsetDateTime::parse(s, &Rfc3339).map_err(|e| {
            anyhow!(
                "'{name}': {at}.core:datetime '{}' is not RFC 3339 ({e}); fix it or give --start",
                sanitize(s)
            )
        })?),
        Some(_) => {
            bail!("'{name}': {at}.core:datetime must be an RFC 3339 string; fix it or give --start")
        }
    };
    Ok(Capture {
        sample_start,
        global_index: count(obj, "core:global_index", name, &at)?,
        center_hz,
        datetime,
        header_bytes: count(obj, "core:header_bytes", name, &at)?.unwrap_or(0),
    })
}

/// A non-negative integer field, `None` when absent.
fn count(obj: &Map<String, Value>, key: &str, name: &str, at: &str) -> Result<Option<u64>> {
    match obj.get(key) {
        None | Some(Value::Null) => Ok(None),
        Some(v) => v.as_u64().map(Some).with_context(|| {
            format!(
                "'{name}': {at}.{key} must be a whole number from 0 to {}, not {}; fix the meta file",
                u64::MAX,
                short(v)
            )
        }),
    }
}

/// A JSON value for a message: sanitized and cut to a readable length.
fn short(v: &Value) -> String {
    let text = sanitize(&v.to_string());
    match text.char_indices().nth(40) {
        Some((i, _)) => format!("{}…", &text[..i]),
        None => text,
    }
}
