//! Baselines on disk and change reports: reading a baseline (`census --json` output or a file
//! written by `--save-baseline`), writing one, and the changes as a table section or JSON.

use crate::measure::change::merge::merge;
use crate::measure::change::{compare, Change, Comparison, Inventory, Kind, Thresholds};
use crate::messages::sanitize;
use crate::units::round_dp as round;
use anyhow::{anyhow, Context, Result};
use serde_json::{json, Value};
use std::fmt::Write as _;
use std::io::Write as _;

/// What `--baseline` takes, for error messages.
const WHAT_IT_TAKES: &str = "--baseline takes the --json output of an earlier `bandwarden census` \
     or a file written by `census --save-baseline`";

/// Reads a baseline from `path`.
pub fn load_baseline(path: &str) -> Result<Inventory> {
    let shown = sanitize(path);
    let text = std::fs::read_to_string(path)
        .with_context(|| format!("cannot read the baseline '{shown}'; check the path"))?;
    parse_baseline(&text).map_err(|e| anyhow!("the baseline '{shown}' {e}; {WHAT_IT_TAKES}"))
}

/// Parses a baseline; the error says what was wrong (to follow the file's name).
pub fn parse_baseline(text: &str) -> std::result::Result<Inventory, String> {
    let v: Value = serde_json::from_str(text.trim()).map_err(|e| {
        format!("is not one JSON object (line {}, column {})", e.line(), e.column())
    })?;
    if !v.is_object() {
        return Err("is JSON but not an object".into());
    }
    let inv: Inventory =
        serde_json::from_value(v).map_err(|e| format!("is not a census or baseline: {e}"))?;
    if inv.sample_rate_hz <= 0.0 || !inv.center_hz.is_finite() {
        return Err("holds no span (sample_rate_hz must be above 0)".into());
    }
    Ok(inv)
}

/// Writes `run` as a baseline to `path`, merged into the baseline already there (if any).
/// The file is replaced whole (a new file renamed over it), so a failure leaves the old one.
/// Returns the runs the file now holds.
pub fn save_baseline(path: &str, run: &Inventory) -> Result<u32> {
    let shown = sanitize(path);
    let merged = match std::fs::read_to_string(path) {
        Ok(text) => {
            let old = parse_baseline(&text).map_err(|e| {
                anyhow!("--save-baseline: '{shown}' exists and {e}; give a new file or a baseline to add this run to")
            })?;
            merge(&old, run).map_err(|e| anyhow!("--save-baseline '{shown}': {e}"))?
        }
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => run.clone(),
        Err(e) => return Err(e).with_context(|| format!("cannot read '{shown}'")),
    };
    let mut v = serde_json::to_value(&merged)?;
    v["written_by"] = json!("bandwarden census --save-baseline");
    let tmp = format!("{path}.part");
    let write = || -> std::io::Result<()> {
        let mut f = std::fs::File::create(&tmp)?;
        writeln!(f, "{v}")?;
        f.sync_all()?;
        std::fs::rename(&tmp, path)
    };
    write().with_context(|| format!("cannot write the baseline '{shown}'"))?;
    Ok(merged.runs)
}

/// Numbers of a before/after object rounded to what they mean (Hz to 0.1, levels and shares to
/// 0.01).
fn tidy(v: &Value) -> Value {
    let Value::Object(o) = v else { return v.clone() };
    let mut out = serde_json::Map::new();
    for (k, x) in o {
        let digits = if k.ends_with("_hz") { 1 } else { 2 };
        let x = match x.as_f64() {
            Some(f) if !x.is_u64() && !x.is_i64() => json!(round(f, digits)),
            _ => x.clone(),
        };
        out.insert(k.clone(), x);
    }
    Value::Object(out)
}

/// One change as JSON.
pub fn change_json(c: &Change) -> Value {
    let mut v = json!({
        "kind": c.kind.as_str(),
        "name": c.name,
        "center_hz": round(c.center_hz, 1),
        "before": tidy(&c.before),
        "after": tidy(&c.after),
    });
    if let Some(d) = c.delta_db {
        v["delta_db"] = json!(round(d, 2));
    }
    if let Some((lo, hi)) = c.band {
        v["start_hz"] = json!(round(lo, 1));
        v["end_hz"] = json!(round(hi, 1));
    }
    if let Some(r) = c.ratio {
        v["ratio"] = json!(round(r, 3));
    }
    if let Some(z) = c.z {
        v["z"] = json!(round(z, 2));
    }
    v
}

/// The comparison's part of `census --json`: `changes` and what it was compared with.
pub fn add_changes_json(v: &mut Value, cmp: &Comparison, base: &Inventory, path: &str) {
    v["changes"] = Value::Array(cmp.changes.iter().map(change_json).collect());
    v["baseline"] = json!({
        "file": sanitize(path),
        "runs": base.runs,
        "duration_s": round(base.duration_s, 3),
        "not_compared_outside_span": cmp.outside_span,
        "rare_not_seen": cmp.rare_unseen,
    });
}

fn mhz(hz: f64) -> String {
    format!("{:.6}", hz / 1e6)
}

fn num(v: &Value, k: &str) -> f64 {
    v[k].as_f64().unwrap_or(f64::NAN)
}

