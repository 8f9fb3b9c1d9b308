//! The collector's link to the broker: a persistent session (the broker queues what sites
//! publish while the collector is away), QoS 1 subscription to `PREFIX/+/+`, and manual
//! acknowledgement: a record is acknowledged only after it is written and flushed
//! ([`Collector::take`]), so a collector that dies in between gets it again, never loses it;
//! with a database, only after the transaction holding it is committed (at most 0.2 s, or at
//! once when the link is idle or [`HELD_MAX`] messages wait).
//! The link is re-established with a back-off doubling from 0.5 s to 30 s. While connected it
//! also sends the collector's resend requests ([`Collector::due_requests`]) on
//! `PREFIX/SITE/ask/resend` and says when a site falls silent or is heard again.

use crate::net::collect::{Collector, Taken};
use crate::net::mqtt::Broker;
use crate::net::publish::{wait_connack, Login};
use crate::net::resend::REQUEST_LEVELS;
use anyhow::{bail, Result};
use rumqttc::{Client, Connection, Event, Outgoing, Packet, Publish, QoS};
use serde_json::Value;
use std::collections::VecDeque;
use std::sync::atomic::AtomicBool;
use std::time::{Duration, Instant};

/// Messages held unacknowledged for a database commit before it is made at once: below the
/// broker's window of unacknowledged messages per client (Mosquitto's `max_inflight_messages`,
/// 20 by default), so delivery never stalls waiting for the batch to age.
const HELD_MAX: usize = 16;

/// What the collector tells its user as it goes (site status, lost links).
pub type Notes<'a> = &'a mut dyn FnMut(String);

/// Runs until `stopped()` says so; a write error (full disk) ends it with that error.
pub fn collect(
    broker: &Broker,
    client_id: &str,
    collector: &mut Collector,
    stopped: &dyn Fn() -> bool,
    notes: Notes<'_>,
) -> Result<()> {
    let mut backoff = Duration::from_millis(500);
    let never = AtomicBool::new(false);
    while !stopped() {
        let mut opts = broker.options(client_id)?;
        opts.set_clean_session(false);
        opts.set_manual_acks(true);
        let (client, mut conn) = Client::new(opts, 64);
        let login = wait_connack(&mut conn, &never, None);
        if let Login::Refused(why) = login {
            bail!("the broker {}:{} refused the collector: {why}", broker.host, broker.port);
        }
        if login == Login::NoAnswer {
            notes(format!(
                "cannot reach the broker {}:{}; trying again in {:.1} s",
                broker.host,
                broker.port,
                backoff.as_secs_f64()
            ));
            sleep_unless(backoff, stopped);
            backoff = (backoff * 2).min(Duration::from_secs(30));
            continue;
        }
        backoff = Duration::from_millis(500);
        client.try_subscribe(broker.collect_filter(), QoS::AtLeastOnce)?;
        let mut acks = Acks::default();
        let mut looked = Instant::now();
        loop {
            if stopped() {
                collector.commit(true)?;
                acks.held = 0;
                acks.flush_then_disconnect(&client, &mut conn);
                return Ok(());
            }
            collector.commit(acks.held >= HELD_MAX)?;
            if collector.uncommitted() == 0 {
                acks.held = 0;
            }
            acks.hand_over(&client);
            if looked.elapsed() >= LOOK_EVERY {
                looked = Instant::now();
                ask_and_watch(broker, &client, collector, looked, notes);
            }
            match conn.recv_timeout(Duration::from_millis(100)) {
                Ok(Ok(Event::Incoming(Packet::Publish(p)))) => {
                    match broker.split_topic(&p.topic) {
                        Some((site, "status")) => {
                            notes(status_note(site, &p.payload));
                            collector.status(site, &p.payload, Instant::now())?;
                        }
                        Some((site, _))
                            if collector.take(site, &p.payload)? == Taken::Malformed =>
                        {
                            notes(format!(
                                "dropped a message on '{}' that is not a record",
                                crate::messages::sanitize(&p.topic)
                            ));
                        }
                        Some(_) | None => {}
                    }
                    acks.waiting.push_back(p);
                    if collector.uncommitted() > 0 {
                        acks.held += 1;
                    }
                }
                Ok(Ok(Event::Outgoing(Outgoing::PubAck(_)))) => acks.sent += 1,
                Ok(Ok(_)) => {}
                Err(_) => collector.commit(true)?, // idle: nothing to batch with
                Ok(Err(e)) => {
                    collector.commit(true)?;
                    notes(format!("lost the broker ({e}); reconnecting"));
                    break;
                }
            }
        }
    }
    Ok(())
}

