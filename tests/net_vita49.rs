//! VITA 49 over UDP as a monitoring receiver sends it: a context packet (RF reference, sample
//! rate, reference level, payload format) and signal data packets of 16-bit complex samples
//! with UTC + sample-count time stamps. The packets are assembled here from the standard's
//! layout (ANSI/VITA-49.0 §6.1 header, §7.1 context fields; radix points at bit 20 for
//! frequencies, bit 7 for levels). The truth is this test's own schedule: which packets it
//! left out, repeated, swapped or spoiled.

mod common;

use bandwarden::source::SampleFormat;
use bandwarden::testkit::{keyed_band, Keyed};
use serde_json::Value;
use std::net::UdpSocket;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

const FS: f64 = 200e3;
const PER_PACKET: usize = 1000;
const PACKETS: usize = 200;
const STREAM: u32 = 0x5157;

fn words(w: &[u32]) -> Vec<u8> {
    w.iter().flat_map(|x| x.to_be_bytes()).collect()
}

fn radix20(hz: f64) -> [u32; 2] {
    let v = (hz * (1u64 << 20) as f64) as i64 as u64;
    [(v >> 32) as u32, v as u32]
}

/// A context packet: CIF0 bits 27 (RF reference), 24 (reference level), 21 (sample rate),
/// 15 (payload format: complex Cartesian, signed fixed point, 16-bit items in 16-bit fields).
fn context(count: u32) -> Vec<u8> {
    context_at(count, 145.5e6)
}

/// A context packet as [`context`], tuned to `centre_hz`.
fn context_at(count: u32, centre_hz: f64) -> Vec<u8> {
    let cif0 = (1 << 27) | (1 << 24) | (1 << 21) | (1 << 15);
    let mut w = vec![0u32, STREAM, cif0];
    w.extend(radix20(centre_hz));
    w.push((-20.0f64 * 128.0) as i16 as u16 as u32);
    w.extend(radix20(FS));
    let pf: u64 = (1 << 61) | (15 << 38) | (15 << 32);
    w.extend([(pf >> 32) as u32, pf as u32]);
    w[0] = (4 << 28) | ((count & 0xf) << 16) | w.len() as u32;
    words(&w)
}

/// Data packet `k`: type 1 with a trailer, TSI UTC, TSF sample count.
fn data(k: usize, samples: &[u8]) -> Vec<u8> {
    let first = (k * PER_PACKET) as u64;
    let secs = 1_800_000_000 + (first / FS as u64) as u32;
    let frac = first % FS as u64;
    let mut w = vec![0u32, STREAM, secs, (frac >> 32) as u32, frac as u32];
    let payload = &samples[k * PER_PACKET * 4..(k + 1) * PER_PACKET * 4];
    let words_len = w.len() + payload.len() / 4 + 1;
    w[0] = (1 << 28)
        | (1 << 26)
        | (1 << 22)
        | (1 << 20)
        | (((k as u32) & 0xf) << 16)
        | words_len as u32;
    let mut b = words(&w);
    b.extend_from_slice(payload);
    b.extend_from_slice(&0u32.to_be_bytes());
    b
}

