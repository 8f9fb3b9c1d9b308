//! Raw IQ over TCP: `tcp://HOST:PORT` connects to a receiver that serves samples on a socket;
//! `tcp-listen://ADDR:PORT` waits for one sender to connect.
//!
//! A receiver keeps sampling while the link is down, so the samples of an outage are lost, not
//! late: the time from the moment the connection was found lost to the first bytes after it came
//! back, × the sample rate, is handed to the reader as lost samples
//! ([`SampleSource::take_lost`]) and becomes a `dropped` record with cause `disconnected`. The
//! resolution is that of noticing the loss and the return: on loopback a few milliseconds;
//! across a network, whatever the sender buffers. An incomplete sample left when a connection
//! ends is discarded and counted as one more lost sample (a new connection starts on a sample
//! boundary). The client reconnects with a back-off that doubles from [`FIRST_RETRY`] up to
//! [`MAX_RETRY`]; the listener accepts the next sender.
//!
//! A sender that stalls keeps its connection, as a stalled pipe keeps its reader: nothing is
//! counted lost while an open connection is silent, until [`STALL_LIMIT`] passes without a byte;
//! then the link is taken for dead (a cut cable sends no end-of-stream), dropped, and the time
//! since its last byte is counted as lost. Buffers are bounded: bytes go straight into the
//! reader's block, with at most one incomplete sample carried over.

use super::raw::{ByteStream, RawSource};
use super::{sanitize, InputIssues, InputRequest, SampleFormat, SampleSource, SourceInfo};
use anyhow::{bail, Context, Result};
use num_complex::Complex32;
use std::io::{ErrorKind, Read};
use std::net::{SocketAddr, TcpListener, TcpStream, ToSocketAddrs};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex, OnceLock};
use std::time::{Duration, Instant};

/// First wait before reconnecting.
pub const FIRST_RETRY: Duration = Duration::from_millis(100);
/// Longest wait between reconnection attempts.
pub const MAX_RETRY: Duration = Duration::from_secs(5);
/// An open connection silent for this long is taken for dead.
pub const STALL_LIMIT: Duration = Duration::from_secs(10);
/// How often a blocked read or accept looks at the stop flag.
const TICK: Duration = Duration::from_millis(100);

/// Which side opens the connection.
#[derive(Clone, Debug, PartialEq)]
pub enum Endpoint {
    /// `tcp://HOST:PORT`: we connect.
    Connect(String),
    /// `tcp-listen://ADDR:PORT`: we accept one sender at a time.
    Listen(SocketAddr),
}

/// Reads `tcp://…` or `tcp-listen://…`; `None` for any other input name.
pub fn parse_endpoint(input: &str) -> Option<Result<Endpoint>> {
    if let Some(rest) = input.strip_prefix("tcp://") {
        return Some(host_port(rest, input).map(|_| Endpoint::Connect(rest.to_string())));
    }
    let rest = input.strip_prefix("tcp-listen://")?;
    Some(host_port(rest, input).and_then(|_| {
        rest.parse::<SocketAddr>().map(Endpoint::Listen).with_context(|| {
            format!(
                "'{}': listen on a numeric address and port, e.g. tcp-listen://127.0.0.1:5000",
                sanitize(input)
            )
        })
    }))
}

fn host_port(rest: &str, input: &str) -> Result<()> {
    let ok = rest.rsplit_once(':').is_some_and(|(h, p)| !h.is_empty() && p.parse::<u16>().is_ok());
    if !ok || rest.contains('/') {
        bail!(
            "'{}' is not HOST:PORT after the scheme (e.g. tcp://127.0.0.1:5000)",
            sanitize(input)
        );
    }
    Ok(())
}

/// Shared between the source and the stream it reads through.
#[derive(Default)]
struct Watch {
    /// The reader's stop flag, handed over once it starts.
    stop: OnceLock<Arc<AtomicBool>>,
    /// When the last byte arrived.
    last_byte: Mutex<Option<Instant>>,
}

impl Watch {
    fn stopped(&self) -> bool {
        self.stop.get().is_some_and(|s| s.load(Ordering::Relaxed))
    }

