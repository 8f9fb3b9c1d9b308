//! `log --metrics` scraped by a real Prometheus server (started here on a free loopback port,
//! with a scratch storage folder): the paced demo scene is logged with one-second intervals,
//! Prometheus scrapes every second, and a query through its HTTP API (`/api/v1/query`,
//! Prometheus documentation "HTTP API") must return, for every channel, the occupancy of the
//! interval record the log wrote for the interval whose end it reports. `promtool check
//! metrics` (the Prometheus project's linter of the text format and its naming conventions)
//! must find nothing to say about the exposition.
//!
//! Prometheus comes from the distribution's packages (`.ci/run` installs it). Without it the
//! test fails in CI (`CI=true`) and is skipped with a note elsewhere.

mod common;

use serde_json::Value;
use std::collections::BTreeMap;
use std::io::{BufRead, BufReader, Read, Write};
use std::net::TcpStream;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::sync::mpsc;
use std::time::{Duration, Instant};

use common::{free_port, lines, BIN};

/// The Prometheus binary, or `None` where the test may be skipped (a note says so); in CI its
/// absence fails.
fn prometheus_or_skip() -> Option<(PathBuf, PathBuf)> {
    let found = |name: &str| {
        ["/usr/bin", "/usr/local/bin"].iter().map(|d| Path::new(d).join(name)).find(|p| p.exists())
    };
    let bins = found("prometheus").zip(found("promtool"));
    if bins.is_none() {
        if std::env::var("CI").is_ok_and(|v| v == "true") {
            panic!("prometheus is not installed: .ci/run installs it with apt-get install -y prometheus");
        }
        eprintln!(
            "note: prometheus is not installed (apt-get install -y prometheus); test skipped"
        );
    }
    bins
}

/// Children ended (SIGKILL, by their own id) when the test ends, however it ends.
struct Reaper(Vec<Child>);

impl Drop for Reaper {
    fn drop(&mut self) {
        for c in &mut self.0 {
            let _ = c.kill();
            let _ = c.wait();
        }
    }
}

/// GET `path` on a loopback port (HTTP/1.0, so the body ends with the connection): the status
/// code and the body, or `None` while nothing answers.
fn http_get(port: u16, path: &str) -> Option<(u16, String)> {
    let mut s = TcpStream::connect(("127.0.0.1", port)).ok()?;
    s.set_read_timeout(Some(Duration::from_secs(5))).ok()?;
    write!(s, "GET {path} HTTP/1.0\r\nHost: 127.0.0.1\r\n\r\n").ok()?;
    let mut text = String::new();
    s.read_to_string(&mut text).ok()?;
    let (head, body) = text.split_once("\r\n\r\n")?;
    let status = head.split(' ').nth(1)?.parse().ok()?;
    Some((status, body.to_string()))
}

/// Percent-encodes a query for a URL (RFC 3986: everything but the unreserved characters).
fn encode(q: &str) -> String {
    q.bytes()
        .map(|b| match b {
            b'A'..=b'Z' | b'a'..=b'z' | b'0'..=b'9' | b'-' | b'.' | b'_' | b'~' => {
                (b as char).to_string()
            }
            _ => format!("%{b:02X}"),
        })
        .collect()
}

/// Series of an instant query: each one's labels and value.
type Series = Vec<(BTreeMap<String, String>, f64)>;

/// An instant query through Prometheus's HTTP API.
fn query(port: u16, q: &str) -> Series {
    let Some((200, body)) = http_get(port, &format!("/api/v1/query?query={}", encode(q))) else {
        return Vec::new();
    };
    let v: Value = serde_json::from_str(&body).expect("the API answers JSON");
    assert_eq!(v["status"], "success", "{body}");
    v["data"]["result"]
        .as_array()
        .unwrap()
        .iter()
        .map(|s| {
            let labels = s["metric"]
                .as_object()
                .unwrap()
                .iter()
                .map(|(k, v)| (k.clone(), v.as_str().unwrap().to_string()))
                .collect();
            // Values come as strings, Go's shortest representation of the float64.
            (labels, s["value"][1].as_str().unwrap().parse().unwrap())
        })
        .collect()
}

