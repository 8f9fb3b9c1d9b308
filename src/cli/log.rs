//! `log` flags and their validation.

use super::alarms::{AlarmArgs, AlarmConfig};
use super::common::{parse_progress, parse_seconds, AnalysisArgs, ChannelArgs, ChannelConfig};
use super::metrics::MetricsArgs;
use super::net::PublishArgs;
use super::sigmf_out::{EmissionOutArgs, RecordArgs, SigmfOut};
use crate::cli::common::input_help;
use crate::dsp::DspConfig;
use crate::measure::calibration::Calibration;
use crate::measure::change::baseline::BAND;
use crate::net::publish::PublishConfig;
use crate::output::log::rotation::{parse_rotate, Rotate};
use crate::output::log::LogFormat;
use crate::source::InputRequest;
use crate::units::parse_duration;
use anyhow::{bail, Result};
use clap::Args;
use std::time::Duration;

#[derive(Args, Debug)]
pub struct LogArgs {
    #[arg(value_name = "INPUT", help = input_help!())]
    pub input: String,
    #[command(flatten)]
    pub analysis: AnalysisArgs,
    /// Length of each occupancy record (interval), e.g. 10s, 15m, 1h.
    #[arg(long, value_name = "DURATION", default_value = "60s", allow_hyphen_values = true, value_parser = parse_duration)]
    pub interval: Duration,
    /// An emission ends after this long below threshold (rounded up to whole samples).
    #[arg(long, value_name = "DURATION", default_value = "25ms", allow_hyphen_values = true, value_parser = parse_duration)]
    pub hang: Duration,
    /// Write the log here (default stdout, -); a file is replaced unless --append.
    #[arg(short = 'o', long = "out", value_name = "FILE", default_value = "-")]
    pub out: String,
    /// Add to the end of --out instead of replacing it.
    #[arg(long)]
    pub append: bool,
    /// CSV with a header row instead of JSON Lines.
    #[arg(long)]
    pub csv: bool,
    /// Live input: make the source wait when processing falls behind, instead of dropping (and
    /// logging) blocks.
    #[arg(long)]
    pub no_drop: bool,
    /// Start a new file every UTC day (daily), every hour (hourly) or when the file reaches a
    /// size (e.g. 100M); the key goes before the extension of -o (site.2026-12-02.jsonl).
    #[arg(long, value_name = "WHEN", allow_hyphen_values = true, value_parser = parse_rotate)]
    pub rotate: Option<Rotate>,
    /// Stop after this many seconds of input.
    #[arg(long, value_name = "SECONDS", allow_negative_numbers = true, value_parser = parse_seconds)]
    pub seconds: Option<f64>,
    /// A status line on stderr every PERIOD (e.g. 1m; off for none): input read, intervals and
    /// occupancy, drops. Default: every minute for live input when stderr is a terminal.
    #[arg(long, value_name = "PERIOD", value_parser = parse_progress)]
    pub progress: Option<f64>,
    #[command(flatten)]
    pub channels: ChannelArgs,
    #[command(flatten)]
    pub publish: PublishArgs,
    #[command(flatten)]
    pub record: RecordArgs,
    #[command(flatten)]
    pub emissions: EmissionOutArgs,
    #[command(flatten)]
    pub alarms: AlarmArgs,
    #[command(flatten)]
    pub metrics: MetricsArgs,
}

/// A validated `log`.
#[derive(Clone, Debug)]
pub struct LogConfig {
    pub input: InputRequest,
    pub dsp: DspConfig,
    pub channels: ChannelConfig,
    pub interval_s: f64,
    pub hang_s: f64,
    /// A path, or `-` for stdout.
    pub out: String,
    pub append: bool,
    pub format: LogFormat,
    pub no_drop: bool,
    pub seconds: Option<f64>,
    pub rotate: Option<Rotate>,
    /// The site's name (`--site`), for the start record.
    pub site: Option<String>,
    /// Publishing to a broker (`--publish`).
    pub publish: Option<PublishConfig>,
    /// `--record`, `--annotate`, `--capture`.
    pub sigmf: SigmfOut,
    /// `--progress`: seconds between status lines, 0 for none, `None` for the default.
    pub progress: Option<f64>,
    /// `--alarms` and its settings.
    pub alarms: Option<AlarmConfig>,
    /// `--metrics`: where to serve the Prometheus metrics.
    pub metrics: Option<std::net::SocketAddr>,
    /// dBFS → dBm, when calibrated (`--calibration`, `--ref-offset`).
    pub calibration: Option<Calibration>,
}

