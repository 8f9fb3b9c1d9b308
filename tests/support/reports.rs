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
    // The heat maps, noise-floor lines beside the channels included, byte for byte.
    let dir = logs[0].parent().unwrap();
    for (i, options) in cases[..3].iter().enumerate() {
        let png = |name: &str| dir.join(format!("{name}-{i}.png")).display().to_string();
        let (from_logs, from_db) = (png("logs"), png("db"));
        let paths: Vec<String> = logs.iter().map(|p| p.display().to_string()).collect();
        let mut files: Vec<&str> = vec!["report", "--png", &from_logs];
        files.extend_from_slice(options);
        files.extend(paths.iter().map(String::as_str));
        run(&files);
        let mut stored: Vec<&str> = vec!["report", "--db", db, "--png", &from_db];
        stored.extend_from_slice(access);
        stored.extend_from_slice(options);
        run(&stored);
        // Pixel for pixel but the footer line, which says where the numbers came from.
        let (a, b) = (pixels(&from_logs), pixels(&from_db));
        assert_eq!((a.0, a.1), (b.0, b.1), "{options:?}: sizes");
        let above_footer = (a.1 - FOOTER_PX) * a.2;
        let first = (0..above_footer).find(|&i| a.3[i] != b.3[i]);
        assert!(
            first.is_none(),
            "{options:?}: the heat maps differ at row {:?}",
            first.map(|i| i / a.2)
        );
        assert_ne!(a.3, b.3, "the footers name the logs and the database");
    }
}

/// Copies within and across batches, and a second writer: `url` (named `db` with `access` for
/// the command line), an empty database, gets the mast's 150 minutes (two whole hours and half
/// of a third) in batches that repeat records: one record twice in the same batch, records of
/// the batch before delivered again, and records that another writer stored since this one read
/// the run (it takes them for new; the database keeps them once and the commit counts them as
/// copies). Checked against: the lines written (each stored once, counted by the database), the
/// hourly sums summed again from the intervals by the database itself, and `report` over the
/// log file.
pub fn copies_in_batches(url: &bandwarden::store::DbUrl, db: &str, access: &[&str], dir: &Path) {
    use bandwarden::store::write::{Batch, Stored, Writer};
    let mut text = Vec::new();
    write_run(&mut text, &spec("mast", "20261203T220000Z-61", 150, 1_796_335_200, 4)).unwrap();
    let log = dir.join("mast.jsonl");
    std::fs::write(&log, &text).unwrap();
    let lines: Vec<String> = String::from_utf8(text).unwrap().lines().map(String::from).collect();
    let batch = Batch { records: 1_000_000, age: std::time::Duration::from_secs(3600) };
    let writer = || Writer::new(bandwarden::store::open(url).unwrap(), batch);
    let take_all = |w: &mut Writer, from: usize, to: usize, want: Stored| {
        for (i, l) in lines[from..to].iter().enumerate() {
            assert_eq!(w.take("mast", l).unwrap(), want, "line {}", from + i);
        }
    };
    let (a, b, c) = (lines.len() / 4, lines.len() / 2, lines.len() * 3 / 4);
    let mut w = writer();
    take_all(&mut w, 0, a, Stored::New);
    w.commit().unwrap();
    // One batch: the end of the last one again, new records, and one of them twice.
    take_all(&mut w, a - 20, a, Stored::Duplicate);
    take_all(&mut w, a, b, Stored::New);
    assert_eq!(w.take("mast", &lines[a + 7]).unwrap(), Stored::Duplicate);
    take_all(&mut w, b - 3, b, Stored::Duplicate);
    w.commit().unwrap();
    assert_eq!((w.stored, w.duplicates), (b as u64, 24));
    // Another writer stores [b, c) in the meantime; this one, which read the run before, takes
    // them for new, and learns at the commit that they were there.
    let mut other = writer();
    take_all(&mut other, b, c, Stored::New);
    other.commit().unwrap();
    take_all(&mut w, b, lines.len(), Stored::New);
    w.commit().unwrap();
    assert_eq!(w.stored, (b + lines.len() - c) as u64);
    assert_eq!(w.duplicates, 24 + (c - b) as u64);
    drop((w, other));
    let mut d = bandwarden::store::open(url).unwrap();
    let count = |d: &mut Box<dyn bandwarden::store::Backend>, sql: &str| {
        d.rows(sql, &[]).unwrap()[0][0].i64().unwrap()
    };
    assert_eq!(count(&mut d, "SELECT COUNT(*) FROM records"), lines.len() as i64);
    let intervals = lines.iter().filter(|l| l.contains("\"kind\":\"interval\"")).count();
    assert_eq!(count(&mut d, "SELECT COUNT(*) FROM intervals"), intervals as i64);
    // Every stored hour is the sum of its intervals, summed again here, column by column (the
    // fractional sums to within what another order of adding changes: PostgreSQL adds in the
    // order its plan takes, 1e-12 of 4e8 occupied samples seen).
    let fresh =
        "SELECT channel_id, clock, hour_key, COUNT(*) AS n, CAST(SUM(valid) AS BIGINT) AS v, \
                 CAST(SUM(samples) AS BIGINT) AS s, SUM(occupied) AS o, SUM(measured_s) AS m, \
                 SUM(lost_s) AS l, CAST(SUM(dropped) AS BIGINT) AS dr, \
                 CAST(SUM(power_n) AS BIGINT) AS pn FROM intervals \
                 GROUP BY channel_id, clock, hour_key";
    let hours = count(&mut d, &format!("SELECT COUNT(*) FROM ({fresh}) AS g"));
    assert_eq!(hours, 3 * 3, "3 channels, 3 hours");
    let agree = format!(
        "SELECT COUNT(*) FROM interval_hours h JOIN ({fresh}) AS g \
         ON g.channel_id = h.channel_id AND g.clock = h.clock AND g.hour_key = h.hour_key \
         WHERE h.n = g.n AND h.n_valid = g.v AND h.samples = g.s AND h.dropped = g.dr \
         AND h.power_n = g.pn AND ABS(h.occupied - g.o) <= 1e-12 * ABS(g.o) \
         AND ABS(h.measured_s - g.m) <= 1e-12 * ABS(g.m) AND ABS(h.lost_s - g.l) <= 1e-9"
    );
    assert_eq!(count(&mut d, &agree), hours);
    assert_eq!(count(&mut d, "SELECT COUNT(*) FROM interval_hours"), hours);
    let (files, stored) = both(db, access, &[log], &["--csv"]);
    assert_eq!(files, stored);
}

/// The rows of the heat map's footer (one line of small text at the bottom).
const FOOTER_PX: usize = 32;

/// A PNG's width, height, bytes a row and pixels.
fn pixels(path: &str) -> (usize, usize, usize, Vec<u8>) {
    let decoder = png::Decoder::new(std::fs::File::open(path).unwrap());
    let mut reader = decoder.read_info().unwrap();
    let mut buf = vec![0; reader.output_buffer_size()];
    let info = reader.next_frame(&mut buf).unwrap();
    buf.truncate(info.buffer_size());
    (info.width as usize, info.height as usize, info.line_size, buf)
}
