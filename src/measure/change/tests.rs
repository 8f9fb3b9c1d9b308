use super::merge::merge;
use super::*;

fn emitter(name: &str, center_hz: f64, obw_hz: f64, power_dbfs: f64) -> BaselineEmitter {
    BaselineEmitter {
        name: name.into(),
        center_hz,
        obw_hz,
        emissions: 1,
        airtime_pct: 100.0,
        power_dbfs,
        peak_dbfs: None,
        class: None,
        runs_seen: 1,
    }
}

fn inventory(emitters: Vec<BaselineEmitter>) -> Inventory {
    Inventory {
        sample_rate_hz: 200e3,
        center_hz: 433.5e6,
        rbw_hz: 73.2,
        duration_s: 10.0,
        noise_floor_dbfs_per_hz: -90.0,
        floor: Default::default(),
        emitters,
        runs: 1,
    }
}

fn kinds(c: &Comparison) -> Vec<&'static str> {
    c.changes.iter().map(|c| c.kind.as_str()).collect()
}

#[test]
fn airtime_test_statistic() {
    // ln 3 / sqrt(1/10 + 1/30) = 1.0986 / 0.3651 = 3.009 (by hand).
    assert!((airtime_z(10.0, 10, 30.0, 30).unwrap() - 3.009).abs() < 1e-3);
    assert_eq!(airtime_z(0.0, 10, 30.0, 30), None);
    assert!(airtime_z(30.0, 30, 10.0, 10).unwrap() < 0.0);
}

#[test]
fn a_move_is_one_change_and_a_changed_move_is_two() {
    let t = Thresholds::default();
    let base = inventory(vec![emitter("a", 433.45e6, 3e3, -40.0)]);
    // 10 kHz away, alike: moved, named after the baseline.
    let moved = compare(&base, &inventory(vec![emitter("b", 433.46e6, 3.2e3, -40.5)]), &t);
    assert_eq!(kinds(&moved), ["moved"]);
    assert_eq!(moved.changes[0].name.as_deref(), Some("a"));
    // Within the same-place tolerance (2 RBW + 25 % of 3 kHz = 896 Hz): not moved.
    let still = compare(&base, &inventory(vec![emitter("b", 433.4508e6, 3e3, -40.0)]), &t);
    assert!(still.changes.is_empty(), "{still:?}");
    // 10 kHz away and 6 dB stronger: another emitter.
    let other = compare(&base, &inventory(vec![emitter("b", 433.46e6, 3e3, -34.0)]), &t);
    assert_eq!(kinds(&other), ["new", "gone"]);
}

#[test]
fn class_changes_only_when_both_sides_have_one() {
    let t = Thresholds::default();
    let with = |c: Option<&str>| {
        let mut e = emitter("a", 433.45e6, 3e3, -40.0);
        e.class = c.map(|c| serde_json::json!(c));
        inventory(vec![e])
    };
    assert_eq!(kinds(&compare(&with(Some("fsk")), &with(Some("psk")), &t)), ["class"]);
    assert!(compare(&with(None), &with(Some("psk")), &t).changes.is_empty());
}

#[test]
fn merged_runs_pool_airtime_and_count_sightings() {
    let mut a = emitter("a", 433.45e6, 3e3, -40.0);
    a.airtime_pct = 20.0;
    a.emissions = 4;
    let one = inventory(vec![a.clone(), emitter("rare", 433.55e6, 2e3, -50.0)]);
    let two = inventory(vec![a]);
    let m = merge(&one, &two).unwrap();
    assert_eq!(m.runs, 2);
    assert_eq!(m.duration_s, 20.0);
    let a = m.emitters.iter().find(|e| e.name == "a").unwrap();
    assert_eq!((a.runs_seen, a.emissions, a.airtime_pct), (2, 8, 20.0));
    // Seen in one run of two, on the air all of its 10 s: 50 % of the pooled 20 s.
    let rare = m.emitters.iter().find(|e| e.name == "rare").unwrap();
    assert_eq!((rare.runs_seen, rare.airtime_pct), (1, 50.0));
    // Seen in half the runs: still `gone` when missing; a third run without it would not be.
    let today = inventory(vec![emitter("a2", 433.45e6, 3e3, -40.0)]);
    assert_eq!(kinds(&compare(&m, &today, &Thresholds::default())), ["gone"]);
    let m3 = merge(&m, &today).unwrap();
    let c = compare(&m3, &today, &Thresholds::default());
    assert!(c.changes.is_empty() && c.rare_unseen == 1, "{c:?}");
    // Another span: refused.
    let mut far = inventory(vec![]);
    far.center_hz = 446e6;
    assert!(merge(&m, &far).is_err());
}
