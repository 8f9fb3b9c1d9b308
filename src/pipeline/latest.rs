//! Newest wins: rows for a screen, which must never slow the DSP down (a live source would then
//! drop samples).
//!
//! The run goes on its own thread ([`RowFeed`]); rows go into a small bounded queue with
//! `try_send`, and when it is full the *oldest* queued row is thrown away and counted in
//! `skipped`, so the screen always gets the newest. New settings (FFT size, window, row rate)
//! arrive on a control channel and rebuild the engine between blocks.

use super::input::Input;
use super::run::{run_input_until, Outcome, Run, RunSpec};
use super::stop::StopReason;
use super::{Consumer, Flow};
use crate::dsp::{DspConfig, EngineConfig, Spectrum, WindowKind};
use crossbeam_channel::{bounded, Receiver, Sender, TrySendError};
use std::io;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Arc;
use std::thread::JoinHandle;

/// Rows queued for the screen: slack for a late frame, no more; the screen drains them all each
/// frame, so a full queue means it is really behind.
pub const ROW_QUEUE: usize = 4;

/// How the live monitor cuts the input into rows: the analysis settings (as in [`DspConfig`],
/// which the monitor's keys change one by one) and a row rate.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RowSettings {
    pub fft_size: usize,
    pub window: WindowKind,
    pub overlap: f64,
    pub threads: usize,
    /// Waterfall rows per second of input.
    pub row_rate: f64,
}

impl RowSettings {
    pub fn new(dsp: DspConfig, row_rate: f64) -> RowSettings {
        let DspConfig { fft_size, window, overlap, threads } = dsp;
        RowSettings { fft_size, window, overlap, threads, row_rate }
    }

    pub fn dsp(&self) -> DspConfig {
        DspConfig {
            fft_size: self.fft_size,
            window: self.window,
            overlap: self.overlap,
            threads: self.threads,
        }
    }

    /// The engine configuration that averages enough frames for one row at `sample_rate_hz`.
    pub fn engine(&self, sample_rate_hz: f64) -> EngineConfig {
        let dsp = self.dsp();
        let frames_per_s = sample_rate_hz / dsp.hop() as f64;
        let k = (frames_per_s / self.row_rate.max(1e-3)).round().max(1.0) as u64;
        dsp.engine(Some(k))
    }
}

/// The consumer that offers every row to the screen's queue.
struct LatestRows {
    rows: Sender<Spectrum>,
    /// A receiver of our own queue, to take out the oldest row when it is full.
    oldest: Receiver<Spectrum>,
    skipped: Arc<AtomicU64>,
    control: Receiver<EngineConfig>,
}

