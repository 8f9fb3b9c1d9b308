//! `log --publish`: every record of the occupancy log also goes to an MQTT broker, from a
//! thread of its own, so the measurement never waits for the network.
//!
//! The log hands each record ([`RecordTap`]) to the [`Spool`] on disk, and the publisher thread
//! sends what the spool holds, in order, QoS 1, keeping up to [`WINDOW`] messages in flight. A
//! record leaves the spool when the broker acknowledges it; after a lost connection the
//! publisher reconnects (back-off doubling from 0.5 s to [`MAX_BACKOFF`]) and sends again from the
//! first unacknowledged record, so the broker may see a record twice (the collector drops the
//! copy by its id) but never loses one. Topics and payloads: see [`crate::net::mqtt`].
//!
//! A broker's acknowledgement is not the end of the road: a broker that forgets (restarted
//! without persistence) loses what it had taken. So the publisher also listens on
//! `PREFIX/SITE/ask/resend` and answers the collector's requests from the spool or the local
//! log ([`crate::net::answer`]), and at the end of a run it stays [`ANSWER_GRACE`] after the
//! last record was acknowledged, so that a collector that finds holes when the `stop` record
//! arrives can still ask.

use crate::net::answer::Answers;
use crate::net::lookup::LocalLog;
use crate::net::mqtt::{topic_level, Broker};
use crate::net::resend::REQUEST_LEVELS;
use crate::net::spool::{Pos, Spool, SpoolLimits};
use crate::output::log::occupancy::RecordTap;
use crate::output::log::Stamped;
use anyhow::Result;
use rumqttc::{Client, Connection, ConnectionError, Event, LastWill, Outgoing, Packet, QoS};
use serde_json::{json, Value};
use std::collections::{HashMap, VecDeque};
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Arc;
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

/// Messages sent and not yet acknowledged, at most.
pub const WINDOW: usize = 64;
/// Longest wait between connection attempts.
pub const MAX_BACKOFF: Duration = Duration::from_secs(30);
/// How often the records evicted from the spool are said (joined in ranges of `seq`).
pub const EVICTIONS_SAID_EVERY: Duration = Duration::from_secs(10);
/// At the end of a run, how long the publisher listens for resend requests after everything
/// was acknowledged and the last request was answered (within `--publish-linger`).
pub const ANSWER_GRACE: Duration = Duration::from_secs(2);

/// What the publisher needs.
#[derive(Clone, Debug)]
pub struct PublishConfig {
    pub broker: Broker,
    pub site: String,
    pub spool_dir: std::path::PathBuf,
    pub spool: SpoolLimits,
    /// The local log, where records the spool no longer has are found for a resend (`None`:
    /// on stdout or CSV, so only the spool can answer).
    pub local_log: Option<LocalLog>,
    /// At the end of the run, how long to wait for the spool to drain before leaving the rest
    /// for the next run.
    pub linger: Duration,
}

/// Counters the command reports at the end.
#[derive(Debug, Default)]
pub struct PublishStats {
    pub acked: AtomicU64,
    pub connects: AtomicU64,
    pub lost_links: AtomicU64,
    /// Resend requests taken, records resent for them, and of those read from the local log.
    pub requests: AtomicU64,
    pub resent: AtomicU64,
    pub resent_from_log: AtomicU64,
    /// Why the broker refused the last login, if it did (cleared by a login it accepts).
    pub refused_login: std::sync::Mutex<Option<String>>,
}

/// The running publisher: a tap for the log and the thread that empties the spool.
pub struct Publisher {
    spool: Arc<Spool>,
    stop: Arc<AtomicBool>,
    stats: Arc<PublishStats>,
    thread: Option<JoinHandle<()>>,
}

/// What became of publishing, for the closing notes.
#[derive(Debug)]
pub struct PublishSummary {
    pub acked: u64,
    pub lost_links: u64,
    /// Bytes still in the spool, sent by the next run.
    pub pending_bytes: u64,
    /// Records the spool could not take (they are in the local log only).
    pub refused: u64,
    /// Records evicted from the spool (bytes or age) before the broker had them.
    pub evicted: u64,
    /// Resend requests answered and the records sent again for them (from the local log).
    pub requests: u64,
    pub resent: u64,
    pub resent_from_log: u64,
    /// The broker refused the last login: a setting to fix, why.
    pub refused_login: Option<String>,
}

