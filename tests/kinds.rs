//! Where each emission's kind shows: `census --json` (each emitter) and its table, `log`
//! emission records, `--annotate` annotations, `measure --json` peaks. These check the plumbing
//! whatever the classifier answers: every place has the four fields, the class is one of the
//! set, the confidence lies in 0..1, and the designator begins with the bandwidth code of the
//! OBW printed beside it (ITU RR Appendix 1, through `bandwidth_code`).

use bandwarden::measure::classify::bandwidth_code;
use serde_json::Value;
use std::process::Command;

const BIN: &str = env!("CARGO_BIN_EXE_bandwarden");
const META: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/recordings/wrenhollow-demo.sigmf-meta");
const PLAN: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/recordings/wrenhollow-plan.toml");
const CLASSES: [&str; 10] =
    ["cw", "am", "fm", "fsk", "psk", "qam", "ofdm", "pulsed", "noise", "unknown"];

/// A folder holding a copy of the demo recording (annotations must lie beside their dataset).
fn copy_of_demo(name: &str) -> (std::path::PathBuf, String) {
    let dir = std::env::temp_dir().join(format!("bw-kinds-{name}-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    for ext in ["sigmf-meta", "sigmf-data"] {
        let from = META.replace("sigmf-meta", ext);
        std::fs::copy(&from, dir.join(format!("demo.{ext}"))).unwrap();
    }
    let meta = dir.join("demo.sigmf-meta").to_string_lossy().into_owned();
    (dir, meta)
}

fn run(args: &[&str]) -> String {
    let out = Command::new(BIN).args(args).output().unwrap();
    assert!(out.status.success(), "{args:?}: {}", String::from_utf8_lossy(&out.stderr));
    String::from_utf8(out.stdout).unwrap()
}

/// The four fields of `v` (keys prefixed with `prefix`), against the OBW in `obw_key`.
fn check(v: &Value, prefix: &str, obw_key: &str) {
    let f = |k: &str| &v[format!("{prefix}{k}")];
    assert!(CLASSES.contains(&f("class").as_str().unwrap_or("-")), "{v}");
    let c = f("class_confidence").as_f64().unwrap_or(-1.0);
    assert!((0.0..=1.0).contains(&c), "{v}");
    assert!(f("class_params").is_object(), "{v}");
    let code = bandwidth_code(v[obw_key].as_f64().unwrap());
    let d = f("designator").as_str().unwrap();
    assert!(d.starts_with(&code) && d.len() > code.len(), "{d} against {code}: {v}");
}

#[test]
fn census_emitters_have_a_kind_in_json_and_table() {
    let v: Value =
        serde_json::from_str(&run(&["census", META, "--seconds", "1", "--json"])).unwrap();
    let emitters = v["emitters"].as_array().unwrap();
    assert!(!emitters.is_empty());
    for e in emitters {
        check(e, "", "obw_hz");
    }
    let table = run(&["census", META, "--seconds", "1"]);
    let header = table.lines().nth(1).unwrap();
    assert!(header.ends_with("kind   designator"), "{table}");
    for (line, e) in table.lines().skip(2).zip(emitters) {
        assert!(line.contains(e["designator"].as_str().unwrap()), "{line}");
    }
}

#[test]
fn log_emission_records_and_annotations_have_a_kind() {
    let (dir, meta) = copy_of_demo("log");
    let ann = dir.join("log.sigmf-meta");
    let out = Command::new(BIN)
        .args(["log", &meta, "--plan", PLAN, "--seconds", "2", "-o", "-", "--annotate"])
        .arg(&ann)
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let text = String::from_utf8(out.stdout).unwrap();
    let emissions: Vec<Value> = text
        .lines()
        .map(|l| serde_json::from_str::<Value>(l).unwrap())
        .filter(|r| r["kind"] == "emission" && r["obw_hz"].is_number())
        .collect();
    assert!(!emissions.is_empty(), "{text}");
    for e in &emissions {
        check(e, "", "obw_hz");
    }
    let meta: Value = serde_json::from_slice(&std::fs::read(&ann).unwrap()).unwrap();
    let anns: Vec<&Value> = meta["annotations"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|a| a["bandwarden:obw_hz"].is_number())
        .collect();
    assert_eq!(anns.len(), emissions.len());
    for a in anns {
        check(a, "bandwarden:", "bandwarden:obw_hz");
        let d = a["bandwarden:designator"].as_str().unwrap();
        assert!(a["core:comment"].as_str().unwrap().ends_with(&format!("designator {d}")), "{a}");
    }
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn census_annotations_have_a_kind() {
    let (dir, meta) = copy_of_demo("census");
    let ann = dir.join("census.sigmf-meta");
    let out = Command::new(BIN)
        .args(["census", &meta, "--seconds", "1", "--annotate"])
        .arg(&ann)
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let meta: Value = serde_json::from_slice(&std::fs::read(&ann).unwrap()).unwrap();
    let anns = meta["annotations"].as_array().unwrap();
    assert!(anns.iter().any(|a| a["bandwarden:class"].is_string()), "{meta}");
    for a in anns.iter().filter(|a| a["bandwarden:class"].is_string()) {
        check(a, "bandwarden:", "bandwarden:obw_hz");
    }
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn measure_peaks_have_a_kind() {
    let v: Value =
        serde_json::from_str(&run(&["measure", META, "--seconds", "1", "--json"])).unwrap();
    let peaks = v["peaks"].as_array().unwrap();
    assert!(!peaks.is_empty());
    for p in peaks {
        check(p, "", "obw_hz");
    }
}
