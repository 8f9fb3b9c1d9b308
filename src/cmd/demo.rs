//! `bandwarden demo`: write the built-in scene as IQ, to try files and pipes without a receiver.
//!
//! A SigMF recording also carries the scene's truth: one annotation per keyed interval of every
//! channel (sample range, frequency edges, channel name), so other tools can check what they find
//! against what was sent.

use crate::cli::demo::DemoContainer;
use crate::cli::DemoConfig;
use crate::messages::{note, sanitize};
use crate::output::samples::{RawSink, SampleSink, WavSink};
use crate::output::sink;
use crate::source::demo::{channels, DemoSource, SITE_NAME};
use crate::source::{sigmf, SampleSource};
use anyhow::{Context, Result};
use num_complex::Complex32;
use serde_json::{json, Value};
use std::io::BufWriter;
use std::process::ExitCode;

pub fn run(args: DemoConfig) -> Result<ExitCode> {
    let center = args.center_hz;
    let total = args.total_samples;
    if args.start.is_some() && args.container != DemoContainer::Sigmf {
        note("--start is only recorded in SigMF output (a name ending .sigmf-meta)");
    }
    let mut out: Box<dyn SampleSink> = match args.container {
        DemoContainer::Wav => Box::new(WavSink::create(&args.out, args.format, args.rate)?),
        DemoContainer::Raw => {
            let sink = sink::open(&args.out, false, "samples")?;
            Box::new(RawSink {
                out: BufWriter::with_capacity(1 << 20, sink.out),
                bytes: Vec::new(),
            })
        }
        DemoContainer::Sigmf => {
            let (meta_path, data_path) = sigmf::paths(&args.out);
            let meta = annotated_meta(&args, center, total.unwrap_or(0))?;
            std::fs::write(&meta_path, meta)
                .with_context(|| format!("cannot write '{}'", sanitize(&meta_path)))?;
            let sink = sink::open(&data_path, false, "samples")?;
            Box::new(RawSink {
                out: BufWriter::with_capacity(1 << 20, sink.out),
                bytes: Vec::new(),
            })
        }
    };
    let mut src = DemoSource::with_seed(args.rate, center, args.realtime, args.seed)
        .with_start_time(args.start);
    let mut samples = Vec::new();
    let mut written = 0u64;
    let block = (args.rate / 100.0).clamp(1024.0, 262_144.0) as usize;
    loop {
        let want = match total {
            Some(t) if written >= t => break,
            Some(t) => ((t - written) as usize).min(block),
            None => block,
        };
        samples.resize(want, Complex32::default());
        let n = src.read(&mut samples[..want])?;
        out.put(args.format, &samples[..n])?;
        if args.realtime {
            out.flush()?;
        }
        written += n as u64;
    }
    out.finish()?;
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
