//! `census --baseline` on a before/after pair with planted changes, written by
//! `scripts/make-change-scenes.py` (numpy/scipy, seeded; the truth is in its truth.json, outside
//! the project's own code).
//!
//! Targets (from the issue): every planted change reported with the right kind, its centre
//! within 3 kHz, level deltas (power, floor) within 1 dB; nothing about the unchanged emitters;
//! at most two other reports.

use serde_json::Value;
use std::path::Path;
use std::process::Command;

const DIR: &str = "tests/reference/change";

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_bandwarden"))
}

fn tmp(name: &str) -> std::path::PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("change");
    std::fs::create_dir_all(&dir).unwrap();
    dir.join(name)
}

/// Runs census with `args`, returns the JSON object it printed.
fn census_json(args: &[&str]) -> Value {
    let out = bin().arg("census").args(args).arg("--json").output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let text = String::from_utf8(out.stdout).unwrap();
    assert_eq!(text.trim().lines().count(), 1, "--json is one object: {text}");
    serde_json::from_str(&text).unwrap()
}

fn num(v: &Value, k: &str) -> f64 {
    v[k].as_f64().unwrap_or_else(|| panic!("no {k} in {v}"))
}

#[test]
fn every_planted_change_is_found_and_nothing_else() {
    let truth: Value =
        serde_json::from_str(&std::fs::read_to_string(format!("{DIR}/truth.json")).unwrap())
            .unwrap();
    let base = tmp("before.json");
    let before = census_json(&[&format!("{DIR}/before.sigmf-meta")]);
    // The census records the floor per part of the span (additive field).
    assert!(before["floor"]["parts"].as_array().is_some_and(|p| !p.is_empty()), "{before}");
    std::fs::write(&base, before.to_string()).unwrap();
    let after =
        census_json(&[&format!("{DIR}/after.sigmf-meta"), "--baseline", base.to_str().unwrap()]);
    let changes = after["changes"].as_array().expect("changes[]");
    let mut used = vec![false; changes.len()];
    for t in truth["changes"].as_array().unwrap() {
        let kind = t["kind"].as_str().unwrap();
        let centre = num(t, "center_hz");
        let found = changes.iter().enumerate().find(|(i, c)| {
            !used[*i] && c["kind"] == kind && (num(c, "center_hz") - centre).abs() <= 3e3
        });
        let Some((i, c)) = found else { panic!("planted {t} not reported; changes: {changes:#?}") };
        used[i] = true;
        if let Some(d) = t["delta_db"].as_f64() {
            let got = num(c, "delta_db");
            println!("{kind}: delta {got:.2} dB, planted {d} dB");
            assert!((got - d).abs() <= 1.0, "{kind}: delta {got} against {d}: {c}");
        }
        if kind == "moved" {
            let from = num(&c["before"], "center_hz");
            assert!((from - num(t, "before_center_hz")).abs() <= 3e3, "{c}");
        }
        println!("{kind}: centre off by {:.0} Hz", num(c, "center_hz") - centre);
    }
    for u in truth["unchanged"].as_array().unwrap() {
        let near = changes.iter().find(|c| (num(c, "center_hz") - num(u, "center_hz")).abs() < 1e3);
        assert!(near.is_none(), "unchanged emitter {u} reported: {near:?}");
    }
    let others: Vec<&Value> =
        changes.iter().zip(&used).filter(|(_, u)| !**u).map(|(c, _)| c).collect();
    println!("other reports: {others:#?}");
    assert!(others.len() <= 2, "{} other reports: {others:#?}", others.len());
}

#[test]
fn a_census_against_itself_reports_nothing() {
    let base = tmp("self.json");
    let before = census_json(&[&format!("{DIR}/before.sigmf-meta")]);
    std::fs::write(&base, before.to_string()).unwrap();
    let again =
        census_json(&[&format!("{DIR}/before.sigmf-meta"), "--baseline", base.to_str().unwrap()]);
    assert_eq!(again["changes"], serde_json::json!([]), "{again}");
}

#[test]
fn a_saved_baseline_merges_runs_and_an_old_census_still_loads() {
    let saved = tmp("merged.json");
    let _ = std::fs::remove_file(&saved);
    let s = saved.to_str().unwrap();
    for _ in 0..2 {
        census_json(&[&format!("{DIR}/before.sigmf-meta"), "--save-baseline", s]);
    }
    let merged: Value = serde_json::from_str(&std::fs::read_to_string(&saved).unwrap()).unwrap();
    assert_eq!(merged["runs"], 2, "{merged}");
    // The same input twice: every emitter seen in both runs, airtime unchanged by pooling.
    for e in merged["emitters"].as_array().unwrap() {
        assert_eq!(e["runs_seen"], 2, "{e}");
    }
    // A census JSON without the newer fields (no floor, no runs): still a baseline.
    let mut old = census_json(&[&format!("{DIR}/before.sigmf-meta")]);
    old.as_object_mut().unwrap().remove("floor");
    let old_path = tmp("old.json");
    std::fs::write(&old_path, old.to_string()).unwrap();
    let v = census_json(&[
        &format!("{DIR}/before.sigmf-meta"),
        "--baseline",
        old_path.to_str().unwrap(),
    ]);
    assert_eq!(v["changes"], serde_json::json!([]), "{v}");
}

