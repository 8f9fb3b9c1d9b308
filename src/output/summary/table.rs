//! `report`'s text: the morning report an operator reads. First each site's observation time
//! (measured over the period, the runs and how each stopped, the gaps and why), then one row per
//! channel, what each channel was last heard doing, and the occupancy by hour of the day in the
//! report's zone, a night in order.
//!
//! Rows are keyed by site and channel and sorted by frequency, then channel, then site, so one
//! channel watched from several sites stands on neighbouring rows, side by side.

use crate::output::picture::snapshot::format_duration;
use crate::output::summary::coverage::{site_coverage, stop_words, GapCause, SiteCoverage};
use crate::output::summary::{is_thin, percentile, ChannelSum, LogSummary};
use std::fmt::Write as _;

/// Runs and gaps listed per site in the text; `--json` lists them all.
const LISTED: usize = 12;

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

fn opt(x: Option<f64>, decimals: usize) -> String {
    x.map_or_else(|| "-".to_string(), |v| format!("{v:.decimals$}"))
}

/// A channel's occupancy, or "not measured" for a panorama's channel never in view (never a
/// 0 % that would read as idle).
fn occupancy_cell(c: &ChannelSum) -> String {
    match c.total.pct() {
        None if c.not_measured_s > 0.0 => "not measured".to_string(),
        p => opt(p, 2),
    }
}

/// The text report.
pub fn to_table(summary: &LogSummary) -> String {
    let zone = &summary.settings.zone;
    let mut out = String::new();
    let from = match &summary.database {
        Some(db) => format!("the database {db}"),
        None => format!("{} file(s)", summary.files),
    };
    let _ = writeln!(
        out,
        "Channel occupancy from {from}; times {}; terms of ITU-R SM.1880 and Report ITU-R SM.2256",
        if summary.has_clock() {
            zone.label()
        } else {
            "from the start of each run (the log has no clock times)".into()
        }
    );
    for site in &summary.sites {
        coverage_text(&mut out, summary, &site_coverage(summary, site));
    }
    let _ = writeln!(out);
    channel_rows(&mut out, summary);
    let _ = writeln!(out);
    heard_text(&mut out, summary);
    let _ = writeln!(out);
    hours_text(&mut out, summary);
    super::alarms::alarms_text(&mut out, summary);
    for n in &summary.notes {
        let _ = writeln!(out, "note: {n}");
    }
    out
}

fn coverage_text(out: &mut String, summary: &LogSummary, c: &SiteCoverage) {
    let zone = &summary.settings.zone;
    let _ = writeln!(out, "\nSite {}", c.site);
    let period = match c.period {
        Some((a, b)) => format!(
            "{} of {} ({} to {}), {} %",
            format_duration(c.measured_s()),
            format_duration(b - a),
            zone.format(a),
            zone.format(b),
            opt(c.pct(), 2),
        ),
        None => format!("{} (the log has no clock times)", format_duration(c.measured_s())),
    };
    let _ = writeln!(
        out,
        "  observation time: {period}; lost to dropped input {}",
        format_duration(c.lost_s)
    );
    let _ = writeln!(out, "  runs ({}):", c.runs.len());
    for r in c.runs.iter().take(LISTED) {
        let when = match (r.from, r.to) {
            (Some(a), Some(b)) => format!("{} to {}", zone.format(a), zone.format(b)),
            _ => "time unknown".to_string(),
        };
        let sweep = r.sweep.as_deref().map(|w| format!("; {w}")).unwrap_or_default();
        let _ = writeln!(
            out,
            "    {when}  {:>12}  {}{sweep}",
            format_duration(r.length_s),
            stop_words(r.stop.as_deref())
        );
    }
    more(out, c.runs.len());
    if c.gaps.is_empty() {
        return;
    }
    let _ = writeln!(out, "  not measured ({}):", c.gaps.len());
    for g in c.gaps.iter().take(LISTED) {
        let why = match &g.cause {
            GapCause::NoRun { first: true, .. } => "no run yet".to_string(),
            GapCause::NoRun { after, .. } => {
                format!("no run; the run before: {}", stop_words(after.as_deref()))
            }
            GapCause::Dropped(cause) => format!("input dropped inside a run: {cause}"),
        };
        let _ = writeln!(
            out,
            "    {} to {}  {:>12}  {why}",
            zone.format(g.from),
            zone.format(g.to),
            format_duration(g.to - g.from)
        );
    }
    more(out, c.gaps.len());
}

fn more(out: &mut String, n: usize) {
    if n > LISTED {
        let _ = writeln!(out, "    … and {} more (--json lists them all)", n - LISTED);
    }
}

