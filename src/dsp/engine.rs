//! Turns a stream of sample blocks into averaged, calibrated spectra.
//!
//! Frames of `fft_size` samples start every `hop = round(N·(1 − overlap))` samples. Every
//! `frames_per_output` frames the accumulated `|X|²` becomes one [`Spectrum`]; with `None` a single
//! spectrum covers the whole input (emitted by [`Engine::finish`]). A gap in sample indices (a live
//! source dropped samples) discards the partial frame so no frame straddles missing data.

use super::spectrum::{Geometry, Spectrum};
use super::stft::{welch_dof, FrameSet, Stft, MAX_FFT, MIN_FFT};
use super::window::{Window, WindowKind};
use super::worker::{Batch, Team};
use crate::kernels::Kernels;
use num_complex::Complex32;
use std::sync::Arc;

/// The analysis a user chose (`--fft`, `--window`, `--overlap`, `--threads`), shared by every
/// command; [`DspConfig::engine`] adds how many frames make one output.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DspConfig {
    pub fft_size: usize,
    pub window: WindowKind,
    /// Fraction of a frame shared with the next one, 0 ..= 0.95.
    pub overlap: f64,
    /// Transform threads.
    pub threads: usize,
}

impl DspConfig {
    /// The engine configuration averaging `frames_per_output` frames per output (`None`: all).
    pub fn engine(&self, frames_per_output: Option<u64>) -> EngineConfig {
        EngineConfig {
            fft_size: self.fft_size,
            window: self.window,
            overlap: self.overlap,
            frames_per_output,
        }
    }

    /// Samples between the starts of consecutive frames.
    pub fn hop(&self) -> usize {
        self.engine(None).hop()
    }
}

/// How the STFT is cut and averaged.
#[derive(Clone, Debug, PartialEq)]
pub struct EngineConfig {
    pub fft_size: usize,
    pub window: WindowKind,
    /// Fraction of a frame shared with the next one, 0 ..= 0.95.
    pub overlap: f64,
    /// Frames averaged into each output spectrum; `None` averages everything into one.
    pub frames_per_output: Option<u64>,
}

impl EngineConfig {
    /// Checks ranges and explains what is allowed.
    pub fn validate(&self) -> Result<(), String> {
        if !(MIN_FFT..=MAX_FFT).contains(&self.fft_size) {
            return Err(format!(
                "FFT size {} is out of range; choose {MIN_FFT} ..= {MAX_FFT} (any length, powers of two are fastest)",
                self.fft_size
            ));
        }
        if !(0.0..=0.95).contains(&self.overlap) || self.overlap.is_nan() {
            return Err(format!(
                "--overlap {} is out of range; choose 0 ..= 0.95",
                crate::units::format_num(self.overlap)
            ));
        }
        if self.frames_per_output == Some(0) {
            return Err("frames per output must be at least 1".into());
        }
        Ok(())
    }

    /// Samples between the starts of consecutive frames.
    pub fn hop(&self) -> usize {
        ((self.fft_size as f64 * (1.0 - self.overlap)).round() as usize).max(1)
    }
}

pub struct Engine {
    cfg: EngineConfig,
    hop: usize,
    stft: Stft,
    /// Helper threads with their own transforms (none on one thread).
    team: Team,
    /// Samples not yet covered by a transformed frame; always starts at a frame boundary.
    tail: Vec<Complex32>,
    tail_start: u64,
    /// Per-group f32 sums of the current batch, `fft_size` floats each.
    slots: Vec<f32>,
    /// Frame ranges of the current batch, one per slot at most.
    groups: Vec<(usize, usize)>,
    sums: Sums,
}

/// The running f64 total of the current output and what becomes of it; apart from the
/// transforms so that groups are folded while the transforms of later groups go on.
struct Sums {
    acc: Vec<f64>,
    frames: u64,
    first: u64,
    end: u64,
    hop: usize,
    frames_per_output: Option<u64>,
    /// The window, for the degrees of freedom of each output.
    window: Window,
    /// The spectrum handed to `emit`, refilled for every output.
    out: Spectrum,
    kernels: Kernels,
}

