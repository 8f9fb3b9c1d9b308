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
//! Needs Mosquitto (see `common::mqtt`); takes about 15 s.

mod common;

use common::mqtt::{mosquitto_or_skip, signal, site, ForgetfulBroker, Reaped, Relay};
use common::{lines, BIN};
use std::io::Read;
use std::path::PathBuf;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

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
    let relay = Relay::start(broker.port);
    let mut collector = Reaped(
        Command::new(BIN)
            .args(["collect", &format!("mqtt://127.0.0.1:{}/wrenhollow/net", relay.port)])
            .args(["--out", out.to_str().unwrap(), "--client-id", "resend-collector"])
            .stderr(Stdio::piped())
            .spawn()
            .unwrap(),
    );
    std::thread::sleep(Duration::from_millis(500));
    let names = ["ridge-north", "ridge-south"];
    // The south site's spool is as small as allowed (segments of 8 kB, deleted once the
    // broker acknowledged them): what the broker drops is no longer spooled and is read back
    // from the local log. The north site answers from its spool.
    let small_spool: &[&str] = &["--spool-max-bytes", "64k"];
    let mut sites: Vec<(Reaped, Reaped, PathBuf)> = names
        .iter()
        .zip([(1, &[][..]), (2, small_spool)])
        .map(|(n, (seed, extra))| site(n, &dir, broker.port, (8, seed), extra))
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
    for ((demo, logger, _), name) in sites.iter_mut().zip(names) {
        demo.0.wait().unwrap();
        let err = stderr_of(&mut logger.0);
        assert!(logger.0.wait().unwrap().success(), "{name} log failed: {err}");
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
    signal(&collector.0, "TERM");
    let err = stderr_of(&mut collector.0);
    assert!(collector.0.wait().unwrap().success(), "collect: {err}");
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
    // `report` over the collected file (resent lines stored late) is `report` over the site's
    // own log.
    for name in names {
        let report = |path: &PathBuf| {
            let o = Command::new(BIN).args(["report", "--json"]).arg(path).output().unwrap();
            assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
            o.stdout
        };
        let file = format!("{name}.jsonl");
        let same = report(&out.join(&file)) == report(&dir.join(&file));
        assert!(same, "{name}: report over the collected file differs from the local log's");
    }
    // The broker really forgot: the collector lost it, and records were asked for again.
    assert!(err.contains("lost the broker") || err.contains("cannot reach"), "{err}");
    assert!(!err.contains("never arrived"), "{err}");
    // …and the holes were filled by the sites answering, from the spool (north) and from the
    // local log (south).
    for (notes, name) in site_notes.iter().zip(names) {
        let said = notes.lines().find(|l| l.contains("sent again"));
        eprintln!("{name}: {}", said.unwrap_or("not asked"));
        assert!(said.is_some(), "{name} was not asked to send again:\n{notes}\n{err}");
    }
    assert!(!site_notes[1].contains("(0 read from the local log)"), "{}", site_notes[1]);
    let _ = std::fs::remove_dir_all(&dir);
}