#[test]
fn a_file_that_is_not_a_baseline_is_refused_clearly() {
    let bad = tmp("not-a-baseline.json");
    std::fs::write(&bad, "{\"kind\": \"start\", \"run\": \"x\"}\n").unwrap();
    for file in [bad.to_str().unwrap(), "Cargo.toml", "/nonexistent/base.json"] {
        let out = bin()
            .args(["census", &format!("{DIR}/before.sigmf-meta"), "--baseline", file])
            .output()
            .unwrap();
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(1), "{err}");
        assert!(err.contains("baseline") && err.contains(file), "{err}");
        assert!(!err.contains("panicked"), "{err}");
    }
}

/// `report --baseline-log`: the same planted pair, logged through a plan the census wrote from
/// the before scene. The channels are those of the before scene, so: the stronger emitter shows
/// a power change near +6 dB (within 1 dB), the one keyed three times as often a busier
/// channel, the gone and the moved one a channel gone quiet; the steady and bursty emitters
/// nothing.
#[test]
fn report_compares_each_channel_with_baseline_logs() {
    let truth: Value =
        serde_json::from_str(&std::fs::read_to_string(format!("{DIR}/truth.json")).unwrap())
            .unwrap();
    let plan = tmp("plan.toml");
    let _ = std::fs::remove_file(&plan);
    census_json(&[&format!("{DIR}/before.sigmf-meta"), "--plan-out", plan.to_str().unwrap()]);
    let mut logs = Vec::new();
    for scene in ["before", "after"] {
        let log = tmp(&format!("{scene}.jsonl"));
        let _ = std::fs::remove_file(&log);
        let out = bin()
            .args(["log", &format!("{DIR}/{scene}.sigmf-meta"), "--plan"])
            .args([plan.to_str().unwrap(), "--interval", "1s", "-o", log.to_str().unwrap()])
            .output()
            .unwrap();
        assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
        logs.push(log.to_str().unwrap().to_string());
    }
    let out =
        bin().args(["report", &logs[1], "--baseline-log", &logs[0], "--json"]).output().unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    let changes = v["changes"].as_array().expect("changes[]");
    let at = |kind: &str| {
        let t = truth["changes"].as_array().unwrap().iter().find(|t| t["kind"] == kind).unwrap();
        let f = if kind == "moved" { num(t, "before_center_hz") } else { num(t, "center_hz") };
        changes
            .iter()
            .filter(|c| (num(c, "center_hz") - f).abs() < 3e3)
            .map(|c| c["kind"].as_str().unwrap().to_string())
            .collect::<Vec<_>>()
    };
    let power = changes.iter().find(|c| c["kind"] == "power").expect("a power change");
    println!("report power delta {}", power["delta_db"]);
    assert!((num(power, "delta_db") - 6.0).abs() <= 1.0, "{power}");
    assert!(at("power").contains(&"power".to_string()));
    assert!(at("airtime").contains(&"occupancy".to_string()), "{changes:#?}");
    assert!(at("gone").contains(&"occupancy".to_string()), "{changes:#?}");
    assert!(at("moved").contains(&"occupancy".to_string()), "{changes:#?}");
    for u in truth["unchanged"].as_array().unwrap() {
        let near = changes.iter().find(|c| (num(c, "center_hz") - num(u, "center_hz")).abs() < 3e3);
        assert!(near.is_none(), "unchanged {u} reported: {near:?}");
    }
}

/// A floor raised over the whole span alone (the before scene plus seeded noise of three times
/// its density, +6.02 dB in all) is one `floor` change of the span, and no emitter reads weaker:
/// the census's power is noise-corrected. (ci8 rounding adds 1/12 LSB² per component, about
/// 0.2 dB of noise at this level in both scenes alike.)
#[test]
fn a_floor_raised_everywhere_changes_no_emitter() {
    let raw = std::fs::read(format!("{DIR}/before.sigmf-data")).unwrap();
    let mut rng = bandwarden::testkit::Rng::new(0xf1008);
    // Noise density of the scene: -86 dBFS/Hz at 200 kS/s; ci8 full scale is 128 (x/128).
    let sigma = (3.0 * 10f64.powf(-8.6) * 200e3 / 2.0).sqrt() * 128.0;
    let raised: Vec<u8> = raw
        .iter()
        .map(|&b| ((b as i8) as f64 + sigma * rng.gauss()).round().clamp(-128.0, 127.0) as i8 as u8)
        .collect();
    let data = tmp("raised.sigmf-data");
    std::fs::write(&data, raised).unwrap();
    std::fs::copy(format!("{DIR}/before.sigmf-meta"), tmp("raised.sigmf-meta")).unwrap();
    let base = tmp("raised-base.json");
    std::fs::write(&base, census_json(&[&format!("{DIR}/before.sigmf-meta")]).to_string()).unwrap();
    let v = census_json(&[
        tmp("raised.sigmf-meta").to_str().unwrap(),
        "--baseline",
        base.to_str().unwrap(),
    ]);
    let changes = v["changes"].as_array().unwrap();
    assert_eq!(changes.len(), 1, "{changes:#?}");
    let c = &changes[0];
    assert_eq!(c["kind"], "floor");
    println!("span floor delta {}", c["delta_db"]);
    assert!((num(c, "delta_db") - 6.02).abs() <= 1.0, "{c}");
    assert!(num(c, "end_hz") - num(c, "start_hz") > 190e3, "the whole span: {c}");
}
