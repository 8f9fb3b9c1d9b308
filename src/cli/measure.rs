//! `measure` flags and their validation.

use super::common::{
    parse_band, parse_count, parse_db, parse_number, parse_seconds, ChannelArgs, ChannelConfig,
};
use super::common::{AnalysisArgs, DetectArgs};
use crate::cli::common::input_help;
use crate::dsp::DspConfig;
use crate::measure::calibration::Calibration;
use crate::measure::Detection;
use crate::output::report::Band;
use crate::source::InputRequest;
use crate::units::format_num;
use anyhow::{bail, Result};
use clap::Args;

/// Seconds of the demo scene measured when no input and no `--seconds` are given.
const DEMO_SECONDS: f64 = 2.0;
/// Most signals `--peaks` may ask for: far more than a table anyone reads, and a JSON list of
/// more is better served by the spectrum itself.
pub const MAX_PEAKS: usize = 1000;
/// Deepest x-dB bandwidth: every level here lies above −300 dB (`units::db` floors power at
/// 1e-30), so a band's x-dB points cannot lie further below its peak.
pub const MAX_XDB: f64 = 300.0;

#[derive(Args, Debug)]
pub struct MeasureArgs {
    #[arg(value_name = "INPUT", help = concat!(input_help!(), " Default: the demo scene."))]
    pub input: Option<String>,
    #[command(flatten)]
    pub analysis: AnalysisArgs,
    /// Read at most this many seconds of input (the demo scene defaults to 2 s).
    #[arg(long, value_name = "SECONDS", allow_negative_numbers = true, value_parser = parse_seconds)]
    pub seconds: Option<f64>,
    /// Skip this many seconds of input before measuring (`--seconds` counts from there).
    #[arg(long, value_name = "SECONDS", allow_negative_numbers = true, value_parser = parse_seconds)]
    pub skip: Option<f64>,
    /// How many of the strongest signals to list.
    #[arg(long, value_name = "K", default_value_t = 10, allow_negative_numbers = true, value_parser = parse_count::<usize>)]
    pub peaks: usize,
    /// A band to measure, CENTER:WIDTH in Hz (absolute, e.g. 433.92M:25k); repeatable.
    #[arg(long = "band", value_name = "CENTER:WIDTH", value_parser = parse_band)]
    pub bands: Vec<Band>,
    /// Occupied bandwidth: percentage of a band's power inside it (ITU-R SM.328 β = 100 − this).
    #[arg(long, value_name = "PERCENT", default_value_t = 99.0, allow_negative_numbers = true, value_parser = parse_number)]
    pub obw_percent: f64,
    /// x for the x-dB bandwidth, in dB below the band's highest PSD.
    #[arg(long, value_name = "DB", default_value_t = 26.0, allow_negative_numbers = true, value_parser = parse_db)]
    pub xdb: f64,
    /// Print one JSON object instead of the table.
    #[arg(long)]
    pub json: bool,
    #[command(flatten)]
    pub detect: DetectArgs,
    #[command(flatten)]
    pub channels: ChannelArgs,
}

/// A validated `measure`.
#[derive(Clone, Debug)]
pub struct MeasureConfig {
    pub input: InputRequest,
    pub dsp: DspConfig,
    /// Seconds of input to take at most.
    pub seconds: Option<f64>,
    /// Seconds of input to skip first.
    pub skip: f64,
    pub peaks: usize,
    pub bands: Vec<Band>,
    pub obw_percent: f64,
    pub xdb: f64,
    pub json: bool,
    /// How signals are told from noise.
    pub detection: Detection,
    pub channels: ChannelConfig,
    /// dBFS → dBm, when calibrated (`--calibration`, `--ref-offset`).
    pub calibration: Option<Calibration>,
}

impl MeasureArgs {
    pub fn validate(self) -> Result<MeasureConfig> {
        if self.obw_percent.is_nan() || self.obw_percent <= 0.0 || self.obw_percent >= 100.0 {
            bail!(
                "--obw-percent {} is out of range; choose a value between 0 and 100 (99 is usual)",
                format_num(self.obw_percent)
            );
        }
        if !(self.xdb > 0.0 && self.xdb <= MAX_XDB) {
            bail!(
                "--xdb {} is out of range; choose a positive number of dB up to {MAX_XDB} (26 is usual)",
                format_num(self.xdb)
            );
        }
        if self.peaks > MAX_PEAKS {
            bail!(
                "--peaks {} is more than the {MAX_PEAKS} signals a report lists; choose fewer",
                self.peaks
            );
        }
        let dsp = self.analysis.dsp.validate()?;
        let detection = self.detect.validate(self.obw_percent)?;
        let channels = self.channels.validate()?;
        let demo = self.input.is_none();
        Ok(MeasureConfig {
            input: self.analysis.source.request(self.input),
            dsp,
            seconds: self.seconds.or(demo.then_some(DEMO_SECONDS)),
            skip: self.skip.unwrap_or(0.0),
            peaks: self.peaks,
            bands: self.bands,
            obw_percent: self.obw_percent,
            xdb: self.xdb,
            json: self.json,
            detection,
            channels,
            calibration: self.analysis.levels.validate()?,
        })
    }
}