#[test]
fn lost_reordered_and_repeated_packets_are_counted_exactly() {
    let out = common::scratch("vita49", "site.jsonl");
    let port = free_udp_port();
    let mut child = spawn_log(port, &out);
    let samples = carrier(PACKETS, 3);
    let (tx, to) = announce(port);
    let lost: Vec<usize> = std::iter::once(50).chain(100..120).collect();
    let mut order: Vec<usize> = (0..PACKETS).filter(|k| !lost.contains(k)).collect();
    let at = order.iter().position(|&k| k == 150).unwrap();
    order.swap(at, at + 1);
    let start = Instant::now();
    for (i, &k) in order.iter().enumerate() {
        tx.send_to(&data(k, &samples), &to).unwrap();
        if k == 160 {
            tx.send_to(&data(k, &samples), &to).unwrap(); // a duplicate
            tx.send_to(&[0xde, 0xad, 0xbe], &to).unwrap(); // not a packet
        }
        let due = Duration::from_secs_f64((i + 1) as f64 * PER_PACKET as f64 / FS);
        if let Some(wait) = due.checked_sub(start.elapsed()) {
            std::thread::sleep(wait);
        }
    }
    std::thread::sleep(Duration::from_millis(600));
    Command::new("kill").args(["-TERM", &child.id().to_string()]).status().unwrap();
    let status = child.wait().unwrap();
    assert!(status.success(), "log exits 0 after SIGTERM: {status:?}");

    let recs: Vec<Value> = std::fs::read_to_string(&out)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    let dropped: Vec<&Value> = recs.iter().filter(|r| r["kind"] == "dropped").collect();
    let by_cause = |c: &str| -> u64 {
        dropped
            .iter()
            .filter(|r| r["cause"] == c)
            .map(|r| r["dropped_samples"].as_u64().unwrap())
            .sum()
    };
    // 21 packets never sent: one alone, then 20 in a row (more than the 4-bit count's 16).
    assert_eq!(by_cause("packet_lost"), (lost.len() * PER_PACKET) as u64, "{dropped:?}");
    assert_eq!(by_cause("behind"), 0, "{dropped:?}");
    let first_gap = dropped.iter().find(|r| r["cause"] == "packet_lost").unwrap();
    assert_eq!(first_gap["t_start_s"].as_f64().unwrap(), (50 * PER_PACKET) as f64 / FS);
    let stop = recs.last().unwrap();
    assert_eq!(stop["kind"], "stop");
    assert_eq!(stop["iq_samples"].as_u64().unwrap(), (PACKETS * PER_PACKET) as u64);
    // The centre came from the context: the channel at 145.52 MHz holds the carrier.
    let start_rec = &recs[0];
    assert_eq!(start_rec["center_hz"].as_f64().unwrap(), 145.5e6, "{start_rec}");
}

/// A sender that stops well within `--learn` (a burst of 0.1 s of stream, sent at once) and a
/// stop signal 0.6 s later: the read-ahead took the pause as the end of the stream's first part
/// (quiet for 0.25 s), so what was held is measured and logged, every sample of it, and the run
/// ends cleanly on the signal. Without that it ended before its start with nothing logged.
#[test]
fn a_short_burst_then_a_stop_signal_is_measured_not_lost_in_the_read_ahead() {
    let out = common::scratch("vita49-burst", "site.jsonl");
    let port = free_udp_port();
    let mut child = spawn_log(port, &out);
    let burst = 20;
    let samples = carrier(burst, 5);
    let (tx, to) = announce(port);
    for k in 0..burst {
        tx.send_to(&data(k, &samples), &to).unwrap();
    }
    std::thread::sleep(Duration::from_millis(600));
    Command::new("kill").args(["-TERM", &child.id().to_string()]).status().unwrap();
    let status = child.wait().unwrap();
    assert!(status.success(), "log exits 0 after SIGTERM: {status:?}");
    let recs = records(&out);
    let stop = recs.last().unwrap();
    assert_eq!(stop["kind"], "stop", "{recs:?}");
    assert_eq!(stop["iq_samples"].as_u64().unwrap(), (burst * PER_PACKET) as u64, "{stop}");
    assert_eq!(stop["dropped_samples"].as_u64().unwrap(), 0, "{stop}");
    assert!(recs.iter().any(|r| r["kind"] == "interval" && r["channel"] == "a"), "{recs:?}");
}

#[test]
fn a_public_address_needs_listen_public_and_a_silent_port_says_what_it_waited_for() {
    let o = common::run(&["measure", "vita49://0.0.0.0:0"]);
    let err = common::stderr(&o);
    assert!(!o.status.success() && err.contains("--listen-public"), "{err}");
    let o = common::run(&["measure", "vita49://127.0.0.1:notaport"]);
    assert!(!o.status.success() && common::stderr(&o).contains("vita49://127.0.0.1:4991"));
}

/// `log` on `vita49://` at a free port, writing to `out`.
fn spawn_log(port: u16, out: &std::path::Path) -> std::process::Child {
    spawn_log_with(port, out, &[])
}

/// [`spawn_log`] with `extra` flags.
fn spawn_log_with(port: u16, out: &std::path::Path, extra: &[&str]) -> std::process::Child {
    Command::new(env!("CARGO_BIN_EXE_bandwarden"))
        .args(["log", &format!("vita49://127.0.0.1:{port}"), "--channel", "a=145.52M:10k"])
        .args(["--interval", "1s", "--fft", "512", "--threads", "1", "-o", out.to_str().unwrap()])
        .args(extra)
        .stderr(Stdio::piped())
        .spawn()
        .unwrap()
}

