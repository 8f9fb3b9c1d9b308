//! Starting the reader thread on a bounded queue, shared by every command.
//!
//! Queues are bounded so a slow consumer never makes memory grow: file input simply waits, a live
//! source drops whole blocks (counted in [`ReaderStats::dropped`]) when asked to.

use crate::source::reader::{self, Block, ReaderOptions, ReaderStats};
use crate::source::{InputIssues, SampleSource, SourceInfo};
use anyhow::{anyhow, Result};
use crossbeam_channel::{bounded, Receiver};
use num_complex::Complex32;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::thread::JoinHandle;

/// Fewest blocks in flight between the reader and a live source's DSP.
pub const LIVE_QUEUE_BLOCKS: usize = 64;
/// Seconds of signal the live queue holds when memory allows: a stall of the DSP (the machine
/// busy with other work, a slow disk under the log) shorter than this loses nothing.
pub const LIVE_QUEUE_SECONDS: f64 = 0.5;
/// Most bytes the live queue may hold (at 100 MS/s in 64k-sample blocks, about 0.17 s).
pub const LIVE_QUEUE_MAX_BYTES: usize = 128 << 20;

/// Blocks of `block_len` samples in the queue of a live source at `sample_rate_hz`: half a second
/// of signal within [`LIVE_QUEUE_MAX_BYTES`], never fewer than [`LIVE_QUEUE_BLOCKS`]. At 20 MS/s in
/// 64k-sample blocks, 153 blocks (80 MiB); at 1 MS/s in 10k-sample blocks, 64.
pub fn live_queue_blocks(sample_rate_hz: f64, block_len: usize) -> usize {
    let block_len = block_len.max(1);
    let for_time = (LIVE_QUEUE_SECONDS * sample_rate_hz / block_len as f64).ceil();
    let for_bytes = LIVE_QUEUE_MAX_BYTES / (block_len * std::mem::size_of::<Complex32>());
    (for_time.min(for_bytes as f64).max(0.0) as usize).max(LIVE_QUEUE_BLOCKS)
}
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
        let depth = if info.live {
            live_queue_blocks(info.sample_rate_hz, opts.block_len)
        } else {
            FILE_QUEUE_BLOCKS
        };
        let (tx, rx) = bounded(depth);
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn live_queue_holds_half_a_second_within_its_byte_cap() {
        // 20 MS/s in 65 536-sample blocks: 0.5 s is 152.6 blocks, 80 MiB.
        assert_eq!(live_queue_blocks(20e6, live_block_len(20e6)), 153);
        // 100 MS/s: the 128 MiB cap (256 blocks of 512 KiB) binds before 0.5 s.
        assert_eq!(live_queue_blocks(100e6, live_block_len(100e6)), 256);
        // Slow streams keep the floor.
        assert_eq!(live_queue_blocks(1e6, live_block_len(1e6)), LIVE_QUEUE_BLOCKS);
    }
}
