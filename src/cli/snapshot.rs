//! `snapshot` flags and their validation.

use super::common::{parse_count, parse_db, parse_seconds, AnalysisArgs, PlanArgs};
use crate::cli::common::input_help;
use crate::dsp::DspConfig;
use crate::measure::calibration::Calibration;
use crate::output::picture::canvas::{PictureFormat, MAX_SIDE, MIN_SIDE};
use crate::output::picture::colour::MapKind;
use crate::plan::Plan;
use crate::source::InputRequest;
use anyhow::{bail, Result};
use clap::Args;

#[derive(Args, Debug)]
pub struct SnapshotArgs {
    #[arg(value_name = "INPUT", help = input_help!())]
    pub input: String,
    /// The picture to write: FILE.png or FILE.svg (the extension chooses the format).
    #[arg(short = 'o', long = "out", value_name = "FILE")]
    pub out: String,
    #[command(flatten)]
    pub analysis: AnalysisArgs,
    /// Leave out this many seconds at the start of the input.
    #[arg(long, value_name = "SECONDS", allow_negative_numbers = true, value_parser = parse_seconds)]
    pub skip: Option<f64>,
    /// Show at most this many seconds (after --skip); default: to the end of the input.
    #[arg(long, value_name = "SECONDS", allow_negative_numbers = true, value_parser = parse_seconds)]
    pub seconds: Option<f64>,
    #[command(flatten)]
    pub channels: PlanArgs,
    /// Outline the emissions the signal detector finds, labelled with frequency and level.
    #[arg(long)]
    pub outline: bool,
    /// Picture width in pixels.
    #[arg(long, value_name = "PX", default_value_t = 1400, allow_negative_numbers = true, value_parser = parse_count::<u32>)]
    pub width: u32,
    /// Picture height in pixels.
    #[arg(long, value_name = "PX", default_value_t = 900, allow_negative_numbers = true, value_parser = parse_count::<u32>)]
    pub height: u32,
    /// Colour map of the waterfall: viridis, magma, inferno or grey (the live monitor's maps).
    #[arg(long, value_name = "NAME", default_value = "viridis", value_parser = parse_colour_map)]
    pub colour_map: MapKind,
    /// Ends of the colour scale, LOW:HIGH in dB of the unit shown (e.g. -110:-20); default: from
    /// the noise to the strongest level.
    #[arg(long, value_name = "LOW:HIGH", allow_hyphen_values = true, value_parser = parse_scale)]
    pub scale: Option<(f64, f64)>,
    /// Title of the picture (default: the input and its time).
    #[arg(long, value_name = "TEXT")]
    pub title: Option<String>,
}

/// A validated `snapshot`.
#[derive(Clone, Debug)]
pub struct SnapshotConfig {
    pub input: InputRequest,
    pub out: String,
    pub format: PictureFormat,
    pub dsp: DspConfig,
    pub skip_s: f64,
    pub seconds: Option<f64>,
    pub plan: Plan,
    pub plan_path: Option<String>,
    pub outline: bool,
    pub width: u32,
    pub height: u32,
    pub map: MapKind,
    pub scale: Option<(f64, f64)>,
    /// dBFS → dBm, when calibrated.
    pub calibration: Option<Calibration>,
    pub title: Option<String>,
}

/// A colour map by name (the names the live monitor shows).
pub fn parse_colour_map(text: &str) -> Result<MapKind, String> {
    MapKind::ALL.iter().copied().find(|m| m.name() == text.trim()).ok_or_else(|| {
        let names: Vec<&str> = MapKind::ALL.iter().map(|m| m.name()).collect();
        format!(
            "'{}' is not a colour map; choose {}",
            crate::messages::sanitize(text),
            names.join(", ")
        )
    })
}

/// `LOW:HIGH` in dB, LOW below HIGH.
pub fn parse_scale(text: &str) -> Result<(f64, f64), String> {
    let shown = crate::messages::sanitize(text);
    let (a, b) = text
        .split_once(':')
        .ok_or_else(|| format!("scale '{shown}' must be LOW:HIGH in dB, e.g. -110:-20"))?;
    let (low, high) = (parse_db(a)?, parse_db(b)?);
    if low >= high {
        return Err(format!("scale '{shown}': LOW must lie below HIGH"));
    }
    Ok((low, high))
}

impl SnapshotArgs {
    pub fn validate(self) -> Result<SnapshotConfig> {
        let format = PictureFormat::from_path(&self.out)?;
        for (name, v) in [("--width", self.width), ("--height", self.height)] {
            if !(MIN_SIDE..=MAX_SIDE).contains(&v) {
                bail!("{name} {v} is out of range; choose {MIN_SIDE} ..= {MAX_SIDE} pixels");
            }
        }
        Ok(SnapshotConfig {
            input: self.analysis.source.request(Some(self.input)),
            out: self.out,
            format,
            dsp: self.analysis.dsp.validate()?,
            skip_s: self.skip.unwrap_or(0.0),
            seconds: self.seconds,
            plan: self.channels.validate()?,
            plan_path: self.channels.plan.clone(),
            outline: self.outline,
            width: self.width,
            height: self.height,
            map: self.colour_map,
            scale: self.scale,
            calibration: self.analysis.levels.validate()?,
            title: self.title,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cli::{Cli, Command};
    use clap::Parser;

    #[test]
    fn snapshot_flags_parse() {
        let cli = Cli::try_parse_from([
            "bandwarden",
            "snapshot",
            "x.sigmf-meta",
            "-o",
            "x.SVG",
            "--skip",
            "1.5",
            "--seconds",
            "2",
            "--outline",
            "--colour-map",
            "magma",
            "--scale",
            "-110:-20",
            "--ref-offset",
            "-12",
            "--width",
            "800",
        ])
        .unwrap();
        let Some(Command::Snapshot(a)) = cli.command else { panic!("not snapshot") };
        let c = a.validate().unwrap();
        assert_eq!(c.format, PictureFormat::Svg);
        assert_eq!((c.skip_s, c.seconds), (1.5, Some(2.0)));
        assert_eq!(c.map, MapKind::Magma);
        assert_eq!(c.scale, Some((-110.0, -20.0)));
        assert_eq!(c.calibration.map(|c| c.offset_db(433e6)), Some(-12.0));
        assert_eq!((c.width, c.height), (800, 900));
        assert!(c.outline);
        let bad = |args: &[&str]| {
            let mut all = vec!["bandwarden", "snapshot", "x.cu8"];
            all.extend_from_slice(args);
            Cli::try_parse_from(all).map_err(|e| e.to_string()).and_then(|c| match c.command {
                Some(Command::Snapshot(a)) => a.validate().map(|_| ()).map_err(|e| e.to_string()),
                _ => Ok(()),
            })
        };
        assert!(bad(&["-o", "x.jpg"]).unwrap_err().contains(".png or .svg"));
        assert!(bad(&["-o", "x.png", "--width", "10"]).unwrap_err().contains("--width"));
        assert!(bad(&["-o", "x.png", "--scale", "-20:-110"]).is_err());
        assert!(bad(&["-o", "x.png", "--colour-map", "rainbow"]).unwrap_err().contains("viridis"));
        assert!(bad(&["-o", "x.png"]).is_ok());
    }
}
