//! `report` flags and their validation.

use super::change::ChangeArgs;
use super::snapshot::parse_colour_map;
use crate::measure::change::Thresholds;
use crate::output::picture::colour::MapKind;
use crate::output::summary::site::SiteRules;
use crate::output::summary::zone::{parse_instant, parse_zone, Zone};
use crate::output::summary::Settings;
use anyhow::{bail, Result};
use clap::Args;

#[derive(Args, Debug)]
pub struct ReportArgs {
    /// Occupancy logs written by `bandwarden log` (JSON Lines or --csv): rotated, appended,
    /// daily and several sites' files alike.
    #[arg(value_name = "LOG", required_unless_present = "db")]
    pub logs: Vec<String>,
    /// Sum the records stored in this database (collect --db, import) instead of log files.
    #[command(flatten)]
    pub db: crate::cli::db::DbArgs,
    /// Only this site (repeatable); NAME=SITE,SITE reports those sites merged as one, NAME.
    #[arg(long, value_name = "NAME[=SITE,…]")]
    pub site: Vec<String>,
    /// Only what starts at or after this time: 2026-12-03, 2026-12-03T22:00 (in --tz) or RFC 3339.
    #[arg(long, value_name = "TIME")]
    pub from: Option<String>,
    /// Only what starts before this time (same forms as --from).
    #[arg(long, value_name = "TIME")]
    pub to: Option<String>,
    /// Zone of the times, hours and heat map: UTC (default), a fixed offset such as +01:00, or
    /// an IANA zone name such as Europe/Berlin (with its daylight-saving rules).
    #[arg(long, value_name = "ZONE", default_value = "UTC")]
    pub tz: String,
    /// CSV (one row per channel, the hours as columns) instead of the table.
    #[arg(long, conflicts_with = "json")]
    pub csv: bool,
    /// One JSON object instead of the table.
    #[arg(long)]
    pub json: bool,
    /// Also draw the occupancy heat map (channel × hour of day, or × day) into this PNG.
    #[arg(long, value_name = "FILE.png")]
    pub png: Option<String>,
    /// Colour map of the heat map: viridis, magma, inferno or grey.
    #[arg(long, value_name = "NAME", default_value = "viridis", value_parser = parse_colour_map)]
    pub colour_map: MapKind,
    /// Title of the heat map (default: what it shows and the period).
    #[arg(long, value_name = "TEXT")]
    pub title: Option<String>,
    /// Also write each channel's usual occupancy and noise floor by hour of week, learnt from
    /// the logs' intervals, to this JSON file: the baseline `log --alarms --baseline FILE` reads.
    #[arg(long, value_name = "FILE.json")]
    pub save_baseline: Option<String>,
    /// Compare every channel with the same channel (site and name) in these earlier logs
    /// (repeatable; summed the same way, without --from/--to): occupancy, emissions, power
    /// while occupied and noise floor. Uses --level-change, --airtime-z and --airtime-factor.
    #[arg(long, value_name = "LOG")]
    pub baseline_log: Vec<String>,
    #[command(flatten)]
    pub change: ChangeArgs,
}

/// What `report` writes on standard output.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ReportFormat {
    Table,
    Csv,
    Json,
}

/// A validated `report`.
#[derive(Clone, Debug)]
pub struct ReportConfig {
    pub logs: Vec<String>,
    /// `--db`: the database to sum instead of `logs`.
    pub db: Option<crate::store::DbUrl>,
    pub format: ReportFormat,
    pub png: Option<String>,
    pub map: MapKind,
    pub title: Option<String>,
    /// Zone, window and sites.
    pub settings: Settings,
    /// `--save-baseline`.
    pub save_baseline: Option<String>,
    /// `--baseline-log` files and the thresholds of the comparison.
    pub baseline_logs: Vec<String>,
    pub thresholds: Thresholds,
}

