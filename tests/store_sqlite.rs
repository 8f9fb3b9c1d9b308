//! The database of `collect --db`, `import` and `report --db`, on SQLite (no server needed).
//!
//! Checked against: `report` over the same log files (itself checked against sums made
//! independently in tests/report_cli.rs): `report --db` must print the same channels, hours,
//! coverage and CSV; and SQLite's own count of the rows stored (a second connection, the
//! `rusqlite` crate), which must hold each (site, run, seq) once however often it came.

#[path = "support/network_logs.rs"]
mod network_logs;
#[path = "support/reports.rs"]
mod reports;

use bandwarden::net::collect::{Collector, Taken};
use bandwarden::store::write::{Batch, Stored, Writer};
use bandwarden::store::{open, DbUrl};
use network_logs::{write_run, RunSpec};
use reports::spec;
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::time::{Duration, Instant};

fn bin() -> &'static str {
    env!("CARGO_BIN_EXE_bandwarden")
}

fn scratch(name: &str) -> PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("store").join(name);
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

fn run(args: &[&str]) -> Output {
    let out = Command::new(bin()).args(args).output().unwrap();
    assert!(out.status.success(), "{args:?}: {}", String::from_utf8_lossy(&out.stderr));
    out
}

fn lines(spec: &RunSpec) -> Vec<String> {
    let mut out = Vec::new();
    write_run(&mut out, spec).unwrap();
    String::from_utf8(out).unwrap().lines().map(String::from).collect()
}

fn count(db: &Path, sql: &str) -> i64 {
    let c = rusqlite::Connection::open(db).unwrap();
    c.query_row(sql, [], |r| r.get(0)).unwrap()
}

fn writer(path: &Path) -> Writer {
    Writer::new(open(&DbUrl::Sqlite(path.into())).unwrap(), Batch::default())
}

#[test]
fn the_collector_stores_each_record_once() {
    let dir = scratch("collect");
    let db = dir.join("net.db");
    let ridge = lines(&spec("ridge", "20261203T220000Z-11", 30, 1_796_335_200, 7));
    let north = lines(&spec("north", "20261203T220000Z-12", 20, 1_796_335_200, 8));
    let mut c = Collector::open(None, Some(writer(&db))).unwrap();
    // Every record, then a third of them again (a broker redelivering), then one that is no record.
    for (site, l) in ridge.iter().map(|l| ("ridge", l)).chain(north.iter().map(|l| ("north", l))) {
        assert_eq!(c.take(site, l.as_bytes()).unwrap(), Taken::Written);
    }
    for l in ridge.iter().step_by(3) {
        assert_eq!(c.take("ridge", l.as_bytes()).unwrap(), Taken::Duplicate);
    }
    assert_eq!(c.take("ridge", b"{\"kind\":\"interval\"").unwrap(), Taken::Malformed);
    assert!(c.uncommitted() > 0, "a batch of 1000 records or 0.2 s is not committed at once");
    c.commit(true).unwrap();
    assert_eq!(c.uncommitted(), 0);
    drop(c);
    let total = (ridge.len() + north.len()) as i64;
    assert_eq!(count(&db, "SELECT COUNT(*) FROM records"), total);
    let intervals =
        ridge.iter().chain(&north).filter(|l| l.contains("\"kind\":\"interval\"")).count();
    assert_eq!(count(&db, "SELECT COUNT(*) FROM intervals"), intervals as i64);
    assert_eq!(count(&db, "SELECT COUNT(*) FROM sites"), 2);
    assert_eq!(count(&db, "SELECT COUNT(*) FROM runs WHERE has_start = 1"), 2);
    // The original line is kept, byte for byte.
    let c = rusqlite::Connection::open(&db).unwrap();
    let first: String =
        c.query_row("SELECT line FROM records ORDER BY id LIMIT 1", [], |r| r.get(0)).unwrap();
    assert_eq!(first, ridge[0]);
    drop(c);
    // A collector started again (a restart) stores nothing twice.
    let mut c = Collector::open(None, Some(writer(&db))).unwrap();
    for l in &north {
        assert_eq!(c.take("north", l.as_bytes()).unwrap(), Taken::Duplicate);
    }
    c.commit(true).unwrap();
    assert_eq!(count(&db, "SELECT COUNT(*) FROM records"), total);
}