/// `packets` packets' worth of a −30 dBFS carrier 20 kHz above the centre in noise, ci16_be.
fn carrier(packets: usize, seed: u64) -> Vec<u8> {
    let on = |_: u64| true;
    let tone = [Keyed { offset_hz: 20e3, level_dbfs: -30.0, on: &on }];
    let x = keyed_band(packets * PER_PACKET, FS, 1e-4, &tone, seed);
    let mut samples = Vec::new();
    SampleFormat::Ci16Be.encode(&x, &mut samples);
    samples
}

/// A sender and where it sends, after a second of context packets (until bandwarden has
/// surely bound its port).
fn announce(port: u16) -> (UdpSocket, String) {
    announce_with(port, context)
}

/// As [`announce`], with the context packets `context(count)` makes.
fn announce_with(port: u16, context: impl Fn(u32) -> Vec<u8>) -> (UdpSocket, String) {
    let tx = UdpSocket::bind("127.0.0.1:0").unwrap();
    let to = format!("127.0.0.1:{port}");
    for i in 0..10 {
        let _ = tx.send_to(&context(i), &to);
        std::thread::sleep(Duration::from_millis(100));
    }
    (tx, to)
}

fn free_udp_port() -> u16 {
    UdpSocket::bind("127.0.0.1:0").unwrap().local_addr().unwrap().port()
}

#[test]
fn a_retune_mid_stream_ends_the_input_after_the_samples_before_it() {
    let out = common::scratch("vita49", "retune.jsonl");
    let port = free_udp_port();
    // Learning off: a retune is then an end, as for a stream that retunes after --learn.
    let child = spawn_log_with(port, &out, &["--learn", "0"]);
    let samples = carrier(80, 4);
    let (tx, to) = announce(port);
    // 50 packets at 145.5 MHz, the same context repeated on the way (no change), then the
    // receiver moves to 146.5 MHz and sends 30 more.
    for k in 0..80 {
        if k == 25 {
            tx.send_to(&context(11), &to).unwrap();
        }
        if k == 50 {
            tx.send_to(&context_at(12, 146.5e6), &to).unwrap();
        }
        tx.send_to(&data(k, &samples), &to).unwrap();
        std::thread::sleep(Duration::from_secs_f64(PER_PACKET as f64 / FS));
    }
    let o = child.wait_with_output().unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(
        err.contains("changed its centre from 145500000 to 146500000 Hz at sample 50000"),
        "{err}"
    );
    assert!(err.contains("give --hop-plan FILE"), "the way to stitch it is named: {err}");
    let recs: Vec<Value> = std::fs::read_to_string(&out)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    let stop = recs.last().unwrap();
    assert_eq!(stop["kind"], "stop", "{recs:?}");
    assert_eq!(stop["reason"], "input_error");
    // Every sample from before the change was measured, none from after it.
    assert_eq!(stop["iq_samples"].as_u64().unwrap(), 50 * PER_PACKET as u64, "{stop}");
}

#[test]
fn a_signal_while_waiting_for_the_context_is_an_orderly_stop() {
    for signal in ["-TERM", "-HUP", "-INT"] {
        let out = common::scratch("vita49", "silent.jsonl");
        let child = spawn_log(free_udp_port(), &out);
        std::thread::sleep(Duration::from_millis(500));
        Command::new("kill").args([signal, &child.id().to_string()]).status().unwrap();
        let t0 = Instant::now();
        let o = child.wait_with_output().unwrap();
        let err = String::from_utf8_lossy(&o.stderr);
        // Before: killed by the signal's default action (exit 129 for SIGHUP).
        assert_eq!(o.status.code(), Some(0), "{signal}: {err}");
        assert!(err.contains("while waiting for the first context packet"), "{signal}: {err}");
        assert!(t0.elapsed() < Duration::from_secs(3), "{signal}: it waited on");
    }
}

