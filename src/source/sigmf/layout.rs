//! Where each capture's samples lie in the dataset file, which of them are read, and when each
//! segment was taken.
//!
//! The byte arithmetic is the SigMF specification's (and its reference implementation's
//! `get_capture_byte_boundaries`): capture `k` starts at `sample_start[k] × frame` plus the
//! header bytes of captures `0..=k`, and runs to the next capture's start, or for the last one
//! to the end of the file less `core:trailing_bytes`. A frame is one sample of every channel.

use super::meta::Meta;
use crate::source::Segment;
use anyhow::{bail, Context, Result};
use std::ops::Range;
use time::OffsetDateTime;

/// What the user picked: one capture segment, one channel of a multi-channel recording.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Choice {
    pub segment: Option<usize>,
    pub channel: Option<u64>,
}

/// The bytes to read and what they hold.
#[derive(Clone, Debug, PartialEq)]
pub struct Layout {
    /// Byte ranges of the dataset (counted from its first byte), read in this order.
    pub spans: Vec<Range<u64>>,
    /// Bytes of one sample of every channel.
    pub frame_bytes: u64,
    /// Where the chosen channel's sample lies in a frame.
    pub channel_offset: u64,
    /// The segments delivered, `sample_start` counted in the delivered stream.
    pub segments: Vec<Segment>,
    pub total_samples: u64,
}

/// Options that override the file.
#[derive(Clone, Copy, Debug, Default)]
pub struct Overrides {
    pub center_hz: Option<f64>,
    pub start_time: Option<OffsetDateTime>,
}

/// Lays out `meta` over a dataset of `data_len` bytes holding samples of `sample_bytes` bytes.
/// `names` (sanitized) are the meta and data files, for messages.
pub fn layout(
    meta: &Meta,
    data_len: u64,
    sample_bytes: u64,
    rate_hz: f64,
    choice: Choice,
    over: Overrides,
    names: (&str, &str),
) -> Result<Layout> {
    let (name, data) = names;
    let n = meta.num_channels;
    let channel = match (n, choice.channel) {
        (_, Some(c)) if c < n => c,
        (_, Some(c)) => bail!(
            "'{name}' holds {n} channel(s) (core:num_channels); --input-channel {c} does not exist: give 0 to {}",
            n - 1
        ),
        (1, None) => 0,
        (_, None) => bail!(
            "'{name}' holds {n} channels interleaved (core:num_channels = {n}); bandwarden analyses one: pick it with --input-channel C (0 to {})",
            n - 1
        ),
    };
    let frame = sample_bytes.checked_mul(n).with_context(|| {
        format!("'{name}': core:num_channels {n} is too large (a frame of {n} × {sample_bytes} bytes does not fit in 64 bits): fix the meta file")
    })?;
    let caps = &meta.captures;
    if let Some(k) = choice.segment.filter(|&k| k >= caps.len()) {
        bail!(
            "'{name}' has {} capture segment(s); --segment {k} does not exist: give 0 to {}",
            caps.len(),
            caps.len() - 1
        );
    }
    let end_of_samples = data_len.checked_sub(meta.trailing_bytes).with_context(|| {
        format!(
            "'{name}': core:trailing_bytes {} is more than the {data_len} bytes of '{data}': the meta file does not describe this data file; fix it or pair the right files",
            meta.trailing_bytes
        )
    })?;

    // Byte range of every capture.
    let mut ranges = Vec::with_capacity(caps.len());
    let mut headers = 0u64;
    for (k, c) in caps.iter().enumerate() {
        let overflow = || {
            format!("'{name}': captures[{k}] lies beyond any possible file (core:sample_start {} × {frame} bytes plus the header bytes overflows 64 bits): fix the meta file", c.sample_start)
        };
        headers = headers.checked_add(c.header_bytes).with_context(overflow)?;
        let start = c
            .sample_start
            .checked_mul(frame)
            .and_then(|b| b.checked_add(headers))
            .with_context(overflow)?;
        if start > end_of_samples {
            bail!(
                "'{name}': captures[{k}] starts at byte {start} (core:sample_start {} × {frame} bytes + {headers} header bytes) but '{data}' holds samples only up to byte {end_of_samples}: the data file is cut short or belongs to another meta file; give --segment to read an earlier segment, or pair the right files",
                c.sample_start
            );
        }
        let end = match caps.get(k + 1) {
            None => end_of_samples,
            Some(next) => (next.sample_start - c.sample_start)
                .checked_mul(frame)
                .and_then(|b| b.checked_add(start))
                .with_context(|| {
                    format!("'{name}': captures[{}] lies beyond any possible file (core:sample_start {} × {frame} bytes overflows 64 bits): fix the meta file", k + 1, next.sample_start)
                })?
                .min(end_of_samples),
        };
        ranges.push(start..end);
    }

    // Captures at different centres are dwells of a retuned receiver: stitched into a panorama
    // (see `source::tuning`), unless one segment is chosen.
    let stated = caps.iter().find_map(|c| c.center_hz);
    let chosen: Vec<usize> = match choice.segment {
        Some(k) => vec![k],
        None => (0..caps.len()).collect(),
    };
    let times = segment_times(meta, rate_hz, chosen[0], over.start_time);
    let mut spans = Vec::with_capacity(chosen.len());
    let mut segments = Vec::with_capacity(chosen.len());
    let mut delivered = 0u64;
    for &k in &chosen {
        let r = &ranges[k];
        let samples = (r.end - r.start) / frame;
        segments.push(Segment {
            sample_start: delivered,
            center_hz: over.center_hz.or(caps[k].center_hz).or(stated).unwrap_or(0.0),
            start_time: times[k],
        });
        delivered += samples;
        // Whole frames only, except at the very end of the dataset, where an incomplete sample
        // of a one-channel recording is left for the reader to count as trailing bytes.
        let end = if n == 1 && r.end == end_of_samples { r.end } else { r.start + samples * frame };
        spans.push(r.start..end);
    }
    Ok(Layout {
        spans,
        frame_bytes: frame,
        channel_offset: channel * sample_bytes,
        segments,
        total_samples: delivered,
    })
}

