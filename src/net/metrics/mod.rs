//! Prometheus metrics: `log --metrics ADDR:PORT` and `collect --metrics ADDR:PORT` serve what
//! they measure at `http://ADDR:PORT/metrics` for a Prometheus server to scrape, in the
//! Prometheus text exposition format (version 0.0.4).
//!
//! The text is written by the `prometheus-client` crate (the Prometheus project's own Rust
//! client: escaping, `_total` suffixes, `NaN`/`+Inf` spellings and the format's line grammar
//! are its job, not ours); a `tiny_http` server on one thread of its own answers the scrapes.
//! The metrics of `log` are in [`log`], those of `collect` in [`collect`].
//!
//! The metrics have no password and no TLS, so by default they are served on a loopback address
//! only; another address needs `--listen-public` ([`listen_address`]).

pub mod collect;
pub mod log;

use anyhow::{bail, Context, Result};
use prometheus_client::encoding::prometheus_text::{encode, CONTENT_TYPE};
use prometheus_client::registry::{Metric, Registry};
use std::net::{IpAddr, Ipv4Addr, SocketAddr};
use std::sync::{Arc, Mutex, MutexGuard, PoisonError};
use std::thread::JoinHandle;

/// The prefix of every metric's name.
pub const PREFIX: &str = "bandwarden";

/// The address `--metrics` asks for, checked: `ADDR:PORT` (`127.0.0.1:9477`, `[::1]:9477`,
/// `localhost:9477`; port 0 takes a free one), on loopback unless `public` (`--listen-public`).
pub fn listen_address(text: &str, public: bool) -> Result<SocketAddr> {
    let shown = crate::messages::sanitize(text);
    let addr = match text.strip_prefix("localhost:") {
        Some(port) => {
            port.parse::<u16>().ok().map(|p| SocketAddr::new(Ipv4Addr::LOCALHOST.into(), p))
        }
        None => text.parse::<SocketAddr>().ok(),
    };
    let Some(addr) = addr else {
        bail!("--metrics '{shown}' is not ADDR:PORT: give e.g. 127.0.0.1:9477 or [::1]:9477");
    };
    if !public && !is_loopback(addr.ip()) {
        bail!(
            "--metrics {shown} would serve the metrics beyond this machine, without password or TLS: \
             give a loopback address (127.0.0.1:{port}) and let a proxy or Prometheus on this host \
             reach it, or add --listen-public if that is meant (and guard the port with a firewall)",
            port = addr.port()
        );
    }
    Ok(addr)
}

/// 127.0.0.0/8, ::1, or an IPv4 loopback address written as IPv6 (`::ffff:127.0.0.1`).
fn is_loopback(ip: IpAddr) -> bool {
    match ip {
        IpAddr::V4(v4) => v4.is_loopback(),
        IpAddr::V6(v6) => {
            v6.is_loopback() || v6.to_ipv4_mapped().is_some_and(|v4| v4.is_loopback())
        }
    }
}

/// Registers each `(name, help, metric)` of a table of metrics of one type (a clone: clones
/// share the values). Help texts end without a full stop: the encoder adds one.
pub fn register_all<M: Metric + Clone>(registry: &mut Registry, table: &[(&str, &str, &M)]) {
    for (name, help, metric) in table {
        registry.register(*name, *help, (*metric).clone());
    }
}

/// The registry's metrics as the text exposition format.
pub fn exposition(registry: &Registry) -> String {
    let mut text = String::new();
    // Writing into a String cannot fail; the encoder's errors come only from its writer.
    let _ = encode(&mut text, registry);
    text
}

/// Held while the values of one record are set and while a scrape is encoded, so that a scrape
/// never sees half a record (a channel's new occupancy beside its old interval end).
pub type Consistency = Arc<Mutex<()>>;

/// Waits for [`Consistency`]; a panic elsewhere while it was held leaves only values behind,
/// which are still worth serving.
pub fn hold(lock: &Consistency) -> MutexGuard<'_, ()> {
    lock.lock().unwrap_or_else(PoisonError::into_inner)
}