/// Runs bandwarden with `args` (the subcommand first) on `vita49://` at a free port against
/// `packets` packets of the −30 dBFS carrier, after the context (reference level −20 dBm).
fn run_against_stream(args: &[&str], packets: usize) -> std::process::Output {
    let port = free_udp_port();
    let child = Command::new(env!("CARGO_BIN_EXE_bandwarden"))
        .arg(args[0])
        .arg(format!("vita49://127.0.0.1:{port}"))
        .args(&args[1..])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let samples = carrier(packets, 5);
    let (tx, to) = announce(port);
    for k in 0..packets {
        let _ = tx.send_to(&data(k, &samples), &to);
        std::thread::sleep(Duration::from_secs_f64(PER_PACKET as f64 / FS));
    }
    child.wait_with_output().unwrap()
}

const MEASURE: [&str; 10] = [
    "measure",
    "--json",
    "--seconds",
    "0.5",
    "--channel",
    "a=145.52M:10k",
    "--threads",
    "1",
    "--fft",
    "1024",
];

#[test]
fn the_reference_level_turns_levels_into_dbm() {
    // VITA-49.0 §7.1.5.9 (from memory): the reference level is the dBm at the reference point
    // that 0 dBFS stands for, so dBm = dBFS + reference level: a −30 dBFS carrier under a
    // −20 dBm reference level is −50 dBm. The carrier fills the 10 kHz channel; the noise in
    // it (1e-4 over 200 kHz, −53 dBFS in 10 kHz) adds 0.02 dB.
    let o = run_against_stream(&MEASURE, 120);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{err}");
    assert!(err.contains("levels in dBm from the stream's VITA 49 reference level"), "{err}");
    let v: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["calibration"], "vita49 reference level", "{v}");
    assert_eq!(v["level_offset_db"].as_f64(), Some(-20.0), "{v}");
    let power = v["channels"][0]["power_dbm"].as_f64().unwrap();
    assert!((power - -50.0).abs() < 0.1, "{power} dBm, not -50");

    // `log`: the start record names the calibration, each interval gives dBm.
    let out = common::scratch("vita49", "reflevel.jsonl");
    let log = [
        "log",
        "--seconds",
        "0.5",
        "--interval",
        "0.25s",
        "--channel",
        "a=145.52M:10k",
        "--fft",
        "512",
        "--threads",
        "1",
        "-o",
        out.to_str().unwrap(),
    ];
    let o = run_against_stream(&log, 120);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let recs: Vec<Value> = std::fs::read_to_string(&out)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect();
    assert_eq!(recs[0]["calibration"], "vita49 reference level", "{}", recs[0]);
    // A stream at one centre, read ahead for a retune that never came: no panorama.
    assert!(recs[0]["panorama"].is_null(), "{}", recs[0]);
    assert_eq!(recs[0]["level_offset_db"].as_f64(), Some(-20.0));
    let intervals: Vec<&Value> = recs.iter().filter(|r| r["kind"] == "interval").collect();
    assert!(!intervals.is_empty(), "{recs:?}");
    for i in intervals {
        let mean = i["mean_dbm"].as_f64().unwrap();
        assert!((mean - -50.0).abs() < 0.1, "{mean} dBm, not -50: {i}");
    }
}

#[test]
fn ref_offset_wins_over_the_stream_reference_level() {
    let o = run_against_stream(&[&MEASURE[..], &["--ref-offset", "-7"]].concat(), 120);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{err}");
    assert!(err.contains("not from the stream's reference level of -20.00 dBm"), "{err}");
    let v: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["calibration"], "--ref-offset -7", "{v}");
    let power = v["channels"][0]["power_dbm"].as_f64().unwrap();
    assert!((power - -37.0).abs() < 0.1, "{power} dBm, not -37");
}

/// A Wrenhollow Ridge sweep: four steps 160 kHz apart, the receiver's bandwidth 160 kHz
/// (80 % of the rate), so the steps' usable bands tile 144.92 .. 145.56 MHz without a hole.
const SWEEP: [f64; 4] = [145.0e6, 145.16e6, 145.32e6, 145.48e6];
/// Packets per dwell (50 ms) and packets of settling at its start (5 ms).
const DWELL_PACKETS: usize = 10;
/// Tones (absolute Hz, dBFS): one inside step 0, one 1.5 kHz inside step 2's usable band (its
/// window skirt falls across the boundary into step 1's bins).
const SWEEP_TONES: [(f64, f64); 2] = [(145.05e6, -30.0), (145.2415e6, -40.0)];
/// A strong spur in the first packet (the settling time) of every dwell that sees it.
const SWEEP_SPUR_HZ: f64 = 145.3e6;

