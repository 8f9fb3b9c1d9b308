//! `report --csv` (one row per channel, the hours as columns) and `report --json` (one object).
//! Every number is rounded to what it means: percentages to 0.001 %, seconds to the
//! millisecond, levels to 0.01 dB, frequencies to 0.1 Hz, shared samples to 0.001. Times are
//! RFC 3339 in the report's zone (`--tz`).

use crate::output::summary::coverage::{site_coverage, GapCause};
use crate::output::summary::table::ordered;
use crate::output::summary::{is_thin, percentile, ChannelSum, Heard, LogSummary};
use serde_json::{json, Value};
use std::fmt::Write as _;

pub use crate::units::round_dp as round;

fn pct(x: Option<f64>) -> Option<f64> {
    x.map(|v| round(v, 3))
}

fn secs(x: f64) -> f64 {
    round(x, 3)
}

fn db(x: Option<f64>) -> Option<f64> {
    x.map(|v| round(v, 2))
}

fn hz(x: Option<f64>) -> Option<f64> {
    x.map(|v| round(v, 1))
}

/// The CSV: one row per channel, the hours as columns `h22`, `h23`, `h00`… in the order of the
/// axis (a night in order), or from the start of the run without clock times.
pub fn to_csv(summary: &LogSummary) -> String {
    let zone = &summary.settings.zone;
    let hours = summary.hour_axis();
    let mut out = String::from(
        "site,channel,center_hz,width_hz,occupancy_pct,samples,occupied_samples,dropped_samples,observed_s,lost_s,not_measured_s,emissions,duration_median_s,duration_p90_s,duration_max_s,mean_dbfs,peak_dbfs,busy_hour,busy_hour_occupancy_pct,last_heard,noise_floor_start,noise_floor_median,noise_floor_end",
    );
    for h in &hours {
        let _ = write!(out, ",h{h:02}");
    }
    out.push('\n');
    let field = |x: Option<f64>| x.map_or(String::new(), |v| format!("{v}"));
    for c in ordered(summary) {
        let by_hour = c.by_hour_of_day();
        let busy = c.busy_hour();
        let noise = c.noise_trend();
        let d = |p| field(percentile(&c.durations_s, p).map(secs));
        let cells = [
            csv_text(&c.site),
            csv_text(&c.name),
            field(hz(c.center_hz)),
            field(hz(c.width_hz)),
            field(pct(c.total.pct())),
            c.total.samples.to_string(),
            field(Some(round(c.total.occupied, 3))),
            c.dropped_samples.to_string(),
            field(Some(secs(c.total.seconds))),
            field(Some(secs(c.lost_s))),
            field(Some(secs(c.not_measured_s))),
            c.durations_s.len().to_string(),
            d(50.0),
            d(90.0),
            d(100.0),
            field(db(c.mean_dbfs())),
            field(db(c.peak_dbfs)),
            busy.map_or(String::new(), |b| b.0.to_string()),
            field(pct(busy.map(|b| b.1))),
            last_heard(c).and_then(|t| zone.rfc3339(t)).unwrap_or_default(),
            field(db(noise.map(|n| n.start))),
            field(db(noise.map(|n| n.median))),
            field(db(noise.map(|n| n.end))),
        ];
        out.push_str(&cells.join(","));
        for h in &hours {
            let _ = write!(out, ",{}", field(pct(by_hour.get(h).and_then(|t| t.pct()))));
        }
        out.push('\n');
    }
    out
}

fn last_heard(c: &ChannelSum) -> Option<f64> {
    c.last_heard.and_then(|h| h.end.or(h.start))
}

