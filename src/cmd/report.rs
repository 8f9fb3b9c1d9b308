//! `bandwarden report`: summarise occupancy logs (see [`crate::output::summary`] for how they
//! are read and summed) as a table, CSV or JSON on standard output, and optionally a heat map.

use crate::cli::report::ReportFormat;
use crate::cli::ReportConfig;
use crate::measure::change::baseline::BaselineFile;
use crate::messages::{note, notes, sanitize};
use crate::output::picture::heatmap::{draw_heatmap, heatmap_title};
use crate::output::sink;
use crate::output::summary::export::{to_csv, to_json};
use crate::output::summary::table::to_table;
use crate::output::summary::LogSummary;
use anyhow::{bail, Context, Result};
use std::io::{BufReader, Write};
use std::process::ExitCode;

pub fn run(cfg: ReportConfig) -> Result<ExitCode> {
    let mut summary = LogSummary::new(cfg.settings.clone());
    if cfg.save_baseline.is_some() {
        summary.baseline = Some(BaselineFile::default());
    }
    for path in &cfg.logs {
        let shown = sanitize(path);
        let file = std::fs::File::open(path)
            .with_context(|| format!("cannot open the log '{shown}'; check the path"))?;
        summary
            .read(path, BufReader::new(file))
            .with_context(|| format!("cannot read the log '{shown}'"))?;
    }
    let missing = cfg.settings.sites.missing(&summary.sites_seen);
    if !missing.is_empty() {
        bail!(
            "--site: no log holds the site(s) {}; the logs hold: {}",
            missing.join(", "),
            summary.sites_seen.join(", ")
        );
    }
    if summary.unplaced > 0 {
        summary.notes.push(format!(
            "{} records without clock times were left out: --from/--to place only records with times",
            summary.unplaced
        ));
    }
    if summary.channels.is_empty() {
        bail!(
            "no interval or emission records{} in {}; report reads the logs written by `bandwarden log` (JSON Lines or --csv)",
            if cfg.settings.from.is_some() || cfg.settings.to.is_some() { " within --from/--to" } else { "" },
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
        let title = cfg.title.clone().unwrap_or_else(|| heatmap_title(&summary));
        let bytes = draw_heatmap(&summary, cfg.map, &title)?;
        let mut f = sink::open(png, false, "heat map")?.out;
        f.write_all(&bytes)?;
        f.flush()?;
        note(&format!("wrote {}", sanitize(png)));
    }
    if let (Some(path), Some(baseline)) = (&cfg.save_baseline, &summary.baseline) {
        let text = serde_json::to_string_pretty(baseline)?;
        let mut f = sink::open(path, false, "baseline")?.out;
        f.write_all(text.as_bytes())?;
        f.write_all(b"\n")?;
        f.flush()?;
        note(&format!("wrote the baseline {}", sanitize(path)));
    }
    Ok(ExitCode::SUCCESS)
}
