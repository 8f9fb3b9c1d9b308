//! Writing IQ samples to files and pipes: raw interleaved samples in a SigMF datatype, or a
//! two-channel WAV file (I left, Q right).

use crate::messages::sanitize;
use crate::source::SampleFormat;
use anyhow::{Context, Result};
use num_complex::Complex32;
use std::io::{BufWriter, Write};

/// Where the scene's samples go.
pub trait SampleSink {
    fn put(&mut self, format: SampleFormat, samples: &[Complex32]) -> Result<()>;
    fn flush(&mut self) -> Result<()>;
    fn finish(&mut self) -> Result<()>;
}

/// Interleaved samples in a SigMF datatype, through the checked output path.
pub struct RawSink {
    pub out: BufWriter<Box<dyn Write>>,
    pub bytes: Vec<u8>,
}

impl SampleSink for RawSink {
    fn put(&mut self, format: SampleFormat, samples: &[Complex32]) -> Result<()> {
        self.bytes.clear();
        format.encode(samples, &mut self.bytes);
        Ok(self.out.write_all(&self.bytes)?)
    }

    fn flush(&mut self) -> Result<()> {
        Ok(self.out.flush()?)
    }

    fn finish(&mut self) -> Result<()> {
        self.flush()
    }
}

/// A two-channel WAV file (I left, Q right) written with hound, the same crate that reads them.
pub struct WavSink {
    writer: Option<hound::WavWriter<std::io::BufWriter<std::fs::File>>>,
    path: String,
}

impl WavSink {
    /// Creates `path` for samples of `format` (cu8, ci16_le or cf32_le) at `rate` samples/s.
    pub fn create(path: &str, format: SampleFormat, rate: f64) -> Result<WavSink> {
        let (bits, sample_format) = match format {
            SampleFormat::Cu8 => (8, hound::SampleFormat::Int),
            SampleFormat::Ci16Le => (16, hound::SampleFormat::Int),
            _ => (32, hound::SampleFormat::Float),
        };
        let rate = rate.round();
        if !(1.0..=u32::MAX as f64).contains(&rate) {
            anyhow::bail!("a WAV file cannot carry a rate of {rate} samples/s; write a raw or SigMF file instead");
        }
        let spec = hound::WavSpec {
            channels: 2,
            sample_rate: rate as u32,
            bits_per_sample: bits,
            sample_format,
        };
        let shown = sanitize(path);
        let writer = hound::WavWriter::create(path, spec).with_context(|| {
            format!(
                "cannot create the WAV file '{shown}'; check the directory exists and is writable"
            )
        })?;
        Ok(WavSink { writer: Some(writer), path: shown })
    }

    fn writer(&mut self) -> &mut hound::WavWriter<std::io::BufWriter<std::fs::File>> {
        self.writer.as_mut().expect("written to before finish")
    }
}

impl SampleSink for WavSink {
    fn put(&mut self, format: SampleFormat, samples: &[Complex32]) -> Result<()> {
        let path = self.path.clone();
        let w = self.writer();
        let fail = |e: hound::Error| anyhow::anyhow!("cannot write the WAV file '{path}': {e}");
        for s in samples {
            for x in [s.re, s.im] {
                match format {
                    // hound stores i8 as WAV's unsigned 8-bit samples (offset 128), read back as x/128.
                    SampleFormat::Cu8 => {
                        w.write_sample((x * 128.0).round().clamp(-128.0, 127.0) as i8)
                    }
                    SampleFormat::Ci16Le => {
                        w.write_sample((x * 32768.0).round().clamp(-32768.0, 32767.0) as i16)
                    }
                    _ => w.write_sample(x),
                }
                .map_err(fail)?;
            }
        }
        Ok(())
    }

    fn flush(&mut self) -> Result<()> {
        let path = self.path.clone();
        self.writer().flush().with_context(|| format!("cannot write the WAV file '{path}'"))
    }

    fn finish(&mut self) -> Result<()> {
        if let Some(w) = self.writer.take() {
            w.finalize().with_context(|| format!("cannot finish the WAV file '{}'", self.path))?;
        }
        Ok(())
    }
}
