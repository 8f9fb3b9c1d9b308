//! Asking a site to send records again: end-to-end delivery over a broker that may forget.
//!
//! MQTT's QoS 1 holds between one client and the broker (MQTT 3.1.1 §4.3.2): a broker that
//! acknowledged a site's record and then lost it (a restart without persistence, a wiped
//! store) leaves a hole in the collector's `seq` that no acknowledgement will mend. So the
//! collector asks the site itself: on `PREFIX/SITE/ask/resend` it publishes a [`ResendRequest`]
//! (`{"run":…,"from":A,"to":B}`, `to` inclusive, absent for "everything from A on"), and the
//! site, which keeps every record in its spool and its local log, publishes the records of that
//! run with `from <= seq <= to` again on their usual topics. The collector stores each once
//! (by its id), so a request answered twice does no harm.
//!
//! [`Ask`] is the collector's schedule for one run: the first request shortly after a hole is
//! seen, then again with a back-off while nothing fills it, and no more after [`MAX_ASKS`]
//! unanswered ones (the site has lost the records, or is gone: the hole is then reported).

use serde::{Deserialize, Serialize};
use std::time::{Duration, Instant};

/// The last topic levels of a site's requests, under `PREFIX/SITE/`. Two levels, so that a
/// collector subscribed to `PREFIX/+/+` does not receive its own requests.
pub const REQUEST_LEVELS: &str = "ask/resend";

/// How long after a hole is seen (or after the last record that filled one) the collector asks:
/// records resent for an earlier request may still be on their way.
pub const FIRST_ASK: Duration = Duration::from_secs(1);
/// Longest wait between two requests for the same run.
pub const MAX_ASK_WAIT: Duration = Duration::from_secs(30);
/// Requests in a row that filled nothing before the collector stops asking (about 3 minutes
/// with the back-off doubling from [`FIRST_ASK`] to [`MAX_ASK_WAIT`]); asking starts again when
/// the site is heard after a silence.
pub const MAX_ASKS: u32 = 10;
/// Most records a site sends for one request; the collector asks again for the rest.
pub const MAX_ANSWER: usize = 2000;
/// Most ranges asked for one run at a time.
pub const MAX_RANGES: usize = 16;

/// What the collector asks a site for.
#[derive(Serialize, Deserialize, Debug, Clone, PartialEq, Eq)]
pub struct ResendRequest {
    pub run: String,
    pub from: u64,
    /// Last `seq` wanted (inclusive); `None`: every record of the run from `from` on (the end
    /// of a run whose `stop` record never came is not known to the collector).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub to: Option<u64>,
}

impl ResendRequest {
    /// Whether `seq` is asked for.
    pub fn wants(&self, seq: u64) -> bool {
        seq >= self.from && self.to.map_or(true, |to| seq <= to)
    }

    pub fn to_json(&self) -> Vec<u8> {
        serde_json::to_vec(self).expect("plain fields")
    }

    /// The request in a message, if it is one (a malformed one is ignored by the site).
    pub fn parse(payload: &[u8]) -> Option<ResendRequest> {
        let r: ResendRequest = serde_json::from_slice(payload).ok()?;
        (r.to.map_or(true, |to| to >= r.from) && !r.run.is_empty()).then_some(r)
    }
}

/// When to ask next for one run's missing records.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Ask {
    /// When the next request is due; `None`: nothing is wanted (or not yet known to be).
    next: Option<Instant>,
    wait: Duration,
    /// Requests sent since something last filled a hole.
    unanswered: u32,
}

impl Ask {
    /// A new hole: ask soon (or keep an earlier time already set), with a fresh back-off.
    pub fn hole(&mut self, now: Instant) {
        let soon = now + FIRST_ASK;
        self.next = Some(self.next.map_or(soon, |t| t.min(soon)));
        self.wait = FIRST_ASK;
        self.unanswered = 0;
    }

    /// A missing record came: more of the answer may be on its way, so wait [`FIRST_ASK`]
    /// before asking again, with a fresh back-off.
    pub fn filled(&mut self, now: Instant) {
        self.next = Some(now + FIRST_ASK);
        self.wait = FIRST_ASK;
        self.unanswered = 0;
    }

    /// Ask at once (the run ended with holes, or the site is back after a silence).
    pub fn now(&mut self, now: Instant) {
        self.next = Some(now);
        self.wait = FIRST_ASK;
        self.unanswered = 0;
    }

    /// Whether a request is due at `now`. Something wanted with no time set yet (a quiet run's
    /// missing tail, holes read back from the file) is due at once.
    pub fn due(&mut self, now: Instant) -> bool {
        if self.unanswered >= MAX_ASKS {
            return false;
        }
        *self.next.get_or_insert(now) <= now
    }

    /// A request went out at `now`: the next one waits twice as long as the last, up to
    /// [`MAX_ASK_WAIT`].
    pub fn asked(&mut self, now: Instant) {
        if self.wait.is_zero() {
            self.wait = FIRST_ASK;
        }
        self.next = Some(now + self.wait);
        self.wait = (self.wait * 2).min(MAX_ASK_WAIT);
        self.unanswered += 1;
    }

    /// Nothing is wanted any more.
    pub fn settle(&mut self) {
        *self = Ask::default();
    }

    /// Requests sent that filled nothing.
    pub fn unanswered(&self) -> u32 {
        self.unanswered
    }

    /// The collector has stopped asking ([`MAX_ASKS`] unanswered).
    pub fn gave_up(&self) -> bool {
        self.unanswered >= MAX_ASKS
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn requests_round_trip_and_bad_ones_are_refused() {
        let r = ResendRequest { run: "20261204T203000Z-7".into(), from: 5, to: Some(9) };
        assert_eq!(ResendRequest::parse(&r.to_json()), Some(r.clone()));
        assert!(r.wants(5) && r.wants(9) && !r.wants(4) && !r.wants(10));
        let open = ResendRequest::parse(br#"{"run":"r","from":3}"#).unwrap();
        assert!(open.wants(3) && open.wants(u64::MAX) && !open.wants(2));
        for bad in [&br#"{"run":"r","from":5,"to":4}"#[..], br#"{"from":1}"#, b"x"] {
            assert_eq!(ResendRequest::parse(bad), None);
        }
    }

    #[test]
    fn the_schedule_backs_off_and_gives_up_until_something_fills() {
        let t0 = Instant::now();
        let at = |s: f64| t0 + Duration::from_secs_f64(s);
        let mut a = Ask::default();
        a.hole(t0);
        assert!(!a.due(at(0.5)) && a.due(at(1.0)));
        // 1, 2, 4, 8, 16 then 30 s apart (the back-off of the module doc).
        let mut t = 1.0;
        let mut gaps = Vec::new();
        while a.due(at(t)) {
            a.asked(at(t));
            let before = t;
            while !a.due(at(t)) && t < 1000.0 {
                t += 0.5;
            }
            gaps.push(t - before);
        }
        assert_eq!(gaps[..6], [1.0, 2.0, 4.0, 8.0, 16.0, 30.0]);
        assert_eq!(a.unanswered(), MAX_ASKS);
        assert!(a.gave_up());
        // A record that fills the hole starts the schedule afresh.
        a.filled(at(t));
        assert!(!a.gave_up() && !a.due(at(t + 0.9)) && a.due(at(t + 1.0)));
    }
}