/// Serves a registry at `/metrics` until dropped.
pub struct MetricsServer {
    server: Arc<tiny_http::Server>,
    addr: SocketAddr,
    thread: Option<JoinHandle<()>>,
}

impl MetricsServer {
    /// Listens on `addr` and answers scrapes on a thread of its own.
    pub fn start(
        addr: SocketAddr,
        registry: Registry,
        consistency: Consistency,
    ) -> Result<MetricsServer> {
        let server =
            tiny_http::Server::http(addr).map_err(|e| anyhow::anyhow!("{e}")).with_context(
                || format!("cannot serve the metrics on {addr}: give a free port with --metrics"),
            )?;
        let addr = server.server_addr().to_ip().unwrap_or(addr);
        let server = Arc::new(server);
        let serving = Arc::clone(&server);
        let thread = std::thread::Builder::new()
            .name("metrics".into())
            .spawn(move || answer(&serving, &registry, &consistency))
            .context("cannot start the metrics thread")?;
        Ok(MetricsServer { server, addr, thread: Some(thread) })
    }

    /// The address listened on (with the port the system chose for port 0).
    pub fn addr(&self) -> SocketAddr {
        self.addr
    }
}

impl Drop for MetricsServer {
    fn drop(&mut self) {
        self.server.unblock();
        if let Some(t) = self.thread.take() {
            let _ = t.join();
        }
    }
}

