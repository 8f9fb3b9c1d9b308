//! `report` flags and their validation.

use super::snapshot::parse_colour_map;
use crate::output::picture::colour::MapKind;
use anyhow::{bail, Result};
use clap::Args;

#[derive(Args, Debug)]
pub struct ReportArgs {
    /// Occupancy logs written by `bandwarden log` (JSON Lines): rotated, appended and several
    /// sites' files alike.
    #[arg(value_name = "LOG.jsonl", required = true)]
    pub logs: Vec<String>,
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
    pub format: ReportFormat,
    pub png: Option<String>,
    pub map: MapKind,
    pub title: Option<String>,
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
        let format = if self.csv {
            ReportFormat::Csv
        } else if self.json {
            ReportFormat::Json
        } else {
            ReportFormat::Table
        };
        Ok(ReportConfig {
            logs: self.logs,
            format,
            png: self.png,
            map: self.colour_map,
            title: self.title,
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
}