impl LogArgs {
    pub fn validate(self) -> Result<LogConfig> {
        let channels = self.channels.validate()?;
        if channels.plan.is_empty() {
            bail!("log needs channels: give --plan FILE.toml or --channel NAME=CENTER:WIDTH");
        }
        if self.rotate.is_some() && self.out == "-" {
            bail!("--rotate writes a series of files: give -o FILE (e.g. -o site.jsonl)");
        }
        if self.interval.is_zero() {
            bail!("--interval must be longer than zero (e.g. 60s)");
        }
        let alarms = self.alarms.validate()?;
        if alarms.is_some() && channels.plan.channels.iter().any(|c| c.name == BAND) {
            bail!("--alarms names the band-wide floor '{BAND}': rename the plan channel called '{BAND}'");
        }
        let publish = self.publish.validate(&self.out, self.csv, self.rotate.is_some())?;
        let sigmf = SigmfOut::validate(self.record, self.emissions, &self.input)?;
        Ok(LogConfig {
            site: self.publish.site.clone(),
            publish,
            dsp: self.analysis.dsp.validate()?,
            input: self.analysis.source.request(Some(self.input)),
            channels,
            interval_s: self.interval.as_secs_f64(),
            hang_s: self.hang.as_secs_f64(),
            out: self.out,
            append: self.append,
            format: if self.csv { LogFormat::Csv } else { LogFormat::JsonLines },
            no_drop: self.no_drop,
            seconds: self.seconds,
            rotate: self.rotate,
            sigmf,
            progress: self.progress,
            alarms,
            metrics: self.metrics.validate(self.analysis.source.listen_public)?,
            calibration: self.analysis.levels.validate()?,
        })
    }
}

#[cfg(test)]
mod tests {
    use crate::cli::{Cli, Command};
    use clap::Parser;
    use std::time::Duration;

    #[test]
    fn log_flags_parse_with_units() {
        let cli = Cli::try_parse_from([
            "bandwarden",
            "log",
            "-",
            "--format",
            "cu8",
            "--rate",
            "2.4M",
            "--channel",
            "a=433.1M:25k",
            "--plan",
            "site.toml",
            "--dwell",
            "20ms",
            "--threshold-db",
            "6",
            "--interval",
            "15m",
            "--hang",
            "100ms",
            "--csv",
            "--append",
            "--no-drop",
            "-o",
            "x.csv",
            "--seconds",
            "3600",
        ])
        .unwrap();
        let Some(Command::Log(a)) = cli.command else { panic!("not log") };
        assert_eq!(a.input, "-");
        assert_eq!(a.channels.plan.channels[0].center_hz, 433.1e6);
        assert_eq!(a.channels.plan.plan.as_deref(), Some("site.toml"));
        assert_eq!(a.channels.dwell, Some(Duration::from_millis(20)));
        assert_eq!(a.channels.threshold_db, 6.0);
        assert_eq!(a.interval, Duration::from_secs(900));
        assert_eq!(a.hang, Duration::from_millis(100));
        assert!(a.csv && a.append && a.no_drop);
        assert_eq!((a.out.as_str(), a.seconds), ("x.csv", Some(3600.0)));
        let defaults = Cli::try_parse_from(["bandwarden", "log", "f.cu8"]).unwrap();
        let Some(Command::Log(d)) = defaults.command else { panic!("not log") };
        assert_eq!(d.interval.as_secs_f64(), crate::measure::occupancy::DEFAULT_INTERVAL_S);
        assert_eq!(d.hang.as_secs_f64(), crate::measure::occupancy::DEFAULT_HANG_S);
        assert_eq!(d.channels.threshold_db, crate::plan::DEFAULT_THRESHOLD_DB);
        assert_eq!(d.out, "-");
        assert!(Cli::try_parse_from(["bandwarden", "log", "f", "--interval", "soon"]).is_err());
        assert!(Cli::try_parse_from(["bandwarden", "log", "f", "--channel", "a=1M"]).is_err());
        assert!(Cli::try_parse_from(["bandwarden", "log"]).is_err(), "INPUT is required");
    }
}