fn channel_rows(out: &mut String, summary: &LogSummary) {
    let sites = summary.sites.len() > 1;
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
        "busy hour",
        "observed",
        "lost",
    ]);
    let mut rows: Vec<Vec<String>> = vec![header.iter().map(|s| s.to_string()).collect()];
    for c in ordered(summary) {
        let mut r = vec![];
        if sites {
            r.push(c.site.clone());
        }
        let busy = c.busy_hour().map_or("-".to_string(), |(h, p)| format!("{h:02}h {p:.1} %"));
        r.extend([
            c.name.clone(),
            occupancy_cell(c),
            c.durations_s.len().to_string(),
            opt(percentile(&c.durations_s, 50.0), 3),
            opt(percentile(&c.durations_s, 90.0), 3),
            opt(percentile(&c.durations_s, 100.0), 3),
            opt(c.mean_dbfs(), 1),
            opt(c.peak_dbfs, 1),
            busy,
            format_duration(c.total.seconds),
            format_duration(c.lost_s),
        ]);
        rows.push(r);
    }
    let text_columns = if sites { 2 } else { 1 };
    aligned(out, &rows, text_columns);
    if summary.channels.values().any(|c| c.not_measured_s > 0.0) {
        let _ = writeln!(
            out,
            "not measured: a sweep's channel that no step had whole in view (in a hole between steps, or beyond the span): no occupancy, never idle"
        );
    }
    let _ = writeln!(
        out,
        "occupancy: occupied / measured samples; durations of emissions (nearest rank); busy hour: the hour of day with the highest occupancy, when one is higher than the rest (hours measured under 6 min left out)"
    );
}

/// Writes `rows` in columns, the first `text_columns` left-aligned, the rest right-aligned.
fn aligned(out: &mut String, rows: &[Vec<String>], text_columns: usize) {
    let widths: Vec<usize> = (0..rows[0].len())
        .map(|i| rows.iter().map(|r| r[i].chars().count()).max().unwrap_or(0))
        .collect();
    for r in rows {
        let cells: Vec<String> = r
            .iter()
            .enumerate()
            .map(|(i, c)| {
                if i < text_columns {
                    format!("{c:<w$}", w = widths[i])
                } else {
                    format!("{c:>w$}", w = widths[i])
                }
            })
            .collect();
        let _ = writeln!(out, "{}", cells.join("  ").trim_end());
    }
}

fn heard_text(out: &mut String, summary: &LogSummary) {
    let zone = &summary.settings.zone;
    let sites = summary.sites.len() > 1;
    let when = |t: Option<f64>| t.map_or("time unknown".to_string(), |t| zone.format(t));
    let _ = writeln!(
        out,
        "Last heard, longest emissions, noise floor (dBFS/Hz: first interval / median / last):"
    );
    for c in ordered(summary) {
        let name = if sites { format!("{} / {}", c.site, c.name) } else { c.name.clone() };
        let last = c.last_heard.map_or("never heard".to_string(), |h| {
            format!("last heard {}", when(h.end.or(h.start)))
        });
        let longest: Vec<String> = c
            .longest
            .iter()
            .map(|h| format!("{} at {}", format_duration(h.duration_s), when(h.start)))
            .collect();
        let noise = c.noise_trend().map_or("-".to_string(), |n| {
            format!("{:.1} / {:.1} / {:.1}", n.start, n.median, n.end)
        });
        let _ = writeln!(out, "  {name}: {last}");
        if !longest.is_empty() {
            let _ = writeln!(out, "    longest: {}", longest.join(", "));
        }
        let _ = writeln!(out, "    noise floor: {noise}");
    }
}

/// Occupancy per hour of the day, the hours measured at any channel only, in the axis order.
fn hours_text(out: &mut String, summary: &LogSummary) {
    let sites = summary.sites.len() > 1;
    let chans = ordered(summary);
    let per: Vec<_> = chans.iter().map(|c| c.by_hour_of_day()).collect();
    let hours: Vec<i64> = summary
        .hour_axis()
        .into_iter()
        .filter(|h| per.iter().any(|p| p.get(h).is_some_and(|t| t.samples > 0)))
        .collect();
    let what = if summary.has_clock() {
        format!("hour of day, {}, all days summed", summary.settings.zone.label())
    } else {
        "hour from the start of the run".to_string()
    };
    let _ = writeln!(out, "Occupancy % by {what} (* thin: under 6 min measured; - not measured):");
    let mut rows = vec![std::iter::once("channel".to_string())
        .chain(hours.iter().map(|h| format!("{h:02}")))
        .collect::<Vec<_>>()];
    for (c, p) in chans.iter().zip(&per) {
        let name = if sites { format!("{} / {}", c.site, c.name) } else { c.name.clone() };
        let cells =
            hours.iter().map(|h| match p.get(h).and_then(|t| Some((t.pct()?, t.seconds))) {
                Some((pct, s)) if is_thin(s, 3600.0) => format!("{pct:.1}*"),
                Some((pct, _)) => format!("{pct:.1}"),
                None => "-".to_string(),
            });
        rows.push(std::iter::once(name).chain(cells).collect());
    }
    aligned(out, &rows, 1);
}
