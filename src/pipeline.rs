//! Wiring of the reader thread to whoever runs the DSP, shared by every command.

use crate::source::reader::{self, Block, ReaderOptions, ReaderStats};
use crate::source::{InputIssues, SampleSource, SourceInfo};
use anyhow::{anyhow, Result};
use crossbeam_channel::{bounded, Receiver};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::thread::JoinHandle;

/// Blocks in flight between the reader and a live source's DSP: with 64k-sample blocks, 32 MiB,
/// about 0.2 s at 20 MS/s, so a brief stall of the DSP loses nothing.
pub const LIVE_QUEUE_BLOCKS: usize = 64;
/// For files a short queue suffices (the reader simply waits) and keeps memory low.
pub const FILE_QUEUE_BLOCKS: usize = 8;

/// A running reader and the receiving end of its queue.
pub struct Input {
    pub info: SourceInfo,
    pub blocks: Receiver<Block>,
    pub stats: Arc<ReaderStats>,
    pub stop: Arc<AtomicBool>,
    handle: Option<JoinHandle<Result<InputIssues>>>,
}

impl Input {
    pub fn start(src: Box<dyn SampleSource>, opts: ReaderOptions) -> Input {
        let info = src.info().clone();
        let (tx, rx) = bounded(if info.live { LIVE_QUEUE_BLOCKS } else { FILE_QUEUE_BLOCKS });
        let stats = Arc::new(ReaderStats::default());
        let stop = Arc::new(AtomicBool::new(false));
        let handle = reader::spawn(src, opts, tx, stop.clone(), stats.clone());
        Input { info, blocks: rx, stats, stop, handle: Some(handle) }
    }

    /// Asks the reader to stop at its next block.
    pub fn request_stop(&self) {
        self.stop.store(true, Ordering::SeqCst);
    }

    /// Waits for the reader and returns what it found wrong with the input, or its error.
    pub fn finish(mut self) -> Result<InputIssues> {
        self.request_stop();
        // Drain so a reader blocked on a full queue can see the stop flag.
        while self.blocks.try_recv().is_ok() {}
        let handle = self.handle.take().expect("finish is called once");
        drop(self.blocks);
        handle.join().map_err(|_| anyhow!("the reader thread panicked"))?
    }
}