    fn last_byte(&self) -> Option<Instant> {
        *self.last_byte.lock().unwrap_or_else(|e| e.into_inner())
    }
}

/// One connection as a byte stream: reads wait in ticks (to see the stop flag); the end of the
/// stream, an error or a stall all read as end of input, which the source turns into a reconnect.
struct Conn {
    stream: TcpStream,
    watch: Arc<Watch>,
}

impl Read for Conn {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        loop {
            if self.watch.stopped() {
                return Ok(0);
            }
            match self.stream.read(buf) {
                Ok(n) => {
                    if n > 0 {
                        *self.watch.last_byte.lock().unwrap_or_else(|e| e.into_inner()) =
                            Some(Instant::now());
                    }
                    return Ok(n);
                }
                Err(e) if matches!(e.kind(), ErrorKind::WouldBlock | ErrorKind::TimedOut) => {
                    if self.watch.last_byte().is_some_and(|t| t.elapsed() >= STALL_LIMIT) {
                        return Ok(0);
                    }
                }
                Err(e) if e.kind() == ErrorKind::Interrupted => {}
                Err(_) => return Ok(0),
            }
        }
    }
}

impl ByteStream for Conn {}

/// Samples from a TCP peer, across reconnections.
pub struct TcpSource {
    endpoint: Endpoint,
    listener: Option<TcpListener>,
    format: SampleFormat,
    info: SourceInfo,
    raw: Option<RawSource>,
    watch: Arc<Watch>,
    /// Samples lost to outages not yet handed to the reader.
    lost: u64,
    /// Issues of connections that have ended.
    issues: InputIssues,
    /// Whether a connection has delivered bytes (time before the first one is no outage).
    streaming: bool,
}

/// Opens the endpoint: connects (an error if nothing serves there) or binds the listener (an
/// address beyond loopback only with `--listen-public`, and then a note says so).
pub fn open(ep: Endpoint, req: &InputRequest, notes: &mut Vec<String>) -> Result<TcpSource> {
    let format = req.format.context(
        "IQ over TCP needs --format (a SigMF datatype such as cu8, ci8, ci16_le or cf32_le)",
    )?;
    let rate = req
        .sample_rate_hz
        .context("IQ over TCP needs --rate (the sample rate, e.g. --rate 2.4M)")?;
    let (label, listener) = match &ep {
        Endpoint::Connect(addr) => (format!("tcp://{addr}"), None),
        Endpoint::Listen(addr) => {
            if !addr.ip().is_loopback() {
                if !req.listen_public {
                    bail!(
                        "tcp-listen://{addr} would accept samples from other hosts; add --listen-public to mean it, or listen on 127.0.0.1"
                    );
                }
                notes.push(format!(
                    "listening on {addr}, reachable from other hosts (--listen-public): anyone who can reach it can feed this run"
                ));
            }
            let l = TcpListener::bind(addr).with_context(|| {
                format!("cannot listen on {addr} (in use, or not an address of this host?)")
            })?;
            l.set_nonblocking(true)?;
            (format!("tcp-listen://{}", l.local_addr()?), Some(l))
        }
    };
    let info = SourceInfo::live(label, format, rate, req);
    let mut src = TcpSource {
        endpoint: ep,
        listener,
        format,
        info,
        raw: None,
        watch: Arc::new(Watch::default()),
        lost: 0,
        issues: InputIssues::default(),
        streaming: false,
    };
    if let Endpoint::Connect(addr) = &src.endpoint {
        let stream = connect(addr).with_context(|| {
            format!("cannot connect to tcp://{}: is the receiver serving IQ there?", sanitize(addr))
        })?;
        src.attach(stream)?;
    }
    Ok(src)
}

fn connect(addr: &str) -> std::io::Result<TcpStream> {
    let mut last = std::io::Error::new(ErrorKind::NotFound, "the name resolves to no address");
    for a in addr.to_socket_addrs()? {
        match TcpStream::connect_timeout(&a, Duration::from_secs(5)) {
            Ok(s) => return Ok(s),
            Err(e) => last = e,
        }
    }
    Err(last)
}