impl PublishSummary {
    /// What the user should hear at the end of the run.
    pub fn notes(&self) -> Vec<String> {
        let mut n = vec![format!(
            "published {} records (the broker acknowledged each){}",
            self.acked,
            if self.lost_links > 0 {
                format!("; the link to the broker was lost or refused {} times", self.lost_links)
            } else {
                String::new()
            }
        )];
        if self.pending_bytes > 0 {
            n.push(format!(
                "{} bytes of records wait in the spool for the broker; the next run with the same --spool sends them",
                self.pending_bytes
            ));
        }
        if self.refused > 0 {
            n.push(format!(
                "{} records were not spooled: larger than --spool-max-bytes, or the spool could not be written; they are in the local log",
                self.refused
            ));
        }
        if self.evicted > 0 {
            n.push(format!(
                "{} records left the spool (--spool-max-bytes, --spool-max-age) before the broker had them; they are in the local log and are resent from it when the collector asks",
                self.evicted
            ));
        }
        if self.requests > 0 {
            n.push(format!(
                "the collector asked {} times for records it had not received: {} sent again ({} read from the local log)",
                self.requests, self.resent, self.resent_from_log
            ));
        }
        n
    }
}

impl Publisher {
    /// Opens the spool and starts the thread (which connects in the background: a broker that is
    /// down at the start is no error, the records wait in the spool).
    pub fn start(cfg: PublishConfig) -> Result<Publisher> {
        let spool = Arc::new(Spool::open(&cfg.spool_dir, cfg.spool)?);
        let stop = Arc::new(AtomicBool::new(false));
        let stats = Arc::new(PublishStats::default());
        let mut worker = Worker {
            cfg,
            spool: spool.clone(),
            stop: stop.clone(),
            stats: stats.clone(),
            online: false,
            refused: None,
            answers: Answers::default(),
            evictions_said: std::cell::Cell::new(Instant::now()),
        };
        let thread = std::thread::Builder::new()
            .name("publish".into())
            .spawn(move || {
                worker.run();
                worker.note_evictions(true);
                worker.spool.save();
            })
            .map_err(anyhow::Error::from)?;
        Ok(Publisher { spool, stop, stats, thread: Some(thread) })
    }

    /// The tap to hand to the occupancy log.
    pub fn tap(&self) -> Box<dyn RecordTap> {
        Box::new(SpoolTap { spool: self.spool.clone() })
    }

    /// Waits (up to the linger time) for the spool to drain, says goodbye, and stops.
    pub fn finish(mut self) -> PublishSummary {
        self.stop.store(true, Ordering::SeqCst);
        if let Some(t) = self.thread.take() {
            let _ = t.join();
        }
        PublishSummary {
            acked: self.stats.acked.load(Ordering::SeqCst),
            lost_links: self.stats.lost_links.load(Ordering::SeqCst),
            pending_bytes: self.spool.pending_bytes(),
            refused: self.spool.refused(),
            evicted: self.spool.evicted(),
            requests: self.stats.requests.load(Ordering::SeqCst),
            resent: self.stats.resent.load(Ordering::SeqCst),
            resent_from_log: self.stats.resent_from_log.load(Ordering::SeqCst),
            refused_login: self.stats.refused_login.lock().map(|r| r.clone()).unwrap_or(None),
        }
    }
}

struct SpoolTap {
    spool: Arc<Spool>,
}

impl RecordTap for SpoolTap {
    fn record(&mut self, line: &Stamped) {
        if let Ok(text) = serde_json::to_string(line) {
            self.spool.append(&text);
        }
    }
}

/// What a message in flight stands for.
#[derive(Clone, Copy, Debug)]
enum Tag {
    /// A record; acknowledging it acknowledges the spool up to here.
    Record(Pos),
    /// A retained copy or a status message.
    Extra,
}