/// The paced demo scene into `log --metrics 127.0.0.1:0`; returns the children and the port
/// the log says it serves on.
fn logging_site(log: &Path, reaper: &mut Reaper) -> u16 {
    let mut demo = Command::new(BIN)
        .args(["demo", "-o", "-", "--rate", "1M", "--format", "cf32_le", "--realtime"])
        .args(["--seconds", "25", "--seed", "3"])
        .stdout(Stdio::piped())
        .spawn()
        .unwrap();
    let plan = concat!(env!("CARGO_MANIFEST_DIR"), "/recordings/wrenhollow-plan.toml");
    let mut logger = Command::new(BIN)
        .args(["log", "-", "--format", "cf32_le", "--rate", "1M", "--center", "433.5M"])
        .args(["--plan", plan, "--interval", "1s", "--threads", "1"])
        .args(["--site", "wrenhollow-ridge", "--metrics", "127.0.0.1:0"])
        .args(["-o", log.to_str().unwrap()])
        .stdin(demo.stdout.take().unwrap())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let stderr = logger.stderr.take().unwrap();
    reaper.0.extend([demo, logger]);
    let (tx, rx) = mpsc::channel();
    std::thread::spawn(move || {
        for line in BufReader::new(stderr).lines().map_while(Result::ok) {
            eprintln!("log: {line}");
            if let Some(rest) = line.split_once("metrics at http://127.0.0.1:").map(|p| p.1) {
                let _ = tx.send(rest.trim_end_matches("/metrics").parse::<u16>().unwrap());
            }
        }
    });
    rx.recv_timeout(Duration::from_secs(10)).expect("log says where it serves the metrics")
}

fn start_prometheus(bin: &Path, dir: &Path, target: u16, reaper: &mut Reaper) -> u16 {
    let port = free_port();
    let conf = dir.join("prometheus.yml");
    std::fs::write(
        &conf,
        format!(
            "global:\n  scrape_interval: 1s\n  scrape_timeout: 1s\nscrape_configs:\n  - job_name: bandwarden\n    static_configs:\n      - targets: ['127.0.0.1:{target}']\n"
        ),
    )
    .unwrap();
    let out = std::fs::File::create(dir.join("prometheus.out")).unwrap();
    let child = Command::new(bin)
        .arg(format!("--config.file={}", conf.display()))
        .arg(format!("--storage.tsdb.path={}", dir.join("tsdb").display()))
        .arg(format!("--web.listen-address=127.0.0.1:{port}"))
        .stdout(out.try_clone().unwrap())
        .stderr(out)
        .spawn()
        .expect("starting prometheus");
    reaper.0.push(child);
    port
}

