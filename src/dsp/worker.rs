//! Long-lived helper threads that share the engine's transforms, batch by batch.
//!
//! A batch is a list of frame groups, each with its own f32 slot for the summed power. Every
//! thread (the engine's own included) takes the next untaken group until none is left, so a
//! thread that the reader or the scheduler slows down simply takes fewer groups; the engine
//! folds the slots in group order, so the totals do not depend on who computed what. Starting a
//! scoped thread per batch cost about as much as transforming a few frames; threads started once
//! and woken through a mailbox do not, and nothing is allocated per batch.
//!
//! The engine's thread folds each group as soon as it and those before it are done, and only
//! transforms while the next group in order is still being worked on
//! ([`Team::run_folding`]): a finished row is then measured (noise floor, detection, the
//! consumers) while the helpers go on transforming the rest of the batch, instead of idling
//! until the engine's thread has measured every row of it.

use super::engine::GROUPS;
use super::stft::{FrameSet, Stft};
use super::window::WindowKind;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::{Arc, Condvar, Mutex};
use std::thread::JoinHandle;

/// One batch: groups of frames (`first .. end` of `frames`) and where each group's sum goes.
pub struct Batch<'a> {
    pub frames: FrameSet<'a>,
    pub groups: &'a [(usize, usize)],
    /// `groups.len() · n` floats; group `g` owns `slots[g·n .. (g+1)·n]`.
    slots: *mut f32,
    next: AtomicUsize,
    /// Set once group `g`'s slot holds its sum (and is never written again in this batch).
    done: [AtomicBool; GROUPS],
    /// Set when a helper died inside this batch: the group it held will never be done.
    broken: AtomicBool,
    /// Wakes the engine's thread waiting for a group (see [`Batch::wait_done`]).
    lock: Mutex<()>,
    changed: Condvar,
}

impl<'a> Batch<'a> {
    pub fn new(frames: FrameSet<'a>, groups: &'a [(usize, usize)], slots: &'a mut [f32]) -> Self {
        assert!(slots.len() >= groups.len() * frames.n, "one slot per group");
        assert!(groups.len() <= GROUPS, "at most {GROUPS} groups per batch");
        Batch {
            frames,
            groups,
            slots: slots.as_mut_ptr(),
            next: AtomicUsize::new(0),
            done: Default::default(),
            broken: AtomicBool::new(false),
            lock: Mutex::new(()),
            changed: Condvar::new(),
        }
    }

    /// Transforms untaken groups until there are none left.
    fn work(&self, stft: &mut Stft) {
        while self.work_one(stft) {}
    }

    /// Transforms the next untaken group; false when none was left.
    fn work_one(&self, stft: &mut Stft) -> bool {
        let n = self.frames.n;
        let g = self.next.fetch_add(1, Ordering::Relaxed);
        let Some(&(first, end)) = self.groups.get(g) else { return false };
        // SAFETY: `fetch_add` hands each index to exactly one thread, so slot `g` is written
        // by one thread only, and `new` checked that it lies inside `slots`, which the engine
        // reads only through `slot` once `done[g]` is set, and not at all otherwise until
        // every thread has reported back (see `Team::run_folding`).
        let slot = unsafe { std::slice::from_raw_parts_mut(self.slots.add(g * n), n) };
        stft.sum_frames(&self.frames, first, end, slot);
        self.done[g].store(true, Ordering::Release);
        // Taking the lock orders this store before a waiter's check or after its sleep began.
        drop(self.lock.lock().unwrap_or_else(|e| e.into_inner()));
        self.changed.notify_all();
        true
    }

    fn is_done(&self, g: usize) -> bool {
        self.done[g].load(Ordering::Acquire)
    }

    /// Sleeps until group `g` is done.
    fn wait_done(&self, g: usize) {
        let guard = self.lock.lock().unwrap_or_else(|e| e.into_inner());
        let broken = || self.broken.load(Ordering::Acquire);
        let guard = self.changed.wait_while(guard, |_| !self.is_done(g) && !broken());
        drop(guard.unwrap_or_else(|e| e.into_inner()));
        assert!(self.is_done(g), "DSP worker thread ended");
    }

    /// Marks the batch broken (a helper is unwinding out of it) and wakes the engine's thread.
    fn abandon(&self) {
        self.broken.store(true, Ordering::Release);
        drop(self.lock.lock().unwrap_or_else(|e| e.into_inner()));
        self.changed.notify_all();
    }

    /// The sum of group `g`, once it is done.
    pub fn slot(&self, g: usize) -> &[f32] {
        assert!(self.is_done(g), "group {g} is not done");
        let n = self.frames.n;
        // SAFETY: `done[g]` is set (with release ordering, read here with acquire) only after
        // the one thread that took group `g` finished writing its slot; nobody writes it again.
        unsafe { std::slice::from_raw_parts(self.slots.add(g * n), n) }
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

    /// Runs `batch` on the helpers and on the calling thread (with `stft`), handing every group
    /// to `fold` on the calling thread, in group order, as soon as it and those before it are
    /// done; returns when every group is folded and every helper has let go of the batch.
    ///
    /// The calling thread folds first and transforms only while the next group is not done,
    /// so whatever `fold` does (measuring a finished row) overlaps the helpers' transforms.
    pub fn run_folding(&self, batch: &Batch<'_>, stft: &mut Stft, mut fold: impl FnMut(usize)) {
        // Helpers are only worth waking when there is more than one group.
        let wake = if batch.groups.len() > 1 { self.members.len() } else { 0 };
        let mut guard = Waiting { members: &self.members[..0] };
        for i in 0..wake {
            let job = Job(std::ptr::from_ref(batch).cast());
            assert!(self.members[i].mailbox.post(job), "DSP worker thread ended");
            guard.members = &self.members[..=i];
        }
        let mut next = 0;
        while next < batch.groups.len() {
            if batch.is_done(next) {
                fold(next);
                next += 1;
            } else if !batch.work_one(stft) {
                batch.wait_done(next);
            }
        }
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
                /// Tells the engine's thread, waiting for a group, if this thread dies in it.
                struct Abandon<'a>(&'a Batch<'a>);
                impl Drop for Abandon<'_> {
                    fn drop(&mut self) {
                        if std::thread::panicking() {
                            self.0.abandon();
                        }
                    }
                }
                let abandon = Abandon(batch);
                batch.work(&mut stft);
                drop(abandon);
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
