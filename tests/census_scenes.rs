//! `census` counted against outside truth: the scenes in `tests/reference/census/`, written by
//! `scripts/make-census-scenes.py` (numpy/scipy, seeded; see its doc and `VERSIONS.txt`), each
//! with its emitters' nominal centres, 99 % occupied bandwidths (scipy.signal.welch, ITU-R
//! SM.328) and keying times in `truth.json`.
//!
//! A listed emitter matches a truth emitter when its centre lies within half the truth's width
//! (at least 2 RBW) of the truth's centre; each truth emitter takes the strongest such row, and
//! every other row is spurious. Targets (from the issue): every truth emitter found, at most 1
//! spurious row on the multi-emitter keyed band and at most 3 over all single-emitter scenes;
//! two emitters keyed at the same instants stay two. Each matched row's power while on the air
//! is within 1 dB of the truth's (numpy's mean power of the emitter's own samples while keyed):
//! what was attributed to it must not be counted twice, nor be lost from it.

use serde_json::Value;
use std::path::PathBuf;
use std::process::Command;

const BIN: &str = env!("CARGO_BIN_EXE_bandwarden");

/// The committed scenes, or those of another draw in `$CENSUS_DIR` (see
/// scripts/make-census-scenes.py) for a one-off check.
fn dir() -> PathBuf {
    match std::env::var_os("CENSUS_DIR").filter(|d| !d.is_empty()) {
        Some(d) => PathBuf::from(d),
        None => PathBuf::from(concat!(env!("CARGO_MANIFEST_DIR"), "/tests/reference/census")),
    }
}

fn truth() -> Vec<Value> {
    let text = std::fs::read_to_string(dir().join("truth.json")).unwrap();
    let v: Value = serde_json::from_str(&text).unwrap();
    v["scenes"].as_array().unwrap().clone()
}

/// `census --json` of one scene, with extra arguments.
fn census(scene: &Value, extra: &[&str]) -> Value {
    let rate = scene["rate_hz"].as_f64().unwrap().to_string();
    let path = dir().join(scene["file"].as_str().unwrap());
    let out = Command::new(BIN)
        .arg("census")
        .arg(&path)
        .args(["--format", "ci8", "--rate", &rate, "--center", "0", "--json"])
        .args(extra)
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    serde_json::from_slice(&out.stdout).unwrap()
}

/// The matched rows whose power is more than 1 dB from the truth's, described.
fn power_off(scene: &Value, r: &Value, c: &Count) -> Vec<String> {
    let rows = r["emitters"].as_array().unwrap();
    let truth = scene["emitters"].as_array().unwrap();
    truth
        .iter()
        .zip(&c.matched)
        .filter_map(|(t, m)| Some((t, &rows[(*m)?])))
        .filter(|(t, e)| {
            (e["power_dbfs"].as_f64().unwrap() - t["power_dbfs"].as_f64().unwrap()).abs() > 1.0
        })
        .map(|(t, e)| {
            format!("{}: {} dBFS against {}", t["what"], e["power_dbfs"], t["power_dbfs"])
        })
        .collect()
}

/// Rows matched to the truth (truth index → row index) and the spurious rows.
struct Count {
    matched: Vec<Option<usize>>,
    spurious: Vec<usize>,
}

fn count(scene: &Value, r: &Value) -> Count {
    let rows = r["emitters"].as_array().unwrap();
    let rbw = r["rbw_hz"].as_f64().unwrap();
    let mut taken = vec![false; rows.len()];
    let mut matched = Vec::new();
    for t in scene["emitters"].as_array().unwrap() {
        let centre = t["centre_hz"].as_f64().unwrap();
        let tol = (t["width_hz"].as_f64().unwrap() / 2.0).max(2.0 * rbw);
        let best = (0..rows.len())
            .filter(|&i| !taken[i])
            .filter(|&i| (rows[i]["center_hz"].as_f64().unwrap() - centre).abs() <= tol)
            .max_by(|&a, &b| {
                let p = |i: usize| rows[i]["power_dbfs"].as_f64().unwrap();
                p(a).total_cmp(&p(b))
            });
        if let Some(i) = best {
            taken[i] = true;
        }
        matched.push(best);
    }
    let spurious = (0..rows.len()).filter(|&i| !taken[i]).collect();
    Count { matched, spurious }
}

fn scene(name: &str) -> Value {
    truth().into_iter().find(|s| s["file"] == format!("{name}.ci8")).unwrap()
}

