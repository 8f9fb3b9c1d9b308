//! `report --baseline-log`: each plan channel of the logs against the same channel in a
//! baseline set of logs, summed the same way ([`super::LogSummary`]).
//!
//! Channels are matched by site and name (by name alone when the baseline has it at another
//! site). Per channel:
//! - `occupancy`: channel occupancy (ITU-R SM.1880) changed beyond chance and by the airtime
//!   factor, with the census's airtime test ([`airtime_z`]) on the emissions counted;
//! - `emissions`: the rate of emissions per hour measured changed beyond chance (the same Wald
//!   test on the log of two Poisson rates) and by the airtime factor;
//! - `power`: the mean power while occupied, noise taken off, changed by the level change
//!   (the log's interval mean less the noise in the channel, `floor × width`, over the occupied
//!   share: a raised floor alone does not move it);
//! - `floor`: the median noise floor of the channel's intervals changed by the level change;
//! - `new`, `gone`: a channel in one set of logs only.

use super::{ChannelSum, LogSummary};
use crate::measure::change::{airtime_z, Thresholds};
use crate::units::{db, undb};
use serde_json::{json, Value};
use std::fmt::Write as _;

/// A channel silent on one side is a change when the other side heard at least this many
/// emissions (a Poisson count of 3 or more has under a 5 % chance of coming from a rate that
/// gives none in a like time, common practice).
pub const QUIET_MIN: u64 = 3;
/// … or was occupied at least this share of the time (percent): a carrier heard for long.
pub const QUIET_MIN_PCT: f64 = 10.0;

/// One change of a channel.
#[derive(Clone, Debug, PartialEq)]
pub struct ChannelChange {
    pub kind: &'static str,
    pub site: String,
    pub channel: String,
    pub center_hz: Option<f64>,
    pub before: Value,
    pub after: Value,
    pub delta_db: Option<f64>,
    pub z: Option<f64>,
}

/// Mean power while occupied, noise taken off, dBFS.
fn power_on_air(c: &ChannelSum) -> Option<f64> {
    let occ = c.total.pct()? / 100.0;
    let noise = undb(c.noise_trend()?.median) * c.width_hz?;
    // The interval mean is occ·(S + N) + (1 − occ)·N = occ·S + N.
    let signal = undb(c.mean_dbfs()?) - noise;
    (occ > 0.0 && signal > 0.0).then(|| db(signal / occ))
}

/// Emissions per hour measured.
fn rate(c: &ChannelSum) -> Option<f64> {
    (c.total.seconds > 0.0).then(|| c.durations_s.len() as f64 / c.total.seconds * 3600.0)
}

