//! What changed: between two inventories of a band (today's census against a baseline, an
//! earlier census or several merged, see [`merge`]), and, for unattended logging
//! (`log --alarms`), between each interval and the channel's usual occupancy and noise floor by
//! hour of week ([`baseline`]): residuals standardised and run through a published sequential
//! test ([`chart`]), turned into alarms that are raised and cleared ([`alarm`]). Pure: no I/O,
//! no clock of its own.
//!
//! **Matching.** Emitters are paired in two passes, closest pair first, each emitter at most once:
//! 1. *Same place*: centres within `2·RBW + move_share·OBW` (the wider of the two OBWs; 25 % by
//!    default), the census's own rule for one place in frequency.
//! 2. *Moved*: still unpaired, centres within `move_within·OBW + 10·RBW`, and otherwise alike:
//!    OBW ratio under the width factor, power within the power threshold and, when both sides
//!    carry one, the same class. One that moved *and* changed its width or level cannot be told
//!    from another emitter and is reported as `gone` plus `new`.
//!
//! The rest are `gone` (baseline only; from a merged baseline only emitters seen in at least
//! half of its runs) and `new`, except a *floor-like* new emission: on the air at least
//! [`FLOOR_LIKE_AIRTIME_PCT`] of the time, standing less than `floor_rise_max_db` above the
//! baseline floor, where the baseline had no emitter. The census cannot tell weak broadband
//! interference from a raised floor, and to the operator both mean the same (less sensitivity
//! there), so it is a `floor` change of its band; new fragments inside that band go with it.
//!
//! **Per pair.** `power`: the census power is already noise-corrected (the floor density is
//! taken off its own averaged spectrum), so a raised floor alone does not make an emitter look
//! weaker or stronger; a change of at least `power_db` is reported. `width`: OBW ratio at least
//! `width_factor` either way. `airtime`: see [`airtime_z`]. `class`: only when both sides name one.
//!
//! **Floor.** Per part of the span ([`crate::measure::census::floor`]) where both sides have a
//! figure: the span's change is the median of the parts' changes; parts that changed by at
//! least `floor_db` beyond the span's (reported) change are reported, neighbours joined into one
//! band with the change of its most changed part. Without parts (an older baseline), the span
//! figures are compared.

pub mod alarm;
pub mod baseline;
pub mod chart;
pub mod floor;
pub mod inventory;
pub mod merge;
pub mod pairs;

pub use chart::{Chart, Direction, Method, Verdict, DEFAULT_CUSUM, DEFAULT_EWMA};
pub use inventory::{BaselineEmitter, Inventory};

use crate::units::{db, undb};
use serde_json::{json, Value};

/// A new emission on the air this share of the time (percent) or more may be a raised floor.
pub const FLOOR_LIKE_AIRTIME_PCT: f64 = 90.0;

/// The thresholds of a comparison (flags of `census`, defaults documented there).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Thresholds {
    /// Power change reported, dB.
    pub power_db: f64,
    /// OBW ratio reported.
    pub width_factor: f64,
    /// |z| of the airtime test reported (two-sided; 2.576 is α = 0.01).
    pub airtime_z: f64,
    /// And the airtime ratio at least this.
    pub airtime_factor: f64,
    /// Floor change reported, dB.
    pub floor_db: f64,
    /// Share of the OBW a centre may shift and stay at the same place.
    pub move_share: f64,
    /// How far (in OBWs) a moved emitter is looked for.
    pub move_within: f64,
    /// A continuous new emission standing less than this above the old floor is a floor rise.
    pub floor_rise_max_db: f64,
}

impl Default for Thresholds {
    fn default() -> Thresholds {
        Thresholds {
            power_db: 3.0,
            width_factor: 1.5,
            airtime_z: 2.576,
            airtime_factor: 1.5,
            floor_db: 3.0,
            move_share: 0.25,
            move_within: 5.0,
            floor_rise_max_db: 7.0,
        }
    }
}

/// Kinds of change.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Kind {
    New,
    Gone,
    Moved,
    Power,
    Width,
    Airtime,
    Class,
    Floor,
}

impl Kind {
    pub fn as_str(self) -> &'static str {
        match self {
            Kind::New => "new",
            Kind::Gone => "gone",
            Kind::Moved => "moved",
            Kind::Power => "power",
            Kind::Width => "width",
            Kind::Airtime => "airtime",
            Kind::Class => "class",
            Kind::Floor => "floor",
        }
    }
}

/// One change.
#[derive(Clone, Debug, PartialEq)]
pub struct Change {
    pub kind: Kind,
    /// The baseline's name of the emitter, else today's; `None` for the floor.
    pub name: Option<String>,
    /// Where it is now (the baseline's place for `gone`; the band's middle for `floor`), Hz.
    pub center_hz: f64,
    /// The fields that changed, before and after (JSON objects).
    pub before: Value,
    pub after: Value,
    pub delta_db: Option<f64>,
    /// A band (floor changes), Hz.
    pub band: Option<(f64, f64)>,
    /// The ratio after/before (width, airtime) and the test statistic (airtime).
    pub ratio: Option<f64>,
    pub z: Option<f64>,
}

impl Change {
    fn of(kind: Kind, name: &str, center_hz: f64, before: Value, after: Value) -> Change {
        Change {
            kind,
            name: Some(name.to_string()),
            center_hz,
            before,
            after,
            delta_db: None,
            band: None,
            ratio: None,
            z: None,
        }
    }
}

