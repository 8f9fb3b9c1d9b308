//! The acceptance check of `report --db`, shared by the SQLite and PostgreSQL tests: logs of
//! the demo scene (written by `log`) and made-up days of a network, imported into a database,
//! must give the same report as `report` over the files (checked against sums made
//! independently in tests/report_cli.rs): the CSV text, and in `--json` every channel, the
//! coverage, period, sites and alarms, for several windows, site choices and zones.

use super::network_logs::{write_run, RunSpec};
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn run(args: &[&str]) -> Output {
    let out = Command::new(env!("CARGO_BIN_EXE_bandwarden")).args(args).output().unwrap();
    assert!(out.status.success(), "{args:?}: {}", String::from_utf8_lossy(&out.stderr));
    out
}

pub fn spec(site: &str, run: &str, minutes: u64, start_epoch: i64, seed: u64) -> RunSpec {
    RunSpec {
        site: site.into(),
        run: run.into(),
        channels: 3,
        start_epoch,
        minutes,
        seed,
        no_clock: false,
    }
}

/// The logs: `log` on the demo scene at two sites (one across an hour's end), made-up days of
/// a mast (two runs), a partial copy of the mast's log (as a daily file would repeat it), and a
/// shed whose log has no clock.
pub fn network_logs(dir: &Path) -> Vec<PathBuf> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let demo = root.join("recordings/wrenhollow-demo.sigmf-meta");
    let plan = root.join("recordings/wrenhollow-plan.toml");
    let mut logs = Vec::new();
    for (site, start) in [("north", "2026-12-03T22:59:59.5Z"), ("hut", "2026-12-04T06:10:00Z")] {
        let log = dir.join(format!("{site}.jsonl"));
        run(&[
            "log",
            demo.to_str().unwrap(),
            "--plan",
            plan.to_str().unwrap(),
            "--interval",
            "100ms",
            "--threads",
            "1",
            "--site",
            site,
            "--start",
            start,
            "-o",
            log.to_str().unwrap(),
        ]);
        logs.push(log);
    }
    let mast = dir.join("mast.jsonl");
    let mut text = Vec::new();
    write_run(&mut text, &spec("mast", "20261130T210000Z-31", 3 * 1440, 1_796_072_400, 5)).unwrap();
    write_run(&mut text, &spec("mast", "20261203T220000Z-32", 600, 1_796_335_200, 6)).unwrap();
    std::fs::write(&mast, &text).unwrap();
    logs.push(mast);
    let copy = dir.join("mast.2026-12-01.jsonl");
    let part: Vec<&[u8]> = text.split(|b| *b == b'\n').skip(2000).take(3000).collect();
    std::fs::write(&copy, part.join(&b'\n')).unwrap();
    logs.push(copy);
    let shed = dir.join("shed.jsonl");
    let mut file = std::fs::File::create(&shed).unwrap();
    let no_clock = RunSpec { no_clock: true, ..spec("shed", "20261201T000000Z-41", 300, 0, 9) };
    write_run(&mut file, &no_clock).unwrap();
    logs.push(shed);
    logs
}

/// `report` over `logs` and `report --db` with the same options (`access`: the database's
/// password flags).
fn both(db: &str, access: &[&str], logs: &[PathBuf], options: &[&str]) -> (String, String) {
    let mut files: Vec<&str> = vec!["report"];
    files.extend_from_slice(options);
    let paths: Vec<String> = logs.iter().map(|p| p.display().to_string()).collect();
    files.extend(paths.iter().map(String::as_str));
    let mut stored: Vec<&str> = vec!["report", "--db", db];
    stored.extend_from_slice(access);
    stored.extend_from_slice(options);
    let a = String::from_utf8(run(&files).stdout).unwrap();
    let b = String::from_utf8(run(&stored).stdout).unwrap();
    (a, b)
}

/// Imports `logs` into `db` (twice: nothing is stored twice) and compares the reports.
pub fn import_and_compare(db: &str, logs: &[PathBuf], access: &[&str]) {
    let paths: Vec<String> = logs.iter().map(|p| p.display().to_string()).collect();
    let mut args = vec!["import", "--db", db];
    args.extend_from_slice(access);
    args.extend(paths.iter().map(String::as_str));
    let out = run(&args);
    assert!(String::from_utf8_lossy(&out.stderr).contains("records/s"));
    let again = String::from_utf8_lossy(&run(&args).stderr).to_string();
    assert!(again.contains("stored 0 records"), "{again}");
    let cases: [&[&str]; 5] = [
        &[],
        &["--from", "2026-12-01T05:30", "--to", "2026-12-03T23:00:00.2Z"],
        &["--site", "mast", "--site", "north"],
        &["--site", "all=mast,north,hut", "--tz", "+05:30"],
        &["--tz=-03:00", "--from", "2026-12-02"],
    ];
    for options in cases {
        let (a, b) = both(db, access, logs, &[&["--csv"], options].concat());
        assert_eq!(a, b, "--csv {options:?}");
        let (a, b) = both(db, access, logs, &[&["--json"], options].concat());
        let (a, b): (Value, Value) =
            (serde_json::from_str(&a).unwrap(), serde_json::from_str(&b).unwrap());
        let (ca, cb) = (a["channels"].as_array().unwrap(), b["channels"].as_array().unwrap());
        assert!(ca.len() >= 3, "{options:?}: {ca:?}");
        assert_eq!(ca.len(), cb.len(), "{options:?}");
        for (x, y) in ca.iter().zip(cb) {
            assert_eq!(x, y, "{options:?}: channel {} {}", x["site"], x["name"]);
        }
        for key in ["period", "zone", "hours_are", "sites", "coverage", "alarms"] {
            assert_eq!(a[key], b[key], "{options:?}: {key}");
        }
    }
}
