//! An inventory as a comparison needs it: the fields of `census --json` it reads (an older file
//! without the newer fields still loads), and what a baseline file adds (how many runs it
//! merges, and in how many each emitter was seen).

use crate::measure::census::floor::FloorProfile;
use serde::{Deserialize, Serialize};
use serde_json::{json, Value};

/// One census, or several merged.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Inventory {
    pub sample_rate_hz: f64,
    pub center_hz: f64,
    #[serde(default)]
    pub rbw_hz: f64,
    /// Seconds of input (the sum over merged runs).
    #[serde(default)]
    pub duration_s: f64,
    pub noise_floor_dbfs_per_hz: f64,
    #[serde(default)]
    pub floor: FloorProfile,
    pub emitters: Vec<BaselineEmitter>,
    /// Censuses merged into it (1 for a plain census).
    #[serde(default = "one")]
    pub runs: u32,
}

/// One emitter of an inventory.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct BaselineEmitter {
    pub name: String,
    pub center_hz: f64,
    pub obw_hz: f64,
    #[serde(default)]
    pub emissions: u64,
    #[serde(default)]
    pub airtime_pct: f64,
    pub power_dbfs: f64,
    #[serde(default)]
    pub peak_dbfs: Option<f64>,
    /// The modulation family, when the census classified it: a name (`"fsk"`) or an object
    /// with a `class` field.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub class: Option<Value>,
    /// Runs of a merged baseline it was seen in (1 for a plain census).
    #[serde(default = "one")]
    pub runs_seen: u32,
}

fn one() -> u32 {
    1
}

impl BaselineEmitter {
    /// Its class name, if it has one.
    pub fn class_name(&self) -> Option<&str> {
        match self.class.as_ref()? {
            Value::String(s) => Some(s.as_str()),
            Value::Object(o) => o.get("class").and_then(Value::as_str),
            _ => None,
        }
        .filter(|s| !s.is_empty())
    }

    /// The share of `runs` it was seen in.
    pub fn seen_share(&self, runs: u32) -> f64 {
        self.runs_seen as f64 / runs.max(1) as f64
    }

    /// Its figures, for a `new` or `gone` change.
    pub fn fields(&self) -> Value {
        let mut v = json!({
            "center_hz": self.center_hz,
            "obw_hz": self.obw_hz,
            "power_dbfs": self.power_dbfs,
            "airtime_pct": self.airtime_pct,
            "emissions": self.emissions,
        });
        if let Some(c) = self.class_name() {
            v["class"] = json!(c);
        }
        v
    }
}

impl Inventory {
    /// Today's census as an inventory: read from its own `--json` object, so that every field
    /// the census prints (a class, when it classifies) is compared.
    pub fn of_census_json(v: &Value) -> Result<Inventory, serde_json::Error> {
        Inventory::deserialize(v)
    }

    /// Whether `freq_hz` lies inside its span.
    pub fn covers(&self, freq_hz: f64) -> bool {
        (freq_hz - self.center_hz).abs() <= self.sample_rate_hz / 2.0
    }

    /// Its floor at `freq_hz`: the part's figure, else the span's (dBFS/Hz).
    pub fn floor_at(&self, freq_hz: f64) -> f64 {
        self.floor
            .parts
            .iter()
            .find(|p| p.start_hz <= freq_hz && freq_hz < p.end_hz)
            .and_then(|p| p.dbfs_per_hz)
            .or(self.floor.span_dbfs_per_hz)
            .unwrap_or(self.noise_floor_dbfs_per_hz)
    }
}