/// Answers requests until the server is unblocked: `GET /metrics` (any query string) gets the
/// exposition, other paths 404, other methods 405. A scraper that hangs up early costs nothing
/// but its own answer.
fn answer(server: &tiny_http::Server, registry: &Registry, consistency: &Consistency) {
    use tiny_http::{Header, Method, Response};
    for request in server.incoming_requests() {
        let path = request.url().split('?').next().unwrap_or("");
        let response = match (request.method(), path) {
            (Method::Get | Method::Head, "/metrics") => {
                let header = Header::from_bytes("Content-Type", CONTENT_TYPE).expect("ASCII");
                let text = {
                    let _whole = hold(consistency);
                    exposition(registry)
                };
                Response::from_string(text).with_header(header)
            }
            (Method::Get | Method::Head, _) => {
                Response::from_string("bandwarden serves only /metrics\n").with_status_code(404)
            }
            _ => Response::from_string("only GET /metrics\n").with_status_code(405),
        };
        let _ = request.respond(response);
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use std::collections::BTreeMap;
    use std::io::{Read, Write};

    /// One sample line of the text format: `name{label="value",…} value`.
    #[derive(Debug)]
    pub(crate) struct Sample {
        pub name: String,
        pub labels: BTreeMap<String, String>,
        pub value: f64,
    }

    /// Reads the sample lines of the text exposition format back, by its grammar (Prometheus
    /// documentation, "Exposition formats", text format 0.0.4): `#` lines are comments or
    /// HELP/TYPE; label values are quoted with `\\`, `\"` and `\n` escapes; values are Go
    /// floats (`NaN`, `+Inf`, `-Inf`). Panics on a line that does not follow it.
    pub(crate) fn parse_exposition(text: &str) -> Vec<Sample> {
        let mut out = Vec::new();
        for line in text.lines().filter(|l| !l.is_empty() && !l.starts_with('#')) {
            let name_end = line.find(['{', ' ']).unwrap_or_else(|| panic!("no value: {line}"));
            let name = line[..name_end].to_string();
            let mut labels = BTreeMap::new();
            let mut rest = &line[name_end..];
            if let Some(mut inner) = rest.strip_prefix('{') {
                while !inner.starts_with('}') {
                    let (key, after) = inner.split_once("=\"").unwrap_or_else(|| panic!("{line}"));
                    let mut value = String::new();
                    let mut chars = after.char_indices();
                    let end = loop {
                        match chars.next() {
                            Some((_, '\\')) => match chars.next() {
                                Some((_, 'n')) => value.push('\n'),
                                Some((_, c)) => value.push(c),
                                None => panic!("{line}"),
                            },
                            Some((i, '"')) => break i,
                            Some((_, c)) => value.push(c),
                            None => panic!("unterminated label value: {line}"),
                        }
                    };
                    labels.insert(key.to_string(), value);
                    inner = after[end + 1..].trim_start_matches(',');
                }
                rest = &inner[1..];
            }
            let value = rest.trim();
            let value = match value {
                "+Inf" => f64::INFINITY,
                "-Inf" => f64::NEG_INFINITY,
                v => v.parse().unwrap_or_else(|_| panic!("not a value: {line}")),
            };
            out.push(Sample { name, labels, value });
        }
        out
    }

    #[test]
    fn loopback_only_unless_public() {
        for ok in [
            "127.0.0.1:9477",
            "127.8.9.10:0",
            "[::1]:9477",
            "localhost:9477",
            "[::ffff:127.0.0.1]:1",
        ] {
            assert!(listen_address(ok, false).is_ok(), "{ok}");
        }
        assert_eq!(listen_address("localhost:9477", false).unwrap().to_string(), "127.0.0.1:9477");
        for public in ["0.0.0.0:9477", "[::]:9477", "192.0.2.7:9477"] {
            let e = listen_address(public, false).unwrap_err().to_string();
            assert!(e.contains("--listen-public") && e.contains("127.0.0.1:9477"), "{e}");
            assert!(listen_address(public, true).is_ok(), "{public}");
        }
        for bad in ["9477", "127.0.0.1", "ridge:9477", "127.0.0.1:70000", "localhost:x", ""] {
            let e = listen_address(bad, true).unwrap_err().to_string();
            assert!(e.contains("is not ADDR:PORT"), "{bad}: {e}");
        }
    }

    fn get(addr: SocketAddr, request: &str) -> String {
        let mut s = std::net::TcpStream::connect(addr).unwrap();
        s.write_all(request.as_bytes()).unwrap();
        let mut text = String::new();
        s.read_to_string(&mut text).unwrap();
        text
    }

    #[test]
    fn serves_the_registry_at_metrics_and_nothing_else() {
        let mut registry = Registry::with_prefix(PREFIX);
        let c: prometheus_client::metrics::counter::Counter = Default::default();
        registry.register("test_things", "Things counted by the test", c.clone());
        c.inc_by(3);
        let server = MetricsServer::start(
            listen_address("127.0.0.1:0", false).unwrap(),
            registry,
            Consistency::default(),
        )
        .unwrap();
        assert_ne!(server.addr().port(), 0);
        let close = "Connection: close\r\n\r\n";
        let ok = get(server.addr(), &format!("GET /metrics HTTP/1.1\r\nHost: x\r\n{close}"));
        assert!(ok.starts_with("HTTP/1.1 200"), "{ok}");
        // The content type Prometheus expects of the text format 0.0.4 (Prometheus
        // documentation, "Exposition formats").
        assert!(ok.contains("text/plain; version=0.0.4; charset=utf-8"), "{ok}");
        assert!(
            ok.ends_with(
                "# TYPE bandwarden_test_things_total counter\nbandwarden_test_things_total 3\n"
            ),
            "{ok}"
        );
        let other = get(server.addr(), &format!("GET / HTTP/1.1\r\nHost: x\r\n{close}"));
        assert!(other.starts_with("HTTP/1.1 404"), "{other}");
        let post = get(
            server.addr(),
            &format!("POST /metrics HTTP/1.1\r\nHost: x\r\nContent-Length: 0\r\n{close}"),
        );
        assert!(post.starts_with("HTTP/1.1 405"), "{post}");
        // A second server on the same port is refused with the port named.
        let again =
            MetricsServer::start(server.addr(), Registry::default(), Consistency::default())
                .err()
                .unwrap();
        assert!(format!("{again:#}").contains(&server.addr().to_string()), "{again:#}");
        drop(server);
    }
}
