//! Starting the reader thread on a bounded queue, shared by every command.
//!
//! Queues are bounded so a slow consumer never makes memory grow: file input simply waits, a live
//! source drops whole blocks (counted in [`ReaderStats::dropped`]) when asked to.

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

/// Samples per block for input that is watched as it arrives (live sources, paced playback):
/// about 10 ms of signal, so records and the screen follow the signal closely and a row never
/// waits on a block; files read for a report use large blocks, which read faster.
pub fn live_block_len(sample_rate_hz: f64) -> usize {
    (sample_rate_hz / 100.0).clamp(1024.0, 65536.0) as usize
}

/// Samples per block for input read as fast as it comes.
pub const FILE_BLOCK_LEN: usize = 65536;

/// Reader options for an unattended run (`log`, `census`) of at most `seconds` of input: live
/// input in small blocks, dropping whole blocks when behind unless `no_drop`; files in large
/// blocks. Also returns how many samples the run will read, if known (for progress).
pub fn unattended_options(
    info: &SourceInfo,
    seconds: Option<f64>,
    no_drop: bool,
) -> (ReaderOptions, Option<u64>) {
    let max_samples = seconds.map(|s| (s * info.sample_rate_hz).round() as u64);
    let opts = ReaderOptions {
        block_len: if info.live { live_block_len(info.sample_rate_hz) } else { FILE_BLOCK_LEN },
        drop_when_full: info.live && !no_drop,
        max_samples,
        ..Default::default()
    };
    let total = match (max_samples, info.total_samples) {
        (Some(m), Some(t)) => Some(m.min(t)),
        (_, t) => t,
    };
    (opts, total)
}

/// A running reader and the receiving end of its queue.
pub struct Input {
    pub info: SourceInfo,
    pub blocks: Receiver<Block>,
    pub stats: Arc<ReaderStats>,
    pub stop: Arc<AtomicBool>,
    max_samples: Option<u64>,
    handle: Option<JoinHandle<Result<InputIssues>>>,
}

impl Input {
    pub fn start(src: Box<dyn SampleSource>, opts: ReaderOptions) -> Input {
        let info = src.info().clone();
        let (tx, rx) = bounded(if info.live { LIVE_QUEUE_BLOCKS } else { FILE_QUEUE_BLOCKS });
        let stats = Arc::new(ReaderStats::default());
        let stop = Arc::new(AtomicBool::new(false));
        let max_samples = opts.max_samples;
        let handle = reader::spawn(src, opts, tx, stop.clone(), stats.clone());
        Input { info, blocks: rx, stats, stop, max_samples, handle: Some(handle) }
    }

    /// Blocks that something other than a reader thread sends (tests of what runs on them).
    #[cfg(test)]
    pub(crate) fn from_blocks(info: SourceInfo, blocks: Receiver<Block>) -> Input {
        let stats = Arc::new(ReaderStats::default());
        let stop = Arc::new(AtomicBool::new(false));
        Input { info, blocks, stats, stop, max_samples: None, handle: None }
    }

    /// The most samples the reader was asked to take (`--seconds`), if limited.
    pub fn max_samples(&self) -> Option<u64> {
        self.max_samples
    }

    /// Asks the reader to stop at its next block.
    pub fn request_stop(&self) {
        self.stop.store(true, Ordering::SeqCst);
    }

    /// Samples the reader has taken from the source so far (delivered or dropped).
    pub fn samples_read(&self) -> u64 {
        self.stats.samples.load(Ordering::SeqCst)
    }

    /// Waits for the reader and returns what it found wrong with the input, or its error.
    pub fn finish(mut self) -> Result<InputIssues> {
        self.request_stop();
        // Drain so a reader blocked on a full queue can see the stop flag.
        while self.blocks.try_recv().is_ok() {}
        let Some(handle) = self.handle.take() else { return Ok(InputIssues::default()) };
        drop(self.blocks);
        handle.join().map_err(|_| anyhow!("the reader thread panicked"))?
    }
}