impl Sums {
    /// Adds one group's sum (frames `first ..` of an output, ending at sample `end`) and emits
    /// the output it completes.
    fn fold(&mut self, sum: &[f32], first: u64, end: u64, frames: u64, emit: Emit<'_>) {
        if self.frames == 0 {
            self.first = first;
        }
        self.kernels.add_wide(&mut self.acc, sum);
        self.frames += frames;
        self.end = end;
        if Some(self.frames) == self.frames_per_output {
            emit(self.take());
        }
    }

    /// Turns the accumulated sums into the output spectrum (whose buffer is reused, so rows
    /// allocate nothing) and starts the next accumulation.
    fn take(&mut self) -> &Spectrum {
        let dof = welch_dof(&self.window, self.hop, self.frames);
        self.out.fill_from_power_sum(&self.acc, self.frames, dof, self.first, self.end);
        self.acc.iter_mut().for_each(|a| *a = 0.0);
        self.frames = 0;
        &self.out
    }
}

/// Where finished spectra go.
type Emit<'e> = &'e mut dyn FnMut(&Spectrum);

/// Memory the per-group sums may use; bounds the groups of very long transforms.
const SLOT_BYTES: usize = 8 << 20;

/// Groups per batch: enough that a thread held up (by the reader, say) hands work to the
/// others on machines of two to four cores. Fixed, not tied to the thread count, so that the
/// sums do not depend on it.
pub const GROUPS: usize = 8;

impl Engine {
    pub fn new(cfg: EngineConfig, sample_rate_hz: f64, center_hz: f64) -> Engine {
        let stft = Stft::new(cfg.fft_size, cfg.window);
        let geometry = Geometry::new(stft.window(), sample_rate_hz, center_hz);
        let sums = Sums {
            acc: vec![0.0; cfg.fft_size],
            frames: 0,
            first: 0,
            end: 0,
            hop: cfg.hop(),
            frames_per_output: cfg.frames_per_output,
            window: stft.window().clone(),
            out: Spectrum::empty(Arc::new(geometry)),
            kernels: Kernels::detect(),
        };
        let mut e = Engine {
            hop: cfg.hop(),
            slots: Vec::new(),
            groups: Vec::new(),
            tail: Vec::with_capacity(cfg.fft_size * 2),
            stft,
            team: Team::new(0, cfg.fft_size, cfg.window),
            cfg,
            tail_start: 0,
            sums,
        };
        e.size_slots();
        e
    }

    /// Spreads the frames over `threads` threads, the extra ones long-lived helpers. Frames are
    /// independent: each batch is cut into groups that the threads take in turn, and the groups'
    /// sums are added in a fixed order. How batches are cut depends only on the input, so the
    /// result is the same, to the bit, for any number of threads and any scheduling. More than
    /// [`GROUPS`] threads would find nothing to do, so no more are started.
    pub fn set_threads(&mut self, threads: usize) {
        let helpers = threads.clamp(1, GROUPS) - 1;
        if helpers != self.team.helpers() {
            self.team = Team::new(helpers, self.cfg.fft_size, self.cfg.window);
        }
    }

    /// Room for [`GROUPS`] group sums, fewer for very long transforms so they stay within
    /// [`SLOT_BYTES`].
    fn size_slots(&mut self) {
        let n = self.cfg.fft_size;
        let count = GROUPS.min((SLOT_BYTES / (4 * n)).max(1));
        self.slots = vec![0.0; count * n];
        self.groups = Vec::with_capacity(count);
    }

    /// The number of threads the transform runs on.
    pub fn threads(&self) -> usize {
        1 + self.team.helpers()
    }

    pub fn config(&self) -> &EngineConfig {
        &self.cfg
    }

    /// Frames to gather before transforming: one per group, so every thread has work when the
    /// helpers are woken, but never more than one output's worth, so a spectrum is emitted as
    /// soon as its last frame arrives (a slow input in `watch` must not wait for 8 frames).
    fn min_batch(&self) -> usize {
        let groups = self.slots.len() / self.cfg.fft_size;
        self.cfg.frames_per_output.map_or(groups, |k| groups.min(k as usize))
    }

