//! Merging censuses of one span into a baseline (`census --save-baseline` onto an existing
//! file).
//!
//! - Runs must share the span (centre and sample rate); their durations add up.
//! - Emitters are matched by the same-place rule of the comparison ([`super::pairs`]); a match
//!   keeps the baseline's name; its centre, OBW and power (in dB) are averaged, weighted by the
//!   runs each side was seen in; emissions add up; airtime is pooled (seconds on the air over
//!   the seconds of all runs, so a run without it counts as silence). An emitter of one side only
//!   is kept, its airtime diluted likewise, and counts the runs it was seen in (`runs_seen`):
//!   a comparison calls `gone` only what a baseline saw in at least half of its runs.
//! - The noise floor, over the span and per part, is the run-weighted mean of the dB figures
//!   (parts must have the same edges to within a bin, else the parts are dropped).

use super::pairs::same_place;
use super::{BaselineEmitter, Inventory, Thresholds};
use crate::measure::census::floor::{FloorPart, FloorProfile};

/// `base` and `run` merged, or what keeps them apart.
pub fn merge(base: &Inventory, run: &Inventory) -> Result<Inventory, String> {
    if (base.center_hz - run.center_hz).abs() > 1.0
        || (base.sample_rate_hz - run.sample_rate_hz).abs() > 1.0
    {
        return Err(format!(
            "the baseline covers {} S/s around {} Hz and this run {} S/s around {} Hz; a baseline merges runs of one span",
            base.sample_rate_hz, base.center_hz, run.sample_rate_hz, run.center_hz
        ));
    }
    let (wb, wa) = (base.runs as f64, run.runs as f64);
    let mean = |x: f64, y: f64| (x * wb + y * wa) / (wb + wa);
    let duration = base.duration_s + run.duration_s;
    let rbw = base.rbw_hz.max(run.rbw_hz);
    let t = Thresholds::default();
    let dilute = |e: &BaselineEmitter, d: f64| BaselineEmitter {
        airtime_pct: e.airtime_pct * d / duration.max(f64::MIN_POSITIVE),
        ..e.clone()
    };
    let mut taken = vec![false; run.emitters.len()];
    let mut emitters: Vec<BaselineEmitter> = Vec::new();
    for b in &base.emitters {
        let m = (0..run.emitters.len())
            .filter(|&j| !taken[j] && same_place(b, &run.emitters[j], rbw, &t))
            .min_by(|&x, &y| {
                let d = |j: usize| (run.emitters[j].center_hz - b.center_hz).abs();
                d(x).total_cmp(&d(y))
            });
        match m {
            Some(j) => {
                taken[j] = true;
                emitters.push(joined(b, &run.emitters[j], (base.duration_s, run.duration_s)));
            }
            None => emitters.push(dilute(b, base.duration_s)),
        }
    }
    for (j, a) in run.emitters.iter().enumerate().filter(|(j, _)| !taken[*j]) {
        let mut e = dilute(a, run.duration_s);
        while emitters.iter().any(|o| o.name == e.name) {
            e.name = format!("{}-b{j}", a.name);
        }
        emitters.push(e);
    }
    emitters.sort_by(|x, y| y.power_dbfs.total_cmp(&x.power_dbfs));
    Ok(Inventory {
        sample_rate_hz: base.sample_rate_hz,
        center_hz: base.center_hz,
        rbw_hz: rbw,
        duration_s: duration,
        noise_floor_dbfs_per_hz: mean(base.noise_floor_dbfs_per_hz, run.noise_floor_dbfs_per_hz),
        floor: merged_floor(&base.floor, &run.floor, rbw, mean),
        emitters,
        runs: base.runs + run.runs,
    })
}

/// One emitter seen in both: figures weighted by the runs each was seen in, airtime pooled.
fn joined(b: &BaselineEmitter, a: &BaselineEmitter, (db_s, da_s): (f64, f64)) -> BaselineEmitter {
    let (wb, wa) = (b.runs_seen as f64, a.runs_seen as f64);
    let mean = |x: f64, y: f64| (x * wb + y * wa) / (wb + wa);
    let on_air = b.airtime_pct * db_s + a.airtime_pct * da_s;
    BaselineEmitter {
        name: b.name.clone(),
        center_hz: mean(b.center_hz, a.center_hz),
        obw_hz: mean(b.obw_hz, a.obw_hz),
        emissions: b.emissions + a.emissions,
        airtime_pct: on_air / (db_s + da_s).max(f64::MIN_POSITIVE),
        power_dbfs: mean(b.power_dbfs, a.power_dbfs),
        peak_dbfs: b.peak_dbfs.zip(a.peak_dbfs).map(|(x, y)| mean(x, y)).or(b.peak_dbfs),
        class: b.class.clone().or_else(|| a.class.clone()),
        runs_seen: b.runs_seen + a.runs_seen,
    }
}

/// The floors merged part by part (see the module's doc).
fn merged_floor(
    b: &FloorProfile,
    a: &FloorProfile,
    rbw: f64,
    mean: impl Fn(f64, f64) -> f64,
) -> FloorProfile {
    let same = b.parts.len() == a.parts.len()
        && b.parts.iter().zip(&a.parts).all(|(p, q)| (p.start_hz - q.start_hz).abs() <= rbw);
    let both = |x: Option<f64>, y: Option<f64>| match (x, y) {
        (Some(x), Some(y)) => Some(mean(x, y)),
        (x, y) => x.or(y),
    };
    if !same {
        return FloorProfile::default();
    }
    FloorProfile {
        span_dbfs_per_hz: both(b.span_dbfs_per_hz, a.span_dbfs_per_hz),
        parts: b
            .parts
            .iter()
            .zip(&a.parts)
            .map(|(p, q)| FloorPart {
                dbfs_per_hz: both(p.dbfs_per_hz, q.dbfs_per_hz),
                ..p.clone()
            })
            .collect(),
    }
}
