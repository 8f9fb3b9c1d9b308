//! Two-channel WAV files (left = I, right = Q), read with `hound`; the rate comes from the header.
//!
//! Integer samples of `b` bits map to full scale as `x / 2^(b−1)`, like the raw integer formats.

use super::{sanitize, InputIssues, InputRequest, SampleSource, SourceInfo};
use anyhow::{bail, Context, Result};
use hound::{SampleFormat as WavFormat, WavReader};
use num_complex::Complex32;
use std::fs::File;
use std::io::BufReader;

pub struct WavSource {
    path: String,
    reader: WavReader<BufReader<File>>,
    info: SourceInfo,
    issues: InputIssues,
}

pub fn open(path: &str, req: &InputRequest) -> Result<Box<dyn SampleSource>> {
    let reader = WavReader::open(path)
        .with_context(|| format!("cannot read '{}' as a WAV file", sanitize(path)))?;
    let spec = reader.spec();
    if spec.channels != 2 {
        bail!(
            "'{}' has {} channel(s); an IQ WAV file needs exactly 2 (I left, Q right)",
            sanitize(path),
            spec.channels
        );
    }
    let info = SourceInfo {
        label: sanitize(path),
        format: None,
        sample_rate_hz: req.sample_rate_hz.unwrap_or(spec.sample_rate as f64),
        center_hz: req.center_hz.unwrap_or(0.0),
        start_time: req.start_time,
        total_samples: Some(reader.duration() as u64),
        live: false,
    };
    Ok(Box::new(WavSource { path: path.to_string(), reader, info, issues: InputIssues::default() }))
}

impl SampleSource for WavSource {
    fn info(&self) -> &SourceInfo {
        &self.info
    }

    fn read(&mut self, out: &mut [Complex32]) -> Result<usize> {
        let spec = self.reader.spec();
        let label = self.info.label.clone();
        let max = out.len();
        let mut kept = 0;
        let mut pending: Option<f32> = None;
        let mut take = |v: f32, out: &mut [Complex32], bad: &mut u64| match pending.take() {
            None => pending = Some(v),
            Some(i) => {
                if i.is_finite() && v.is_finite() {
                    out[kept] = Complex32::new(i, v);
                    kept += 1;
                } else {
                    *bad += 1;
                }
            }
        };
        let mut bad = 0;
        match spec.sample_format {
            WavFormat::Float => {
                for s in self.reader.samples::<f32>().take(2 * max) {
                    let s = s.with_context(|| format!("reading WAV data of {label}"))?;
                    take(s, out, &mut bad);
                }
            }
            WavFormat::Int => {
                let scale = 1.0 / (1u64 << (spec.bits_per_sample - 1)) as f32;
                for s in self.reader.samples::<i32>().take(2 * max) {
                    let s = s.with_context(|| format!("reading WAV data of {label}"))?;
                    take(s as f32 * scale, out, &mut bad);
                }
            }
        }
        self.issues.non_finite += bad;
        Ok(kept)
    }

    fn issues(&self) -> InputIssues {
        self.issues.clone()
    }

    fn rewind(&mut self) -> Result<()> {
        self.reader = WavReader::open(&self.path).context("reopening the WAV file")?;
        Ok(())
    }
}