impl LatestRows {
    /// Queues a row without ever waiting: newest wins.
    fn offer(&self, row: &Spectrum) {
        match self.rows.try_send(row.clone()) {
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

impl Consumer for LatestRows {
    fn row(&mut self, row: &Spectrum) -> io::Result<Flow> {
        self.offer(row);
        Ok(Flow::Continue)
    }

    /// At a gap or the end of the input the screen still shows what the last rows held.
    fn partial_row(&mut self, row: &Spectrum) -> io::Result<()> {
        self.offer(row);
        Ok(())
    }

    fn poll(&mut self) -> Flow {
        let mut newest = None;
        while let Ok(cfg) = self.control.try_recv() {
            newest = Some(cfg);
        }
        newest.map_or(Flow::Continue, Flow::Retune)
    }
}

/// A run on its own thread, feeding a screen.
pub struct RowFeed {
    pub rows: Receiver<Spectrum>,
    control: Sender<EngineConfig>,
    sample_rate_hz: f64,
    /// Rows thrown away because the screen was behind.
    pub skipped: Arc<AtomicU64>,
    stop: Arc<AtomicBool>,
    handle: Option<JoinHandle<anyhow::Result<Outcome>>>,
}

impl RowFeed {
    /// Starts the run over `input`; the queue of rows is closed when the input ends.
    pub fn spawn(input: Input, spec: RunSpec) -> io::Result<RowFeed> {
        RowFeed::spawn_with(input, spec, Vec::new())
    }

    /// [`RowFeed::spawn`] with more consumers on the run's thread (a recording of the input):
    /// they see every block and gap, and the run ends as every command's does
    /// ([`run_input_until`]: the lost tail, the sample limit, every consumer's end), its
    /// [`Outcome`] handed back by [`RowFeed::stop`].
    pub fn spawn_with(
        input: Input,
        spec: RunSpec,
        mut extra: Vec<Box<dyn Consumer + Send>>,
    ) -> io::Result<RowFeed> {
        let (row_tx, row_rx) = bounded(ROW_QUEUE);
        let (control_tx, control_rx) = bounded(8);
        let skipped = Arc::new(AtomicU64::new(0));
        let stop = Arc::new(AtomicBool::new(false));
        let sample_rate_hz = spec.source.sample_rate_hz;
        let mut latest = LatestRows {
            rows: row_tx,
            oldest: row_rx.clone(),
            skipped: skipped.clone(),
            control: control_rx,
        };
        let stop2 = stop.clone();
        let handle = std::thread::Builder::new().name("dsp".into()).spawn(move || {
            let mut consumers: Vec<&mut dyn Consumer> = vec![&mut latest];
            consumers.extend(extra.iter_mut().map(|c| &mut **c as &mut dyn Consumer));
            let run = Run::new(spec, consumers);
            let closed = || stop2.load(Ordering::Relaxed).then_some(StopReason::Closed);
            run_input_until(input, run, &closed)
        })?;
        Ok(RowFeed {
            rows: row_rx,
            control: control_tx,
            sample_rate_hz,
            skipped,
            stop,
            handle: Some(handle),
        })
    }

    /// Asks for new settings; they apply from the next block.
    pub fn apply(&self, settings: &RowSettings) {
        let _ = self.control.send(settings.engine(self.sample_rate_hz));
    }

    /// Stops the run (the operator closed the monitor: [`StopReason::Closed`]) and waits for
    /// it; what the run came to, or why it failed.
    pub fn stop(mut self) -> anyhow::Result<Outcome> {
        self.stop.store(true, Ordering::SeqCst);
        let handle = self.handle.take().expect("stop is called once");
        handle.join().map_err(|_| anyhow::anyhow!("the processing thread panicked"))?
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::source::reader::Block;
    use crate::source::SourceInfo;
    use num_complex::Complex32;
    use std::time::Duration;

    fn settings(row_rate: f64) -> RowSettings {
        let dsp = DspConfig { fft_size: 256, window: WindowKind::Hann, overlap: 0.5, threads: 1 };
        RowSettings::new(dsp, row_rate)
    }

    fn spec(settings: &RowSettings) -> RunSpec {
        let source = SourceInfo::synthetic(1e6, 0.0);
        RunSpec::new(source, settings.engine(1e6), 1)
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
        let s = RowSettings { row_rate: 1e6 / 128.0 / 100.0, ..settings(0.0) };
        let spec = spec(&s);
        let input = Input::from_blocks(spec.source.clone(), rx);
        let feed = RowFeed::spawn(input, spec).unwrap();
        // 2010 frames of 256 at a hop of 128: 20 full rows and a partial one of 10 frames.
        let n = 2009 * 128 + 256;
        let block = Block::new(0, vec![Complex32::new(0.1, 0.0); n]);
        tx.send(block).unwrap();
        drop(tx); // end of input
        let t0 = std::time::Instant::now();
        while feed.skipped.load(Ordering::SeqCst) as usize + feed.rows.len() < 21
            && t0.elapsed() < Duration::from_secs(20)
        {
            std::thread::sleep(Duration::from_millis(10));
        }
        // Nobody read while the thread ran: the queue holds the newest ROW_QUEUE rows.
        let mut got = Vec::new();
        while let Ok(r) = feed.rows.recv_timeout(Duration::from_secs(5)) {
            got.push(r);
        }
        assert_eq!(got.len(), ROW_QUEUE);
        let skipped = feed.skipped.load(Ordering::SeqCst);
        assert_eq!(skipped as usize + got.len(), 21);
        assert!(got.windows(2).all(|w| w[0].first_sample < w[1].first_sample));
        assert_eq!(got.last().unwrap().end_sample, n as u64);
        let outcome = feed.stop().unwrap();
        assert_eq!(outcome.end.reason, StopReason::EndOfInput);
    }

    #[test]
    fn settings_change_the_fft_size() {
        let (tx, rx) = bounded(4);
        let spec = spec(&settings(1000.0));
        let feed = RowFeed::spawn(Input::from_blocks(spec.source.clone(), rx), spec).unwrap();
        let mut s = settings(1000.0);
        s.fft_size = 512;
        feed.apply(&s);
        std::thread::sleep(Duration::from_millis(100));
        tx.send(Block::new(0, vec![Complex32::new(0.0, 0.1); 4096])).unwrap();
        let r = feed.rows.recv_timeout(Duration::from_secs(5)).unwrap();
        assert_eq!(r.fft_size, 512);
        drop(tx);
        feed.stop().unwrap();
    }
}
