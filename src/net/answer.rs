//! The publisher's answers to the collector's resend requests ([`crate::net::resend`]): each
//! request is looked up at once ([`crate::net::lookup`]) and its records wait here until the
//! publisher's window has room; they go ahead of new records, so holes fill before the run
//! moves on. Counted for the closing notes.

use crate::net::lookup::{find, LocalLog};
use crate::net::resend::{ResendRequest, MAX_ANSWER};
use crate::net::spool::Spool;
use std::collections::VecDeque;

/// Records asked for and not yet handed to the client.
#[derive(Default)]
pub struct Answers {
    queue: VecDeque<String>,
    /// Requests taken, records queued for them, and of those the ones read from the local log.
    pub requests: u64,
    pub resent: u64,
    pub from_log: u64,
}

impl Answers {
    /// Looks up the records a request message asks for and queues them; a message that is no
    /// request is ignored (`false`).
    pub fn take(&mut self, payload: &[u8], spool: &Spool, log: Option<&LocalLog>) -> bool {
        let Some(req) = ResendRequest::parse(payload) else { return false };
        self.requests += 1;
        // Records already queued for an earlier request are not queued twice.
        let room = MAX_ANSWER.saturating_sub(self.queue.len());
        let (lines, sources) = find(&req, &spool.segment_files(), log, room);
        self.from_log += sources.from_log as u64;
        for line in lines {
            if !self.queue.contains(&line) {
                self.queue.push_back(line);
                self.resent += 1;
            }
        }
        true
    }

    pub fn pop(&mut self) -> Option<String> {
        self.queue.pop_front()
    }

    /// Puts back a record the client had no room for.
    pub fn unpop(&mut self, line: String) {
        self.queue.push_front(line);
    }

    pub fn is_empty(&self) -> bool {
        self.queue.is_empty()
    }
}
