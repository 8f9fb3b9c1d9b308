//! Mail between the consumers of one run: what one consumer finds that another acts on (a
//! finder's emission starts a capture; a capture's record goes into the log), without either
//! knowing the other and without the order of the consumer list mattering.
//!
//! The [`Run`](super::Run) owns the [`Outbox`] and hands every consumer a [`Post`] when it is
//! built ([`Consumer::connect`](super::Consumer::connect)). A consumer sends any value through
//! its post; the run delivers every letter to every consumer
//! ([`Consumer::mail`](super::Consumer::mail)) after each step (a block, a gap, a stage of the
//! end), and again while the letters delivered cause new ones, before the next step begins. So
//! a consumer sees the mail of a step whether it comes before or after the sender in the list,
//! and a new consumer cannot miss mail: it gets every letter there is and picks the kinds it
//! knows by type ([`Letter::read`]).
//!
//! Letters are rare (one per emission, one per capture), so each is a box: the row path, which
//! sends none, allocates nothing.

use std::any::Any;
use std::collections::VecDeque;
use std::sync::{Arc, Mutex, PoisonError};

/// One message between consumers: any value, read back by its type.
pub struct Letter(Box<dyn Any + Send>);

impl Letter {
    /// The letter's content when it is a `T`.
    pub fn read<T: 'static>(&self) -> Option<&T> {
        self.0.downcast_ref()
    }
}

impl std::fmt::Debug for Letter {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Letter")
    }
}

type Queue = Arc<Mutex<VecDeque<Letter>>>;

/// Where a consumer sends its letters; cheap to clone, and `Send` so a consumer of the
/// monitor's run (on its own thread) may hold it.
#[derive(Clone, Default)]
pub struct Post {
    queue: Queue,
}

impl Post {
    pub fn send<T: Any + Send>(&self, content: T) {
        self.queue
            .lock()
            .unwrap_or_else(PoisonError::into_inner)
            .push_back(Letter(Box::new(content)));
    }
}

impl std::fmt::Debug for Post {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Post")
    }
}

/// The run's side of the post: the letters sent and not yet delivered.
#[derive(Default)]
pub struct Outbox {
    post: Post,
}

impl Outbox {
    /// The post consumers send through.
    pub fn post(&self) -> Post {
        self.post.clone()
    }

    /// The oldest letter not yet delivered.
    pub fn next_letter(&self) -> Option<Letter> {
        self.post.queue.lock().unwrap_or_else(PoisonError::into_inner).pop_front()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn letters_come_out_in_the_order_sent_and_read_by_type() {
        let outbox = Outbox::default();
        let post = outbox.post();
        post.send(7_u32);
        post.clone().send("seven".to_string());
        let first = outbox.next_letter().unwrap();
        assert_eq!(first.read::<u32>(), Some(&7));
        assert_eq!(first.read::<String>(), None);
        assert_eq!(
            outbox.next_letter().unwrap().read::<String>().map(String::as_str),
            Some("seven")
        );
        assert!(outbox.next_letter().is_none());
    }
}
