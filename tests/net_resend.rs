//! The broker that forgets: Mosquitto with `persistence false` is restarted 3 s into an 8 s run
//! of two sites, so whatever it held for the collector (its queue, even its subscription) is
//! gone. The collector's own link is down for 2 s from the restart (a relay cut), so the sites,
//! back at once, publish records the broker acknowledges and drops (nobody is subscribed):
//! without the collector asking, those are lost for sure, not by the luck of who reconnects
//! first. Records the broker acknowledged to a site but never delivered leave holes in `seq`;
//! the collector must ask each site for them again (`PREFIX/SITE/ask/resend`) and end with
//! every record of every site exactly once. The truth is each site's own local log: the
//! collected file must equal it line for line (MQTT 3.1.1 §4.3.2: QoS 1 is at-least-once
//! between one client and the broker only, so end-to-end delivery is the application's job).
//!
//! The same scenario runs twice, one after the other: a collector writing files (`--out`) and
//! one writing only a database (`--db sqlite:`), which must see holes and ask for them alike.
//!
//! Needs Mosquitto (see `common::mqtt`); takes about 15 s each.

mod common;

use common::mqtt::{mosquitto_or_skip, signal, site, Broker, Persistence, Reaped, Relay};
use common::{lines, BIN};
use std::io::Read;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::sync::Mutex;
use std::time::{Duration, Instant};

fn stderr_of(child: &mut Child) -> String {
    let mut err = String::new();
    if let Some(mut e) = child.stderr.take() {
        e.read_to_string(&mut err).unwrap();
    }
    err
}

/// One test at a time: each runs two sites in real time and restarts its broker.
static SERIAL: Mutex<()> = Mutex::new(());

/// What one run of the scenario left: each site's local log, its notes, and the collector's.
struct Outcome {
    want: Vec<Vec<String>>,
    site_notes: Vec<String>,
    collector_notes: String,
}

const NAMES: [&str; 2] = ["ridge-north", "ridge-south"];

/// Runs the scenario with a collector given `output` (its `--out`/`--db` flags) until
/// `collected(site)` holds as many lines as the site logged (or 30 s after the sites ended).
fn forgetful_run(
    dir: &Path,
    output: &[&str],
    collected: &dyn Fn(&str) -> Vec<String>,
) -> Option<Outcome> {
    let bin = mosquitto_or_skip()?;
    let _ = std::fs::remove_dir_all(dir);
    std::fs::create_dir_all(dir).unwrap();
    let mut broker = Broker::start(bin, dir, Persistence::Forgotten);
    let relay = Relay::start(broker.port);
    let mut collector = Reaped(
        Command::new(BIN)
            .args(["collect", &format!("mqtt://127.0.0.1:{}/wrenhollow/net", relay.port)])
            .args(output)
            .args(["--client-id", "resend-collector"])
            .stderr(Stdio::piped())
            .spawn()
            .unwrap(),
    );
    std::thread::sleep(Duration::from_millis(500));
    // The south site's spool is as small as allowed (segments of 8 kB, deleted once the
    // broker acknowledged them): what the broker drops is no longer spooled and is read back
    // from the local log. The north site answers from its spool.
    let small_spool: &[&str] = &["--spool-max-bytes", "64k"];
    let mut sites: Vec<(Reaped, Reaped, PathBuf)> = NAMES
        .iter()
        .zip([(1, &[][..]), (2, small_spool)])
        .map(|(n, (seed, extra))| site(n, dir, broker.port, (8, seed), extra))
        .map(|(demo, log, path)| (Reaped(demo), Reaped(log), path))
        .collect();

    // 3 s into the run the broker goes and comes back with nothing; the collector is away
    // for 2 s more.
    std::thread::sleep(Duration::from_secs(3));
    relay.cut();
    broker.stop();
    std::thread::sleep(Duration::from_millis(300));
    broker.run();
    std::thread::sleep(Duration::from_secs(2));
    relay.mend();

    let mut site_notes = Vec::new();
    for ((demo, logger, _), name) in sites.iter_mut().zip(NAMES) {
        demo.0.wait().unwrap();
        let err = stderr_of(&mut logger.0);
        assert!(logger.0.wait().unwrap().success(), "{name} log failed: {err}");
        site_notes.push(err);
    }
    let want: Vec<Vec<String>> = sites.iter().map(|s| lines(&s.2)).collect();
    assert!(want.iter().all(|w| w.len() > 60), "{:?}", want.iter().map(Vec::len));
    let deadline = Instant::now() + Duration::from_secs(30);
    while Instant::now() < deadline {
        let got: Vec<usize> = NAMES.iter().map(|n| collected(n).len()).collect();
        if got.iter().zip(&want).all(|(g, w)| *g >= w.len()) {
            break;
        }
        std::thread::sleep(Duration::from_millis(200));
    }
    signal(&collector.0, "TERM");
    let collector_notes = stderr_of(&mut collector.0);
    assert!(collector.0.wait().unwrap().success(), "collect: {collector_notes}");
    Some(Outcome { want, site_notes, collector_notes })
}

