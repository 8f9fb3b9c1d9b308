//! The thresholds of a comparison with a baseline (`census --baseline`, `report --baseline-log`).

use super::common::parse_number;
use crate::measure::change::Thresholds;
use anyhow::{bail, Result};
use clap::Args;

/// The help heading of the comparison's flags.
pub const CHANGE_HEADING: &str = "Changes against a baseline";

/// When a difference from the baseline is a change. Defaults: see each flag.
#[derive(Args, Debug, Clone)]
#[command(next_help_heading = CHANGE_HEADING)]
pub struct ChangeArgs {
    /// A level (power, floor) that moved by at least this many dB has changed.
    #[arg(long, value_name = "DB", default_value_t = 3.0, value_parser = parse_number)]
    pub level_change: f64,
    /// An occupied bandwidth that grew or shrank by at least this factor has changed.
    #[arg(long, value_name = "FACTOR", default_value_t = 1.5, value_parser = parse_number)]
    pub width_factor: f64,
    /// Airtime has changed when the test statistic reaches this (two-sided; 2.576 is a 1 %
    /// chance of calling a steady emitter changed) ...
    #[arg(long, value_name = "Z", default_value_t = 2.576, value_parser = parse_number)]
    pub airtime_z: f64,
    /// ... and the ratio of the airtimes is at least this factor.
    #[arg(long, value_name = "FACTOR", default_value_t = 1.5, value_parser = parse_number)]
    pub airtime_factor: f64,
    /// A centre that shifted by more than 2 RBW plus this share of the OBW has moved.
    #[arg(long, value_name = "SHARE", default_value_t = 0.25, value_parser = parse_number)]
    pub move_share: f64,
    /// How far a moved emitter is looked for, in OBWs (plus 10 RBW).
    #[arg(long, value_name = "OBWS", default_value_t = 5.0, value_parser = parse_number)]
    pub move_within: f64,
    /// A new emission on the air all the time (90 % or more) whose density (power over OBW)
    /// stands less than this many dB above the old floor, where no emitter was, is read as a
    /// raised floor (7 dB: rises of the floor up to 7.8 dB); above it, as a new emitter.
    #[arg(long, value_name = "DB", default_value_t = 7.0, value_parser = parse_number)]
    pub floor_like_below: f64,
}

impl ChangeArgs {
    pub fn validate(&self) -> Result<Thresholds> {
        let positive = [
            ("--level-change", self.level_change),
            ("--airtime-z", self.airtime_z),
            ("--move-share", self.move_share),
            ("--move-within", self.move_within),
            ("--floor-like-below", self.floor_like_below),
        ];
        for (flag, v) in positive {
            if v <= 0.0 {
                bail!("{flag} must be above 0 (got {v})");
            }
        }
        for (flag, v) in
            [("--width-factor", self.width_factor), ("--airtime-factor", self.airtime_factor)]
        {
            if v <= 1.0 {
                bail!("{flag} is a factor and must be above 1 (got {v})");
            }
        }
        Ok(Thresholds {
            power_db: self.level_change,
            width_factor: self.width_factor,
            airtime_z: self.airtime_z,
            airtime_factor: self.airtime_factor,
            floor_db: self.level_change,
            move_share: self.move_share,
            move_within: self.move_within,
            floor_rise_max_db: self.floor_like_below,
        })
    }
}
