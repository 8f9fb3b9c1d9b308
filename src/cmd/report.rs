//! `bandwarden report`: summarise occupancy logs (see [`crate::output::summary`] for how they
//! are read and summed) as a table, CSV or JSON on standard output, and optionally a heat map.

use crate::cli::report::ReportFormat;
use crate::cli::ReportConfig;
use crate::measure::change::baseline::BaselineFile;
use crate::messages::{note, notes, sanitize};
use crate::output::picture::heatmap::{draw_heatmap, heatmap_title};
use crate::output::sink;
use crate::output::summary::change::{changes_json, changes_table, compare_logs};
use crate::output::summary::export::{to_csv, to_json};
use crate::output::summary::table::to_table;
use crate::output::summary::{LogSummary, Settings};
use anyhow::{bail, Context, Result};
use std::io::{BufReader, Write};
use std::process::ExitCode;

/// The logs at `paths` summed; `learn`: also learn the hour-of-week baseline of `--save-baseline`.
fn read_logs(paths: &[String], settings: Settings, learn: bool) -> Result<LogSummary> {
    let mut summary = LogSummary::new(settings);
    if learn {
        summary.baseline = Some(BaselineFile::default());
    }
    for path in paths {
        let shown = sanitize(path);
        let file = std::fs::File::open(path)
            .with_context(|| format!("cannot open the log '{shown}'; check the path"))?;
        summary
            .read(path, BufReader::new(file))
            .with_context(|| format!("cannot read the log '{shown}'"))?;
    }
    Ok(summary)
}

pub fn run(cfg: ReportConfig) -> Result<ExitCode> {
    let mut summary = match &cfg.db {
        Some(url) => {
            if let crate::store::DbUrl::Sqlite(path) = url {
                if !path.exists() {
                    bail!(
                        "no database at '{}'; check the path (collect --db or import make one)",
                        path.display()
                    );
                }
            }
            let mut db = crate::store::open(url)?;
            let floors = cfg.png.is_some();
            crate::store::read::summarise(db.as_mut(), cfg.settings.clone(), &url.shown(), floors)?
        }
        None => read_logs(&cfg.logs, cfg.settings.clone(), cfg.save_baseline.is_some())?,
    };
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
            match &cfg.db {
                Some(url) => format!("the database {}", url.shown()),
                None => cfg.logs.iter().map(|l| format!("'{}'", sanitize(l))).collect::<Vec<_>>().join(", "),
            }
        );
    }
    let changes = if cfg.baseline_logs.is_empty() {
        None
    } else {
        let settings = Settings { from: None, to: None, ..cfg.settings.clone() };
        let base = read_logs(&cfg.baseline_logs, settings, false)?;
        if base.channels.is_empty() {
            bail!("--baseline-log: no interval or emission records in the baseline logs");
        }
        Some(compare_logs(&base, &summary, &cfg.thresholds))
    };
    let text = match (cfg.format, &changes) {
        (ReportFormat::Table, None) => to_table(&summary),
        (ReportFormat::Table, Some(c)) => {
            to_table(&summary) + &changes_table(c, &cfg.baseline_logs)
        }
        (ReportFormat::Csv, _) => to_csv(&summary),
        (ReportFormat::Json, c) => {
            let mut v = to_json(&summary);
            if let Some(c) = c {
                v["changes"] = changes_json(c);
            }
            format!("{v}\n")
        }
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
