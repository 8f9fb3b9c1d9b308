//! Long-lived helper threads that share the engine's transforms, batch by batch.
//!
//! A batch is a list of frame groups, each with its own f32 slot for the summed power. Every
//! thread (the engine's own included) takes the next untaken group until none is left, so a
//! thread that the reader or the scheduler slows down simply takes fewer groups; the engine then
//! folds the slots in group order, so the totals do not depend on who computed what. Starting a
//! scoped thread per batch cost about as much as transforming a few frames; threads started once
//! and woken through a mailbox do not, and nothing is allocated per batch.

use super::stft::{FrameSet, Stft};
use super::window::WindowKind;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Arc, Condvar, Mutex};
use std::thread::JoinHandle;

/// One batch: groups of frames (`first .. end` of `frames`) and where each group's sum goes.
pub struct Batch<'a> {
    pub frames: FrameSet<'a>,
    pub groups: &'a [(usize, usize)],
    /// `groups.len() · n` floats; group `g` owns `slots[g·n .. (g+1)·n]`.
    slots: *mut f32,
    next: AtomicUsize,
}

impl<'a> Batch<'a> {
    pub fn new(frames: FrameSet<'a>, groups: &'a [(usize, usize)], slots: &'a mut [f32]) -> Self {
        assert!(slots.len() >= groups.len() * frames.n, "one slot per group");
        Batch { frames, groups, slots: slots.as_mut_ptr(), next: AtomicUsize::new(0) }
    }

    /// Transforms untaken groups until there are none left.
    fn work(&self, stft: &mut Stft) {
        let n = self.frames.n;
        loop {
            let g = self.next.fetch_add(1, Ordering::Relaxed);
            let Some(&(first, end)) = self.groups.get(g) else { return };
            // SAFETY: `fetch_add` hands each index to exactly one thread, so slot `g` is written
            // by one thread only, and `new` checked that it lies inside `slots`, which the
            // engine does not touch until every thread has reported back (see `Team::run`).
            let slot = unsafe { std::slice::from_raw_parts_mut(self.slots.add(g * n), n) };
            stft.sum_frames(&self.frames, first, end, slot);
        }
    }
}

/// A batch handed to a helper thread by address.
#[derive(Clone, Copy)]
struct Job(*const Batch<'static>);

// SAFETY: the batch lives on the engine's stack and stays there, unchanged except through its
// atomic counter and disjoint slots, until the helper has answered (`Team::run` waits for every
// answer, even while unwinding). Every field it points to is `Sync` data.
unsafe impl Send for Job {}

/// What a helper's mailbox holds. A mutex and a condition variable (futexes on Linux) hand
/// batches over without allocating, not even the first time a thread has to sleep, which
/// channels do lazily (and `tests/no_alloc.rs` would catch).
enum Mail {
    Empty,
    Job(Job),
    Working,
    Done,
    /// The helper should end.
    Quit,
    /// The helper ended by panicking.
    Dead,
}

struct Mailbox {
    mail: Mutex<Mail>,
    changed: Condvar,
}

impl Mailbox {
    /// Hands a job over; false if the helper has died.
    fn post(&self, job: Job) -> bool {
        let mut mail = self.mail.lock().unwrap_or_else(|e| e.into_inner());
        if matches!(*mail, Mail::Dead) {
            return false;
        }
        *mail = Mail::Job(job);
        drop(mail);
        self.changed.notify_all();
        true
    }

    fn put(&self, mail: Mail) {
        *self.mail.lock().unwrap_or_else(|e| e.into_inner()) = mail;
        self.changed.notify_all();
    }

    /// Waits until `ready` accepts the mail, then replaces it with `next` and returns the old.
    fn take(&self, ready: impl Fn(&Mail) -> bool, next: Mail) -> Mail {
        let guard = self.mail.lock().unwrap_or_else(|e| e.into_inner());
        let mut guard =
            self.changed.wait_while(guard, |m| !ready(m)).unwrap_or_else(|e| e.into_inner());
        std::mem::replace(&mut *guard, next)
    }
}

struct Member {
    mailbox: Arc<Mailbox>,
    handle: Option<JoinHandle<()>>,
}

/// Helper threads, each with its own planned transform.
pub struct Team {
    members: Vec<Member>,
}

impl Team {
    pub fn new(helpers: usize, fft_size: usize, window: WindowKind) -> Team {
        let members = (0..helpers)
            .map(|_| {
                let mailbox =
                    Arc::new(Mailbox { mail: Mutex::new(Mail::Empty), changed: Condvar::new() });
                let own = mailbox.clone();
                let handle = std::thread::Builder::new()
                    .name("dsp-worker".into())
                    .spawn(move || helper(&own, fft_size, window))
                    .expect("spawning a DSP worker thread");
                Member { mailbox, handle: Some(handle) }
            })
            .collect();
        Team { members }
    }

    pub fn helpers(&self) -> usize {
        self.members.len()
    }

    /// Runs `batch` on the helpers and on the calling thread (with `stft`); returns when every
    /// group is done.
    pub fn run(&self, batch: &Batch<'_>, stft: &mut Stft) {
        // Helpers are only worth waking when there is more than one group.
        let wake = if batch.groups.len() > 1 { self.members.len() } else { 0 };
        let mut guard = Waiting { members: &self.members[..0] };
        for i in 0..wake {
            let job = Job(std::ptr::from_ref(batch).cast());
            assert!(self.members[i].mailbox.post(job), "DSP worker thread ended");
            guard.members = &self.members[..=i];
        }
        batch.work(stft);
        drop(guard);
    }
}

/// A helper thread's life: take a batch, work on it, report, until told to quit.
fn helper(mailbox: &Mailbox, fft_size: usize, window: WindowKind) {
    /// Tells the engine if this thread dies while it may be waiting for us.
    struct Obituary<'a>(&'a Mailbox);
    impl Drop for Obituary<'_> {
        fn drop(&mut self) {
            if std::thread::panicking() {
                self.0.put(Mail::Dead);
            }
        }
    }
    let _obituary = Obituary(mailbox);
    let mut stft = Stft::new(fft_size, window);
    loop {
        match mailbox.take(|m| matches!(m, Mail::Job(_) | Mail::Quit), Mail::Working) {
            Mail::Job(job) => {
                // SAFETY: see `Job`.
                let batch = unsafe { &*job.0 };
                batch.work(&mut stft);
                mailbox.put(Mail::Done);
            }
            _ => return,
        }
    }
}

/// Waits for the answer of every helper that was given the batch, also when unwinding, so no
/// helper can still be reading the batch once `run` has returned.
struct Waiting<'a> {
    members: &'a [Member],
}

impl Drop for Waiting<'_> {
    fn drop(&mut self) {
        for m in self.members {
            let answer = m.mailbox.take(|m| matches!(m, Mail::Done | Mail::Dead), Mail::Empty);
            if matches!(answer, Mail::Dead) {
                m.mailbox.put(Mail::Dead);
                if !std::thread::panicking() {
                    panic!("DSP worker thread ended");
                }
            }
        }
    }
}

impl Drop for Team {
    fn drop(&mut self) {
        for m in &self.members {
            let mut mail = m.mailbox.mail.lock().unwrap_or_else(|e| e.into_inner());
            if !matches!(*mail, Mail::Dead) {
                *mail = Mail::Quit;
            }
            drop(mail);
            m.mailbox.changed.notify_all();
        }
        for m in &mut self.members {
            if let Some(h) = m.handle.take() {
                let _ = h.join();
            }
        }
    }
}