#[test]
fn single_emitter_scenes_list_one_row_each() {
    let mut spurious = 0;
    let mut report = String::new();
    for s in truth().iter().filter(|s| s["emitters"].as_array().unwrap().len() == 1) {
        let r = census(s, &[]);
        let c = count(s, &r);
        let rows = r["emitters"].as_array().unwrap();
        report += &format!("{}: {} row(s), {} spurious\n", s["file"], rows.len(), c.spurious.len());
        assert!(c.matched[0].is_some(), "{}: emitter not found: {r}", s["file"]);
        let off = power_off(s, &r, &c);
        assert!(off.is_empty(), "{}: {off:?}", s["file"]);
        spurious += c.spurious.len();
    }
    eprint!("{report}");
    assert!(spurious <= 3, "{spurious} spurious rows in all:\n{report}");
}

#[test]
fn a_keyed_band_lists_its_six_emitters() {
    let s = scene("keyed-band");
    let r = census(&s, &[]);
    let c = count(&s, &r);
    let rows = r["emitters"].as_array().unwrap();
    for (t, m) in s["emitters"].as_array().unwrap().iter().zip(&c.matched) {
        assert!(m.is_some(), "{} not found: {r}", t["what"]);
    }
    let off = power_off(&s, &r, &c);
    assert!(off.is_empty(), "{off:?}");
    assert!(
        c.spurious.len() <= 1,
        "spurious: {:?}",
        c.spurious.iter().map(|&i| &rows[i]).collect::<Vec<_>>()
    );
    // The keyed emitters' transients were attributed, not hidden: counted on them.
    let transients: u64 =
        rows.iter().map(|e| e["attributed"]["transients"].as_u64().unwrap()).sum();
    let skirts: u64 = rows.iter().map(|e| e["attributed"]["skirts"].as_u64().unwrap()).sum();
    eprintln!("attributed: {transients} transients, {skirts} skirts");
    assert!(transients + skirts > 0, "{r}");
}

#[test]
fn two_emitters_keyed_together_stay_two() {
    let s = scene("keyed-together");
    let r = census(&s, &[]);
    let c = count(&s, &r);
    assert!(c.matched.iter().all(Option::is_some), "{r}");
    assert!(power_off(&s, &r, &c).is_empty(), "{r}");
    // Keyed at the same instants (truth.json), 40 kHz apart, 3 dB apart: two rows, each on
    // the air for the truth's keying (3 bursts). Neither is taken for the other's skirt: had
    // one absorbed the other, its attributed skirt energy would be about -3 dBc; an emitter's
    // own out-of-band skirt (the FM one's sidebands falling away) lies tens of dB down.
    let rows = r["emitters"].as_array().unwrap();
    for m in c.matched.iter().flatten() {
        assert_eq!(rows[*m]["emissions"], 3, "{r}");
        let skirt = &rows[*m]["attributed"]["skirt_energy_dbc"];
        assert!(skirt.is_null() || skirt.as_f64().unwrap() < -20.0, "{r}");
    }
}

#[test]
fn a_pulse_train_is_centred_on_its_pulses() {
    // 50 µs rectangular pulses every 2 ms on a carrier at 30 kHz (truth.json): the lines of its
    // spectrum are 500 Hz apart under a sinc envelope with nulls every 20 kHz (a rectangular
    // pulse of length T has nulls at k/T, common practice). One row, centred on the carrier
    // within two line spacings, its side lobes counted on it.
    let s = scene("pulse-train");
    let r = census(&s, &[]);
    let rows = r["emitters"].as_array().unwrap();
    assert_eq!(rows.len(), 1, "{r}");
    let centre = rows[0]["center_hz"].as_f64().unwrap();
    assert!((centre - 30e3).abs() <= 1000.0, "{centre}");
    assert!(rows[0]["attributed"]["skirts"].as_u64().unwrap() >= 2, "{r}");
    let obw = rows[0]["obw_hz"].as_f64().unwrap();
    let truth = s["emitters"][0]["width_hz"].as_f64().unwrap();
    // The 99 % band of its whole spectrum, lobes included (scipy's, over the same span).
    assert!((obw - truth).abs() <= 0.15 * truth, "{obw} against {truth}");
}

#[test]
fn the_plan_of_the_keyed_band_loads() {
    let s = scene("keyed-band");
    let plan = std::env::temp_dir().join(format!("bw-scenes-{}.toml", std::process::id()));
    let _ = std::fs::remove_file(&plan);
    census(&s, &["--plan-out", plan.to_str().unwrap()]);
    let path = dir().join("keyed-band.ci8");
    let log = Command::new(BIN)
        .arg("log")
        .arg(&path)
        .args(["--format", "ci8", "--rate", "500k", "--center", "0", "--plan"])
        .arg(&plan)
        .args(["-o", "-"])
        .output()
        .unwrap();
    let _ = std::fs::remove_file(&plan);
    assert!(log.status.success(), "{}", String::from_utf8_lossy(&log.stderr));
}
