//! Command-line interface, in two stages: raw flags parsed by clap, then validated settings.
//!
//! Every flag states its unit in its help text. Frequencies and rates accept SI suffixes
//! (`2.4M`, `12.5k`, `1e6`), durations accept `10ms`, `2s`, `15m`, `1h`.

use crate::dsp::{EngineConfig, WindowKind};
use crate::source::{InputRequest, SampleFormat};
use crate::units::{parse_hz, parse_positive_hz};
use clap::{Args, Parser, Subcommand};
use time::format_description::well_known::Rfc3339;
use time::OffsetDateTime;

#[derive(Parser, Debug)]
#[command(
    name = "bandwarden",
    version,
    about = "Watch, measure and log a radio band from complex IQ samples",
    long_about = "Watch, measure and log a radio band from complex IQ samples.\n\n\
        With no subcommand, bandwarden shows the live monitor on its built-in demo scene.\n\
        Levels are in dBFS (a complex sample of magnitude 1.0 is 0 dBFS); without a calibrated\n\
        receiver they are relative, not absolute power."
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Option<Command>,
}

#[derive(Subcommand, Debug)]
pub enum Command {
    /// One-shot measurement of a whole input: PSD, noise floor, strongest signals, band power and
    /// occupied bandwidth.
    Measure(MeasureArgs),
    /// Write the built-in demo scene as IQ samples (to a file or stdout), to try pipes and files.
    Demo(DemoArgs),
    /// Live monitor in the terminal: spectrum, waterfall and the strongest signals.
    Watch(crate::cmd::watch::WatchArgs),
    /// Log how busy each channel of a plan is (ITU-R SM.1880 occupancy) and every emission, as
    /// JSON Lines or CSV, for unattended runs.
    Log(crate::cmd::log::LogArgs),
}

/// Where samples come from and how to read them.
#[derive(Args, Debug, Clone, Default)]
pub struct InputArgs {
    /// Sample format (SigMF names): cu8, ci8, ci16_le, ci16_be, ci32_le, cf32_le, cf32_be,
    /// cf64_le. Overrides a SigMF file; guessed from .cu8/.cs8/.cs16/.cf32 when absent.
    #[arg(long, value_name = "FORMAT", value_parser = parse_format)]
    pub format: Option<SampleFormat>,
    /// Sample rate in samples/s (e.g. 2.4M); overrides the file's own.
    #[arg(long, value_name = "HZ", value_parser = parse_positive_hz)]
    pub rate: Option<f64>,
    /// Centre frequency in Hz (e.g. 433.92M) so the axis shows absolute frequency.
    #[arg(long, value_name = "HZ", value_parser = parse_hz)]
    pub center: Option<f64>,
    /// Time of the first sample, RFC 3339 (e.g. 2026-05-01T08:00:00Z); overrides SigMF
    /// core:datetime.
    #[arg(long, value_name = "TIME", value_parser = parse_time)]
    pub start: Option<OffsetDateTime>,
}

impl InputArgs {
    pub fn request(&self, path: Option<String>) -> InputRequest {
        InputRequest {
            path,
            format: self.format,
            sample_rate_hz: self.rate,
            center_hz: self.center,
            start_time: self.start,
            realtime: false,
        }
    }
}

/// How the spectrum is estimated.
#[derive(Args, Debug, Clone)]
pub struct DspArgs {
    /// FFT size in samples, 16 ..= 1048576 (any length; powers of two are fastest).
    #[arg(long = "fft", value_name = "N", default_value_t = 4096)]
    pub fft_size: usize,
    /// Window: rect, hann, hamming, blackman, blackman-harris, flattop, kaiser:BETA.
    #[arg(long, value_name = "NAME", default_value = "hann", value_parser = parse_window)]
    pub window: WindowKind,
    /// Fraction of each FFT frame shared with the next, 0 ..= 0.95.
    #[arg(long, value_name = "FRACTION", default_value_t = 0.5)]
    pub overlap: f64,
    /// Threads for the transforms [default: one per core, at most 8]; 1 leaves the other cores
    /// free.
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u16).range(1..=256))]
    pub threads: Option<u16>,
}

impl DspArgs {
    pub fn engine(&self, frames_per_output: Option<u64>) -> Result<EngineConfig, String> {
        let cfg = EngineConfig {
            fft_size: self.fft_size,
            window: self.window,
            overlap: self.overlap,
            frames_per_output,
        };
        cfg.validate()?;
        Ok(cfg)
    }

    /// Transform threads: as asked, else one per core.
    pub fn threads(&self) -> usize {
        self.threads.map_or_else(
            || std::thread::available_parallelism().map_or(1, |n| n.get()),
            |t| t as usize,
        )
    }
}