#[test]
fn a_start_record_that_comes_last_still_places_its_intervals() {
    let dir = scratch("late-start");
    let ridge = lines(&spec("ridge", "20261203T220000Z-21", 90, 1_796_335_200, 3));
    // The same records in order, and with the start record (which holds the run's clock and
    // sample rate) delivered last, as a resend would.
    let mut late = ridge[1..].to_vec();
    late.push(ridge[0].clone());
    // Without clock stamps the intervals are placed by the run's clock alone.
    let unstamped: Vec<String> = late
        .iter()
        .map(|l| {
            let mut v: Value = serde_json::from_str(l).unwrap();
            if v["kind"] == "interval" {
                v.as_object_mut().unwrap().remove("start");
                v["dropped_samples"] = 250_000.into();
            }
            v.to_string()
        })
        .collect();
    let mut ordered: Vec<String> = unstamped.clone();
    ordered.rotate_right(1);
    let table = |name: &str, records: &[String]| {
        let db = dir.join(name);
        let mut w = writer(&db);
        for l in records {
            w.take("ridge", l).unwrap();
        }
        w.commit().unwrap();
        let c = rusqlite::Connection::open(&db).unwrap();
        let mut st = c
            .prepare(
                "SELECT i.t_epoch, i.hour_key, i.measured_s, i.lost_s FROM intervals i \
                 JOIN records r ON r.id = i.record_id ORDER BY r.seq",
            )
            .unwrap();
        let rows: Vec<(Option<f64>, i64, f64, f64)> = st
            .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?)))
            .unwrap()
            .map(Result::unwrap)
            .collect();
        rows
    };
    let a = table("late.db", &unstamped);
    let b = table("ordered.db", &ordered);
    assert_eq!(a.len(), 270);
    assert_eq!(a, b);
    // Dropped samples at the run's 1 MS/s: 0.25 s of each measured interval lost.
    assert!(a.iter().all(|r| r.0.is_some()), "every interval placed by the run's clock");
    assert!(a.iter().any(|r| (r.3 - 0.25).abs() < 1e-9), "{:?}", &a[..3]);
}

#[test]
fn report_from_the_database_equals_report_from_the_logs() {
    let dir = scratch("report");
    let logs = reports::network_logs(&dir);
    let db = format!("sqlite:{}", dir.join("net.db").display());
    reports::import_and_compare(&db, &logs, &[]);
    // The table and the heat map are drawn from the same summary.
    let png = dir.join("map.png");
    let out = run(&["report", "--db", &db, "--png", png.to_str().unwrap()]);
    assert!(String::from_utf8_lossy(&out.stdout).contains("from the database"));
    assert!(std::fs::metadata(&png).unwrap().len() > 1000);
}

#[test]
fn copies_in_and_across_batches_and_from_a_second_writer_are_stored_once() {
    let dir = scratch("batches");
    let db = dir.join("net.db");
    let url = format!("sqlite:{}", db.display());
    reports::copies_in_batches(&DbUrl::Sqlite(db), &url, &[], &dir);
}

#[test]
fn bad_database_flags_are_refused() {
    let dir = scratch("bad");
    let fail = |args: &[&str], says: &str| {
        let out = Command::new(bin()).args(args).output().unwrap();
        assert_eq!(out.status.code(), Some(1), "{args:?}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(says), "{args:?}: {err}");
    };
    fail(&["report", "--db", "mysql://x/y"], "sqlite:PATH");
    fail(&["report", "--db", "postgres://ridge:pw@localhost/net"], "no password in the URL");
    fail(&["collect", "mqtt://localhost/wrenhollow"], "--out DIR, --db URL");
    fail(&["report", "--db", "sqlite:x.db", "a.jsonl"], "not both");
    fail(&["report", "--db", "sqlite:/nowhere/wrenhollow.db"], "no database at");
    let junk = dir.join("junk.db");
    std::fs::write(&junk, "this is no database, it only has a name that says so").unwrap();
    let out = Command::new(bin())
        .args(["report", "--db", &format!("sqlite:{}", junk.display())])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("not a SQLite database"));
}

/// `report` over `log` and `report --db` over `db`, with `options`: the CSV, and the channels of
/// `--json`, must be the same.
fn same_report(db: &Path, log: &Path, options: &[&str]) {
    let url = format!("sqlite:{}", db.display());
    for format in ["--csv", "--json"] {
        let files = run(&[&["report", format], options, &[log.to_str().unwrap()]].concat()).stdout;
        let stored = run(&[&["report", format, "--db", &url], options].concat()).stdout;
        if format == "--csv" {
            assert_eq!(String::from_utf8_lossy(&files), String::from_utf8_lossy(&stored));
            continue;
        }
        let a: Value = serde_json::from_slice(&files).unwrap();
        let b: Value = serde_json::from_slice(&stored).unwrap();
        assert!(a["channels"].as_array().unwrap().len() == 3, "{options:?}");
        assert_eq!(a["channels"], b["channels"], "{options:?}");
        assert_eq!(a["coverage"], b["coverage"], "{options:?}");
    }
}

