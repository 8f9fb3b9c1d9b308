//! The monitor's DSP thread: sample blocks in, one averaged spectrum per waterfall row out.
//!
//! The screen must never slow the DSP down (a live source would then drop samples). Rows go into
//! a small bounded queue with `try_send`; when it is full the *oldest* queued row is thrown away
//! and counted in `skipped`, so the screen always gets the newest. Settings (FFT size, window,
//! row rate) arrive on a control channel and rebuild the engine between blocks.

use crate::dsp::{Engine, EngineConfig, Spectrum, WindowKind};
use crate::source::reader::Block;
use crossbeam_channel::{bounded, select, Receiver, Sender, TrySendError};
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Arc;
use std::thread::JoinHandle;
use std::time::Duration;

/// Rows queued for the screen: slack for a late frame, no more; the screen drains them all each
/// frame, so a full queue means it is really behind.
pub const ROW_QUEUE: usize = 4;

/// How the DSP cuts the input into rows.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DspSettings {
    pub fft_size: usize,
    pub window: WindowKind,
    pub overlap: f64,
    /// Waterfall rows per second of input.
    pub row_rate: f64,
    /// Transform threads.
    pub threads: usize,
}

impl DspSettings {
    fn new_engine(&self, sample_rate_hz: f64, center_hz: f64) -> Engine {
        let mut e = Engine::new(self.engine(sample_rate_hz), sample_rate_hz, center_hz);
        e.set_threads(self.threads);
        e
    }

    /// The engine configuration that averages enough frames for one row at `sample_rate_hz`.
    pub fn engine(&self, sample_rate_hz: f64) -> EngineConfig {
        let mut cfg = EngineConfig {
            fft_size: self.fft_size,
            window: self.window,
            overlap: self.overlap,
            frames_per_output: None,
        };
        let frames_per_s = sample_rate_hz / cfg.hop() as f64;
        let k = (frames_per_s / self.row_rate.max(1e-3)).round().max(1.0) as u64;
        cfg.frames_per_output = Some(k);
        cfg
    }
}

/// A running DSP thread.
pub struct DspThread {
    pub rows: Receiver<Spectrum>,
    control: Sender<DspSettings>,
    /// Rows thrown away because the screen was behind.
    pub skipped: Arc<AtomicU64>,
    stop: Arc<AtomicBool>,
    handle: Option<JoinHandle<()>>,
}

impl DspThread {
    pub fn spawn(
        blocks: Receiver<Block>,
        sample_rate_hz: f64,
        center_hz: f64,
        settings: DspSettings,
    ) -> DspThread {
        let (row_tx, row_rx) = bounded(ROW_QUEUE);
        let (control_tx, control_rx) = bounded(8);
        let skipped = Arc::new(AtomicU64::new(0));
        let stop = Arc::new(AtomicBool::new(false));
        let worker = Worker {
            rows: row_tx,
            oldest: row_rx.clone(),
            skipped: skipped.clone(),
            engine: settings.new_engine(sample_rate_hz, center_hz),
            sample_rate_hz,
            center_hz,
        };
        let stop2 = stop.clone();
        let handle = std::thread::Builder::new()
            .name("dsp".into())
            .spawn(move || worker.run(blocks, control_rx, stop2))
            .expect("spawning the DSP thread");
        DspThread { rows: row_rx, control: control_tx, skipped, stop, handle: Some(handle) }
    }

    /// Asks for new settings; they apply from the next block.
    pub fn apply(&self, settings: DspSettings) {
        let _ = self.control.send(settings);
    }

    /// Stops the thread and waits for it.
    pub fn stop(mut self) {
        self.stop.store(true, Ordering::SeqCst);
        if let Some(h) = self.handle.take() {
            let _ = h.join();
        }
    }
}

struct Worker {
    rows: Sender<Spectrum>,
    /// A receiver of our own queue, to take out the oldest row when it is full.
    oldest: Receiver<Spectrum>,
    skipped: Arc<AtomicU64>,
    engine: Engine,
    sample_rate_hz: f64,
    center_hz: f64,
}