struct Worker {
    cfg: PublishConfig,
    spool: Arc<Spool>,
    stop: Arc<AtomicBool>,
    stats: Arc<PublishStats>,
    online: bool,
    /// The last reason the broker gave for refusing us, once said.
    refused: Option<String>,
    /// Records the collector asked for again, waiting for room in the window.
    answers: Answers,
    /// When evictions were last said.
    evictions_said: std::cell::Cell<Instant>,
}

/// How a connection ended.
enum LinkEnd {
    Lost,
    Done,
}

impl Worker {
    fn run(&mut self) {
        let mut backoff = Duration::from_millis(500);
        let mut deadline: Option<Instant> = None;
        loop {
            if self.stop.load(Ordering::SeqCst) {
                let d = *deadline.get_or_insert_with(|| Instant::now() + self.cfg.linger);
                if Instant::now() >= d || self.spool.pending_bytes() == 0 && !self.online {
                    return;
                }
            }
            match self.session(&mut deadline) {
                LinkEnd::Done => return,
                LinkEnd::Lost => {
                    self.stats.lost_links.fetch_add(1, Ordering::Relaxed);
                    self.sleep(backoff, deadline);
                    backoff = (backoff * 2).min(MAX_BACKOFF);
                }
            }
            if self.online {
                backoff = Duration::from_millis(500);
                self.online = false;
            }
        }
    }

    fn sleep(&self, d: Duration, deadline: Option<Instant>) {
        let end = Instant::now() + d;
        while Instant::now() < end {
            if deadline.is_some_and(|dl| Instant::now() >= dl) {
                return;
            }
            // The broker is away: this is when the spool fills and evicts.
            self.note_evictions(false);
            std::thread::sleep(Duration::from_millis(20));
        }
    }

    fn set_refused_login(&self, why: Option<String>) {
        if let Ok(mut r) = self.stats.refused_login.lock() {
            *r = why;
        }
    }

    fn status(&self, state: &str, reason: &str) -> Vec<u8> {
        let v = json!({"kind": "status", "site": self.cfg.site, "state": state, "reason": reason});
        v.to_string().into_bytes()
    }