/// A context packet of the sweep: CIF0 bits 29 (bandwidth), 27 (RF reference), 21 (sample
/// rate), 15 (payload format), in the standard's field order (highest bit first).
fn sweep_context(count: u32, centre_hz: f64) -> Vec<u8> {
    let cif0 = (1 << 29) | (1 << 27) | (1 << 21) | (1 << 15);
    let mut w = vec![0u32, STREAM, cif0];
    w.extend(radix20(0.8 * FS));
    w.extend(radix20(centre_hz));
    w.extend(radix20(FS));
    let pf: u64 = (1 << 61) | (15 << 38) | (15 << 32);
    w.extend([(pf >> 32) as u32, pf as u32]);
    w[0] = (4 << 28) | ((count & 0xf) << 16) | w.len() as u32;
    words(&w)
}

/// `sweeps` sweeps as ci16_be bytes: each dwell holds the tones inside its receiver's span at
/// their offset from its centre, and the spur in its settling time.
fn sweep_samples(sweeps: usize) -> Vec<u8> {
    let mut bytes = Vec::new();
    for s in 0..sweeps {
        for (k, &c) in SWEEP.iter().enumerate() {
            let n = DWELL_PACKETS * PER_PACKET;
            let spur = (SWEEP_SPUR_HZ, PER_PACKET as u64);
            let x = common::dwell(c, FS, n, &SWEEP_TONES, spur, (s * 4 + k) as u64);
            SampleFormat::Ci16Be.encode(&x, &mut bytes);
        }
    }
    bytes
}

#[test]
fn a_four_step_sweep_over_udp_is_one_panorama_with_both_tones_right() {
    let dir = common::scratch("vita49", "sweep.txt");
    let plan = dir.to_str().unwrap().to_string();
    let lines: Vec<String> = SWEEP.iter().map(|c| format!("{}M 50ms", c / 1e6)).collect();
    std::fs::write(&plan, lines.join("\n")).unwrap();
    let port = free_udp_port();
    let child = Command::new(env!("CARGO_BIN_EXE_bandwarden"))
        .args(["measure", &format!("vita49://127.0.0.1:{port}"), "--json", "--fft", "1000"])
        .args(["--hop-plan", &plan, "--settle", "5ms", "--seconds", "0.4", "--threads", "1"])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let samples = sweep_samples(2);
    let (tx, to) = announce_with(port, |i| sweep_context(i, SWEEP[0]));
    for k in 0..2 * SWEEP.len() * DWELL_PACKETS {
        if k % DWELL_PACKETS == 0 {
            // The receiver says where it is before the first packet there, as a sender does.
            let centre = SWEEP[(k / DWELL_PACKETS) % SWEEP.len()];
            tx.send_to(&sweep_context(10 + k as u32, centre), &to).unwrap();
        }
        tx.send_to(&data(k, &samples), &to).unwrap();
        std::thread::sleep(Duration::from_secs_f64(PER_PACKET as f64 / FS));
    }
    let o = child.wait_with_output().unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{err}");
    let v: Value = serde_json::from_slice(&o.stdout).unwrap();
    // The context's 160 kHz bandwidth is each step's usable band: 4 × 160 kHz = 640 kHz of
    // panorama, 144.92 .. 145.56 MHz, centred at 145.24 MHz.
    assert_eq!(v["panorama_span_hz"].as_f64(), Some(640e3), "{v}");
    assert_eq!(v["center_hz"].as_f64(), Some(145.24e6), "{v}");
    // Parseval: a complex tone A·e^{jωn} has power A², so each reads its stated dBFS, at its
    // own frequency within one bin (200 Hz); the spur sent only while the receiver settled was
    // skipped, so nothing else stands out.
    common::assert_tones(&v, &SWEEP_TONES, 200.0, "VITA 49 sweep");
}

