//! `bandwarden demo`: write the built-in scene as IQ, to try files and pipes without a receiver.
//!
//! A SigMF recording also carries the scene's truth: one annotation per keyed interval of every
//! channel (sample range, frequency edges, channel name), so other tools can check what they find
//! against what was sent.

use crate::cli::DemoConfig;
use crate::messages::{note, sanitize};
use crate::source::demo::{channels, DemoSource, SITE_NAME};
use crate::source::{sigmf, SampleSource};
use anyhow::{Context, Result};
use num_complex::Complex32;
use serde_json::{json, Value};
use std::fs::File;
use std::io::{BufWriter, Write};
use std::process::ExitCode;

pub fn run(args: DemoConfig) -> Result<ExitCode> {
    let center = args.center_hz;
    let total = args.total_samples;
    let lower = args.out.to_ascii_lowercase();
    let is_sigmf = lower.ends_with(".sigmf-meta") || lower.ends_with(".sigmf-data");
    if args.start.is_some() && !is_sigmf {
        note("--start is only recorded in SigMF output (a name ending .sigmf-meta)");
    }
    let data_path = if args.out == "-" {
        "standard output".to_string()
    } else if is_sigmf {
        sigmf::paths(&args.out).1
    } else {
        args.out.clone()
    };
    let shown = sanitize(&data_path);
    let mut out: Box<dyn Write> = if args.out == "-" {
        Box::new(BufWriter::with_capacity(1 << 20, std::io::stdout().lock()))
    } else {
        Box::new(BufWriter::with_capacity(
            1 << 20,
            File::create(&data_path).with_context(|| {
                format!("cannot create '{shown}'; check the directory exists and is writable")
            })?,
        ))
    };
    if is_sigmf {
        let meta_path = sigmf::paths(&args.out).0;
        let meta = annotated_meta(&args, center, total.unwrap_or(0))?;
        std::fs::write(&meta_path, meta).with_context(|| {
            format!(
                "cannot write '{}'; check the directory exists and is writable",
                sanitize(&meta_path)
            )
        })?;
    }
    let write_failed = || {
        format!("cannot write the samples to '{shown}'; check the disk has room and the path is writable")
    };
    let mut src = DemoSource::with_seed(args.rate, center, args.realtime, args.seed)
        .with_start_time(args.start);
    let mut samples = Vec::new();
    let mut bytes = Vec::new();
    let mut written = 0u64;
    let block = (args.rate / 100.0).clamp(1024.0, 262_144.0) as usize;
    loop {
        let want = match total {
            Some(t) if written >= t => break,
            Some(t) => ((t - written) as usize).min(block),
            None => block,
        };
        samples.resize(want, Complex32::default());
        bytes.clear();
        let n = src.read(&mut samples[..want])?;
        args.format.encode(&samples[..n], &mut bytes);
        out.write_all(&bytes).with_context(write_failed)?;
        if args.realtime {
            out.flush().with_context(write_failed)?;
        }
        written += n as u64;
    }
    out.flush().with_context(write_failed)?;
    Ok(ExitCode::SUCCESS)
}

/// The `.sigmf-meta` text: the core fields plus the scene's keyed intervals as annotations.
fn annotated_meta(args: &DemoConfig, center_hz: f64, total: u64) -> Result<String> {
    let description = format!(
        "bandwarden demo scene: {SITE_NAME} (an invented site), synthetic, seed {}",
        args.seed
    );
    let text = sigmf::meta_json(args.format, args.rate, center_hz, args.start, &description);
    let mut meta: Value = serde_json::from_str(&text).context("SigMF meta of our own making")?;
    meta["annotations"] = Value::Array(truth_annotations(args.rate, center_hz, total));
    Ok(serde_json::to_string_pretty(&meta)?)
}

/// One SigMF annotation per keyed run of each channel present, in order of first sample.
fn truth_annotations(rate_hz: f64, center_hz: f64, total: u64) -> Vec<Value> {
    let mut found = Vec::new();
    for c in channels().into_iter().filter(|c| c.fits(rate_hz)) {
        let mut runs = Vec::new();
        c.schedule.runs(rate_hz, 0, total, &mut runs);
        let (lo, hi) =
            (c.center_hz(center_hz) - c.width_hz / 2.0, c.center_hz(center_hz) + c.width_hz / 2.0);
        for (a, b) in runs {
            found.push((
                a,
                json!({
                    "core:sample_start": a,
                    "core:sample_count": b - a,
                    "core:freq_lower_edge": lo,
                    "core:freq_upper_edge": hi,
                    "core:label": c.name,
                    "core:comment": "keyed (scene truth)",
                }),
            ));
        }
    }
    found.sort_by_key(|(a, _)| *a);
    found.into_iter().map(|(_, v)| v).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn annotations_follow_the_schedule() {
        let rate = 1e6;
        let total = 4_000_000;
        let notes = truth_annotations(rate, 433.5e6, total);
        let starts: Vec<u64> =
            notes.iter().map(|n| n["core:sample_start"].as_u64().unwrap()).collect();
        assert!(starts.windows(2).all(|w| w[0] <= w[1]), "SigMF wants annotations in order");
        for c in channels() {
            let mine: Vec<_> = notes.iter().filter(|n| n["core:label"] == c.name).collect();
            let keyed: u64 = mine.iter().map(|n| n["core:sample_count"].as_u64().unwrap()).sum();
            // Truth: the schedule's exact keyed time over the 4 s (to a sample per edge).
            let expect = c.schedule.keyed_time(0.0, 4.0) * rate;
            assert!((keyed as f64 - expect).abs() <= 2.0 * mine.len() as f64, "{}", c.name);
            let lo = mine[0]["core:freq_lower_edge"].as_f64().unwrap();
            assert!((lo - (433.5e6 + c.offset_hz - c.width_hz / 2.0)).abs() < 1e-3);
        }
    }
}