impl ReportArgs {
    pub fn validate(self) -> Result<ReportConfig> {
        if let Some(p) = &self.png {
            if !p.to_ascii_lowercase().ends_with(".png") {
                bail!("--png writes a PNG picture: name the file .png");
            }
            if self.logs.iter().any(|l| l == p) {
                bail!(
                    "--png '{}' is one of the logs being read; choose another name",
                    crate::messages::sanitize(p)
                );
            }
        }
        if let Some(b) = &self.save_baseline {
            if self.logs.contains(b) || self.png.as_ref() == Some(b) {
                bail!(
                    "--save-baseline '{}' is one of the files being read or written; choose another name",
                    crate::messages::sanitize(b)
                );
            }
        }
        if !self.baseline_log.is_empty() && self.csv {
            bail!("--baseline-log lists its changes in the table or --json; drop --csv");
        }
        let db = self.db.validate()?;
        if db.is_some() && !self.logs.is_empty() {
            bail!("report reads log files or --db, not both; import the logs into the database first (bandwarden import --db URL LOG…)");
        }
        if db.is_some() && self.save_baseline.is_some() {
            bail!("--save-baseline learns from log files; give the logs instead of --db");
        }
        let thresholds = self.change.validate()?;
        let zone: Zone = parse_zone(&self.tz)?;
        let from = self.from.as_deref().map(|t| parse_instant(t, &zone, "--from")).transpose()?;
        let to = self.to.as_deref().map(|t| parse_instant(t, &zone, "--to")).transpose()?;
        if let (Some(f), Some(t)) = (from, to) {
            if t <= f {
                bail!("--to must come after --from");
            }
        }
        let settings = Settings { zone, from, to, sites: SiteRules::parse(&self.site)? };
        let format = if self.csv {
            ReportFormat::Csv
        } else if self.json {
            ReportFormat::Json
        } else {
            ReportFormat::Table
        };
        Ok(ReportConfig {
            logs: self.logs,
            db,
            format,
            png: self.png,
            map: self.colour_map,
            title: self.title,
            settings,
            save_baseline: self.save_baseline,
            baseline_logs: self.baseline_log,
            thresholds,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cli::{Cli, Command};
    use clap::Parser;

    fn parse(args: &[&str]) -> Result<ReportConfig> {
        let mut all = vec!["bandwarden", "report"];
        all.extend_from_slice(args);
        match Cli::try_parse_from(all)?.command {
            Some(Command::Report(a)) => a.validate(),
            _ => bail!("not report"),
        }
    }

    #[test]
    fn report_flags_parse() {
        let c = parse(&["a.jsonl", "b.jsonl", "--json", "--png", "h.png"]).unwrap();
        assert_eq!(c.logs, ["a.jsonl", "b.jsonl"]);
        assert_eq!(c.format, ReportFormat::Json);
        assert_eq!(c.png.as_deref(), Some("h.png"));
        assert_eq!(parse(&["a.jsonl"]).unwrap().format, ReportFormat::Table);
        assert!(parse(&[]).is_err(), "a log is required");
        assert!(parse(&["a.jsonl", "--csv", "--json"]).is_err());
        assert!(parse(&["a.jsonl", "--png", "h.svg"]).is_err());
        assert!(parse(&["a.jsonl", "--png", "a.jsonl"]).is_err());
    }

    #[test]
    fn window_zone_and_sites() {
        let c = parse(&[
            "a.jsonl",
            "--tz",
            "+01:00",
            "--from",
            "2026-12-03T23:00",
            "--to",
            "2026-12-04T07:00",
            "--site",
            "ridge=ridge,mast",
        ])
        .unwrap();
        assert_eq!(c.settings.zone.offset_s, 3600);
        // 2026-12-03T22:00Z is 20 790 days and 22 h after the epoch.
        assert_eq!(c.settings.from, Some(20_790.0 * 86_400.0 + 22.0 * 3600.0));
        assert_eq!(c.settings.to, Some(20_791.0 * 86_400.0 + 6.0 * 3600.0));
        assert_eq!(c.settings.sites.map("mast").as_deref(), Some("ridge"));
        assert!(parse(&["a.jsonl", "--from", "2026-12-04", "--to", "2026-12-03"]).is_err());
        assert!(parse(&["a.jsonl", "--tz", "Mars/Olympus"]).is_err());
        assert_eq!(
            parse(&["a.jsonl", "--tz", "Europe/Berlin"]).unwrap().settings.zone.label(),
            "Europe/Berlin"
        );
        assert!(parse(&["a.jsonl", "--from", "yesterday"]).is_err());
    }
}