impl TcpSource {
    fn attach(&mut self, stream: TcpStream) -> Result<()> {
        stream.set_nonblocking(false)?;
        stream.set_read_timeout(Some(TICK))?;
        let conn = Conn { stream, watch: self.watch.clone() };
        self.raw = Some(RawSource::new(Box::new(conn), self.format, self.info.clone()));
        Ok(())
    }

    /// Ends the current connection: keeps its issues, counts an incomplete sample as lost.
    fn detach(&mut self) {
        if let Some(raw) = self.raw.take() {
            let i = raw.issues();
            self.issues.non_finite += i.non_finite;
            self.issues.beyond_scale += i.beyond_scale;
            if i.trailing_bytes > 0 {
                self.lost += 1;
            }
        }
    }

    /// Waits for the next connection (with back-off, or the next sender); `false` if stopped.
    fn reconnect(&mut self) -> Result<bool> {
        let mut wait = FIRST_RETRY;
        loop {
            if self.stopped() {
                return Ok(false);
            }
            let next = match (&self.endpoint, &self.listener) {
                (Endpoint::Connect(addr), _) => connect(addr).ok(),
                (Endpoint::Listen(_), Some(l)) => match l.accept() {
                    Ok((s, _)) => Some(s),
                    Err(e) if e.kind() == ErrorKind::WouldBlock => None,
                    Err(e) => return Err(e).context("accepting a sender"),
                },
                (Endpoint::Listen(_), None) => bail!("the listener is gone"),
            };
            if let Some(s) = next {
                self.attach(s)?;
                return Ok(true);
            }
            let pause = if self.listener.is_some() { TICK } else { wait };
            sleep_unless(pause, &self.watch);
            wait = (wait * 2).min(MAX_RETRY);
        }
    }

    fn stopped(&self) -> bool {
        self.watch.stopped()
    }

    /// Samples of the outage that ended now: from the last byte if the link stalled, else from
    /// the moment its end was seen, to now.
    fn outage_samples(&self, lost_at: Instant) -> u64 {
        (lost_at.elapsed().as_secs_f64() * self.info.sample_rate_hz).round() as u64
    }
}

impl SampleSource for TcpSource {
    fn info(&self) -> &SourceInfo {
        &self.info
    }

    fn read(&mut self, out: &mut [Complex32]) -> Result<usize> {
        let mut lost_at: Option<Instant> = None;
        loop {
            if self.raw.is_none() && !self.reconnect()? {
                return Ok(0);
            }
            let raw = self.raw.as_mut().expect("connected");
            let n = raw.read(out)?;
            if n > 0 {
                if let Some(t) = lost_at.filter(|_| self.streaming) {
                    self.lost += self.outage_samples(t);
                }
                self.streaming = true;
                return Ok(n);
            }
            if self.stopped() {
                return Ok(0);
            }
            // The connection ended (or stalled): the outage runs from its last byte if it
            // stalled, else from now.
            if lost_at.is_none() {
                lost_at = Some(match self.watch.last_byte() {
                    Some(t) if t.elapsed() >= STALL_LIMIT => t,
                    _ => Instant::now(),
                });
            }
            self.detach();
        }
    }

    fn issues(&self) -> InputIssues {
        let mut i = self.issues.clone();
        if let Some(raw) = &self.raw {
            let r = raw.issues();
            i.non_finite += r.non_finite;
            i.beyond_scale += r.beyond_scale;
        }
        i
    }

    fn take_lost(&mut self) -> u64 {
        std::mem::take(&mut self.lost)
    }

    fn watch_stop(&mut self, stop: Arc<AtomicBool>) {
        let _ = self.watch.stop.set(stop);
    }
}

fn sleep_unless(d: Duration, watch: &Watch) {
    let end = Instant::now() + d;
    while !watch.stopped() {
        let now = Instant::now();
        if now >= end {
            return;
        }
        std::thread::sleep((end - now).min(TICK));
    }
}
