//! The thread that keeps the disk off the DSP thread, for every consumer that writes samples to
//! files (the recording, the captures): a bounded queue of jobs to it, and a small queue of
//! spent sample buffers back, so the steady state allocates nothing.
//!
//! The queue is bounded by bytes of samples ([`QUEUE_BYTES`]), so memory stays bounded however
//! slow the disk; what a consumer does when it is full (wait for file input, leave work out
//! with live input and say so) is its own rule, over [`WriterThread::offer`] and
//! [`WriterThread::send`].

use crossbeam_channel::{bounded, Receiver, SendError, Sender, TrySendError};
use num_complex::Complex32;
use std::io;
use std::thread::JoinHandle;

/// Most bytes of samples queued for one writer thread.
pub const QUEUE_BYTES: usize = 64 << 20;
/// Spent buffers kept for reuse: enough for a writer that keeps up; more are freed, so a
/// backlog that has cleared does not stay resident.
const SPARE_BUFFERS: usize = 8;

/// A writer thread: the jobs going to it, the buffers coming back, and its handle.
pub struct WriterThread<J, R> {
    jobs: Option<Sender<J>>,
    spare: Receiver<Vec<Complex32>>,
    handle: Option<JoinHandle<R>>,
}

/// What a writer thread's work is handed: its jobs, and where to return spent buffers.
pub type WorkQueues<J> = (Receiver<J>, Sender<Vec<Complex32>>);

impl<J: Send + 'static, R: Send + 'static> WriterThread<J, R> {
    /// Starts `work` on a thread named `name`, with a queue of `depth` jobs.
    pub fn spawn(
        name: &str,
        depth: usize,
        work: impl FnOnce(WorkQueues<J>) -> R + Send + 'static,
    ) -> io::Result<WriterThread<J, R>> {
        let (tx, rx) = bounded(depth.max(1));
        let (spare_tx, spare_rx) = bounded(SPARE_BUFFERS);
        let handle =
            std::thread::Builder::new().name(name.into()).spawn(move || work((rx, spare_tx)))?;
        Ok(WriterThread { jobs: Some(tx), spare: spare_rx, handle: Some(handle) })
    }

    /// A queue depth that holds at most [`QUEUE_BYTES`] of blocks of `block_len` samples.
    pub fn depth_for(block_len: usize) -> usize {
        QUEUE_BYTES / (block_len.max(1) * std::mem::size_of::<Complex32>())
    }

    /// An empty buffer: a spent one when the writer has returned one, else a new one.
    pub fn buffer(&self) -> Vec<Complex32> {
        let mut b = self.spare.try_recv().unwrap_or_default();
        b.clear();
        b
    }

    /// Queues `job` if there is room (live input never waits): the job back when full.
    pub fn offer(&self, job: J) -> Result<(), TrySendError<J>> {
        match self.jobs.as_ref() {
            Some(tx) => tx.try_send(job),
            None => Err(TrySendError::Disconnected(job)),
        }
    }

    /// Queues `job`, waiting for room (file input, or the end of a run).
    pub fn send(&self, job: J) -> Result<(), SendError<J>> {
        match self.jobs.as_ref() {
            Some(tx) => tx.send(job),
            None => Err(SendError(job)),
        }
    }

    /// Puts another queue in the place of the thread's (tests: a disk that stalls).
    #[cfg(test)]
    pub(crate) fn swap_jobs(&mut self, jobs: Sender<J>) -> Option<Sender<J>> {
        self.jobs.replace(jobs)
    }

    /// Closes the queue and waits for the thread: what its work returned, or `None` if it
    /// panicked or was already joined.
    pub fn close(&mut self) -> Option<R> {
        self.jobs = None;
        self.handle.take()?.join().ok()
    }
}
