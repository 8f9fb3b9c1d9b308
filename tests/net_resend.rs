//! The broker that forgets: Mosquitto with `persistence false` is restarted 3 s into an 8 s run
//! of two sites, so whatever it held for the collector (its queue, even its subscription) is
//! gone. Records the broker acknowledged to a site but never delivered leave holes in `seq`;
//! the collector must ask each site for them again (`PREFIX/SITE/ask/resend`) and end with
//! every record of every site exactly once. The truth is each site's own local log: the
//! collected file must equal it line for line (MQTT 3.1.1 §4.3.2: QoS 1 is at-least-once
//! between one client and the broker only, so end-to-end delivery is the application's job).
//!
//! Needs Mosquitto (see `common::mqtt`); takes about 15 s.

mod common;

use common::mqtt::{mosquitto_or_skip, signal, ForgetfulBroker};
use common::{lines, BIN};
use std::io::Read;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

/// A site: the paced demo scene piped into `log --publish`.
fn site(name: &str, dir: &Path, port: u16, seconds: u32, seed: u32) -> (Child, Child, PathBuf) {
    let log = dir.join(format!("{name}.jsonl"));
    let mut demo = Command::new(BIN)
        .args(["demo", "-o", "-", "--rate", "1M", "--format", "cf32_le", "--realtime"])
        .args(["--seconds", &seconds.to_string(), "--seed", &seed.to_string()])
        .stdout(Stdio::piped())
        .spawn()
        .unwrap();
    let plan = concat!(env!("CARGO_MANIFEST_DIR"), "/recordings/wrenhollow-plan.toml");
    let logger = Command::new(BIN)
        .args(["log", "-", "--format", "cf32_le", "--rate", "1M", "--center", "433.5M"])
        .args(["--plan", plan, "--interval", "1s", "--threads", "1", "--site", name])
        .args(["--publish", &format!("mqtt://127.0.0.1:{port}/wrenhollow/net")])
        .args(["--publish-linger", "30s", "-o", log.to_str().unwrap()])
        .stdin(demo.stdout.take().unwrap())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    (demo, logger, log)
}

fn stderr_of(child: &mut Child) -> String {
    let mut err = String::new();
    if let Some(mut e) = child.stderr.take() {
        e.read_to_string(&mut err).unwrap();
    }
    err
}

#[test]
fn every_record_arrives_once_though_the_broker_forgets_everything() {
    let Some(bin) = mosquitto_or_skip() else { return };
    let dir = std::env::temp_dir().join(format!("bw-net-resend-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    let mut broker = ForgetfulBroker::start(bin, &dir);
    let out = dir.join("collected");
    let mut collector = Command::new(BIN)
        .args(["collect", &format!("mqtt://127.0.0.1:{}/wrenhollow/net", broker.port)])
        .args(["--out", out.to_str().unwrap(), "--client-id", "resend-collector"])
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    std::thread::sleep(Duration::from_millis(500));
    let names = ["ridge-north", "ridge-south"];
    let mut sites: Vec<(Child, Child, PathBuf)> =
        names.iter().zip([1, 2]).map(|(n, seed)| site(n, &dir, broker.port, 8, seed)).collect();

    // 3 s into the run the broker goes and comes back with nothing.
    std::thread::sleep(Duration::from_secs(3));
    broker.stop();
    std::thread::sleep(Duration::from_millis(300));
    broker.run();

    let mut site_notes = Vec::new();
    for ((demo, logger, _), name) in sites.iter_mut().zip(names) {
        demo.wait().unwrap();
        let err = stderr_of(logger);
        assert!(logger.wait().unwrap().success(), "{name} log failed: {err}");
        site_notes.push(err);
    }
    let want: Vec<Vec<String>> = sites.iter().map(|s| lines(&s.2)).collect();
    assert!(want.iter().all(|w| w.len() > 60), "{:?}", want.iter().map(Vec::len));
    let deadline = Instant::now() + Duration::from_secs(30);
    let got = loop {
        let got: Vec<Vec<String>> =
            names.iter().map(|n| lines(&out.join(format!("{n}.jsonl")))).collect();
        if got.iter().zip(&want).all(|(g, w)| g.len() >= w.len()) || Instant::now() > deadline {
            break got;
        }
        std::thread::sleep(Duration::from_millis(200));
    };
    signal(&collector, "TERM");
    let err = stderr_of(&mut collector);
    assert!(collector.wait().unwrap().success(), "collect: {err}");
    for ((g, w), name) in got.iter().zip(&want).zip(names) {
        eprintln!("{name}: {} records logged, {} collected", w.len(), g.len());
    }
    for (((g, w), name), notes) in got.iter().zip(&want).zip(names).zip(&site_notes) {
        // Resent records come late, so the collected file is the local log's lines in another
        // order: each line of the log once, nothing else.
        let mut g_sorted = g.clone();
        let mut w_sorted = w.clone();
        g_sorted.sort();
        w_sorted.sort();
        assert_eq!(g_sorted, w_sorted, "{name}: collected vs local log\n{err}\n{notes}");
    }
    // The broker really forgot: the collector lost it, and records were asked for again.
    assert!(err.contains("lost the broker") || err.contains("cannot reach"), "{err}");
    assert!(!err.contains("never arrived"), "{err}");
    // …and the holes were filled by the sites answering, not by luck.
    let resent: Vec<&String> = site_notes.iter().filter(|n| n.contains("sent again")).collect();
    assert!(!resent.is_empty(), "no site was asked to send again:\n{site_notes:?}\n{err}");
    for n in site_notes.iter().flat_map(|n| n.lines()).filter(|l| l.contains("sent again")) {
        eprintln!("{n}");
    }
    let _ = std::fs::remove_dir_all(&dir);
}