/// The time of each capture's first sample: its own `core:datetime`, else carried from a
/// neighbour that has one, over the samples between them (the `core:global_index` step when both
/// give one: the original stream's count, gaps included). `start` (`--start`) sets the time of
/// capture `first`; the others keep their distance from it. `None` where unknown or beyond the
/// range of dates (year 9999).
pub fn segment_times(
    meta: &Meta,
    rate_hz: f64,
    first: usize,
    start: Option<OffsetDateTime>,
) -> Vec<Option<OffsetDateTime>> {
    let caps = &meta.captures;
    let step = |a: usize, b: usize| -> f64 {
        let (x, y) = match (caps[a].global_index, caps[b].global_index) {
            (Some(x), Some(y)) => (x, y),
            _ => (caps[a].sample_start, caps[b].sample_start),
        };
        (y as f64 - x as f64) / rate_hz
    };
    let fill = |t: &mut Vec<Option<OffsetDateTime>>| {
        for k in 1..t.len() {
            if t[k].is_none() {
                t[k] = t[k - 1].and_then(|p| shift(p, step(k - 1, k)));
            }
        }
        for k in (0..t.len().saturating_sub(1)).rev() {
            if t[k].is_none() {
                t[k] = t[k + 1].and_then(|p| shift(p, -step(k, k + 1)));
            }
        }
    };
    let mut t: Vec<Option<OffsetDateTime>> = caps.iter().map(|c| c.datetime).collect();
    fill(&mut t);
    if let Some(s) = start {
        match t[first] {
            Some(was) => {
                let delta = s - was;
                for x in t.iter_mut() {
                    *x = x.and_then(|x| x.checked_add(delta));
                }
            }
            None => {
                t.iter_mut().for_each(|x| *x = None);
                t[first] = Some(s);
                fill(&mut t);
            }
        }
    }
    t
}

/// `t + seconds`, `None` past the range of dates.
pub fn shift(t: OffsetDateTime, seconds: f64) -> Option<OffsetDateTime> {
    time::Duration::checked_seconds_f64(seconds).and_then(|d| t.checked_add(d))
}