#[test]
fn hourly_sums_follow_partial_hours_and_copies_and_a_version_1_database_is_brought_up() {
    let dir = scratch("hours");
    let db = dir.join("net.db");
    // 150 minutes from 22:00 UTC: two whole hours and half of a third.
    let mast = lines(&spec("mast", "20261203T220000Z-51", 150, 1_796_335_200, 4));
    let log = dir.join("mast.jsonl");
    std::fs::write(&log, mast.join("\n") + "\n").unwrap();
    // Committed in the middle of the second hour, which is then summed from part of its
    // intervals; a third of those come again (a resend) before the rest.
    let mut w = writer(&db);
    let cut = mast.len() * 3 / 5;
    for l in &mast[..cut] {
        assert_eq!(w.take("mast", l).unwrap(), Stored::New);
    }
    w.commit().unwrap();
    for l in mast[cut / 2..cut].iter().step_by(3) {
        assert_eq!(w.take("mast", l).unwrap(), Stored::Duplicate);
    }
    for l in &mast[cut..] {
        assert_eq!(w.take("mast", l).unwrap(), Stored::New);
    }
    w.commit().unwrap();
    drop(w);
    // Every stored hour is the sum of its intervals, summed again here.
    let fresh = "SELECT channel_id, clock, hour_key, COUNT(*) AS n, SUM(samples) AS s, \
                 SUM(valid) AS v FROM intervals GROUP BY channel_id, clock, hour_key";
    let hours = count(&db, &format!("SELECT COUNT(*) FROM ({fresh})"));
    assert_eq!(hours, 3 * 3, "3 channels, 3 hours");
    let agree = format!(
        "SELECT COUNT(*) FROM interval_hours h JOIN ({fresh}) g USING (channel_id, clock, hour_key) \
         WHERE h.n = g.n AND h.samples = g.s AND h.n_valid = g.v"
    );
    assert_eq!(count(&db, &agree), hours);
    assert_eq!(count(&db, "SELECT COUNT(*) FROM interval_hours"), hours);
    let windows: [&[&str]; 3] = [
        &[],
        &["--from", "2026-12-03T22:20:00Z", "--to", "2026-12-04T00:10:00Z"],
        &["--to", "2026-12-03T23:30:00Z", "--tz", "+01:00"],
    ];
    for options in windows {
        same_report(&db, &log, options);
    }
    // The database as version 1 wrote it (no hourly sums): brought up when opened, same report.
    let c = rusqlite::Connection::open(&db).unwrap();
    c.execute_batch("DROP TABLE interval_hours; UPDATE schema_version SET version = 1;").unwrap();
    drop(c);
    same_report(&db, &log, windows[1]);
    assert_eq!(count(&db, "SELECT MAX(version) FROM schema_version"), 2);
    assert_eq!(count(&db, &agree), hours);
}

/// A record of run `r1` (a start record says its interval, 1 s).
fn rec(kind: &str, seq: u64) -> Vec<u8> {
    let extra = if kind == "start" { ",\"interval_s\":1.0" } else { "" };
    format!("{{\"kind\":\"{kind}\",\"run\":\"r1\",\"seq\":{seq}{extra}}}").into_bytes()
}

#[test]
fn with_only_a_database_the_collector_asks_for_holes_and_knows_them_after_a_restart() {
    let dir = scratch("db-holes");
    let db = dir.join("net.db");
    let t0 = Instant::now();
    let at = |s: f64| t0 + Duration::from_secs_f64(s);
    let asked = |c: &mut Collector, now: Instant| -> Vec<(u64, Option<u64>)> {
        c.due_requests(now).into_iter().map(|(_, r)| (r.from, r.to)).collect()
    };
    let mut c = Collector::open(None, Some(writer(&db))).unwrap();
    // A status first: the site is known before any record (no file to open).
    c.status("ridge", br#"{"state":"online","reason":"connected"}"#, at(0.0)).unwrap();
    c.take_at("ridge", &rec("start", 0), at(0.0)).unwrap();
    c.take_at("ridge", &rec("interval", 1), at(0.0)).unwrap();
    c.take_at("ridge", &rec("interval", 4), at(0.1)).unwrap();
    assert_eq!(c.take_at("ridge", &rec("interval", 4), at(0.1)).unwrap(), Taken::Duplicate);
    // Asked a second after the hole is seen, as with files (the unit tests of net::collect).
    assert_eq!(asked(&mut c, at(1.2)), [(2, Some(3))]);
    c.commit(true).unwrap();
    drop(c);
    // Started again, it learns from the database what came and what did not.
    let mut c = Collector::open(None, Some(writer(&db))).unwrap();
    assert_eq!(c.take_at("ridge", &rec("interval", 1), at(2.0)).unwrap(), Taken::Duplicate);
    assert_eq!(c.holes(), [("ridge".to_string(), "r1".to_string(), 2, 4)]);
    assert_eq!(c.take_at("ridge", &rec("interval", 2), at(2.0)).unwrap(), Taken::Written);
    assert_eq!(asked(&mut c, at(3.1)), [(3, Some(3))]);
    assert_eq!((c.written, c.duplicates), (1, 1));
    c.commit(true).unwrap();
    assert_eq!(count(&db, "SELECT COUNT(*) FROM records"), 4);
}