#[derive(Args, Debug)]
pub struct MeasureArgs {
    /// Input: a file (raw, .sigmf-meta/.sigmf-data, .wav) or - for stdin. Default: the demo scene.
    #[arg(value_name = "INPUT")]
    pub input: Option<String>,
    #[command(flatten)]
    pub source: InputArgs,
    #[command(flatten)]
    pub dsp: DspArgs,
    /// Read at most this many seconds of input (the demo scene defaults to 2 s).
    #[arg(long, value_name = "SECONDS")]
    pub seconds: Option<f64>,
    /// How many of the strongest signals to list.
    #[arg(long, value_name = "K", default_value_t = 10)]
    pub peaks: usize,
    /// A band to measure, CENTER:WIDTH in Hz (absolute, e.g. 433.92M:25k); repeatable.
    #[arg(long = "band", value_name = "CENTER:WIDTH", value_parser = parse_band)]
    pub bands: Vec<BandArg>,
    /// Occupied bandwidth: percentage of a band's power inside it (ITU-R SM.328 β = 100 − this).
    #[arg(long, value_name = "PERCENT", default_value_t = 99.0)]
    pub obw_percent: f64,
    /// x for the x-dB bandwidth, in dB below the band's highest PSD.
    #[arg(long, value_name = "DB", default_value_t = 26.0)]
    pub xdb: f64,
    /// Print one JSON object instead of the table.
    #[arg(long)]
    pub json: bool,
    #[command(flatten)]
    pub channels: crate::plan::ChannelArgs,
}

#[derive(Args, Debug)]
pub struct DemoArgs {
    /// Output file, or - for stdout. A name ending .sigmf-meta/.sigmf-data writes a SigMF pair.
    #[arg(short = 'o', long = "out", value_name = "FILE", default_value = "-")]
    pub out: String,
    /// Sample format to write.
    #[arg(long, value_name = "FORMAT", default_value = "cf32_le", value_parser = parse_format)]
    pub format: SampleFormat,
    /// Sample rate in samples/s.
    #[arg(long, value_name = "HZ", default_value = "2.4M", value_parser = parse_positive_hz)]
    pub rate: f64,
    /// Centre frequency in Hz (written to SigMF metadata).
    #[arg(long, value_name = "HZ", value_parser = parse_hz)]
    pub center: Option<f64>,
    /// Seconds of signal to write; without it, stdout gets an endless stream.
    #[arg(long, value_name = "SECONDS")]
    pub seconds: Option<f64>,
    /// Write at the sample rate, as a receiver would, instead of as fast as possible.
    #[arg(long)]
    pub realtime: bool,
    /// Time of the first sample, RFC 3339 (e.g. 2026-05-01T08:00:00Z), written to SigMF
    /// core:datetime.
    #[arg(long, value_name = "TIME", value_parser = parse_time)]
    pub start: Option<OffsetDateTime>,
    /// Seed of the scene's noise and phases (keying and levels do not depend on it).
    #[arg(long, value_name = "N", default_value_t = crate::source::demo::DEFAULT_SEED)]
    pub seed: u64,
}

/// A band given as `CENTER:WIDTH` in absolute hertz.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BandArg {
    pub center_hz: f64,
    pub width_hz: f64,
}

pub fn parse_band(text: &str) -> Result<BandArg, String> {
    let (c, w) = text
        .split_once(':')
        .ok_or_else(|| format!("band '{text}' must be CENTER:WIDTH, e.g. 433.92M:25k"))?;
    let center_hz = parse_hz(c)?;
    let width_hz = parse_positive_hz(w).map_err(|e| format!("band '{text}': width {e}"))?;
    Ok(BandArg { center_hz, width_hz })
}

pub fn parse_format(text: &str) -> Result<SampleFormat, String> {
    text.parse()
}

pub fn parse_window(text: &str) -> Result<WindowKind, String> {
    text.parse()
}

pub fn parse_time(text: &str) -> Result<OffsetDateTime, String> {
    OffsetDateTime::parse(text.trim(), &Rfc3339)
        .map_err(|e| format!("'{text}' is not an RFC 3339 time such as 2026-05-01T08:00:00Z ({e})"))
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::CommandFactory;

    #[test]
    fn the_definition_is_consistent() {
        Cli::command().debug_assert();
    }

    #[test]
    fn band_parses_with_suffixes() {
        assert_eq!(
            parse_band("433.92M:25k").unwrap(),
            BandArg { center_hz: 433.92e6, width_hz: 25e3 }
        );
        assert!(parse_band("433.92M").unwrap_err().contains("CENTER:WIDTH"));
        assert!(parse_band("433.92M:0").unwrap_err().contains("greater than zero"));
    }

    #[test]
    fn measure_flags() {
        let cli = Cli::try_parse_from([
            "bandwarden",
            "measure",
            "x.cu8",
            "--rate",
            "2.4M",
            "--center",
            "433.92M",
            "--fft",
            "1000",
            "--window",
            "kaiser:7",
            "--overlap",
            "0.75",
            "--threads",
            "3",
            "--band",
            "433.9M:100k",
            "--json",
        ])
        .unwrap();
        let Some(Command::Measure(m)) = cli.command else { panic!("not measure") };
        assert_eq!(m.source.rate, Some(2.4e6));
        assert_eq!(m.source.center, Some(433.92e6));
        assert_eq!(m.dsp.fft_size, 1000);
        assert_eq!(m.dsp.window, WindowKind::Kaiser(7.0));
        assert_eq!(m.dsp.threads(), 3);
        assert_eq!(m.bands.len(), 1);
        assert!(m.json);
        assert!(Cli::try_parse_from(["bandwarden", "measure", "--window", "gauss"]).is_err());
        assert!(Cli::try_parse_from(["bandwarden", "measure", "--format", "s16"]).is_err());
        assert!(Cli::try_parse_from(["bandwarden", "measure", "--threads", "0"]).is_err());
    }

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
    }

    #[test]
    fn start_time_is_rfc3339() {
        assert!(parse_time("2026-05-01T08:00:00Z").is_ok());
        assert!(parse_time("yesterday").unwrap_err().contains("RFC 3339"));
    }
}