    /// One connection: send from the first unacknowledged record until the link drops or the
    /// run is over and everything is acknowledged.
    fn session(&mut self, deadline: &mut Option<Instant>) -> LinkEnd {
        let b = &self.cfg.broker;
        let status_topic = b.topic(&self.cfg.site, "status");
        let Ok(mut opts) = b.options(&format!("bandwarden-{}", self.cfg.site)) else {
            return LinkEnd::Done;
        };
        opts.set_last_will(LastWill::new(
            &status_topic,
            self.status("offline", "lost"),
            QoS::AtLeastOnce,
            true,
        ));
        opts.set_inflight(WINDOW as u16 + 4);
        let (client, mut conn) = Client::new(opts, WINDOW * 2 + 8);
        match wait_connack(&mut conn, &self.stop, *deadline) {
            Login::Accepted => {
                self.refused = None;
                self.set_refused_login(None);
            }
            Login::NoAnswer => return LinkEnd::Lost,
            Login::Refused(why) => {
                // Said once per reason: the log goes on, the records wait in the spool, and the
                // attempts go on with the back-off in case the broker's settings are mended.
                if self.refused.as_deref() != Some(why.as_str()) {
                    crate::messages::note(&format!(
                        "the broker {}:{} would not take this site's records: {why}; they wait in the spool",
                        b.host, b.port
                    ));
                    self.refused = Some(why.clone());
                }
                self.set_refused_login(Some(why));
                return LinkEnd::Lost;
            }
        }
        self.online = true;
        self.stats.connects.fetch_add(1, Ordering::Relaxed);
        let mut unsent: VecDeque<Tag> = VecDeque::new();
        let mut in_flight: HashMap<u16, Tag> = HashMap::new();
        let online = self.status("online", "connected");
        if client.try_publish(&status_topic, QoS::AtLeastOnce, true, online).is_ok() {
            unsent.push_back(Tag::Extra);
        }
        let request_topic = b.topic(&self.cfg.site, REQUEST_LEVELS);
        if client.try_subscribe(&request_topic, QoS::AtLeastOnce).is_err() {
            return LinkEnd::Lost;
        }
        // Records read from the spool and not yet handed to the client, and the position after
        // the last one read.
        let mut ahead: VecDeque<(Pos, String)> = VecDeque::new();
        let mut read_to = self.spool.acked();
        let mut said_goodbye = false;
        // Since when, at the end, everything is acknowledged and no request is waiting.
        let mut calm_since: Option<Instant> = None;
        loop {
            self.note_evictions(false);
            let stopping = self.stop.load(Ordering::SeqCst);
            if stopping {
                let d = *deadline.get_or_insert_with(|| Instant::now() + self.cfg.linger);
                let drained = self.spool.acked() >= self.spool.end();
                let idle =
                    drained && in_flight.is_empty() && unsent.is_empty() && self.answers.is_empty();
                if !idle {
                    calm_since = None;
                }
                let calm = calm_since.get_or_insert_with(Instant::now).elapsed() >= ANSWER_GRACE;
                if idle && calm && !said_goodbye {
                    let bye = self.status("offline", "stopped");
                    if client.try_publish(&status_topic, QoS::AtLeastOnce, true, bye).is_ok() {
                        unsent.push_back(Tag::Extra);
                    }
                    said_goodbye = true;
                } else if said_goodbye && in_flight.is_empty() && unsent.is_empty()
                    || Instant::now() >= d
                {
                    let _ = client.try_disconnect();
                    let _ = conn.recv_timeout(Duration::from_millis(200));
                    return LinkEnd::Done;
                }
            }
            if !said_goodbye {
                // The spool is read in batches (each read opens a file), but a record is handed
                // on as soon as the window has room: a publisher that waited for half its window
                // to be acknowledged before sending more sent nothing while the broker held back
                // its small PUBACKs (Nagle's algorithm, RFC 896, on a broker socket without
                // TCP_NODELAY) until our side acknowledged at the TCP level (delayed ACK): a
                // stall of up to the 20 ms turn, many times a second. Records the collector
                // asked for again go first.
                while unsent.len() + in_flight.len() < WINDOW {
                    let Some(line) = self.answers.pop() else { break };
                    if !self.send(&client, &line, None, &mut unsent) {
                        self.answers.unpop(line);
                        break;
                    }
                }
                let busy = unsent.len() + in_flight.len();
                if ahead.is_empty() {
                    let idle = busy == 0 && !stopping;
                    let wait = if idle { Duration::from_millis(20) } else { Duration::ZERO };
                    ahead.extend(self.spool.read_from(read_to, WINDOW, wait));
                    if let Some((pos, _)) = ahead.back() {
                        read_to = *pos;
                    }
                }
                while unsent.len() + in_flight.len() < WINDOW {
                    let Some((pos, line)) = ahead.pop_front() else { break };
                    if !self.send(&client, &line, Some(pos), &mut unsent) {
                        ahead.push_front((pos, line));
                        break;
                    }
                }
            }
            match conn.recv_timeout(Duration::from_millis(20)) {
                Ok(Ok(Event::Outgoing(Outgoing::Publish(pkid)))) => {
                    if let Some(tag) = unsent.pop_front() {
                        in_flight.insert(pkid, tag);
                    }
                }
                Ok(Ok(Event::Incoming(Packet::Publish(p)))) if p.topic == request_topic => {
                    let log = self.cfg.local_log.as_ref();
                    let before = (self.answers.resent, self.answers.from_log);
                    if self.answers.take(&p.payload, &self.spool, log) {
                        calm_since = None;
                        let s = &self.stats;
                        s.requests.fetch_add(1, Ordering::Relaxed);
                        s.resent.fetch_add(self.answers.resent - before.0, Ordering::Relaxed);
                        let from_log = self.answers.from_log - before.1;
                        s.resent_from_log.fetch_add(from_log, Ordering::Relaxed);
                    }
                }
                Ok(Ok(Event::Incoming(Packet::PubAck(ack)))) => {
                    if let Some(Tag::Record(pos)) = in_flight.remove(&ack.pkid) {
                        self.spool.ack(pos);
                        self.stats.acked.fetch_add(1, Ordering::Relaxed);
                    }
                }
                Ok(Ok(_)) | Err(_) => {}
                Ok(Err(_)) => return LinkEnd::Lost,
            }
        }
    }