    /// Feeds samples whose first has index `start`; calls `emit` for each finished spectrum.
    ///
    /// Frames that lie wholly inside `samples` are transformed where they are; only the samples
    /// of frames that straddle blocks are copied, into `tail`.
    pub fn push(&mut self, start: u64, samples: &[Complex32], emit: &mut dyn FnMut(&Spectrum)) {
        if start != self.tail_start + self.tail.len() as u64 || self.tail.is_empty() {
            // Frames complete before the gap still count; the partial one cannot.
            self.flush_tail(emit);
            self.tail.clear();
            self.tail_start = start;
        }
        let (n, hop) = (self.cfg.fft_size, self.hop);
        let held = self.tail.len();
        let total = held + samples.len();
        let count = if total < n { 0 } else { (total - n) / hop + 1 };
        if count < self.min_batch() {
            self.tail.extend_from_slice(samples);
            return;
        }
        // Frames that start in the tail run on into `samples`: complete them in the tail.
        let split = held.div_ceil(hop).min(count);
        if split > 0 {
            let need = ((split - 1) * hop + n).saturating_sub(held);
            self.tail.extend_from_slice(&samples[..need]);
        }
        let tail = std::mem::take(&mut self.tail);
        let frames = FrameSet { head: &tail, split, body: samples, body_at: held, hop, n };
        self.run(frames, count, self.tail_start, emit);
        self.tail = tail;
        // Keep what the next frame needs: it starts `count · hop` samples in.
        let next = count * hop;
        if next >= held {
            self.tail.clear();
            self.tail.extend_from_slice(&samples[next - held..]);
        } else {
            self.tail.truncate(held);
            self.tail.drain(..next);
            self.tail.extend_from_slice(samples);
        }
        self.tail_start += next as u64;
    }

    /// Transforms the whole frames still in `tail`.
    fn flush_tail(&mut self, emit: &mut dyn FnMut(&Spectrum)) {
        let (n, hop) = (self.cfg.fft_size, self.hop);
        if self.tail.len() < n {
            return;
        }
        let count = (self.tail.len() - n) / hop + 1;
        let tail = std::mem::take(&mut self.tail);
        self.run(FrameSet::contiguous(&tail, n, hop), count, self.tail_start, emit);
        self.tail = tail;
        self.tail.drain(..count * hop);
        self.tail_start += (count * hop) as u64;
    }

    /// Transforms frames `0 .. count` of `frames` (frame 0 starts at sample index `origin`),
    /// emitting each completed average.
    fn run(
        &mut self,
        frames: FrameSet<'_>,
        count: usize,
        origin: u64,
        emit: &mut dyn FnMut(&Spectrum),
    ) {
        let (n, hop) = (self.cfg.fft_size, self.hop);
        let Engine { cfg, stft, team, slots, groups, sums, .. } = self;
        let slots_len = slots.len() / n;
        let mut k = 0;
        while k < count {
            // Cut the next batch into at most `slots` groups, none crossing an output boundary.
            groups.clear();
            let size = (count - k).div_ceil(slots_len);
            let mut held = sums.frames;
            while groups.len() < slots_len && k < count {
                let room = cfg.frames_per_output.map_or(u64::MAX, |f| f - held);
                let len = (size.min(count - k) as u64).min(room) as usize;
                groups.push((k, k + len));
                k += len;
                held += len as u64;
                if Some(held) == cfg.frames_per_output {
                    held = 0;
                }
            }
            let batch = Batch::new(frames, groups, slots);
            // Fold the groups in order, so the sums do not depend on which thread did which;
            // each row is emitted while the helpers transform the groups after it.
            team.run_folding(&batch, stft, |g| {
                let (first, end) = batch.groups[g];
                let start = origin + (first * hop) as u64;
                let stop = origin + ((end - 1) * hop + n) as u64;
                sums.fold(batch.slot(g), start, stop, (end - first) as u64, emit);
            });
        }
    }

