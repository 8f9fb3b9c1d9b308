//! `log --alarms` flags: the change test and its parameters, the warm-up and the baseline file.

use crate::measure::change::alarm::{
    Settings, DEFAULT_MIN_FLOOR_SPREAD_DB, DEFAULT_MIN_OCCUPANCY_SPREAD,
    DEFAULT_NEW_SIGNAL_BELOW_PCT,
};
use crate::measure::change::Method;
use anyhow::{bail, Result};
use clap::{Args, ValueEnum};

#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum AlarmMethod {
    Cusum,
    Ewma,
}

#[derive(Args, Debug)]
#[command(next_help_heading = "Change alarms")]
pub struct AlarmArgs {
    /// Raise `alarm` records when a channel's noise floor or occupancy departs from its usual
    /// level for the hour of the week (and `clear` records when it returns).
    #[arg(long)]
    pub alarms: bool,
    /// Seed the usual levels from a baseline file (`report LOG… --save-baseline FILE`) instead of
    /// learning them from this run alone.
    #[arg(long, value_name = "FILE", requires = "alarms")]
    pub baseline: Option<String>,
    /// The sequential test: cusum (Page 1954) or ewma (Roberts 1959).
    #[arg(long, value_name = "TEST", value_enum, default_value = "cusum", requires = "alarms")]
    pub alarm_method: AlarmMethod,
    /// CUSUM reference value k, in σ (default 0.5; with h 5: false alarm every ≈465 intervals).
    #[arg(
        long,
        value_name = "SIGMA",
        default_value_t = 0.5,
        allow_negative_numbers = true,
        requires = "alarms"
    )]
    pub cusum_k: f64,
    /// CUSUM decision interval h, in σ (5: ARL0 ≈ 465, ≈10 intervals to a 1σ shift; 4: 168, 8.4).
    #[arg(
        long,
        value_name = "SIGMA",
        default_value_t = 5.0,
        allow_negative_numbers = true,
        requires = "alarms"
    )]
    pub cusum_h: f64,
    /// EWMA weight λ of the newest interval (0 < λ ≤ 1).
    #[arg(
        long,
        value_name = "LAMBDA",
        default_value_t = 0.1,
        allow_negative_numbers = true,
        requires = "alarms"
    )]
    pub ewma_lambda: f64,
    /// EWMA limit L, in σ of the statistic (λ 0.1, L 2.814: ARL0 500, 10.3 at 1σ).
    #[arg(
        long,
        value_name = "L",
        default_value_t = 2.814,
        allow_negative_numbers = true,
        requires = "alarms"
    )]
    pub ewma_limit: f64,
    /// Intervals a channel must be seen (per hour of week, else over all hours) before its
    /// alarms are armed.
    #[arg(long, value_name = "N", default_value_t = crate::measure::change::alarm::DEFAULT_WARMUP, requires = "alarms")]
    pub alarm_warmup: u64,
    /// Smallest spread of the floor a residual is divided by, dB.
    #[arg(long, value_name = "DB", default_value_t = DEFAULT_MIN_FLOOR_SPREAD_DB, allow_negative_numbers = true, requires = "alarms")]
    pub alarm_floor_spread: f64,
    /// Smallest spread of occupancy a residual is divided by, on the asin(√p) scale (radians).
    #[arg(long, value_name = "RAD", default_value_t = DEFAULT_MIN_OCCUPANCY_SPREAD, allow_negative_numbers = true, requires = "alarms")]
    pub alarm_occupancy_spread: f64,
}

/// Validated `--alarms`: the settings and the baseline file to seed from.
#[derive(Clone, Debug, PartialEq)]
pub struct AlarmConfig {
    pub settings: Settings,
    pub baseline: Option<String>,
}

impl AlarmArgs {
    pub fn validate(&self) -> Result<Option<AlarmConfig>> {
        if !self.alarms {
            return Ok(None);
        }
        let method = match self.alarm_method {
            AlarmMethod::Cusum => Method::Cusum { k: self.cusum_k, h: self.cusum_h },
            AlarmMethod::Ewma => Method::Ewma { lambda: self.ewma_lambda, l: self.ewma_limit },
        };
        if let Err(e) = method.check() {
            bail!("--alarm-method {}: {e}", method.name());
        }
        if self.alarm_warmup < 2 {
            bail!("--alarm-warmup must be at least 2 intervals (a spread needs two); the default is 30");
        }
        for (flag, v) in [
            ("--alarm-floor-spread", self.alarm_floor_spread),
            ("--alarm-occupancy-spread", self.alarm_occupancy_spread),
        ] {
            if !(v.is_finite() && v > 0.0) {
                bail!("{flag} must be a number above zero, got {v}");
            }
        }
        Ok(Some(AlarmConfig {
            settings: Settings {
                method,
                warmup: self.alarm_warmup,
                min_floor_spread_db: self.alarm_floor_spread,
                min_occupancy_spread: self.alarm_occupancy_spread,
                new_signal_below_pct: DEFAULT_NEW_SIGNAL_BELOW_PCT,
            },
            baseline: self.baseline.clone(),
        }))
    }
}

#[cfg(test)]
mod tests {
    use crate::cli::{Cli, Command};
    use clap::Parser;

    fn alarms(extra: &[&str]) -> anyhow::Result<Option<super::AlarmConfig>> {
        let mut args = vec!["bandwarden", "log", "f.cu8"];
        args.extend_from_slice(extra);
        let Some(Command::Log(a)) = Cli::try_parse_from(args).unwrap().command else { panic!() };
        a.alarms.validate()
    }

    #[test]
    fn alarm_flags_have_the_published_defaults_and_refuse_bad_values() {
        assert_eq!(alarms(&[]).unwrap(), None);
        let c = alarms(&["--alarms"]).unwrap().unwrap();
        assert_eq!(c.settings.method, crate::measure::change::DEFAULT_CUSUM);
        let e = alarms(&["--alarms", "--alarm-method", "ewma"]).unwrap().unwrap();
        assert_eq!(e.settings.method, crate::measure::change::DEFAULT_EWMA);
        assert!(alarms(&["--alarms", "--cusum-h", "-1"])
            .unwrap_err()
            .to_string()
            .contains("h = 5"));
        assert!(alarms(&["--alarms", "--alarm-floor-spread", "0"]).is_err());
        assert!(alarms(&["--alarms", "--alarm-warmup", "1"]).is_err());
        let no_alarms = Cli::try_parse_from(["bandwarden", "log", "f", "--baseline", "b.json"]);
        assert!(no_alarms.is_err(), "--baseline needs --alarms");
        let no_alarms = Cli::try_parse_from(["bandwarden", "log", "f", "--cusum-h", "4"]);
        assert!(no_alarms.is_err(), "a test parameter without --alarms would be ignored");
    }
}
