//! A long-lived helper thread that transforms frames for the [`Engine`](super::Engine).
//!
//! Starting a scoped thread for every batch cost about as much as the transforms of a few frames;
//! a worker started once and fed over channels does not. Its accumulator travels with each job
//! and comes back with the result, so nothing is allocated per batch.

use super::stft::Stft;
use super::window::WindowKind;
use crossbeam_channel::{bounded, Receiver, Sender};
use num_complex::Complex32;
use std::thread::JoinHandle;

/// Frames `first .. end` (starting every `hop` samples, `n` long) of the samples at `data`.
struct Job {
    data: *const Complex32,
    len: usize,
    first: usize,
    end: usize,
    hop: usize,
    acc: Vec<f64>,
}

// SAFETY: the pointer refers to the engine's pending buffer, which the engine neither moves nor
// changes until it has received this job's result (see `Worker::start` / `Worker::wait`).
unsafe impl Send for Job {}

pub struct Worker {
    jobs: Option<Sender<Job>>,
    done: Receiver<Vec<f64>>,
    handle: Option<JoinHandle<()>>,
    /// The accumulator while it is at home.
    acc: Option<Vec<f64>>,
}

impl Worker {
    pub fn new(fft_size: usize, window: WindowKind) -> Worker {
        let (job_tx, job_rx) = bounded::<Job>(1);
        let (done_tx, done_rx) = bounded(1);
        let handle = std::thread::Builder::new()
            .name("dsp-worker".into())
            .spawn(move || {
                let mut stft = Stft::new(fft_size, window);
                let mut partial = vec![0.0f32; fft_size];
                for mut job in job_rx.iter() {
                    // SAFETY: see `Job`; the slice stays valid until we send the result.
                    let data = unsafe { std::slice::from_raw_parts(job.data, job.len) };
                    stft.accumulate_frames(
                        data,
                        job.first,
                        job.end,
                        job.hop,
                        &mut partial,
                        &mut job.acc,
                    );
                    if done_tx.send(job.acc).is_err() {
                        break;
                    }
                }
            })
            .expect("spawning a DSP worker thread");
        Worker {
            jobs: Some(job_tx),
            done: done_rx,
            handle: Some(handle),
            acc: Some(vec![0.0; fft_size]),
        }
    }

    /// Hands frames `first .. end` of `data` to the worker. The caller must call [`wait`] before
    /// it changes or drops `data`.
    ///
    /// [`wait`]: Worker::wait
    pub fn start(&mut self, data: &[Complex32], first: usize, end: usize, hop: usize) {
        let acc = self.acc.take().expect("a worker runs one job at a time");
        let job = Job { data: data.as_ptr(), len: data.len(), first, end, hop, acc };
        self.jobs.as_ref().expect("worker is running").send(job).expect("DSP worker thread ended");
    }

    /// Waits for the job and adds its sums into `into`, clearing the worker's accumulator.
    pub fn wait(&mut self, into: &mut [f64]) {
        let mut acc = self.done.recv().expect("DSP worker thread ended");
        for (a, h) in into.iter_mut().zip(acc.iter_mut()) {
            *a += *h;
            *h = 0.0;
        }
        self.acc = Some(acc);
    }
}

impl Drop for Worker {
    fn drop(&mut self) {
        self.jobs.take();
        if let Some(h) = self.handle.take() {
            let _ = h.join();
        }
    }
}