/// `sweeps` sweeps of `steps` (centre, packets a dwell) as ci16_be bytes, built as
/// [`sweep_samples`] builds the even sweep.
fn steps_samples(steps: &[(f64, usize)], sweeps: usize) -> Vec<u8> {
    let mut bytes = Vec::new();
    for s in 0..sweeps {
        for (k, &(c, packets)) in steps.iter().enumerate() {
            let spur = (SWEEP_SPUR_HZ, PER_PACKET as u64);
            let seed = (s * steps.len() + k) as u64;
            let x = common::dwell(c, FS, packets * PER_PACKET, &SWEEP_TONES, spur, seed);
            SampleFormat::Ci16Be.encode(&x, &mut bytes);
        }
    }
    bytes
}

/// Sends `sweeps` sweeps of `steps` to bandwarden on `port` at the stream's rate, a context at
/// every dwell's start, after announcing the first centre; then the datagrams of `after`.
fn send_steps(port: u16, steps: &[(f64, usize)], sweeps: usize, after: &[Vec<u8>]) {
    let samples = steps_samples(steps, sweeps);
    let (tx, to) = announce_with(port, |i| sweep_context(i, steps[0].0));
    let mut k = 0;
    for _ in 0..sweeps {
        for &(centre, packets) in steps {
            tx.send_to(&sweep_context(10 + k as u32, centre), &to).unwrap();
            for _ in 0..packets {
                tx.send_to(&data(k, &samples), &to).unwrap();
                std::thread::sleep(Duration::from_secs_f64(PER_PACKET as f64 / FS));
                k += 1;
            }
        }
    }
    for d in after {
        tx.send_to(d, &to).unwrap();
    }
}

/// `command` on `vita49://` at a free port with `args`, fed `sweeps` sweeps of `steps`, then
/// `after`.
fn on_steps(
    command: &str,
    args: &[&str],
    steps: &[(f64, usize)],
    sweeps: usize,
    after: &[Vec<u8>],
) -> std::process::Output {
    let port = free_udp_port();
    let child = Command::new(env!("CARGO_BIN_EXE_bandwarden"))
        .args([command, &format!("vita49://127.0.0.1:{port}")])
        .args(args)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    send_steps(port, steps, sweeps, after);
    child.wait_with_output().unwrap()
}

/// The log at `out`, one JSON value a record.
fn records(out: &std::path::Path) -> Vec<Value> {
    std::fs::read_to_string(out)
        .unwrap()
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect()
}