    /// Emits what has been accumulated (if any frame was); call at end of input.
    pub fn finish(&mut self, emit: Emit<'_>) {
        self.flush_tail(emit);
        if self.sums.frames > 0 {
            emit(self.sums.take());
        }
    }

    /// Emits what has been accumulated and drops the samples of an unfinished frame: the end of
    /// a dwell of a retuned stream, whose last partial frame must not run on into the next
    /// tuning's samples.
    pub fn end_dwell(&mut self, emit: Emit<'_>) {
        self.finish(emit);
        self.tail.clear();
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::stft::tests::seeded;
    use crate::dsp::Window;

    fn cfg(n: usize, overlap: f64, k: Option<u64>) -> EngineConfig {
        EngineConfig { fft_size: n, window: WindowKind::Hann, overlap, frames_per_output: k }
    }

    #[test]
    fn frame_count_does_not_depend_on_block_boundaries() {
        let x = seeded(10_000, 3);
        let mut whole = Vec::new();
        let mut e = Engine::new(cfg(256, 0.5, Some(4)), 1e6, 0.0);
        e.push(0, &x, &mut |s| whole.push(s.clone()));
        e.finish(&mut |s| whole.push(s.clone()));
        let mut pieces = Vec::new();
        let mut e2 = Engine::new(cfg(256, 0.5, Some(4)), 1e6, 0.0);
        let mut start = 0u64;
        for chunk in x.chunks(77) {
            e2.push(start, chunk, &mut |s| pieces.push(s.clone()));
            start += chunk.len() as u64;
        }
        e2.finish(&mut |s| pieces.push(s.clone()));
        assert_eq!(whole.len(), pieces.len());
        // (10000 − 256)/128 + 1 = 77 frames → 19 outputs of 4 and one of the last frame.
        assert_eq!(whole.len(), 20);
        assert_eq!(whole[19].frames, 1);
        for (a, b) in whole.iter().zip(&pieces) {
            assert_eq!(a.first_sample, b.first_sample);
            // Frames are summed in f32 batches whose grouping follows the blocks, so the
            // totals agree to f32 rounding of a few dozen terms, not to the last bit.
            for (p, q) in a.psd.iter().zip(&b.psd) {
                assert!((p - q).abs() <= 1e-5 * p.abs().max(1e-30), "{p} vs {q}");
            }
        }
    }

    #[test]
    fn two_threads_give_the_same_spectra_as_one() {
        let x = seeded(50_000, 11);
        for k in [Some(3u64), Some(40), None] {
            let run = |threads: usize| {
                let mut out = Vec::new();
                let mut e = Engine::new(cfg(512, 0.5, k), 1e6, 0.0);
                e.set_threads(threads);
                let mut start = 0u64;
                for chunk in x.chunks(3000) {
                    e.push(start, chunk, &mut |s| out.push(s.clone()));
                    start += chunk.len() as u64;
                }
                e.finish(&mut |s| out.push(s.clone()));
                out
            };
            let (one, two) = (run(1), run(2));
            assert_eq!(one.len(), two.len(), "k={k:?}");
            for (a, b) in one.iter().zip(&two) {
                assert_eq!(
                    (a.frames, a.first_sample, a.end_sample),
                    (b.frames, b.first_sample, b.end_sample)
                );
                // Batches are cut the same way whatever the thread count: equal to the bit.
                assert_eq!(a.psd, b.psd, "k={k:?}");
            }
        }
    }

    /// Reference: every frame transformed on its own and summed in f64, k frames per output.
    fn frame_by_frame(x: &[Complex32], c: &EngineConfig) -> Vec<(u64, u64, Vec<f64>)> {
        let (n, hop) = (c.fft_size, c.hop());
        let k = c.frames_per_output.unwrap_or(u64::MAX) as usize;
        let mut stft = Stft::new(n, c.window);
        let count = (x.len() - n) / hop + 1;
        let mut out = Vec::new();
        let mut f = 0;
        while f < count {
            let m = k.min(count - f);
            let mut acc = vec![0.0; n];
            for j in f..f + m {
                stft.accumulate_power(&x[j * hop..j * hop + n], &mut acc);
            }
            out.push(((f * hop) as u64, ((f + m - 1) * hop + n) as u64, acc));
            f += m;
        }
        out
    }

    #[test]
    fn ragged_blocks_on_one_or_two_threads_match_frame_by_frame_sums() {
        let x = seeded(30_000, 17);
        let mut rng = crate::testkit::Rng::new(99);
        let mut next_len = move || 1 + rng.below(700); // from 1 sample to several frames
        for (overlap, k) in [(0.25, Some(1u64)), (0.5, Some(7)), (0.0, None), (0.9, Some(3))] {
            let c = cfg(128, overlap, k);
            let reference = frame_by_frame(&x, &c);
            let w = Window::new(c.window, c.fft_size);
            let mut cuts = vec![0];
            while *cuts.last().unwrap() < x.len() {
                cuts.push((cuts.last().unwrap() + next_len()).min(x.len()));
            }
            let mut first_run: Option<Vec<Spectrum>> = None;
            for threads in [1, 2, 3] {
                let mut out = Vec::new();
                let mut e = Engine::new(c.clone(), 1e6, 0.0);
                e.set_threads(threads);
                for w in cuts.windows(2) {
                    e.push(w[0] as u64, &x[w[0]..w[1]], &mut |s| out.push(s.clone()));
                }
                e.finish(&mut |s| out.push(s.clone()));
                assert_eq!(out.len(), reference.len(), "overlap {overlap} k {k:?} t {threads}");
                for (got, (first, end, acc)) in out.iter().zip(&reference) {
                    assert_eq!((got.first_sample, got.end_sample), (*first, *end));
                    let frames = got.frames;
                    let want =
                        Spectrum::from_power_sum(acc, frames, got.dof, &w, 1e6, 0.0, *first, *end);
                    for (p, q) in got.psd.iter().zip(&want.psd) {
                        assert!((p - q).abs() <= 1e-5 * q.abs(), "t {threads}: {p} vs {q}");
                    }
                }
                // The same blocks give the same sums to the bit on any number of threads.
                let psd: Vec<_> = out.iter().map(|s| s.psd.clone()).collect();
                match &first_run {
                    None => first_run = Some(out),
                    Some(one) => {
                        let one: Vec<_> = one.iter().map(|s| s.psd.clone()).collect();
                        assert!(one == psd, "overlap {overlap} k {k:?}: {threads} threads differ");
                    }
                }
            }
        }
    }

    #[test]
    fn an_output_is_emitted_as_soon_as_its_last_frame_arrives() {
        // One frame per output, fed one hop at a time as a slow live input would deliver it.
        let x = seeded(256 * 6, 8);
        let mut e = Engine::new(cfg(256, 0.5, Some(1)), 48e3, 0.0);
        e.set_threads(2);
        let mut out = Vec::new();
        for (i, hop) in x.chunks(128).enumerate() {
            e.push(i as u64 * 128, hop, &mut |s| out.push(s.clone()));
            // After chunk i, frames 0 ..= i − 1 are complete.
            assert_eq!(out.len(), i, "after {} samples", (i + 1) * 128);
        }
    }

    #[test]
    fn a_gap_restarts_framing() {
        let x = seeded(1000, 5);
        let mut out = Vec::new();
        let mut e = Engine::new(cfg(256, 0.0, None), 1e6, 0.0);
        e.push(0, &x[..300], &mut |s| out.push(s.clone())); // one frame, 44 samples left over
        e.push(5000, &x[300..], &mut |s| out.push(s.clone())); // gap: the 44 are discarded
        e.finish(&mut |s| out.push(s.clone()));
        assert_eq!(out.len(), 1);
        assert_eq!(out[0].frames, 1 + 700 / 256);
        assert_eq!(out[0].end_sample, 5000 + 2 * 256);
    }

    #[test]
    fn validation_explains_ranges() {
        assert!(cfg(8, 0.5, None).validate().unwrap_err().contains("16 ..= 1048576"));
        assert!(cfg(1024, 0.99, None).validate().unwrap_err().contains("0 ..= 0.95"));
        assert!(cfg(1000, 0.5, Some(3)).validate().is_ok());
    }
}