#[test]
fn prometheus_scrapes_the_occupancy_the_log_wrote() {
    let Some((prometheus, promtool)) = prometheus_or_skip() else { return };
    let dir = std::env::temp_dir().join(format!("bw-metrics-prom-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    let log = dir.join("ridge.jsonl");
    let mut reaper = Reaper(Vec::new());
    let began = Instant::now();
    let metrics = logging_site(&log, &mut reaper);
    let prom = start_prometheus(&prometheus, &dir, metrics, &mut reaper);

    // The exposition itself passes the Prometheus project's linter.
    let (status, text) = http_get(metrics, "/metrics").expect("the log serves /metrics");
    assert_eq!(status, 200);
    let mut lint = Command::new(&promtool)
        .args(["check", "metrics"])
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    lint.stdin.take().unwrap().write_all(text.as_bytes()).unwrap();
    let lint = lint.wait_with_output().unwrap();
    assert!(
        lint.status.success(),
        "promtool check metrics: {}{}\n{text}",
        String::from_utf8_lossy(&lint.stdout),
        String::from_utf8_lossy(&lint.stderr)
    );

    let first = scrape_matches_log(prom, &log, &dir, 0.0);
    let scraped_after = began.elapsed();
    // A later interval too, some seconds on: the values follow the log, not only its start.
    let later = scrape_matches_log(prom, &log, &dir, first + 2.0);
    eprintln!("matched the intervals ending at {first} and {later} (Unix s)");

    // The delivered-sample counter gives the input rate through PromQL.
    let rate = query(prom, "rate(bandwarden_input_samples_total[3s])");
    assert_eq!(rate.len(), 1, "{rate:?}");
    eprintln!(
        "first full scrape {:.1} s after start; delivered rate by PromQL {:.0} S/s",
        scraped_after.as_secs_f64(),
        rate[0].1
    );
    assert!(
        rate[0].1 > 0.0 && rate[0].1 < 1.5e6,
        "the paced demo runs at 1 MS/s (PromQL extrapolates over a 3 s window): {rate:?}"
    );
    drop(reaper);
    let _ = std::fs::remove_dir_all(&dir);
}

/// Waits until Prometheus holds a scrape with every channel's occupancy and the end of its
/// interval, both from one instant query (one scrape stores all its samples at one timestamp,
/// and the log sets a record's values under one lock), for an interval ending after `after`;
/// checks each against the log's interval record of that channel and end, and returns the end.
fn scrape_matches_log(prom: u16, log: &Path, dir: &Path, after: f64) -> f64 {
    let q = "{__name__=~\"bandwarden_channel_occupancy_ratio|bandwarden_channel_interval_end_timestamp_seconds\",job=\"bandwarden\"}";
    let deadline = Instant::now() + Duration::from_secs(20);
    let fresh = |s: &Series| {
        s.len() == 14 && s.iter().all(|(l, v)| !l["__name__"].ends_with("_seconds") || *v > after)
    };
    let series = loop {
        let s = query(prom, q);
        if fresh(&s) {
            break s;
        }
        if Instant::now() > deadline {
            let out = std::fs::read_to_string(dir.join("prometheus.out")).unwrap_or_default();
            panic!("Prometheus has no full scrape of an interval ending after {after} within 20 s: {s:?}\n{out}");
        }
        std::thread::sleep(Duration::from_millis(250));
    };
    let value = |name: &str, channel: &str| {
        let found: Vec<f64> = series
            .iter()
            .filter(|(l, _)| l["__name__"] == name && l["channel"] == channel)
            .map(|(l, v)| {
                assert_eq!(l["site"], "wrenhollow-ridge");
                *v
            })
            .collect();
        assert_eq!(found.len(), 1, "{name} {channel}: {series:?}");
        found[0]
    };
    let records: Vec<Value> = lines(log).iter().map(|l| serde_json::from_str(l).unwrap()).collect();
    let channels: Vec<&str> = records
        .iter()
        .filter(|r| r["kind"] == "channel")
        .map(|r| r["channel"].as_str().unwrap())
        .collect();
    assert_eq!(channels.len(), 7);
    let (mut busy, mut last_end) = (0, 0.0_f64);
    for ch in channels {
        let end = value("bandwarden_channel_interval_end_timestamp_seconds", ch);
        let occupancy = value("bandwarden_channel_occupancy_ratio", ch);
        // The log's record of that channel and interval: its `end` is the same instant.
        let record = records
            .iter()
            .find(|r| {
                r["kind"] == "interval"
                    && r["channel"] == ch
                    && r["end"].as_str().and_then(epoch) == Some(end)
            })
            .unwrap_or_else(|| panic!("no interval of {ch} ends at {end}"));
        let pct = record["occupancy_pct"].as_f64().unwrap();
        eprintln!("{ch}: Prometheus {occupancy}, log {pct} % (interval ending {})", record["end"]);
        assert!((occupancy - pct / 100.0).abs() < 1e-12, "{ch}: {occupancy} against {pct} %");
        busy += usize::from(occupancy > 0.0);
        last_end = last_end.max(end);
    }
    assert!(busy >= 3, "the demo scene keeps several channels busy");
    last_end
}

/// Seconds since the epoch of an RFC 3339 time, as the log writes them (milliseconds, `Z`).
fn epoch(stamp: &str) -> Option<f64> {
    let t =
        time::OffsetDateTime::parse(stamp, &time::format_description::well_known::Rfc3339).ok()?;
    Some(t.unix_timestamp_nanos() as f64 / 1e9)
}