#[test]
fn a_four_step_sweep_without_a_hop_plan_is_learnt_from_its_first_sweep() {
    let steps: Vec<(f64, usize)> = SWEEP.iter().map(|&c| (c, DWELL_PACKETS)).collect();
    let args = ["--json", "--fft", "1000", "--settle", "5ms", "--seconds", "0.4", "--threads", "1"];
    let o = on_steps("measure", &args, &steps, 2, &[]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{err}");
    // Read ahead until the first packet back at the first centre.
    assert!(err.contains("its sweep was learnt from the first 0.205 s"), "{err}");
    assert!(err.contains("145.480000 MHz 50.0 ms"), "{err}");
    let v: Value = serde_json::from_slice(&o.stdout).unwrap();
    // As with the plan (the test above): 4 × 160 kHz usable = 640 kHz centred at 145.24 MHz.
    assert_eq!(v["panorama_span_hz"].as_f64(), Some(640e3), "{v}");
    assert_eq!(v["center_hz"].as_f64(), Some(145.24e6), "{v}");
    // The first sweep, held while it was learnt, is measured too: both sweeps' samples.
    assert_eq!(v["samples"].as_u64(), Some(80_000), "{v}");
    // Parseval: each tone reads its stated dBFS within 0.5 dB, at its frequency within one
    // bin (200 Hz); the spur in the settling time stays out.
    common::assert_tones(&v, &SWEEP_TONES, 200.0, "learnt VITA 49 sweep");
}

#[test]
fn a_learnt_sweep_keeps_unequal_dwells_in_the_order_visited() {
    // Unsorted centres, dwells of 30, 50, 70 and 40 ms.
    let steps = [(145.16e6, 6), (145.0e6, 10), (145.48e6, 14), (145.32e6, 8)];
    let out = common::scratch("vita49", "learnt.jsonl");
    let o = out.to_str().unwrap();
    // A channel inside the 145.16 MHz step's usable band only (145.08 .. 145.24 MHz).
    let args = ["--channel", "b=145.12M:10k", "--interval", "1s", "--fft", "500", "--settle"];
    let args = [&args[..], &["5ms", "--seconds", "0.38", "--threads", "1", "-o", o]].concat();
    let run = on_steps("log", &args, &steps, 2, &[]);
    assert!(run.status.success(), "{}", String::from_utf8_lossy(&run.stderr));
    let recs = records(&out);
    let pano = &recs[0]["panorama"];
    assert_eq!(pano["dwell_s"], serde_json::json!([0.03, 0.05, 0.07, 0.04]), "{pano}");
    assert_eq!(pano["timeline"], "stream", "{pano}");
    let centres: Vec<f64> =
        pano["step_centers_hz"].as_array().unwrap().iter().map(|c| c.as_f64().unwrap()).collect();
    assert_eq!(centres, SWEEP, "the grid's centres, lowest first: {pano}");
    let stop = recs.last().unwrap();
    assert_eq!(stop["iq_samples"].as_u64(), Some(2 * 38 * PER_PACKET as u64), "{stop}");
    // ITU-R Report SM.2256 (from memory): observation time is the time the channel was in
    // view: its step's 30 ms dwell less 5 ms settling, in both sweeps (the first one learnt).
    let b = recs.iter().find(|r| r["kind"] == "interval" && r["channel"] == "b").unwrap();
    assert!((b["observation_s"].as_f64().unwrap() - 0.05).abs() < 1e-9, "{b}");
}

#[test]
fn input_ending_mid_first_sweep_stitches_the_centres_seen() {
    // Two steps, then the receiver changes its sample rate: the input ends there.
    let steps = [(145.0e6, 10), (145.16e6, 10)];
    let mut ends = sweep_context(30, 145.16e6);
    ends[28..36].copy_from_slice(&words(&radix20(2.0 * FS)));
    let out = common::scratch("vita49", "cut.jsonl");
    let args = ["--channel", "a=145.05M:10k", "--interval", "1s", "--fft", "500"];
    let args = [&args[..], &["--threads", "1", "-o", out.to_str().unwrap()]].concat();
    let o = on_steps("log", &args, &steps, 1, &[ends]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(err.contains("its unfinished sweep was learnt"), "{err}");
    assert!(err.contains("changed its sample rate"), "{err}");
    let recs = records(&out);
    let pano = &recs[0]["panorama"];
    assert_eq!(pano["step_centers_hz"], serde_json::json!([145.0e6, 145.16e6]), "{pano}");
    let stop = recs.last().unwrap();
    assert_eq!(stop["reason"], "input_error", "{stop}");
    assert_eq!(stop["iq_samples"].as_u64(), Some(20 * PER_PACKET as u64), "{stop}");
}

#[test]
fn a_retune_to_a_centre_not_in_the_learnt_sweep_stops_the_run_naming_it() {
    let steps: Vec<(f64, usize)> = SWEEP.iter().map(|&c| (c, DWELL_PACKETS)).collect();
    // After two sweeps the receiver moves to 146 MHz and sends a dwell there.
    let after: Vec<Vec<u8>> = std::iter::once(sweep_context(3, 146.0e6))
        .chain((80..90).map(|k| data(k, &sweep_samples(3))))
        .collect();
    let args = ["--json", "--fft", "1000", "--threads", "1"];
    let o = on_steps("measure", &args, &steps, 2, &after);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(err.contains("retuned to 146.000000 MHz at sample 80000"), "{err}");
    assert!(err.contains("--hop-plan"), "{err}");
}

#[test]
fn learn_is_refused_with_a_hop_plan_and_off_vita49() {
    let o = common::run(&["measure", "vita49://127.0.0.1:0", "--learn", "1s", "--hop-plan", "p"]);
    let err = common::stderr(&o);
    assert!(!o.status.success() && err.contains("give one of the two"), "{err}");
    let o = common::run(&["measure", "x.cf32", "--rate", "1M", "--learn", "2s"]);
    let err = common::stderr(&o);
    assert!(!o.status.success() && err.contains("--learn applies to vita49://"), "{err}");
}
