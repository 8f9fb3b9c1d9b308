//! `calibrate` flags and their validation.

use super::common::{parse_count, parse_db, parse_seconds, InputArgs, LevelArgs};
use crate::cli::common::input_help;
use crate::dsp::{DspConfig, EngineConfig, WindowKind};
use crate::measure::calibration::Calibration;
use crate::messages::sanitize;
use crate::source::InputRequest;
use crate::units::parse_hz;
use anyhow::{bail, Result};
use clap::Args;

#[derive(Args, Debug)]
pub struct CalibrateArgs {
    #[arg(value_name = "INPUT", help = concat!(input_help!(), " The generator tone, or the terminated input with --terminated."))]
    pub input: String,
    #[command(flatten)]
    pub source: InputArgs,
    /// A generator tone fed to the antenna port, FREQ:LEVEL (absolute Hz and dBm, e.g.
    /// 433.92M:-50dBm); repeatable for tones at several frequencies (one per frequency).
    #[arg(long = "tone", value_name = "FREQ:LEVEL", allow_hyphen_values = true, value_parser = parse_tone)]
    pub tones: Vec<(f64, f64)>,
    /// Write the calibration measured from the tones to FILE (TOML), for --calibration.
    #[arg(short = 'o', long = "out", value_name = "FILE")]
    pub out: Option<String>,
    /// The input is a matched load at room temperature: report the noise figure its floor
    /// implies (needs --calibration or --ref-offset).
    #[arg(long, conflicts_with_all = ["tones", "out"])]
    pub terminated: bool,
    #[command(flatten)]
    pub levels: LevelArgs,
    /// FFT size in samples (flat-top window, half-overlapping frames), 16 ..= 1048576.
    #[arg(long = "fft", value_name = "N", default_value_t = 4096, allow_negative_numbers = true, value_parser = parse_count::<usize>)]
    pub fft_size: usize,
    /// Read at most this many seconds of input.
    #[arg(long, value_name = "SECONDS", allow_negative_numbers = true, value_parser = parse_seconds)]
    pub seconds: Option<f64>,
}

/// What `calibrate` does.
#[derive(Clone, Debug)]
pub enum CalibrateTask {
    /// Measure these tones (Hz, dBm) and write the calibration to the file.
    Tones { tones: Vec<(f64, f64)>, out: String },
    /// The noise figure of a terminated input under this calibration.
    NoiseFigure(Calibration),
}

/// A validated `calibrate`.
#[derive(Clone, Debug)]
pub struct CalibrateConfig {
    pub input: InputRequest,
    pub dsp: DspConfig,
    pub seconds: Option<f64>,
    pub task: CalibrateTask,
}

/// `FREQ:LEVEL` with LEVEL in dBm (a `dBm` suffix is allowed).
pub fn parse_tone(text: &str) -> Result<(f64, f64), String> {
    let shown = sanitize(text);
    let (f, l) = text
        .rsplit_once(':')
        .ok_or_else(|| format!("tone '{shown}' must be FREQ:LEVEL, e.g. 433.92M:-50dBm"))?;
    let l = l.trim();
    let l = l.strip_suffix("dBm").or_else(|| l.strip_suffix("dbm")).unwrap_or(l);
    Ok((parse_hz(f)?, parse_db(l).map_err(|e| format!("tone '{shown}': level {e}"))?))
}

impl CalibrateArgs {
    pub fn validate(self) -> Result<CalibrateConfig> {
        let task = if self.terminated {
            let Some(cal) = self.levels.validate()? else {
                bail!("--terminated reports the noise figure in dBm terms: give --calibration FILE (from calibrate --tone) or --ref-offset DB");
            };
            CalibrateTask::NoiseFigure(cal)
        } else {
            if self.tones.is_empty() {
                bail!("calibrate needs --tone FREQ:LEVEL (a generator tone of known power at the antenna port) or --terminated (a matched load, for the noise figure)");
            }
            if self.levels.calibration.is_some() || self.levels.ref_offset.is_some() {
                bail!("--tone measures a calibration; --calibration and --ref-offset go with --terminated");
            }
            let Some(out) = self.out else {
                bail!(
                    "--tone needs -o FILE to write the calibration into (e.g. -o ridge-cal.toml)"
                );
            };
            CalibrateTask::Tones { tones: self.tones, out }
        };
        let dsp = DspConfig {
            fft_size: self.fft_size,
            window: WindowKind::FlatTop,
            overlap: 0.5,
            threads: std::thread::available_parallelism().map_or(1, |n| n.get()),
        };
        EngineConfig::validate(&dsp.engine(None)).map_err(anyhow::Error::msg)?;
        Ok(CalibrateConfig {
            input: self.source.request(Some(self.input)),
            dsp,
            seconds: self.seconds,
            task,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tones_parse_with_or_without_the_unit() {
        assert_eq!(parse_tone("433.92M:-50dBm"), Ok((433.92e6, -50.0)));
        assert_eq!(parse_tone("1e6:-73.5"), Ok((1e6, -73.5)));
        assert!(parse_tone("433.92M").is_err());
        assert!(parse_tone("433.92M:loud").is_err());
    }
}