/// The changes of every channel of `now` against `base`.
pub fn compare_logs(base: &LogSummary, now: &LogSummary, t: &Thresholds) -> Vec<ChannelChange> {
    let mut out = Vec::new();
    let find = |s: &LogSummary, site: &str, name: &str| {
        s.channels
            .get(&(site.to_string(), name.to_string()))
            .or_else(|| s.channels.values().find(|c| c.name == name))
            .cloned()
    };
    for c in now.channels.values() {
        let change = |kind, before, after| ChannelChange {
            kind,
            site: c.site.clone(),
            channel: c.name.clone(),
            center_hz: c.center_hz,
            before,
            after,
            delta_db: None,
            z: None,
        };
        let Some(b) = find(base, &c.site, &c.name) else {
            out.push(change("new", Value::Null, json!({ "occupancy_pct": c.total.pct() })));
            continue;
        };
        let (nb, na) = (b.durations_s.len() as u64, c.durations_s.len() as u64);
        let (ob, oa) = (b.total.pct().unwrap_or(0.0), c.total.pct().unwrap_or(0.0));
        let beyond = |z: f64, r: f64| {
            z.abs() >= t.airtime_z && (r >= t.airtime_factor || r <= 1.0 / t.airtime_factor)
        };
        // Heard on one side only, with a few emissions on the other: no test needed.
        let heard = |o: f64, n: u64| o >= QUIET_MIN_PCT || (o > 0.0 && n >= QUIET_MIN);
        if (oa == 0.0 && heard(ob, nb)) || (ob == 0.0 && heard(oa, na)) {
            out.push(change(
                "occupancy",
                json!({ "occupancy_pct": ob }),
                json!({ "occupancy_pct": oa }),
            ));
        } else if let Some(z) = airtime_z(ob, nb, oa, na).filter(|&z| beyond(z, oa / ob)) {
            let mut x =
                change("occupancy", json!({ "occupancy_pct": ob }), json!({ "occupancy_pct": oa }));
            x.z = Some(z);
            out.push(x);
        }
        if let (Some(rb), Some(ra)) = (rate(&b), rate(c)) {
            if let Some(z) = airtime_z(rb, nb, ra, na).filter(|&z| beyond(z, ra / rb)) {
                let mut x = change(
                    "emissions",
                    json!({ "emissions": nb, "per_hour": rb }),
                    json!({ "emissions": na, "per_hour": ra }),
                );
                x.z = Some(z);
                out.push(x);
            }
        }
        let levels = [
            ("power", power_on_air(&b), power_on_air(c), "power_dbfs"),
            (
                "floor",
                b.noise_trend().map(|n| n.median),
                c.noise_trend().map(|n| n.median),
                "dbfs_per_hz",
            ),
        ];
        for (kind, x, y, field) in levels {
            if let (Some(x), Some(y)) = (x, y) {
                if (y - x).abs() >= t.power_db {
                    let mut ch = change(kind, json!({ field: x }), json!({ field: y }));
                    ch.delta_db = Some(y - x);
                    out.push(ch);
                }
            }
        }
    }
    for b in base.channels.values() {
        if find(now, &b.site, &b.name).is_none() {
            out.push(ChannelChange {
                kind: "gone",
                site: b.site.clone(),
                channel: b.name.clone(),
                center_hz: b.center_hz,
                before: json!({ "occupancy_pct": b.total.pct() }),
                after: Value::Null,
                delta_db: None,
                z: None,
            });
        }
    }
    out
}

fn r(x: f64, d: i32) -> f64 {
    super::export::round(x, d)
}

/// The changes as JSON (`changes[]` of `report --json`).
pub fn changes_json(changes: &[ChannelChange]) -> Value {
    let tidy = |v: &Value| match v {
        Value::Object(o) => Value::Object(
            o.iter()
                .map(|(k, x)| {
                    (
                        k.clone(),
                        x.as_f64().filter(|_| !x.is_u64()).map_or(x.clone(), |f| json!(r(f, 3))),
                    )
                })
                .collect(),
        ),
        _ => v.clone(),
    };
    Value::Array(
        changes
            .iter()
            .map(|c| {
                let mut v = json!({
                    "kind": c.kind, "site": c.site, "name": c.channel,
                    "center_hz": c.center_hz.map(|f| r(f, 1)),
                    "before": tidy(&c.before), "after": tidy(&c.after),
                });
                if let Some(d) = c.delta_db {
                    v["delta_db"] = json!(r(d, 2));
                }
                if let Some(z) = c.z {
                    v["z"] = json!(r(z, 2));
                }
                v
            })
            .collect(),
    )
}

/// The changes as a section after the report's table.
pub fn changes_table(changes: &[ChannelChange], baseline: &[String]) -> String {
    let shown: Vec<String> = baseline.iter().map(|b| crate::messages::sanitize(b)).collect();
    let mut s = format!("\nchanges against the baseline logs {}:\n", shown.join(", "));
    if changes.is_empty() {
        s.push_str("no changes\n");
        return s;
    }
    let _ = writeln!(s, "{:<10} {:<12} {:<16} before -> after", "kind", "site", "channel");
    let rounded = changes_json(changes);
    for (c, j) in changes.iter().zip(rounded.as_array().into_iter().flatten()) {
        let _ = write!(
            s,
            "{:<10} {:<12} {:<16} {} -> {}",
            c.kind, c.site, c.channel, j["before"], j["after"]
        );
        if let Some(d) = c.delta_db {
            let _ = write!(s, " ({d:+.2} dB)");
        }
        if let Some(z) = c.z {
            let _ = write!(s, " (z {z:+.2})");
        }
        s.push('\n');
    }
    s
}
