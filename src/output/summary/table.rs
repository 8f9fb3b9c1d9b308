//! `report`'s words: the summary of occupancy logs as a text table, CSV or one JSON object.
//!
//! Rows are keyed by site and channel and sorted by channel, then site, so one channel watched
//! from several sites stands on neighbouring rows, side by side. Hours are UTC hours of the day
//! (0–23, summed over days) when the log has clock times, else hours from the start of the run.

use crate::output::picture::snapshot::format_duration;
use crate::output::summary::{percentile, ChannelSum, LogSummary};
use serde_json::{json, Value};
use std::fmt::Write as _;

/// The channels in the order every output lists them.
pub fn ordered(summary: &LogSummary) -> Vec<&ChannelSum> {
    let mut v: Vec<&ChannelSum> = summary.channels.values().collect();
    v.sort_by(|a, b| {
        let fa = a.center_hz.unwrap_or(f64::MAX);
        let fb = b.center_hz.unwrap_or(f64::MAX);
        fa.total_cmp(&fb).then_with(|| a.name.cmp(&b.name)).then_with(|| a.site.cmp(&b.site))
    });
    v
}

fn hour_word(summary: &LogSummary) -> &'static str {
    if summary.has_clock() {
        "UTC hour of day"
    } else {
        "hour from the start of the run"
    }
}

fn opt(x: Option<f64>, decimals: usize) -> String {
    x.map_or_else(|| "-".to_string(), |v| format!("{v:.decimals$}"))
}

/// The text table.
pub fn to_table(summary: &LogSummary) -> String {
    let sites = summary.sites.len() > 1;
    let mut out = String::new();
    let period = match (&summary.first, &summary.last) {
        (Some(a), Some(b)) => format!("{a} to {b}"),
        _ => "times unknown (the log has no clock times)".to_string(),
    };
    let _ = writeln!(out, "Occupancy from {} file(s): {period}", summary.files);
    let _ = writeln!(
        out,
        "occupancy: occupied / measured samples (ITU-R SM.1880); durations in s (nearest rank); busiest: {}\n",
        hour_word(summary)
    );
    let mut header = vec![];
    if sites {
        header.push("site");
    }
    header.extend([
        "channel",
        "occupancy %",
        "emissions",
        "median s",
        "90 % s",
        "max s",
        "mean dBFS",
        "peak dBFS",
        "busiest",
        "measured",
        "lost",
    ]);
    let mut rows: Vec<Vec<String>> = vec![header.iter().map(|s| s.to_string()).collect()];
    for c in ordered(summary) {
        let mut r = vec![];
        if sites {
            r.push(c.site.clone());
        }
        let busiest =
            c.busiest_hour().map_or("-".to_string(), |(h, p)| format!("{h:02}h {p:.1} %"));
        r.extend([
            c.name.clone(),
            opt(c.total.pct(), 2),
            c.durations_s.len().to_string(),
            opt(percentile(&c.durations_s, 50.0), 3),
            opt(percentile(&c.durations_s, 90.0), 3),
            opt(percentile(&c.durations_s, 100.0), 3),
            opt(c.mean_dbfs(), 1),
            opt(c.peak_dbfs, 1),
            busiest,
            format_duration(c.measured_s),
            format_duration(c.lost_s),
        ]);
        rows.push(r);
    }
    let widths: Vec<usize> = (0..rows[0].len())
        .map(|i| rows.iter().map(|r| r[i].chars().count()).max().unwrap_or(0))
        .collect();
    for r in &rows {
        let cells: Vec<String> = r
            .iter()
            .enumerate()
            .map(|(i, c)| {
                let first_text = i == 0 || (sites && i == 1);
                if first_text {
                    format!("{c:<w$}", w = widths[i])
                } else {
                    format!("{c:>w$}", w = widths[i])
                }
            })
            .collect();
        let _ = writeln!(out, "{}", cells.join("  ").trim_end());
    }
    for n in &summary.notes {
        let _ = writeln!(out, "note: {n}");
    }
    out
}

