//! Floor changes: over the span, per part of it, and the floor-like new emissions (see
//! [`super`]).

use super::{density, over, BaselineEmitter, Change, Inventory, Kind, Thresholds};
use crate::measure::census::floor::FloorPart;
use crate::units::{db, undb};
use serde_json::json;

/// The floor-like new emissions as floor changes, and which of the new emitters they take.
pub struct FloorLike {
    pub changes: Vec<Change>,
    /// Per new emitter (in the order given): taken into a floor change.
    pub absorbed: Vec<bool>,
}

/// Reads the new emitters `new` for floor-like emissions (see [`super`]); `old` are the
/// baseline's emitters inside today's span.
pub fn floor_like(
    base: &Inventory,
    now: &Inventory,
    old: &[&BaselineEmitter],
    new: &[&BaselineEmitter],
    rbw: f64,
    t: &Thresholds,
) -> FloorLike {
    let mut out = FloorLike { changes: Vec::new(), absorbed: vec![false; new.len()] };
    let band = |e: &BaselineEmitter| (e.center_hz - e.obw_hz / 2.0, e.center_hz + e.obw_hz / 2.0);
    for (k, e) in new.iter().enumerate() {
        if out.absorbed[k] || e.airtime_pct < super::FLOOR_LIKE_AIRTIME_PCT {
            continue;
        }
        let before = base.floor_at(e.center_hz);
        if over(density(e), before) >= t.floor_rise_max_db {
            continue;
        }
        let (lo, hi) = band(e);
        let (lo_g, hi_g) = (lo - 2.0 * rbw, hi + 2.0 * rbw);
        if old.iter().any(|o| band(o).0 < hi_g && lo_g < band(o).1) {
            continue;
        }
        let after = db(undb(now.floor_at(e.center_hz)) + density(e));
        if (after - before).abs() < t.floor_db {
            continue;
        }
        for (m, o) in new.iter().enumerate() {
            if lo_g <= o.center_hz && o.center_hz <= hi_g {
                out.absorbed[m] = true;
            }
        }
        out.changes.push(floor_change((lo, hi), before, after, Some(&e.name)));
    }
    out
}

/// A floor change over `band`.
fn floor_change(band: (f64, f64), before: f64, after: f64, seen_as: Option<&str>) -> Change {
    let mut after_v = json!({ "dbfs_per_hz": after });
    if let Some(n) = seen_as {
        after_v["seen_as"] = json!(n);
    }
    Change {
        kind: Kind::Floor,
        name: None,
        center_hz: 0.5 * (band.0 + band.1),
        before: json!({ "dbfs_per_hz": before }),
        after: after_v,
        delta_db: Some(after - before),
        band: Some(band),
        ratio: None,
        z: None,
    }
}

/// The parts both sides measured, with their figures: (part, before, after).
fn matched_parts<'a>(base: &'a Inventory, now: &Inventory) -> Vec<(&'a FloorPart, f64, f64)> {
    let overlap =
        |p: &FloorPart, q: &FloorPart| p.end_hz.min(q.end_hz) - p.start_hz.max(q.start_hz);
    base.floor
        .parts
        .iter()
        .filter_map(|p| {
            let q = now.floor.parts.iter().find(|q| {
                let o = overlap(p, q);
                o >= 0.5 * (p.end_hz - p.start_hz) && o >= 0.5 * (q.end_hz - q.start_hz)
            })?;
            Some((p, p.dbfs_per_hz?, q.dbfs_per_hz?))
        })
        .collect()
}

/// Changes of the floor over the span and per part (not inside `skip`, bands already reported).
pub fn floor_changes(
    base: &Inventory,
    now: &Inventory,
    skip: &[(f64, f64)],
    t: &Thresholds,
) -> Vec<Change> {
    let span = (
        (base.center_hz - base.sample_rate_hz / 2.0).max(now.center_hz - now.sample_rate_hz / 2.0),
        (base.center_hz + base.sample_rate_hz / 2.0).min(now.center_hz + now.sample_rate_hz / 2.0),
    );
    let parts = matched_parts(base, now);
    let mut out = Vec::new();
    if parts.is_empty() {
        let b = base.floor.span_dbfs_per_hz.unwrap_or(base.noise_floor_dbfs_per_hz);
        let a = now.floor.span_dbfs_per_hz.unwrap_or(now.noise_floor_dbfs_per_hz);
        if (a - b).abs() >= t.floor_db {
            out.push(floor_change(span, b, a, None));
        }
        return out;
    }
    let mut deltas: Vec<f64> = parts.iter().map(|p| p.2 - p.1).collect();
    deltas.sort_by(f64::total_cmp);
    let span_d = deltas[deltas.len() / 2];
    let reference = if span_d.abs() >= t.floor_db {
        let b = base.floor.span_dbfs_per_hz.unwrap_or(base.noise_floor_dbfs_per_hz);
        out.push(floor_change(span, b, b + span_d, None));
        span_d
    } else {
        0.0
    };
    let mut run: Vec<(&FloorPart, f64, f64)> = Vec::new();
    for &(p, b, a) in &parts {
        let d = a - b - reference;
        let flagged =
            d.abs() >= t.floor_db && !skip.iter().any(|s| s.0 < p.end_hz && p.start_hz < s.1);
        let joins = run.last().is_some_and(|l| {
            (l.0.end_hz - p.start_hz).abs() < 1.0 && (l.2 - l.1 - reference).signum() == d.signum()
        });
        if !flagged || !joins {
            out.extend(part_run(&run, reference));
            run.clear();
        }
        if flagged {
            run.push((p, b, a));
        }
    }
    out.extend(part_run(&run, reference));
    out
}

/// A run of neighbouring changed parts as one change: its band, and the figures of its most
/// changed part.
fn part_run(run: &[(&FloorPart, f64, f64)], reference: f64) -> Option<Change> {
    let (first, last) = (run.first()?, run.last()?);
    let most = run
        .iter()
        .max_by(|x, y| (x.2 - x.1 - reference).abs().total_cmp(&(y.2 - y.1 - reference).abs()))?;
    Some(floor_change((first.0.start_hz, last.0.end_hz), most.1, most.2, None))
}