/// The result of a comparison.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Comparison {
    pub changes: Vec<Change>,
    /// Emitters of either side outside the other's span, not compared.
    pub outside_span: usize,
    /// Baseline emitters seen in under half of its runs and not seen today: not called gone.
    pub rare_unseen: usize,
}

/// The airtime test: a Wald test on the log of the ratio of the two airtime shares, with the
/// variance of each log share taken as 1/emissions (the airtime of N independent emissions of
/// like length is a Poisson count scaled, whose log has variance about 1/N; unequal lengths only
/// widen it, so the test errs towards silence). Common practice for comparing two Poisson rates.
/// Returns z (positive: busier now).
pub fn airtime_z(before_pct: f64, before_n: u64, after_pct: f64, after_n: u64) -> Option<f64> {
    if before_pct <= 0.0 || after_pct <= 0.0 || before_n == 0 || after_n == 0 {
        return None;
    }
    let var = 1.0 / before_n as f64 + 1.0 / after_n as f64;
    Some((after_pct / before_pct).ln() / var.sqrt())
}

/// Compares `now` with `base`.
pub fn compare(base: &Inventory, now: &Inventory, t: &Thresholds) -> Comparison {
    let mut out = Comparison::default();
    let b: Vec<&BaselineEmitter> =
        base.emitters.iter().filter(|e| now.covers(e.center_hz)).collect();
    let a: Vec<&BaselineEmitter> =
        now.emitters.iter().filter(|e| base.covers(e.center_hz)).collect();
    out.outside_span = base.emitters.len() + now.emitters.len() - b.len() - a.len();
    let rbw = base.rbw_hz.max(now.rbw_hz);
    let paired = pairs::pair(&b, &a, rbw, t);
    for &(i, j, moved) in &paired.pairs {
        if moved {
            out.changes.push(moved_change(b[i], a[j]));
        } else {
            out.changes.extend(pair_changes(b[i], a[j], t));
        }
    }
    let new: Vec<&BaselineEmitter> = paired.new.iter().map(|&j| a[j]).collect();
    let floor_like = floor::floor_like(base, now, &b, &new, rbw, t);
    for (k, e) in new.iter().enumerate() {
        if !floor_like.absorbed[k] {
            out.changes.push(Change::of(Kind::New, &e.name, e.center_hz, Value::Null, e.fields()));
        }
    }
    for &i in &paired.gone {
        let e = b[i];
        if e.seen_share(base.runs) < 0.5 {
            out.rare_unseen += 1;
            continue;
        }
        out.changes.push(Change::of(Kind::Gone, &e.name, e.center_hz, e.fields(), Value::Null));
    }
    let bands: Vec<(f64, f64)> = floor_like.changes.iter().filter_map(|c| c.band).collect();
    out.changes.extend(floor_like.changes);
    out.changes.extend(floor::floor_changes(base, now, &bands, t));
    out
}

fn moved_change(b: &BaselineEmitter, a: &BaselineEmitter) -> Change {
    Change::of(
        Kind::Moved,
        &b.name,
        a.center_hz,
        json!({ "center_hz": b.center_hz }),
        json!({ "center_hz": a.center_hz }),
    )
}

/// The changes of one emitter seen at the same place in both.
fn pair_changes(b: &BaselineEmitter, a: &BaselineEmitter, t: &Thresholds) -> Vec<Change> {
    let mut out = Vec::new();
    let d = a.power_dbfs - b.power_dbfs;
    if d.abs() >= t.power_db {
        let mut c = Change::of(
            Kind::Power,
            &b.name,
            a.center_hz,
            json!({ "power_dbfs": b.power_dbfs }),
            json!({ "power_dbfs": a.power_dbfs }),
        );
        c.delta_db = Some(d);
        out.push(c);
    }
    let r = a.obw_hz / b.obw_hz.max(f64::MIN_POSITIVE);
    if r >= t.width_factor || r <= 1.0 / t.width_factor {
        let mut c = Change::of(
            Kind::Width,
            &b.name,
            a.center_hz,
            json!({ "obw_hz": b.obw_hz }),
            json!({ "obw_hz": a.obw_hz }),
        );
        c.ratio = Some(r);
        out.push(c);
    }
    if let Some(z) = airtime_z(b.airtime_pct, b.emissions, a.airtime_pct, a.emissions) {
        let r = a.airtime_pct / b.airtime_pct;
        if z.abs() >= t.airtime_z && (r >= t.airtime_factor || r <= 1.0 / t.airtime_factor) {
            let mut c = Change::of(
                Kind::Airtime,
                &b.name,
                a.center_hz,
                json!({ "airtime_pct": b.airtime_pct, "emissions": b.emissions }),
                json!({ "airtime_pct": a.airtime_pct, "emissions": a.emissions }),
            );
            (c.ratio, c.z) = (Some(r), Some(z));
            out.push(c);
        }
    }
    if let (Some(cb), Some(ca)) = (b.class_name(), a.class_name()) {
        if cb != ca {
            out.push(Change::of(
                Kind::Class,
                &b.name,
                a.center_hz,
                json!({ "class": cb }),
                json!({ "class": ca }),
            ));
        }
    }
    out
}

/// The noise density (FS²/Hz) of an emitter spread evenly over its OBW.
fn density(e: &BaselineEmitter) -> f64 {
    undb(e.power_dbfs) / e.obw_hz.max(1.0)
}

/// `x` over `floor`, dB.
fn over(x: f64, floor_dbfs_per_hz: f64) -> f64 {
    db(x) - floor_dbfs_per_hz
}

#[cfg(test)]
mod tests;
