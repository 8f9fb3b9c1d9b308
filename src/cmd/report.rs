//! `bandwarden report`: summarise occupancy logs (see [`crate::output::summary`] for how they
//! are read and summed) as a table, CSV or JSON on standard output, and optionally a heat map.

use crate::cli::report::ReportFormat;
use crate::cli::ReportConfig;
use crate::messages::{note, notes, sanitize};
use crate::output::picture::heatmap::{draw_heatmap, grid, Columns};
use crate::output::sink;
use crate::output::summary::table::{to_csv, to_json, to_table};
use crate::output::summary::{LogSummary, Seen};
use anyhow::{bail, Context, Result};
use std::io::{BufReader, Write};
use std::process::ExitCode;

pub fn run(cfg: ReportConfig) -> Result<ExitCode> {
    let mut summary = LogSummary::default();
    let mut seen = Seen::default();
    for path in &cfg.logs {
        let shown = sanitize(path);
        let file = std::fs::File::open(path)
            .with_context(|| format!("cannot open the log '{shown}'; check the path"))?;
        summary
            .read(path, BufReader::new(file), &mut seen)
            .with_context(|| format!("cannot read the log '{shown}'"))?;
    }
    if summary.channels.is_empty() {
        bail!(
            "no interval or emission records in {}; report reads the JSON Lines written by `bandwarden log` (not its --csv form)",
            cfg.logs.iter().map(|l| format!("'{}'", sanitize(l))).collect::<Vec<_>>().join(", ")
        );
    }
    let text = match cfg.format {
        ReportFormat::Table => to_table(&summary),
        ReportFormat::Csv => to_csv(&summary),
        ReportFormat::Json => format!("{}\n", to_json(&summary)),
    };
    if cfg.format != ReportFormat::Table {
        notes(&summary.notes);
    }
    let mut out = sink::open("-", false, "report")?.out;
    out.write_all(text.as_bytes())?;
    out.flush()?;
    if let Some(png) = &cfg.png {
        let what = match grid(&summary).columns {
            Columns::HourOfDay => "by UTC hour of day",
            Columns::HourFromStart => "by hour from the start of the run",
            Columns::Day => "by UTC day",
        };
        let sites = if summary.sites.len() > 1 {
            format!(", sites {}", summary.sites.join(", "))
        } else {
            summary.sites.first().map_or(String::new(), |s| format!(", {s}"))
        };
        let title = cfg.title.clone().unwrap_or_else(|| format!("Channel occupancy {what}{sites}"));
        let bytes = draw_heatmap(&summary, cfg.map, &title)?;
        let mut f = sink::open(png, false, "heat map")?.out;
        f.write_all(&bytes)?;
        f.flush()?;
        note(&format!("wrote {}", sanitize(png)));
    }
    Ok(ExitCode::SUCCESS)
}