impl Worker {
    fn run(
        mut self,
        blocks: Receiver<Block>,
        control: Receiver<DspSettings>,
        stop: Arc<AtomicBool>,
    ) {
        while !stop.load(Ordering::Relaxed) {
            select! {
                recv(blocks) -> msg => match msg {
                    Ok(block) => self.feed(&block),
                    Err(_) => {
                        // End of input: show what the last partial row holds.
                        let mut last = None;
                        self.engine.finish(&mut |s| last = Some(s));
                        if let Some(s) = last {
                            self.offer(s);
                        }
                        return;
                    }
                },
                recv(control) -> msg => match msg {
                    Ok(settings) => {
                        self.engine = settings.new_engine(self.sample_rate_hz, self.center_hz);
                    }
                    Err(_) => return,
                },
                default(Duration::from_millis(50)) => {}
            }
        }
    }

    fn feed(&mut self, block: &Block) {
        let mut out = Vec::new();
        self.engine.push(block.start, &block.samples, &mut |s| out.push(s));
        for s in out {
            self.offer(s);
        }
    }

    /// Queues a row without ever waiting: newest wins.
    fn offer(&self, row: Spectrum) {
        match self.rows.try_send(row) {
            Ok(()) | Err(TrySendError::Disconnected(_)) => {}
            Err(TrySendError::Full(row)) => {
                if self.oldest.try_recv().is_ok() {
                    self.skipped.fetch_add(1, Ordering::Relaxed);
                }
                if self.rows.try_send(row).is_err() {
                    self.skipped.fetch_add(1, Ordering::Relaxed);
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use num_complex::Complex32;

    fn settings(row_rate: f64) -> DspSettings {
        DspSettings { fft_size: 256, window: WindowKind::Hann, overlap: 0.5, row_rate, threads: 1 }
    }

    #[test]
    fn rows_average_enough_frames_for_the_row_rate() {
        // 1 MS/s, hop 128: 7812.5 frames/s; 20 rows/s → 391 frames a row.
        assert_eq!(settings(20.0).engine(1e6).frames_per_output, Some(391));
        // A slow input never averages less than one frame.
        assert_eq!(settings(20.0).engine(1e3).frames_per_output, Some(1));
    }

    #[test]
    fn a_slow_screen_gets_the_newest_rows_and_skips_are_counted() {
        let (tx, rx) = bounded(64);
        // 1 row per 100 frames of 128 hop → 12800 samples a row; 20 rows in this input.
        let s = DspSettings { row_rate: 1e6 / 128.0 / 100.0, ..settings(0.0) };
        let dsp = DspThread::spawn(rx, 1e6, 0.0, s);
        // 2010 frames of 256 at a hop of 128: 20 full rows and a partial one of 10 frames.
        let n = 2009 * 128 + 256;
        let block = Block::new(0, vec![Complex32::new(0.1, 0.0); n]);
        tx.send(block).unwrap();
        drop(tx); // end of input
        let t0 = std::time::Instant::now();
        while dsp.skipped.load(Ordering::SeqCst) as usize + dsp.rows.len() < 21
            && t0.elapsed() < Duration::from_secs(20)
        {
            std::thread::sleep(Duration::from_millis(10));
        }
        // Nobody read while the thread ran: the queue holds the newest ROW_QUEUE rows.
        let mut got = Vec::new();
        while let Ok(r) = dsp.rows.recv_timeout(Duration::from_secs(5)) {
            got.push(r);
        }
        assert_eq!(got.len(), ROW_QUEUE);
        let skipped = dsp.skipped.load(Ordering::SeqCst);
        assert_eq!(skipped as usize + got.len(), 21);
        assert!(got.windows(2).all(|w| w[0].first_sample < w[1].first_sample));
        assert_eq!(got.last().unwrap().end_sample, n as u64);
        dsp.stop();
    }

    #[test]
    fn settings_change_the_fft_size() {
        let (tx, rx) = bounded(4);
        let dsp = DspThread::spawn(rx, 1e6, 0.0, settings(1000.0));
        dsp.apply(DspSettings { fft_size: 512, ..settings(1000.0) });
        std::thread::sleep(Duration::from_millis(100));
        tx.send(Block::new(0, vec![Complex32::new(0.0, 0.1); 4096])).unwrap();
        let r = dsp.rows.recv_timeout(Duration::from_secs(5)).unwrap();
        assert_eq!(r.fft_size, 512);
        drop(tx);
        dsp.stop();
    }
}
