//! The collector's link to the broker: a persistent session (the broker queues what sites
//! publish while the collector is away), QoS 1 subscription to `PREFIX/+/+`, and manual
//! acknowledgement: a record is acknowledged only after it is written and flushed
//! ([`Collector::take`]), so a collector that dies in between gets it again, never loses it.
//! The link is re-established with a back-off doubling from 0.5 s to 30 s.

use super::collect::{Collector, Taken};
use super::mqtt::Broker;
use super::publish::wait_connack;
use anyhow::Result;
use rumqttc::{Client, Event, Packet, QoS};
use serde_json::Value;
use std::sync::atomic::AtomicBool;
use std::time::{Duration, Instant};

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
        if !wait_connack(&mut conn, &never, None) {
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
        loop {
            if stopped() {
                let _ = client.try_disconnect();
                let _ = conn.recv_timeout(Duration::from_millis(200));
                return Ok(());
            }
            match conn.recv_timeout(Duration::from_millis(100)) {
                Ok(Ok(Event::Incoming(Packet::Publish(p)))) => {
                    match broker.split_topic(&p.topic) {
                        Some((site, "status")) => notes(status_note(site, &p.payload)),
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
                    let _ = client.try_ack(&p);
                }
                Ok(Ok(_)) | Err(_) => {}
                Ok(Err(e)) => {
                    notes(format!("lost the broker ({e}); reconnecting"));
                    break;
                }
            }
        }
    }
    Ok(())
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
