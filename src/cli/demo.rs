//! `demo` flags and their validation.

use super::common::{parse_count, parse_format, parse_seconds, parse_time};
use crate::source::demo::{DEFAULT_CENTER_HZ, DEFAULT_SEED};
use crate::source::SampleFormat;
use crate::units::{format_num, parse_hz, parse_rate, samples_in};
use anyhow::{bail, Result};
use clap::Args;
use time::OffsetDateTime;

#[derive(Args, Debug)]
pub struct DemoArgs {
    /// Output file, or - for stdout. A name ending .sigmf-meta/.sigmf-data writes a SigMF pair.
    #[arg(short = 'o', long = "out", value_name = "FILE", default_value = "-")]
    pub out: String,
    /// Sample format to write [default: from the file name (.cu8, .cs8, .cs16, .cf32), ci16_le
    /// for .wav, else cf32_le].
    #[arg(long, value_name = "FORMAT", value_parser = parse_format)]
    pub format: Option<SampleFormat>,
    /// Sample rate in samples/s.
    #[arg(long, value_name = "HZ", default_value = "2.4M", allow_hyphen_values = true, value_parser = parse_rate)]
    pub rate: f64,
    /// Centre frequency in Hz (written to SigMF metadata).
    #[arg(long, value_name = "HZ", allow_hyphen_values = true, value_parser = parse_hz)]
    pub center: Option<f64>,
    /// Seconds of signal to write; without it, stdout gets an endless stream.
    #[arg(long, value_name = "SECONDS", allow_negative_numbers = true, value_parser = parse_seconds)]
    pub seconds: Option<f64>,
    /// Write at the sample rate, as a receiver would, instead of as fast as possible.
    #[arg(long)]
    pub realtime: bool,
    /// Time of the first sample, RFC 3339 (e.g. 2026-05-01T08:00:00Z), written to SigMF
    /// core:datetime.
    #[arg(long, value_name = "TIME", value_parser = parse_time)]
    pub start: Option<OffsetDateTime>,
    /// Seed of the scene's noise and phases (keying and levels do not depend on it).
    #[arg(long, value_name = "N", default_value_t = DEFAULT_SEED, allow_negative_numbers = true, value_parser = parse_count::<u64>)]
    pub seed: u64,
}

/// What kind of file `demo` writes, from the name given to `-o`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum DemoContainer {
    /// Raw interleaved samples (a file or stdout).
    Raw,
    /// A SigMF pair, with the scene's truth as annotations.
    Sigmf,
    /// A two-channel WAV file (I left, Q right).
    Wav,
}
/// Largest demo recording written to a file: 1 TiB. The scene is for trying things out; a bigger
/// file only fills a disk (an endless stream can still go to standard output).
pub const MAX_DEMO_FILE_BYTES: u64 = 1 << 40;

/// A validated `demo`.
#[derive(Clone, Debug)]
pub struct DemoConfig {
    pub out: String,
    pub container: DemoContainer,
    pub format: SampleFormat,
    pub rate: f64,
    pub center_hz: f64,
    /// Samples to write; `None` for an endless stream.
    pub total_samples: Option<u64>,
    pub realtime: bool,
    pub start: Option<OffsetDateTime>,
    pub seed: u64,
}

impl DemoArgs {
    pub fn validate(self) -> Result<DemoConfig> {
        let (container, format) = container_and_format(&self.out, self.format)?;
        let total_samples = match self.seconds {
            Some(s) => {
                let n = samples_in(s, self.rate).map_err(|e| anyhow::anyhow!("--seconds: {e}"))?;
                let bytes = n.saturating_mul(format.bytes_per_sample() as u64);
                if self.out != "-" && bytes > MAX_DEMO_FILE_BYTES {
                    bail!(
                        "--seconds {} at --rate {} would write {} bytes, more than the 1 TiB a demo file may take; use a shorter --seconds or a lower --rate (or write to stdout with -o -)",
                        format_num(s),
                        format_num(self.rate),
                        format_num(bytes as f64)
                    );
                }
                Some(n)
            }
            None if self.out != "-" => {
                bail!("writing to a file needs --seconds (how long a recording to make)")
            }
            None => None,
        };
        Ok(DemoConfig {
            out: self.out,
            container,
            format,
            rate: self.rate,
            center_hz: self.center.unwrap_or(DEFAULT_CENTER_HZ),
            total_samples,
            realtime: self.realtime,
            start: self.start,
            seed: self.seed,
        })
    }
}

