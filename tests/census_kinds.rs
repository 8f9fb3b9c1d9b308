//! The census names each emitter's kind: the single-emitter scenes of
//! scripts/make-census-scenes.py (numpy/scipy, seeded; tests/reference/census/truth.json) were
//! built as the classes below, so the class each was built as is the truth here. MSK is
//! continuous-phase FSK of index ½ (ITU RR App. 1 first symbol F, class fsk), so its shift is
//! half its bit rate.

use serde_json::Value;
use std::path::Path;
use std::process::Command;

fn census(file: &str, rate: f64) -> Value {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/census");
    let o = Command::new(env!("CARGO_BIN_EXE_bandwarden"))
        .arg("census")
        .arg(dir.join(file))
        .args(["--format", "ci8", "--rate", &rate.to_string(), "--json"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{file}: {}", String::from_utf8_lossy(&o.stderr));
    serde_json::from_slice(&o.stdout).unwrap()
}

#[test]
fn each_single_emitter_scene_is_named_the_class_it_was_built_as() {
    let truth: Value = serde_json::from_slice(
        &std::fs::read(
            Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/census/truth.json"),
        )
        .unwrap(),
    )
    .unwrap();
    // (scene, class, designator's first symbol by ITU RR App. 1 for that class)
    let built = [
        ("ofdm.ci8", "ofdm", 'D'),
        ("pulse-train.ci8", "pulsed", 'P'),
        ("fsk4.ci8", "fsk", 'F'),
        ("keyed-fm.ci8", "fm", 'F'),
        ("qpsk-bursts.ci8", "psk", 'G'),
        ("qam16.ci8", "qam", 'D'),
        ("am.ci8", "am", 'A'),
        ("cw.ci8", "cw", 'N'),
        ("keyed-cw.ci8", "cw", 'N'),
        ("wide-bursts.ci8", "noise", 'X'),
        ("bpsk.ci8", "psk", 'G'),
        ("msk-bursts.ci8", "fsk", 'F'),
    ];
    for (file, class, symbol) in built {
        let scene = truth["scenes"]
            .as_array()
            .unwrap()
            .iter()
            .find(|s| s["file"] == file)
            .unwrap_or_else(|| panic!("{file} not in truth.json"));
        let v = census(file, scene["rate_hz"].as_f64().unwrap());
        let e = &v["emitters"][0];
        assert_eq!(e["class"], class, "{file}: {e}");
        let d = e["designator"].as_str().unwrap();
        let code = bandwarden::measure::classify::bandwidth_code(e["obw_hz"].as_f64().unwrap());
        assert!(d.starts_with(&code), "{file}: designator {d}, bandwidth code {code}");
        assert_eq!(d[code.len()..].chars().next(), Some(symbol), "{file}: {d}");
    }
    // Parameters against the scenes' construction (truth.json "what").
    let fsk = &census("fsk4.ci8", 250e3)["emitters"][0]["class_params"];
    assert_eq!(fsk["tones"], 4);
    assert!((fsk["symbol_rate_hz"].as_f64().unwrap() - 2400.0).abs() < 24.0, "{fsk}");
    assert!((fsk["shift_hz"].as_f64().unwrap() - 2400.0).abs() < 120.0, "{fsk}");
    let bpsk = &census("bpsk.ci8", 250e3)["emitters"][0]["class_params"];
    assert_eq!(bpsk["psk_order"], 2);
    assert!((bpsk["symbol_rate_hz"].as_f64().unwrap() - 5000.0).abs() < 50.0, "{bpsk}");
    let ofdm = &census("ofdm.ci8", 250e3)["emitters"][0]["class_params"];
    assert!((ofdm["subcarrier_spacing_hz"].as_f64().unwrap() - 1000.0).abs() < 10.0, "{ofdm}");
    // The bursts are read from the keyed-on stretch, not from their edges (10 kBd, not 15).
    let qpsk = &census("qpsk-bursts.ci8", 250e3)["emitters"][0]["class_params"];
    assert_eq!(qpsk["psk_order"], 4);
    assert!((qpsk["symbol_rate_hz"].as_f64().unwrap() - 10e3).abs() < 100.0, "{qpsk}");
    // MSK at 4800 bit/s: two tones 2400 Hz apart (truth.json "what").
    let msk = &census("msk-bursts.ci8", 250e3)["emitters"][0]["class_params"];
    assert_eq!(msk["tones"], 2);
    assert!((msk["symbol_rate_hz"].as_f64().unwrap() - 4800.0).abs() < 48.0, "{msk}");
    assert!((msk["shift_hz"].as_f64().unwrap() - 2400.0).abs() < 120.0, "{msk}");
    // Voice-band AM scaled to a peak depth of 0.8: the depth read is the peak depth.
    let am = &census("am.ci8", 250e3)["emitters"][0]["class_params"];
    assert!((am["mod_depth"].as_f64().unwrap() - 0.8).abs() < 0.15, "{am}");
    let pulses = &census("pulse-train.ci8", 500e3)["emitters"][0]["class_params"];
    assert!((pulses["pri_s"].as_f64().unwrap() - 2e-3).abs() < 2e-5, "{pulses}");
    // Written rounded as every output writes them (0.01 Hz, depth 1e-4), not as raw float
    // averages of the emitter's votes.
    for (p, key, dp) in [(fsk, "shift_hz", 2), (msk, "symbol_rate_hz", 2), (am, "mod_depth", 4)] {
        let v = p[key].as_f64().unwrap();
        let scale = 10f64.powi(dp);
        assert_eq!((v * scale).round() / scale, v, "{key} {v} not rounded to {dp} places");
    }
}

/// A steady emission longer than most of the classifier's history (4 s) is classified while it
/// is still on the air, from its first samples, in the band measured so far; the answer must be
/// the one its construction gives, as for the short scenes. Eight copies of a 0.6 s scene end to
/// end (4.8 s at 250 kS/s; at the joins the symbols or tones simply go on from the start).
#[test]
fn a_long_steady_emission_is_classified_as_it_was_built() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/reference/census");
    let tmp = std::env::temp_dir().join(format!("bw-long-kinds-{}", std::process::id()));
    std::fs::create_dir_all(&tmp).unwrap();
    let long = |file: &str| {
        let one = std::fs::read(dir.join(file)).unwrap();
        let path = tmp.join(file);
        std::fs::write(&path, one.repeat(8)).unwrap();
        let o = Command::new(env!("CARGO_BIN_EXE_bandwarden"))
            .arg("census")
            .arg(&path)
            .args(["--format", "ci8", "--rate", "250000", "--json"])
            .output()
            .unwrap();
        assert!(o.status.success(), "{file}: {}", String::from_utf8_lossy(&o.stderr));
        let v: Value = serde_json::from_slice(&o.stdout).unwrap();
        v["emitters"][0].clone()
    };
    // The 16QAM scene is built at round(250 k / 20 k) = 12 samples per symbol
    // (scripts/make-census-scenes.py, `linear`): 20 833 Bd.
    let qam = long("qam16.ci8");
    assert_eq!(qam["class"], "qam", "{qam}");
    let rate = qam["class_params"]["symbol_rate_hz"].as_f64().unwrap();
    assert!((rate / (250e3 / 12.0) - 1.0).abs() < 0.01, "{qam}");
    // truth.json "what": BPSK at 5 kBd; 4-FSK at 2400 Bd, tones 2400 Hz apart.
    let bpsk = long("bpsk.ci8");
    assert_eq!(bpsk["class"], "psk", "{bpsk}");
    assert_eq!(bpsk["class_params"]["psk_order"], 2, "{bpsk}");
    let rate = bpsk["class_params"]["symbol_rate_hz"].as_f64().unwrap();
    assert!((rate - 5000.0).abs() < 50.0, "{bpsk}");
    let fsk = long("fsk4.ci8");
    assert_eq!(fsk["class"], "fsk", "{fsk}");
    assert_eq!(fsk["class_params"]["tones"], 4, "{fsk}");
    let shift = fsk["class_params"]["shift_hz"].as_f64().unwrap();
    assert!((shift - 2400.0).abs() < 120.0, "{fsk}");
    let cw = long("cw.ci8");
    assert_eq!(cw["class"], "cw", "{cw}");
    let _ = std::fs::remove_dir_all(&tmp);
}
