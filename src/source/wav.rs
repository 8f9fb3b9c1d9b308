//! Two-channel WAV files (left = I, right = Q), read with `hound`; the rate comes from the header.
//!
//! Integer samples of `b` bits map to full scale as `x / 2^(b−1)`, like the raw integer formats.
//!
//! A file cut short (its header promises more data than it holds) is read up to its last whole
//! sample, with a note saying how many samples are missing.

use super::{sanitize, InputIssues, InputRequest, SampleSource, SourceInfo};
use anyhow::{bail, Context, Result};
use hound::{SampleFormat as WavFormat, WavReader};
use num_complex::Complex32;
use std::fs::File;
use std::io::{BufReader, Seek};

pub struct WavSource {
    path: String,
    reader: WavReader<BufReader<File>>,
    info: SourceInfo,
    issues: InputIssues,
    /// The data ended (possibly before the header said it would).
    finished: bool,
    /// An error met after some samples of a block were decoded: those are delivered first.
    pending: Option<anyhow::Error>,
    /// Values (I or Q) the file really holds, and those not read yet: a file cut short ends
    /// there rather than in a read error.
    values: u64,
    values_left: u64,
    /// Bytes after the last whole sample of a file cut short.
    partial_bytes: u64,
}

fn open_reader(path: &str) -> Result<WavReader<BufReader<File>>> {
    WavReader::open(path).with_context(|| {
        format!("cannot read '{}' as a WAV file; check it is a whole 2-channel WAV file (a cut or foreign header cannot be read)", sanitize(path))
    })
}

pub fn open(
    path: &str,
    req: &InputRequest,
    notes: &mut Vec<String>,
) -> Result<Box<dyn SampleSource>> {
    let reader = open_reader(path)?;
    let spec = reader.spec();
    if spec.channels != 2 {
        bail!(
            "'{}' has {} channel(s); an IQ WAV file needs exactly 2 (I left, Q right)",
            sanitize(path),
            spec.channels
        );
    }
    let promised = reader.duration() as u64;
    let (held, partial_bytes) = samples_held(path, spec).unwrap_or((promised, 0));
    if held < promised {
        notes.push(format!(
            "'{}' is cut short: its header promises {promised} samples but the file holds {held}; reading the {held} that are there",
            sanitize(path)
        ));
    }
    let info = SourceInfo {
        label: sanitize(path),
        format: None,
        sample_rate_hz: req.sample_rate_hz.unwrap_or(spec.sample_rate as f64),
        center_hz: req.center_hz.unwrap_or(0.0),
        start_time: req.start_time,
        total_samples: Some(held.min(promised)),
        live: false,
        segments: Vec::new(),
        reference_level_dbm: None,
        tuning: None,
    };
    Ok(Box::new(WavSource {
        path: path.to_string(),
        reader,
        info,
        issues: InputIssues::default(),
        finished: false,
        pending: None,
        values: 2 * held.min(promised),
        values_left: 2 * held.min(promised),
        partial_bytes: if held < promised { partial_bytes } else { 0 },
    }))
}

/// Whole IQ samples the file really holds after its header and the bytes left after them
/// (`None` if that cannot be told).
fn samples_held(path: &str, spec: hound::WavSpec) -> Option<(u64, u64)> {
    let len = std::fs::metadata(path).ok()?.len();
    // hound leaves its reader at the first byte of the data chunk.
    let data_start = open_reader(path).ok()?.into_inner().stream_position().ok()?;
    let frame = u64::from(spec.channels) * u64::from(spec.bits_per_sample).div_ceil(8);
    let data = len.saturating_sub(data_start);
    Some((data / frame.max(1), data % frame.max(1)))
}

impl SampleSource for WavSource {
    fn info(&self) -> &SourceInfo {
        &self.info
    }

