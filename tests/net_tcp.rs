//! IQ over TCP as an operator meets it: a receiver serving samples on a loopback socket whose
//! link goes down for a while. The truth is the schedule this test keeps: how many samples it
//! sent, and for how long (by its own monotonic clock) nothing was connected.

use bandwarden::source::SampleFormat;
use bandwarden::testkit::{keyed_band, Keyed};
use serde_json::Value;
use std::io::Write;
use std::net::{TcpListener, TcpStream};
use std::path::PathBuf;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

const BIN: &str = env!("CARGO_BIN_EXE_bandwarden");
const FS: f64 = 200e3;

/// `n` samples of a carrier in noise, as cf32_le bytes.
fn signal(n: usize, seed: u64) -> Vec<u8> {
    let on = |_: u64| true;
    let x = keyed_band(n, FS, 1e-4, &[Keyed { offset_hz: 20e3, level_dbfs: -30.0, on: &on }], seed);
    let mut bytes = Vec::new();
    SampleFormat::Cf32Le.encode(&x, &mut bytes);
    bytes
}

/// Sends samples paced at the sample rate in 10 ms chunks, as a receiver would.
fn send_paced(sock: &mut TcpStream, bytes: &[u8]) {
    let chunk = (FS / 100.0) as usize * 8;
    let start = Instant::now();
    for (i, c) in bytes.chunks(chunk).enumerate() {
        sock.write_all(c).unwrap();
        let due = Duration::from_secs_f64((i + 1) as f64 * 0.01);
        if let Some(wait) = due.checked_sub(start.elapsed()) {
            std::thread::sleep(wait);
        }
    }
}

fn parse(path: &PathBuf) -> Vec<Value> {
    std::fs::read_to_string(path)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).expect("one JSON object per line"))
        .collect()
}

fn terminate(child: &mut Child) {
    let pid = child.id().to_string();
    Command::new("kill").args(["-TERM", &pid]).status().unwrap();
    let status = child.wait().unwrap();
    assert!(status.success(), "log exits 0 after SIGTERM: {status:?}");
}

#[test]
fn an_outage_of_the_link_is_logged_as_its_length_in_samples() {
    let dir = std::env::temp_dir().join(format!("bw-net-tcp-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let out = dir.join("site.jsonl");
    let listener = TcpListener::bind("127.0.0.1:0").unwrap();
    let addr = format!("tcp://{}", listener.local_addr().unwrap());
    let mut child = Command::new(BIN)
        .args(["log", &addr, "--format", "cf32_le", "--rate", "200k", "--center", "100M"])
        .args(["--channel", "a=100.02M:10k", "--interval", "1s", "--fft", "512", "--threads", "1"])
        .args(["-o", out.to_str().unwrap()])
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let first = (0.6 * FS) as usize;
    let second = (0.8 * FS) as usize;
    // Made before the clock runs: making them takes longer than the resolution checked.
    let (one, two) = (signal(first, 1), signal(second, 2));
    let (mut a, _) = listener.accept().unwrap();
    send_paced(&mut a, &one);
    // Half a sample left over when the link goes: it is discarded and counted as lost.
    a.write_all(&[1, 2, 3, 4]).unwrap();
    a.flush().unwrap();
    drop(a);
    let down = Instant::now();
    // bandwarden reconnects at once (the kernel completes the connection from the backlog);
    // the link carries nothing until this side sends again.
    let (mut b, _) = listener.accept().unwrap();
    std::thread::sleep(Duration::from_millis(700).saturating_sub(down.elapsed()));
    let outage = down.elapsed().as_secs_f64();
    send_paced(&mut b, &two);
    std::thread::sleep(Duration::from_millis(300));
    terminate(&mut child);

    let recs = parse(&out);
    let dropped: Vec<&Value> = recs.iter().filter(|r| r["kind"] == "dropped").collect();
    assert_eq!(dropped.len(), 1, "one outage, one record: {dropped:?}");
    assert_eq!(dropped[0]["cause"], "disconnected");
    let lost = dropped[0]["dropped_samples"].as_u64().unwrap();
    // The outage by this test's clock, plus the incomplete sample. Resolution (documented in
    // source::tcp): noticing the closed link and the first new bytes, a few ms on loopback;
    // 20 ms allowed for a busy machine.
    let expected = outage * FS + 1.0;
    assert!(
        (lost as f64 - expected).abs() <= 0.02 * FS,
        "lost {lost} samples, outage {outage:.4} s = {expected:.0} samples"
    );
    assert_eq!(dropped[0]["t_start_s"].as_f64().unwrap(), first as f64 / FS);
    // Time stays exact: the stop record counts every sample sent plus every sample lost.
    let stop = recs.last().unwrap();
    assert_eq!(stop["kind"], "stop");
    assert_eq!(stop["iq_samples"].as_u64().unwrap(), (first + second) as u64 + lost);
    assert_eq!(stop["dropped_samples"].as_u64().unwrap(), lost);
    // The interval that held the outage says how much of its input was lost.
    let in_intervals: u64 = recs
        .iter()
        .filter(|r| r["kind"] == "interval")
        .map(|r| r["dropped_samples"].as_u64().unwrap())
        .sum();
    assert_eq!(in_intervals, lost);
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn a_listening_input_takes_one_sender_and_refuses_a_public_address_unless_asked() {
    let out = Command::new(BIN)
        .args(["log", "tcp-listen://0.0.0.0:0", "--format", "cu8", "--rate", "1M"])
        .args(["--channel", "a=0:10k", "-o", "/dev/null"])
        .output()
        .unwrap();
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("--listen-public"), "{err}");

    // Find a free loopback port, then let bandwarden listen there.
    let port = TcpListener::bind("127.0.0.1:0").unwrap().local_addr().unwrap().port();
    let dir = std::env::temp_dir().join(format!("bw-net-listen-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let log = dir.join("l.jsonl");
    let mut child = Command::new(BIN)
        .args(["log", &format!("tcp-listen://127.0.0.1:{port}"), "--format", "cf32_le"])
        .args(["--rate", "200k", "--channel", "a=20k:10k", "--interval", "1s", "--fft", "512"])
        .args(["-o", log.to_str().unwrap()])
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let deadline = Instant::now() + Duration::from_secs(10);
    let mut sock = loop {
        match TcpStream::connect(("127.0.0.1", port)) {
            Ok(s) => break s,
            Err(_) if Instant::now() < deadline => std::thread::sleep(Duration::from_millis(50)),
            Err(e) => panic!("bandwarden never listened on {port}: {e}"),
        }
    };
    let n = (0.5 * FS) as usize;
    send_paced(&mut sock, &signal(n, 3));
    std::thread::sleep(Duration::from_millis(300));
    terminate(&mut child);
    let recs = parse(&log);
    assert_eq!(recs[0]["source"], format!("tcp-listen://127.0.0.1:{port}"));
    let stop = recs.last().unwrap();
    assert_eq!(stop["iq_samples"].as_u64().unwrap(), n as u64);
    assert_eq!(stop["dropped_samples"], 0);
    let _ = std::fs::remove_dir_all(&dir);
}