/// The container the name asks for and the sample format to write into it; a format that the
/// name contradicts (`-o x.cu8 --format cf32_le`) is refused rather than written under a
/// misleading name.
fn container_and_format(
    out: &str,
    format: Option<SampleFormat>,
) -> Result<(DemoContainer, SampleFormat)> {
    if let Some(f) = format.filter(|f| f.is_real()) {
        bail!("the demo scene is complex IQ and cannot be written as real-valued {f}; choose a complex format such as {}", f.complex_twin());
    }
    let lower = out.to_ascii_lowercase();
    if lower.ends_with(".sigmf-meta") || lower.ends_with(".sigmf-data") {
        return Ok((DemoContainer::Sigmf, format.unwrap_or(SampleFormat::Cf32Le)));
    }
    if lower.ends_with(".wav") {
        let f = format.unwrap_or(SampleFormat::Ci16Le);
        if !matches!(f, SampleFormat::Cu8 | SampleFormat::Ci16Le | SampleFormat::Cf32Le) {
            bail!("a WAV file holds cu8, ci16_le or cf32_le samples, not {f}; choose one of those with --format, or another file name");
        }
        return Ok((DemoContainer::Wav, f));
    }
    let named = if out == "-" { None } else { SampleFormat::guess_from_extension(out) };
    match (named, format) {
        (Some(n), Some(f)) if n != f => bail!(
            "'{}' names {n} samples but --format is {f}; make them agree (or use a neutral name such as .iq)",
            crate::messages::sanitize(out)
        ),
        (Some(n), _) => Ok((DemoContainer::Raw, n)),
        (None, f) => Ok((DemoContainer::Raw, f.unwrap_or(SampleFormat::Cf32Le))),
    }
}

#[cfg(test)]
mod tests {
    use crate::cli::{Cli, Command};
    use clap::Parser;

    #[test]
    fn demo_flags() {
        let cli = Cli::try_parse_from([
            "bandwarden",
            "demo",
            "--rate",
            "1M",
            "--start",
            "2031-04-17T06:30:00Z",
            "--seed",
            "9",
        ])
        .unwrap();
        let Some(Command::Demo(d)) = cli.command else { panic!("not demo") };
        assert_eq!(d.rate, 1e6);
        assert_eq!(d.start.unwrap().unix_timestamp(), 1_934_173_800);
        assert_eq!(d.seed, 9);
        assert!(Cli::try_parse_from(["bandwarden", "demo", "--start", "today"]).is_err());
        use super::{container_and_format, DemoContainer};
        use crate::source::SampleFormat;
        let c = |out: &str, f| container_and_format(out, f);
        assert_eq!(c("x.cu8", None).unwrap(), (DemoContainer::Raw, SampleFormat::Cu8));
        assert_eq!(c("x.wav", None).unwrap(), (DemoContainer::Wav, SampleFormat::Ci16Le));
        assert_eq!(c("-", None).unwrap(), (DemoContainer::Raw, SampleFormat::Cf32Le));
        assert!(c("x.cu8", Some(SampleFormat::Cf32Le)).unwrap_err().to_string().contains("agree"));
        assert!(c("x.wav", Some(SampleFormat::Ci8)).is_err());
        let file = Cli::try_parse_from(["bandwarden", "demo", "-o", "x.cf32"]).unwrap();
        let Some(Command::Demo(f)) = file.command else { panic!("not demo") };
        assert!(f.validate().unwrap_err().to_string().contains("--seconds"));
    }
}