    fn read(&mut self, out: &mut [Complex32]) -> Result<usize> {
        if let Some(e) = self.pending.take() {
            return Err(e);
        }
        if self.finished {
            return Ok(0);
        }
        let spec = self.reader.spec();
        let label = self.info.label.clone();
        let max = out.len().min((self.values_left / 2) as usize);
        let mut kept = 0;
        let mut pending: Option<f32> = None;
        let mut take = |v: f32, out: &mut [Complex32], bad: &mut u64| match pending.take() {
            None => pending = Some(v),
            Some(i) => {
                // Kept in place, so time stays exact: the run treats it as a gap.
                *bad += u64::from(!(i.is_finite() && v.is_finite()));
                out[kept] = Complex32::new(i, v);
                kept += 1;
            }
        };
        let mut bad = 0;
        let mut failed = None;
        let mut seen = 0u64;
        match spec.sample_format {
            WavFormat::Float => {
                for s in self.reader.samples::<f32>().take(2 * max) {
                    match s {
                        Ok(s) => take(s, out, &mut bad),
                        Err(e) => {
                            failed = Some(e);
                            break;
                        }
                    }
                    seen += 1;
                }
            }
            WavFormat::Int => {
                let scale = 1.0 / (1u64 << (spec.bits_per_sample - 1)) as f32;
                for s in self.reader.samples::<i32>().take(2 * max) {
                    match s {
                        Ok(s) => take(s as f32 * scale, out, &mut bad),
                        Err(e) => {
                            failed = Some(e);
                            break;
                        }
                    }
                    seen += 1;
                }
            }
        }
        self.issues.non_finite += bad;
        self.values_left -= seen;
        if self.values_left == 0 || (seen < 2 * max as u64 && failed.is_none()) {
            // The end of the data; of a file cut short (noted at open), the bytes after its
            // last whole sample are dropped like a raw file's incomplete sample.
            self.finished = true;
            self.issues.trailing_bytes = self.partial_bytes;
        }
        if let Some(e) = failed {
            let e = anyhow::Error::new(e).context(format!("reading WAV data of {label}"));
            if kept == 0 {
                return Err(e);
            }
            self.pending = Some(e);
        }
        Ok(kept)
    }

    fn issues(&self) -> InputIssues {
        self.issues.clone()
    }

    fn rewind(&mut self) -> Result<()> {
        self.reader = open_reader(&self.path)?;
        self.finished = false;
        self.pending = None;
        self.values_left = self.values;
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A WAV file (RIFF/WAVE as hound writes it) cut short: its data chunk promises 1000 samples
    /// but 600 and a half are there. The 600 arrive, the half is counted, the shortfall noted.
    #[test]
    fn a_cut_file_gives_the_samples_it_holds() {
        let dir = std::env::temp_dir().join(format!("bandwarden-wav-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let path = dir.join("cut.wav");
        let spec = hound::WavSpec {
            channels: 2,
            sample_rate: 48_000,
            bits_per_sample: 16,
            sample_format: WavFormat::Int,
        };
        let mut w = hound::WavWriter::create(&path, spec).unwrap();
        for i in 0..1000i16 {
            w.write_sample(i * 10).unwrap();
            w.write_sample(-i * 10).unwrap();
        }
        w.finalize().unwrap();
        let len = std::fs::metadata(&path).unwrap().len();
        let file = std::fs::OpenOptions::new().write(true).open(&path).unwrap();
        file.set_len(len - 400 * 4 + 2).unwrap();

        let mut notes = Vec::new();
        let path = path.to_str().unwrap();
        let mut src = open(path, &InputRequest::default(), &mut notes).unwrap();
        assert!(
            notes.len() == 1
                && notes[0].contains("promises 1000")
                && notes[0].contains("holds 600"),
            "{notes:?}"
        );
        assert_eq!(src.info().total_samples, Some(600));
        let mut got = Vec::new();
        let mut buf = vec![Complex32::default(); 256];
        loop {
            let n = src.read(&mut buf).unwrap();
            if n == 0 {
                break;
            }
            got.extend_from_slice(&buf[..n]);
        }
        let want: Vec<Complex32> = (0..600)
            .map(|i| Complex32::new(i as f32 * 10.0 / 32768.0, -(i as f32) * 10.0 / 32768.0))
            .collect();
        assert_eq!(got, want);
        assert_eq!(src.issues().trailing_bytes, 2);
    }
}
