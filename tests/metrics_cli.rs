//! `--metrics` at the command line: bad addresses and busy ports are refused with a clear
//! error and a non-zero exit, and `collect --metrics` serves its families (no broker needed:
//! the collector waits for one and serves meanwhile).

mod common;

use common::{free_port, run, scratch, stderr, BIN};
use std::io::{BufRead, BufReader, Read, Write};
use std::net::TcpStream;
use std::process::{Command, Stdio};
use std::time::Duration;

const PLAN: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/recordings/wrenhollow-plan.toml");
const DEMO: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/recordings/wrenhollow-demo.sigmf-meta");

#[test]
fn log_refuses_a_public_or_malformed_address_and_a_busy_port() {
    let out = scratch("metrics-cli", "never.jsonl");
    let o = out.to_str().unwrap();
    let public = run(&["log", DEMO, "--plan", PLAN, "-o", o, "--metrics", "0.0.0.0:9477"]);
    assert_eq!(public.status.code(), Some(1));
    let e = stderr(&public);
    assert!(e.contains("beyond this machine") && e.contains("--listen-public"), "{e}");
    let bad = run(&["log", DEMO, "--plan", PLAN, "-o", o, "--metrics", "9477"]);
    assert_eq!(bad.status.code(), Some(1));
    assert!(stderr(&bad).contains("is not ADDR:PORT"), "{}", stderr(&bad));
    // A port another program holds: named in the error, and no log written.
    let held = std::net::TcpListener::bind("127.0.0.1:0").unwrap();
    let addr = held.local_addr().unwrap().to_string();
    let busy = run(&["log", DEMO, "--plan", PLAN, "-o", o, "--metrics", &addr]);
    assert_eq!(busy.status.code(), Some(1));
    assert!(
        stderr(&busy).contains(&format!("cannot serve the metrics on {addr}")),
        "{}",
        stderr(&busy)
    );
    assert!(!out.exists(), "nothing is written when the metrics cannot be served");
}

#[test]
fn collect_needs_metrics_for_listen_public_and_serves_its_families() {
    let dir = scratch("metrics-cli", "collected");
    let d = dir.to_str().unwrap();
    let broker = format!("mqtt://127.0.0.1:{}/wrenhollow/net", free_port());
    let alone = run(&["collect", &broker, "--out", d, "--listen-public"]);
    assert_eq!(alone.status.code(), Some(1));
    assert!(stderr(&alone).contains("--listen-public is for --metrics"), "{}", stderr(&alone));

    let mut collector = Command::new(BIN)
        .args(["collect", &broker, "--out", d, "--metrics", "127.0.0.1:0"])
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut lines = BufReader::new(collector.stderr.take().unwrap()).lines();
    let port: u16 = loop {
        let line = lines.next().expect("collect says where it serves").unwrap();
        if let Some((_, rest)) = line.split_once("metrics at http://127.0.0.1:") {
            break rest.trim_end_matches("/metrics").parse().unwrap();
        }
    };
    let mut s = TcpStream::connect(("127.0.0.1", port)).unwrap();
    s.set_read_timeout(Some(Duration::from_secs(5))).unwrap();
    s.write_all(b"GET /metrics HTTP/1.0\r\n\r\n").unwrap();
    let mut text = String::new();
    s.read_to_string(&mut text).unwrap();
    Command::new("kill").args(["-TERM", &collector.id().to_string()]).status().unwrap();
    let status = collector.wait().unwrap();
    assert!(text.starts_with("HTTP/1.0 200"), "{text}");
    // No site has sent anything: none seen, and the per-site families have no series yet.
    assert!(text.contains("\nbandwarden_collect_sites 0\n"), "{text}");
    assert!(text.contains("\nbandwarden_collect_malformed_messages_total 0\n"), "{text}");
    assert!(status.success(), "collect ends cleanly on SIGTERM: {status:?}");
}