/// The CSV: one row per channel, the hours as columns `h00`…`h23` (or from the start).
pub fn to_csv(summary: &LogSummary) -> String {
    let hours = hour_columns(summary);
    let mut out = String::from(
        "site,channel,center_hz,width_hz,occupancy_pct,samples,occupied_samples,dropped_samples,emissions,duration_median_s,duration_p90_s,duration_max_s,mean_dbfs,peak_dbfs,busiest_hour,busiest_hour_occupancy_pct",
    );
    for h in &hours {
        let _ = write!(out, ",h{h:02}");
    }
    out.push('\n');
    let field = |x: Option<f64>| x.map_or(String::new(), |v| format!("{v}"));
    for c in ordered(summary) {
        let by_hour = c.by_hour_of_day();
        let busiest = c.busiest_hour();
        let _ = write!(
            out,
            "{},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
            csv_text(&c.site),
            csv_text(&c.name),
            field(c.center_hz),
            field(c.width_hz),
            field(c.total.pct().map(round4)),
            c.total.samples,
            c.total.occupied,
            c.dropped_samples,
            c.durations_s.len(),
            field(percentile(&c.durations_s, 50.0)),
            field(percentile(&c.durations_s, 90.0)),
            field(percentile(&c.durations_s, 100.0)),
            field(c.mean_dbfs().map(round2)),
            field(c.peak_dbfs),
            busiest.map_or(String::new(), |b| b.0.to_string()),
            field(busiest.map(|b| round4(b.1))),
        );
        for h in &hours {
            let _ = write!(out, ",{}", field(by_hour.get(h).and_then(|t| t.pct()).map(round4)));
        }
        out.push('\n');
    }
    out
}

/// The hour columns: 0..24 of the day with clock times, else every hour from the start seen.
fn hour_columns(summary: &LogSummary) -> Vec<i64> {
    if summary.has_clock() {
        return (0..24).collect();
    }
    let last =
        summary.channels.values().flat_map(|c| c.by_hour_of_day().into_keys()).max().unwrap_or(0);
    (0..=last).collect()
}

fn csv_text(s: &str) -> String {
    if s.contains([',', '"', '\n']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

fn round2(x: f64) -> f64 {
    (x * 100.0).round() / 100.0
}

fn round4(x: f64) -> f64 {
    (x * 1e4).round() / 1e4
}

/// One JSON object: `period`, `sites`, `channels[]` (each with `name, occupancy_pct, emissions,
/// hours[]` and the rest), `notes`.
pub fn to_json(summary: &LogSummary) -> Value {
    let clock = summary.has_clock();
    let channels: Vec<Value> = ordered(summary)
        .into_iter()
        .map(|c| {
            let hours: Vec<Value> = c
                .by_hour_of_day()
                .into_iter()
                .map(|(h, t)| {
                    json!({
                        "hour": h,
                        "occupancy_pct": t.pct().map(round4),
                        "samples": t.samples,
                        "occupied_samples": t.occupied,
                    })
                })
                .collect();
            json!({
                "site": c.site,
                "name": c.name,
                "center_hz": c.center_hz,
                "width_hz": c.width_hz,
                "occupancy_pct": c.total.pct().map(round4),
                "samples": c.total.samples,
                "occupied_samples": c.total.occupied,
                "dropped_samples": c.dropped_samples,
                "measured_s": c.measured_s,
                "lost_s": c.lost_s,
                "emissions": c.durations_s.len(),
                "emission_duration_s": {
                    "median": percentile(&c.durations_s, 50.0),
                    "p90": percentile(&c.durations_s, 90.0),
                    "max": percentile(&c.durations_s, 100.0),
                },
                "mean_dbfs": c.mean_dbfs().map(round2),
                "peak_dbfs": c.peak_dbfs,
                "busiest_hour": c.busiest_hour().map(|(h, p)| json!({"hour": h, "occupancy_pct": round4(p)})),
                "hours": hours,
            })
        })
        .collect();
    json!({
        "period": {"start": summary.first, "end": summary.last},
        "hours_are": if clock { "utc_hour_of_day" } else { "hours_from_run_start" },
        "files": summary.files,
        "sites": summary.sites,
        "duplicates_skipped": summary.duplicates,
        "channels": channels,
        "notes": summary.notes,
    })
}
