//! `census` flags and their validation.

use super::change::ChangeArgs;
use super::common::{parse_progress, parse_seconds, AnalysisArgs, DetectArgs};
use super::sigmf_out::{EmissionOutArgs, RecordArgs, SigmfOut};
use crate::cli::common::input_help;
use crate::dsp::DspConfig;
use crate::measure::calibration::Calibration;
use crate::measure::change::Thresholds;
use crate::measure::occupancy::timing::OBW_PERCENT;
use crate::measure::Detection;
use crate::source::InputRequest;
use crate::units::parse_duration;
use anyhow::{bail, Result};
use clap::Args;
use std::time::Duration;

#[derive(Args, Debug)]
pub struct CensusArgs {
    #[arg(value_name = "INPUT", help = concat!(input_help!(), " Live input runs until its end, Ctrl-C or SIGTERM, then prints."))]
    pub input: String,
    #[command(flatten)]
    pub analysis: AnalysisArgs,
    #[command(flatten)]
    pub detect: DetectArgs,
    /// Length of one row (an average of FFT frames) in which emissions are detected, e.g. 10ms;
    /// rounded to whole FFT hops. Default: the most hops that fit in 10 ms.
    #[arg(long, value_name = "DURATION", allow_hyphen_values = true, value_parser = parse_duration)]
    pub dwell: Option<Duration>,
    /// An emission ends after this long without a detection (rounded up to whole rows).
    #[arg(long, value_name = "DURATION", default_value = "25ms", allow_hyphen_values = true, value_parser = parse_duration)]
    pub hang: Duration,
    /// Print one JSON object instead of the table.
    #[arg(long)]
    pub json: bool,
    /// Leave out each emitter's kind and designator (no classification): the quickest census,
    /// and the reference that scripts/bench-census times classification against.
    #[arg(long)]
    pub no_kinds: bool,
    /// Also write a channel plan (TOML, as `log --plan` reads) with one channel per emitter.
    #[arg(long, value_name = "FILE.toml")]
    pub plan_out: Option<String>,
    /// Stop after this many seconds of input.
    #[arg(long, value_name = "SECONDS", allow_negative_numbers = true, value_parser = parse_seconds)]
    pub seconds: Option<f64>,
    /// Live input: make the source (and --record/--capture) wait when processing or the disk
    /// falls behind, instead of dropping blocks.
    #[arg(long)]
    pub no_drop: bool,
    /// A status line on stderr every PERIOD (e.g. 1m; off for none): input read, intervals and
    /// occupancy, drops. Default: every minute for live input when stderr is a terminal.
    #[arg(long, value_name = "PERIOD", value_parser = parse_progress)]
    pub progress: Option<f64>,
    #[command(flatten)]
    pub record: RecordArgs,
    #[command(flatten)]
    pub emissions: EmissionOutArgs,
    /// Compare with an earlier inventory: the --json output of a census, or a file written by
    /// --save-baseline. Adds a section of changes (in --json, `changes`).
    #[arg(long, value_name = "FILE.json", help_heading = super::change::CHANGE_HEADING)]
    pub baseline: Option<String>,
    /// Save this census as a baseline; if FILE exists (a baseline of the same span), this run
    /// is merged into it.
    #[arg(long, value_name = "FILE.json", help_heading = super::change::CHANGE_HEADING)]
    pub save_baseline: Option<String>,
    #[command(flatten)]
    pub change: ChangeArgs,
}

/// A validated `census`.
#[derive(Clone, Debug)]
pub struct CensusConfig {
    pub input: InputRequest,
    pub dsp: DspConfig,
    pub detection: Detection,
    pub dwell_s: Option<f64>,
    pub hang_s: f64,
    pub json: bool,
    /// Classify emissions (false with `--no-kinds`).
    pub kinds: bool,
    pub plan_out: Option<String>,
    pub seconds: Option<f64>,
    pub no_drop: bool,
    /// `--record`, `--annotate`, `--capture`.
    pub sigmf: SigmfOut,
    /// `--progress`: seconds between status lines, 0 for none, `None` for the default.
    pub progress: Option<f64>,
    pub baseline: Option<String>,
    pub save_baseline: Option<String>,
    pub thresholds: Thresholds,
    /// dBFS → dBm, when calibrated (`--calibration`, `--ref-offset`).
    pub calibration: Option<Calibration>,
}

impl CensusArgs {
    pub fn validate(self) -> Result<CensusConfig> {
        if self.plan_out.as_deref() == Some("-") {
            bail!("--plan-out writes a file: give a path (e.g. --plan-out site-plan.toml)");
        }
        if self.save_baseline.as_deref() == Some("-") {
            bail!("--save-baseline writes a file: give a path (e.g. --save-baseline ridge-baseline.json)");
        }
        if self.baseline.is_some() && self.baseline == self.save_baseline {
            bail!("--baseline and --save-baseline name the same file: compare with one and save into another");
        }
        let thresholds = self.change.validate()?;
        let sigmf = SigmfOut::validate(self.record, self.emissions, &self.input)?;
        Ok(CensusConfig {
            dsp: self.analysis.dsp.validate()?,
            detection: self.detect.validate(OBW_PERCENT)?,
            input: self.analysis.source.request(Some(self.input)),
            dwell_s: self.dwell.map(|d| d.as_secs_f64()),
            hang_s: self.hang.as_secs_f64(),
            json: self.json,
            kinds: !self.no_kinds,
            plan_out: self.plan_out,
            seconds: self.seconds,
            no_drop: self.no_drop,
            sigmf,
            progress: self.progress,
            baseline: self.baseline,
            save_baseline: self.save_baseline,
            thresholds,
            calibration: self.analysis.levels.validate()?,
        })
    }
}