impl Outcome {
    /// Each site's records collected exactly once: `got` holds each line of its local log once,
    /// nothing else (resent records come late: the order may differ).
    fn each_record_once(&self, got: &[Vec<String>]) {
        for ((g, w), name) in got.iter().zip(&self.want).zip(NAMES) {
            eprintln!("{name}: {} records logged, {} collected", w.len(), g.len());
        }
        for (((g, w), name), notes) in got.iter().zip(&self.want).zip(NAMES).zip(&self.site_notes) {
            let mut g_sorted = g.clone();
            let mut w_sorted = w.clone();
            g_sorted.sort();
            w_sorted.sort();
            let err = &self.collector_notes;
            assert_eq!(g_sorted, w_sorted, "{name}: collected vs local log\n{err}\n{notes}");
        }
    }

    /// The broker really forgot (the collector lost it), nothing was given up on, and the
    /// holes were filled by the sites answering: from the spool (north) and from the local
    /// log (south).
    fn sites_were_asked_again(&self) {
        let err = &self.collector_notes;
        assert!(err.contains("lost the broker") || err.contains("cannot reach"), "{err}");
        assert!(!err.contains("never arrived"), "{err}");
        for (notes, name) in self.site_notes.iter().zip(NAMES) {
            let said = notes.lines().find(|l| l.contains("sent again"));
            eprintln!("{name}: {}", said.unwrap_or("not asked"));
            assert!(said.is_some(), "{name} was not asked to send again:\n{notes}\n{err}");
        }
        let south = &self.site_notes[1];
        assert!(!south.contains("(0 read from the local log)"), "{south}");
    }
}

#[test]
fn every_record_arrives_once_though_the_broker_forgets_everything() {
    let _one = SERIAL.lock().unwrap_or_else(|e| e.into_inner());
    let dir = std::env::temp_dir().join(format!("bw-net-resend-{}", std::process::id()));
    let out = dir.join("collected");
    let file_of = |n: &str| lines(&out.join(format!("{n}.jsonl")));
    let args = ["--out", out.to_str().unwrap()];
    let Some(o) = forgetful_run(&dir, &args, &file_of) else { return };
    let got: Vec<Vec<String>> = NAMES.iter().map(|n| file_of(n)).collect();
    o.each_record_once(&got);
    // `report` over the collected file (resent lines stored late) is `report` over the site's
    // own log.
    for name in NAMES {
        let report = |path: &PathBuf| {
            let o = Command::new(BIN).args(["report", "--json"]).arg(path).output().unwrap();
            assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
            o.stdout
        };
        let file = format!("{name}.jsonl");
        let same = report(&out.join(&file)) == report(&dir.join(&file));
        assert!(same, "{name}: report over the collected file differs from the local log's");
    }
    o.sites_were_asked_again();
    let _ = std::fs::remove_dir_all(&dir);
}

/// The records of `site` in the database, one line per stored row (none before it exists).
fn stored_lines(db: &Path, site: &str) -> Vec<String> {
    let Ok(c) =
        rusqlite::Connection::open_with_flags(db, rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY)
    else {
        return Vec::new();
    };
    let sql = "SELECT r.line FROM records r JOIN runs u ON u.id = r.run_id \
               JOIN sites s ON s.id = u.site_id WHERE s.name = ?1";
    let Ok(mut st) = c.prepare(sql) else { return Vec::new() };
    st.query_map([site], |r| r.get(0)).unwrap().map(Result::unwrap).collect()
}

#[test]
fn every_record_is_stored_once_in_the_database_though_the_broker_forgets_everything() {
    let _one = SERIAL.lock().unwrap_or_else(|e| e.into_inner());
    let dir = std::env::temp_dir().join(format!("bw-net-resend-db-{}", std::process::id()));
    let db = dir.join("net.db");
    let url = format!("sqlite:{}", db.display());
    let rows_of = |n: &str| stored_lines(&db, n);
    let Some(o) = forgetful_run(&dir, &["--db", &url], &rows_of) else { return };
    let got: Vec<Vec<String>> = NAMES.iter().map(|n| rows_of(n)).collect();
    o.each_record_once(&got);
    // Each (site, run, seq) once, as many as the sites logged (SQLite's own count).
    let c = rusqlite::Connection::open(&db).unwrap();
    let q = |sql: &str| -> i64 { c.query_row(sql, [], |r| r.get(0)).unwrap() };
    let logged: usize = o.want.iter().map(Vec::len).sum();
    assert_eq!(q("SELECT COUNT(*) FROM records") as usize, logged);
    let distinct = "SELECT COUNT(*) FROM (SELECT DISTINCT u.site_id, u.run, r.seq FROM records r \
                    JOIN runs u ON u.id = r.run_id)";
    assert_eq!(q(distinct) as usize, logged);
    o.sites_were_asked_again();
    let _ = std::fs::remove_dir_all(&dir);
}
