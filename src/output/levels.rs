//! Levels in dBm beside dBFS in JSON output, when a calibration is given.
//!
//! The rule every output keeps: a key's suffix is its unit. `_dbfs` keys always hold dBFS and
//! `_dbfs_per_hz` keys dBFS/Hz, calibrated or not, so a script written for an uncalibrated log
//! never misreads a calibrated one. A calibration adds a twin beside each: `peak_dbfs` gets
//! `peak_dbm`, `noise_floor_dbfs_per_hz` gets `noise_floor_dbm_per_hz`, each at the offset of
//! its own object's frequency (`freq_hz`, else `center_hz`, else the enclosing object's).
//! The top object names the calibration (`calibration`) and its offset at the centre
//! (`level_offset_db`).

use crate::measure::calibration::Calibration;
use serde_json::{Map, Value};

/// The unit of a level for people: `dBm` when calibrated, else `dBFS`.
pub fn level_unit(cal: Option<&Calibration>) -> &'static str {
    if cal.is_some() {
        "dBm"
    } else {
        "dBFS"
    }
}

/// Adds the `_dbm` twins to `value` (an object, or arrays of them, at any depth) and the
/// calibration's name and offset to its top; `center_hz` is the frequency of objects that name
/// none of their own.
pub fn add_dbm(value: &mut Value, cal: &Calibration, center_hz: f64) {
    twins(value, cal, center_hz);
    if let Value::Object(top) = value {
        top.insert("calibration".into(), Value::from(cal.origin.clone()));
        top.insert("level_offset_db".into(), Value::from(round_to(cal.offset_db(center_hz), 3)));
    }
}

fn twins(value: &mut Value, cal: &Calibration, freq_hz: f64) {
    match value {
        Value::Array(items) => items.iter_mut().for_each(|v| twins(v, cal, freq_hz)),
        Value::Object(obj) => {
            let own = ["freq_hz", "center_hz"].iter().find_map(|k| obj.get(*k)?.as_f64());
            let f = own.unwrap_or(freq_hz);
            let mut added = Map::new();
            for (key, v) in obj.iter_mut() {
                if let Some(name) = dbm_name(key) {
                    // A level not measured (null) stays null in dBm too.
                    let dbm = v.as_f64().map(|dbfs| round_to(dbfs + cal.offset_db(f), 2));
                    added.insert(name, dbm.map_or(Value::Null, Value::from));
                } else {
                    twins(v, cal, f);
                }
            }
            obj.extend(added);
        }
        _ => {}
    }
}

pub use crate::units::round_dp as round_to;

/// `x_dbfs` → `x_dbm`, `x_dbfs_per_hz` → `x_dbm_per_hz`; `None` for other keys.
fn dbm_name(key: &str) -> Option<String> {
    if let Some(stem) = key.strip_suffix("_dbfs") {
        return Some(format!("{stem}_dbm"));
    }
    key.strip_suffix("_dbfs_per_hz").map(|stem| format!("{stem}_dbm_per_hz"))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::measure::calibration::CalPoint;
    use serde_json::json;

    #[test]
    fn every_dbfs_key_gets_a_twin_at_its_own_frequency() {
        let pt = CalPoint::new;
        let cal =
            Calibration::from_points(vec![pt(433e6, -20.0), pt(435e6, -22.0)], "t".into()).unwrap();
        let mut v = json!({
            "center_hz": 434e6,
            "noise_floor_dbfs_per_hz": -100.0,
            "peaks": [{"freq_hz": 433e6, "level_dbfs": -30.0, "snr_db": 40.0}],
            "bands": [{"center_hz": 435e6, "power_dbfs": null}]
        });
        add_dbm(&mut v, &cal, 434e6);
        assert_eq!(v["noise_floor_dbm_per_hz"], json!(-121.0));
        assert_eq!(v["noise_floor_dbfs_per_hz"], json!(-100.0), "dBFS keys keep dBFS");
        assert_eq!(v["peaks"][0]["level_dbm"], json!(-50.0));
        assert!(v["peaks"][0].get("snr_dbm").is_none(), "a ratio in dB is no level");
        assert_eq!(v["bands"][0]["power_dbm"], Value::Null, "not measured in either unit");
        assert_eq!(v["level_offset_db"], json!(-21.0));
        assert_eq!(v["calibration"], json!("t"));
    }
}