    /// Says which records left the spool unsent, at most every [`EVICTIONS_SAID_EVERY`] (the
    /// spool joins consecutive `seq` in one range meanwhile) unless `now_please`.
    fn note_evictions(&self, now_please: bool) {
        if !now_please && self.evictions_said.get().elapsed() < EVICTIONS_SAID_EVERY {
            return;
        }
        self.evictions_said.set(Instant::now());
        for e in self.spool.take_evictions() {
            crate::messages::note(&format!("site {}: {}", self.cfg.site, e.note()));
        }
    }

    /// Publishes one record on its kind's topic: a spooled one (`pos`, acknowledged in the
    /// spool when the broker has it) with an interval's retained copy, or one sent again for
    /// the collector (`None`, no retained copy: it is old). `false` when the client's queue
    /// had no room (the record is sent later).
    fn send(
        &self,
        client: &Client,
        line: &str,
        pos: Option<Pos>,
        unsent: &mut VecDeque<Tag>,
    ) -> bool {
        let v: Value = serde_json::from_str(line).unwrap_or(Value::Null);
        let kind = v["kind"].as_str().unwrap_or("unknown");
        let b = &self.cfg.broker;
        let topic = b.topic(&self.cfg.site, kind);
        if client.try_publish(topic, QoS::AtLeastOnce, false, line.as_bytes().to_vec()).is_err() {
            return false;
        }
        unsent.push_back(pos.map_or(Tag::Extra, Tag::Record));
        if kind == "interval" && pos.is_some() {
            if let Some(ch) = v["channel"].as_str() {
                let latest = b.topic(&self.cfg.site, &format!("latest/{}", topic_level(ch)));
                if client
                    .try_publish(latest, QoS::AtLeastOnce, true, line.as_bytes().to_vec())
                    .is_ok()
                {
                    unsent.push_back(Tag::Extra);
                }
            }
        }
        true
    }
}

/// How an attempt to log in to the broker ended.
#[derive(Debug, PartialEq)]
pub enum Login {
    Accepted,
    /// The broker answered and said no (credentials, authorisation) or its certificate failed
    /// the TLS check: trying again will not help until someone changes a setting. The reason
    /// is for the user.
    Refused(String),
    /// No answer (broker down, network cut, timeout): an outage, tried again later.
    NoAnswer,
}

/// Waits for the broker's CONNACK, for up to 10 s.
pub fn wait_connack(conn: &mut Connection, stop: &AtomicBool, deadline: Option<Instant>) -> Login {
    let give_up = Instant::now() + Duration::from_secs(10);
    while Instant::now() < give_up {
        if stop.load(Ordering::SeqCst) && deadline.is_some_and(|d| Instant::now() >= d) {
            return Login::NoAnswer;
        }
        match conn.recv_timeout(Duration::from_millis(100)) {
            Ok(Ok(Event::Incoming(Packet::ConnAck(_)))) => return Login::Accepted,
            Ok(Err(e)) => return refusal(&e).map_or(Login::NoAnswer, Login::Refused),
            _ => {}
        }
    }
    Login::NoAnswer
}

/// What the user must fix, if the failure `e` is one no retry will cure.
fn refusal(e: &ConnectionError) -> Option<String> {
    use rumqttc::ConnectReturnCode as Code;
    match e {
        ConnectionError::ConnectionRefused(Code::BadUserNamePassword | Code::NotAuthorized) => Some(
            "it refused the user name or password (check --mqtt-user and --mqtt-password-file or BANDWARDEN_MQTT_PASSWORD, and the broker's password file)".into(),
        ),
        ConnectionError::ConnectionRefused(code) => Some(format!("it refused the connection ({code:?})")),
        ConnectionError::Tls(t) => Some(format!(
            "the TLS handshake failed: {t} (check --mqtt-ca: the authority that signed the broker's certificate, whose names must include the host in the address)"
        )),
        _ => None,
    }
}
