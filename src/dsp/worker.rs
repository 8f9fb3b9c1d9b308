//! Long-lived helper threads that share the engine's transforms, batch by batch.
//!
//! A batch is a list of frame groups, each with its own f32 slot for the summed power. Every
//! thread (the engine's own included) takes the next untaken group until none is left, so a
//! thread that the reader or the scheduler slows down simply takes fewer groups; the engine then
//! folds the slots in group order, so the totals do not depend on who computed what. Starting a
//! scoped thread per batch cost about as much as transforming a few frames; threads started once
//! and woken over channels do not, and nothing is allocated per batch.

use super::stft::{FrameSet, Stft};
use super::window::WindowKind;
use crossbeam_channel::{bounded, Receiver, Sender};
use std::sync::atomic::{AtomicUsize, Ordering};
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
struct Job(*const Batch<'static>);

// SAFETY: the batch lives on the engine's stack and stays there, unchanged except through its
// atomic counter and disjoint slots, until the helper has answered (`Team::run` waits for every
// answer, even while unwinding). Every field it points to is `Sync` data.
unsafe impl Send for Job {}

struct Member {
    jobs: Option<Sender<Job>>,
    done: Receiver<()>,
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
                let (job_tx, job_rx) = bounded::<Job>(1);
                let (done_tx, done_rx) = bounded(1);
                let handle = std::thread::Builder::new()
                    .name("dsp-worker".into())
                    .spawn(move || {
                        let mut stft = Stft::new(fft_size, window);
                        for job in job_rx.iter() {
                            // SAFETY: see `Job`.
                            let batch = unsafe { &*job.0 };
                            batch.work(&mut stft);
                            if done_tx.send(()).is_err() {
                                break;
                            }
                        }
                    })
                    .expect("spawning a DSP worker thread");
                Member { jobs: Some(job_tx), done: done_rx, handle: Some(handle) }
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
        for (i, m) in self.members[..wake].iter().enumerate() {
            let job = Job(std::ptr::from_ref(batch).cast());
            m.jobs.as_ref().expect("team is running").send(job).expect("DSP worker thread ended");
            guard.members = &self.members[..=i];
        }
        batch.work(stft);
        drop(guard);
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
            if m.done.recv().is_err() && !std::thread::panicking() {
                panic!("DSP worker thread ended");
            }
        }
    }
}

impl Drop for Team {
    fn drop(&mut self) {
        for m in &mut self.members {
            m.jobs.take();
        }
        for m in &mut self.members {
            if let Some(h) = m.handle.take() {
                let _ = h.join();
            }
        }
    }
}