/// What a change says, in words.
fn what(c: &Change) -> String {
    let (b, a) = (&c.before, &c.after);
    match c.kind {
        Kind::New => format!(
            "OBW {:.3} kHz, {:.2} dBFS, on the air {:.2} % ({} emissions)",
            num(a, "obw_hz") / 1e3,
            num(a, "power_dbfs"),
            num(a, "airtime_pct"),
            a["emissions"]
        ),
        Kind::Gone => format!(
            "was OBW {:.3} kHz, {:.2} dBFS, on the air {:.2} %",
            num(b, "obw_hz") / 1e3,
            num(b, "power_dbfs"),
            num(b, "airtime_pct")
        ),
        Kind::Moved => format!(
            "centre {} -> {} MHz ({:+.3} kHz)",
            mhz(num(b, "center_hz")),
            mhz(num(a, "center_hz")),
            (num(a, "center_hz") - num(b, "center_hz")) / 1e3
        ),
        Kind::Power => format!(
            "power {:.2} -> {:.2} dBFS ({:+.2} dB)",
            num(b, "power_dbfs"),
            num(a, "power_dbfs"),
            c.delta_db.unwrap_or(f64::NAN)
        ),
        Kind::Width => format!(
            "OBW {:.3} -> {:.3} kHz (x{:.2})",
            num(b, "obw_hz") / 1e3,
            num(a, "obw_hz") / 1e3,
            c.ratio.unwrap_or(f64::NAN)
        ),
        Kind::Airtime => format!(
            "on the air {:.2} % ({} emissions) -> {:.2} % ({}) (x{:.2}, z {:+.2})",
            num(b, "airtime_pct"),
            b["emissions"],
            num(a, "airtime_pct"),
            a["emissions"],
            c.ratio.unwrap_or(f64::NAN),
            c.z.unwrap_or(f64::NAN)
        ),
        Kind::Class => format!(
            "class {} -> {}",
            b["class"].as_str().unwrap_or("?"),
            a["class"].as_str().unwrap_or("?")
        ),
        Kind::Floor => {
            let (lo, hi) = c.band.unwrap_or((f64::NAN, f64::NAN));
            format!(
                "floor over {}-{} MHz {:.2} -> {:.2} dBFS/Hz ({:+.2} dB)",
                mhz(lo),
                mhz(hi),
                num(b, "dbfs_per_hz"),
                num(a, "dbfs_per_hz"),
                c.delta_db.unwrap_or(f64::NAN)
            )
        }
    }
}

/// The changes as a section for the census table.
pub fn changes_table(cmp: &Comparison, base: &Inventory, path: &str) -> String {
    let mut s = format!(
        "\nchanges against the baseline {} ({} run(s), {:.1} s):\n",
        sanitize(path),
        base.runs,
        base.duration_s
    );
    if cmp.changes.is_empty() {
        s.push_str("no changes\n");
    } else {
        let _ = writeln!(s, "{:<8} {:<14} {:>15}  what", "kind", "name", "centre (MHz)");
        for c in &cmp.changes {
            let name = c.name.as_deref().unwrap_or("-");
            let _ = writeln!(
                s,
                "{:<8} {:<14} {:>15}  {}",
                c.kind.as_str(),
                name,
                mhz(c.center_hz),
                what(c)
            );
        }
    }
    if cmp.outside_span > 0 {
        let _ = writeln!(
            s,
            "({} emitter(s) lie outside the other inventory's span: not compared)",
            cmp.outside_span
        );
    }
    if cmp.rare_unseen > 0 {
        let _ = writeln!(
            s,
            "({} baseline emitter(s) seen in under half of its runs were not heard: not called gone)",
            cmp.rare_unseen
        );
    }
    s
}

/// The baseline side of a census: the baseline read before the run (so a bad file stops it
/// early), the comparison added to the output, and the run saved.
pub struct BaselineStep {
    base: Option<(String, Inventory)>,
    save: Option<String>,
    thresholds: Thresholds,
}

impl BaselineStep {
    pub fn open(
        baseline: Option<&str>,
        save: Option<&str>,
        thresholds: Thresholds,
    ) -> Result<Self> {
        let base = baseline.map(|p| Ok::<_, anyhow::Error>((p.to_string(), load_baseline(p)?)));
        Ok(BaselineStep { base: base.transpose()?, save: save.map(str::to_string), thresholds })
    }

    /// Compares the census (its `--json` object `v`) with the baseline, adding `changes` to `v`
    /// (when `json`) or a section to `text`; saves it with `--save-baseline`. Returns a note.
    pub fn apply(&self, v: &mut Value, text: &mut String, json: bool) -> Result<Option<String>> {
        let now = Inventory::of_census_json(v).context("the census could not be read back")?;
        if let Some((path, base)) = &self.base {
            let cmp = compare(base, &now, &self.thresholds);
            if json {
                add_changes_json(v, &cmp, base, path);
            } else {
                text.push_str(&changes_table(&cmp, base, path));
            }
        }
        let Some(path) = &self.save else { return Ok(None) };
        let runs = save_baseline(path, &now)?;
        Ok(Some(format!("baseline '{}' saved: {runs} run(s)", sanitize(path))))
    }
}