fn csv_text(s: &str) -> String {
    if s.contains([',', '"', '\n']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// One JSON object: `period`, `zone`, `sites`, `coverage[]` (per site: observation time, runs,
/// gaps), `channels[]` (each with `site, name, occupancy_pct, emissions, hours[]` and the rest),
/// `notes`.
pub fn to_json(summary: &LogSummary) -> Value {
    let zone = &summary.settings.zone;
    let at = |t: Option<f64>| t.and_then(|t| zone.rfc3339(t));
    let axis = summary.hour_axis();
    let channels: Vec<Value> = ordered(summary)
        .into_iter()
        .map(|c| {
            let by_hour = c.by_hour_of_day();
            let hours: Vec<Value> = axis
                .iter()
                .filter_map(|h| Some((h, by_hour.get(h)?)))
                .map(|(h, t)| {
                    json!({
                        "hour": h,
                        "occupancy_pct": pct(t.pct()),
                        "samples": t.samples,
                        "occupied_samples": round(t.occupied, 3),
                        "measured_s": secs(t.seconds),
                        "thin": is_thin(t.seconds, 3600.0),
                    })
                })
                .collect();
            let heard = |h: &Heard| json!({"start": at(h.start), "end": at(h.end), "duration_s": secs(h.duration_s)});
            let noise = c.noise_trend();
            json!({
                "site": c.site,
                "name": c.name,
                "center_hz": hz(c.center_hz),
                "width_hz": hz(c.width_hz),
                "occupancy_pct": pct(c.total.pct()),
                "samples": c.total.samples,
                "occupied_samples": round(c.total.occupied, 3),
                "dropped_samples": c.dropped_samples,
                "observed_s": secs(c.total.seconds),
                "lost_s": secs(c.lost_s),
                // A panorama's channel never in view: seconds not measured (occupancy null).
                "not_measured_s": secs(c.not_measured_s),
                "emissions": c.durations_s.len(),
                "emission_duration_s": {
                    "median": percentile(&c.durations_s, 50.0).map(secs),
                    "p90": percentile(&c.durations_s, 90.0).map(secs),
                    "max": percentile(&c.durations_s, 100.0).map(secs),
                },
                "longest_emissions": c.longest.iter().map(heard).collect::<Vec<_>>(),
                "last_heard": at(last_heard(c)),
                "mean_dbfs": db(c.mean_dbfs()),
                "peak_dbfs": db(c.peak_dbfs),
                "noise_floor_dbfs_per_hz": noise.map(|n| json!({
                    "start": round(n.start, 2), "median": round(n.median, 2), "end": round(n.end, 2)
                })),
                "busy_hour": c.busy_hour().map(|(h, p)| json!({"hour": h, "occupancy_pct": round(p, 3)})),
                "hours": hours,
            })
        })
        .collect();
    let coverage: Vec<Value> = summary
        .sites
        .iter()
        .map(|s| {
            let c = site_coverage(summary, s);
            let runs: Vec<Value> = c
                .runs
                .iter()
                .map(|r| json!({"start": at(r.from), "end": at(r.to), "length_s": secs(r.length_s), "stop": r.stop, "sweep": r.sweep}))
                .collect();
            let gaps: Vec<Value> = c
                .gaps
                .iter()
                .map(|g| {
                    let (cause, after) = match &g.cause {
                        GapCause::NoRun { first: true, .. } => ("no_run_yet", None),
                        GapCause::NoRun { after, .. } => ("no_run", Some(after.clone().unwrap_or_else(|| "no_stop_record".into()))),
                        GapCause::Dropped(cause) => (cause.as_str(), None),
                    };
                    json!({"start": at(Some(g.from)), "end": at(Some(g.to)), "length_s": secs(g.to - g.from), "cause": cause, "after_stop": after})
                })
                .collect();
            json!({
                "site": s,
                "period": {"start": at(c.period.map(|p| p.0)), "end": at(c.period.map(|p| p.1))},
                "period_s": c.period_s().map(secs),
                "observed_s": secs(c.observed_s),
                "lost_s": secs(c.lost_s),
                "measured_s": secs(c.measured_s()),
                "measured_pct": pct(c.pct()),
                "runs": runs,
                "gaps": gaps,
            })
        })
        .collect();
    json!({
        "period": {"start": at(summary.first), "end": at(summary.last)},
        "zone": zone.label(),
        "hours_are": if summary.has_clock() { "hour_of_day" } else { "hours_from_run_start" },
        "files": summary.files,
        "sites": summary.sites,
        "duplicates_skipped": summary.duplicates,
        "coverage": coverage,
        "channels": channels,
        "alarms": super::alarms::alarms_json(summary),
        "notes": summary.notes,
    })
}
