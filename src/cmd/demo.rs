//! `bandwarden demo`: write the built-in scene as IQ, to try files and pipes without a receiver.

use crate::cli::DemoArgs;
use crate::source::demo::{DemoSource, DEFAULT_CENTER_HZ};
use crate::source::{sigmf, SampleSource};
use anyhow::{bail, Context, Result};
use std::fs::File;
use std::io::{BufWriter, Write};
use std::process::ExitCode;

pub fn run(args: DemoArgs) -> Result<ExitCode> {
    let center = args.center.unwrap_or(DEFAULT_CENTER_HZ);
    let total = match args.seconds {
        Some(s) if s > 0.0 && s.is_finite() => Some((s * args.rate).round() as u64),
        Some(s) => bail!("--seconds {s} must be a positive number"),
        None if args.out != "-" => {
            bail!("writing to a file needs --seconds (how long a recording to make)")
        }
        None => None,
    };
    let lower = args.out.to_ascii_lowercase();
    let is_sigmf = lower.ends_with(".sigmf-meta") || lower.ends_with(".sigmf-data");
    let mut out: Box<dyn Write> = if args.out == "-" {
        Box::new(BufWriter::with_capacity(1 << 20, std::io::stdout().lock()))
    } else {
        let path = if is_sigmf { sigmf::paths(&args.out).1 } else { args.out.clone() };
        Box::new(BufWriter::with_capacity(
            1 << 20,
            File::create(&path).with_context(|| format!("cannot create '{path}'"))?,
        ))
    };
    if is_sigmf {
        let meta_path = sigmf::paths(&args.out).0;
        let meta = sigmf::meta_json(
            args.format,
            args.rate,
            center,
            None,
            "bandwarden demo scene (synthetic)",
        );
        std::fs::write(&meta_path, meta).with_context(|| format!("cannot write '{meta_path}'"))?;
    }
    let mut src = DemoSource::new(args.rate, center, args.realtime);
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
        samples.clear();
        bytes.clear();
        let n = src.read(&mut samples, want)?;
        args.format.encode(&samples[..n], &mut bytes);
        out.write_all(&bytes)?;
        if args.realtime {
            out.flush()?;
        }
        written += n as u64;
    }
    out.flush()?;
    Ok(ExitCode::SUCCESS)
}