/// How often requests and silences are looked at.
const LOOK_EVERY: Duration = Duration::from_millis(200);

/// Sends the resend requests that are due (a request the client has no room for is lost and
/// asked again after the back-off), and says which sites fell silent or came back.
fn ask_and_watch(
    broker: &Broker,
    client: &Client,
    collector: &mut Collector,
    now: Instant,
    notes: Notes<'_>,
) {
    for (site, req) in collector.due_requests(now) {
        let topic = broker.topic(&site, REQUEST_LEVELS);
        let _ = client.try_publish(topic, QoS::AtLeastOnce, false, req.to_json());
    }
    for n in collector.silence_notes(now) {
        notes(n);
    }
}

/// Acknowledgements on their way to the broker. The client's request queue is bounded and the
/// event loop takes from it only between incoming packets, so under a burst it fills: an
/// acknowledgement that does not fit waits here and is handed over on a later turn, in order.
/// One dropped instead would leave the broker's copy unacknowledged for the rest of the
/// connection, holding one of its few in-flight slots for this client (Mosquitto allows 20 by
/// default, `max_inflight_messages`); enough of those and delivery stalls.
#[derive(Default)]
struct Acks {
    waiting: VecDeque<Publish>,
    /// The last messages of `waiting`, whose records wait for the database's commit.
    held: usize,
    /// Handed to the client, and written to the socket (its `Outgoing::PubAck` events).
    handed: u64,
    sent: u64,
}

impl Acks {
    fn hand_over(&mut self, client: &Client) {
        while let Some(p) = self.waiting.front().filter(|_| self.waiting.len() > self.held) {
            if client.try_ack(p).is_err() {
                break;
            }
            self.waiting.pop_front();
            self.handed += 1;
        }
    }

    /// At the end: lets the event loop send what was acknowledged (for up to 2 s), then says
    /// goodbye. What is still unsent then comes again on the next connection and is dropped as
    /// a copy.
    fn flush_then_disconnect(&mut self, client: &Client, conn: &mut Connection) {
        let give_up = Instant::now() + Duration::from_secs(2);
        while (!self.waiting.is_empty() || self.sent < self.handed) && Instant::now() < give_up {
            self.hand_over(client);
            match conn.recv_timeout(Duration::from_millis(50)) {
                Ok(Ok(Event::Outgoing(Outgoing::PubAck(_)))) => self.sent += 1,
                Ok(Err(_)) => return,
                _ => {}
            }
        }
        let _ = client.try_disconnect();
        while Instant::now() < give_up + Duration::from_millis(200) {
            match conn.recv_timeout(Duration::from_millis(50)) {
                Ok(Ok(Event::Outgoing(Outgoing::Disconnect))) | Ok(Err(_)) => return,
                _ => {}
            }
        }
    }
}

fn status_note(site: &str, payload: &[u8]) -> String {
    let v: Value = serde_json::from_slice(payload).unwrap_or(Value::Null);
    let state = v["state"].as_str().unwrap_or("unknown");
    let reason = v["reason"].as_str().unwrap_or("");
    crate::messages::sanitize(&format!("site {site}: {state} ({reason})"))
}

fn sleep_unless(d: Duration, stopped: &dyn Fn() -> bool) {
    let end = Instant::now() + d;
    while Instant::now() < end && !stopped() {
        std::thread::sleep(Duration::from_millis(20));
    }
}
