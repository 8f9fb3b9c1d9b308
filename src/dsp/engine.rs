//! Turns a stream of sample blocks into averaged, calibrated spectra.
//!
//! Frames of `fft_size` samples start every `hop = round(N·(1 − overlap))` samples. Every
//! `frames_per_output` frames the accumulated `|X|²` becomes one [`Spectrum`]; with `None` a single
//! spectrum covers the whole input (emitted by [`Engine::finish`]). A gap in sample indices (a live
//! source dropped samples) discards the partial frame so no frame straddles missing data.

use super::spectrum::Spectrum;
use super::stft::{welch_dof, Stft, MAX_FFT, MIN_FFT};
use super::window::WindowKind;
use super::worker::Worker;
use num_complex::Complex32;

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
            return Err(format!("overlap {} is out of range; choose 0 ..= 0.95", self.overlap));
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
    /// Extra transforms with their own accumulators, one per additional thread.
    helpers: Vec<Worker>,
    sample_rate_hz: f64,
    center_hz: f64,
    pending: Vec<Complex32>,
    pending_start: u64,
    acc: Vec<f64>,
    /// f32 scratch for [`Stft::accumulate_frames`].
    partial: Vec<f32>,
    acc_frames: u64,
    acc_first: u64,
    acc_end: u64,
}

impl Engine {
    pub fn new(cfg: EngineConfig, sample_rate_hz: f64, center_hz: f64) -> Engine {
        let stft = Stft::new(cfg.fft_size, cfg.window);
        Engine {
            hop: cfg.hop(),
            acc: vec![0.0; cfg.fft_size],
            partial: vec![0.0; cfg.fft_size],
            pending: Vec::with_capacity(cfg.fft_size * 2),
            stft,
            helpers: Vec::new(),
            cfg,
            sample_rate_hz,
            center_hz,
            pending_start: 0,
            acc_frames: 0,
            acc_first: 0,
            acc_end: 0,
        }
    }

    /// Spreads the frames over `threads` threads, the extra ones long-lived workers (frames are
    /// independent; partial sums are added in a fixed order, so the result does not depend on
    /// scheduling). With more than one thread,
    /// frames are gathered into batches of at least two per thread before they are transformed,
    /// which delays an output by at most that many frames.
    pub fn set_threads(&mut self, threads: usize) {
        let extra = threads.max(1) - 1;
        self.helpers.truncate(extra);
        while self.helpers.len() < extra {
            self.helpers.push(Worker::new(self.cfg.fft_size, self.cfg.window));
        }
    }

    /// The number of threads the transform runs on.
    pub fn threads(&self) -> usize {
        1 + self.helpers.len()
    }

    pub fn config(&self) -> &EngineConfig {
        &self.cfg
    }

    /// Feeds samples whose first has index `start`; calls `emit` for each finished spectrum.
    pub fn push(&mut self, start: u64, samples: &[Complex32], emit: &mut dyn FnMut(Spectrum)) {
        let expected = self.pending_start + self.pending.len() as u64;
        if start != expected || self.pending.is_empty() {
            // Frames complete before the gap still count; the partial one cannot.
            self.process_ready(emit);
            self.pending.clear();
            self.pending_start = start;
        }
        self.pending.extend_from_slice(samples);
        // Two frames per thread amortise the thread hand-off; very long frames need only one
        // each, and holding more would cost memory (a 1M-point frame is 8 MiB).
        let batch = match self.threads() {
            1 => 1,
            t if self.cfg.fft_size >= 65536 => t,
            t => 2 * t,
        };
        if self.frames_ready() >= batch {
            self.process_ready(emit);
        }
    }

    /// Whole frames waiting in `pending`.
    fn frames_ready(&self) -> usize {
        let n = self.cfg.fft_size;
        if self.pending.len() < n {
            0
        } else {
            (self.pending.len() - n) / self.hop + 1
        }
    }

    /// Transforms every whole frame in `pending`, emitting each completed average.
    fn process_ready(&mut self, emit: &mut dyn FnMut(Spectrum)) {
        let ready = self.frames_ready();
        let n = self.cfg.fft_size;
        let mut f = 0usize;
        while f < ready {
            if self.acc_frames == 0 {
                self.acc_first = self.pending_start + (f * self.hop) as u64;
            }
            let room = self.cfg.frames_per_output.map_or(u64::MAX, |k| k - self.acc_frames);
            let m = ((ready - f) as u64).min(room) as usize;
            self.accumulate_frames(f, m);
            self.acc_frames += m as u64;
            self.acc_end = self.pending_start + ((f + m - 1) * self.hop + n) as u64;
            f += m;
            if Some(self.acc_frames) == self.cfg.frames_per_output {
                emit(self.take());
            }
        }
        let consumed = (f * self.hop).min(self.pending.len());
        self.pending.drain(..consumed);
        self.pending_start += consumed as u64;
    }

    /// Adds the power of frames `first .. first + count` of `pending` into `acc`.
    fn accumulate_frames(&mut self, first: usize, count: usize) {
        let hop = self.hop;
        let threads = self.threads();
        if threads == 1 || count < 2 * threads {
            let end = first + count;
            self.stft.accumulate_frames(
                &self.pending,
                first,
                end,
                hop,
                &mut self.partial,
                &mut self.acc,
            );
            return;
        }
        let per = count.div_ceil(threads);
        let end = first + count;
        for (i, worker) in self.helpers.iter_mut().enumerate() {
            let a = (first + (i + 1) * per).min(end);
            worker.start(&self.pending, a, (a + per).min(end), hop);
        }
        let mine = (first + per).min(end);
        self.stft.accumulate_frames(
            &self.pending,
            first,
            mine,
            hop,
            &mut self.partial,
            &mut self.acc,
        );
        // Always in the same order, so the sums do not depend on which thread finished first.
        for worker in self.helpers.iter_mut() {
            worker.wait(&mut self.acc);
        }
    }

    /// Emits what has been accumulated (if any frame was); call at end of input.
    pub fn finish(&mut self, emit: &mut dyn FnMut(Spectrum)) {
        self.process_ready(emit);
        if self.acc_frames > 0 {
            emit(self.take());
        }
    }

    /// Frames accumulated since the last output.
    pub fn frames_pending(&self) -> u64 {
        self.acc_frames
    }

    fn take(&mut self) -> Spectrum {
        let dof = welch_dof(self.stft.window(), self.hop, self.acc_frames);
        let s = Spectrum::from_power_sum(
            &self.acc,
            self.acc_frames,
            dof,
            self.stft.window(),
            self.sample_rate_hz,
            self.center_hz,
            self.acc_first,
            self.acc_end,
        );
        self.acc.iter_mut().for_each(|a| *a = 0.0);
        self.acc_frames = 0;
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::stft::tests::seeded;

    fn cfg(n: usize, overlap: f64, k: Option<u64>) -> EngineConfig {
        EngineConfig { fft_size: n, window: WindowKind::Hann, overlap, frames_per_output: k }
    }

    #[test]
    fn frame_count_does_not_depend_on_block_boundaries() {
        let x = seeded(10_000, 3);
        let mut whole = Vec::new();
        let mut e = Engine::new(cfg(256, 0.5, Some(4)), 1e6, 0.0);
        e.push(0, &x, &mut |s| whole.push(s));
        let mut pieces = Vec::new();
        let mut e2 = Engine::new(cfg(256, 0.5, Some(4)), 1e6, 0.0);
        let mut start = 0u64;
        for chunk in x.chunks(77) {
            e2.push(start, chunk, &mut |s| pieces.push(s));
            start += chunk.len() as u64;
        }
        assert_eq!(whole.len(), pieces.len());
        // (10000 − 256)/128 + 1 = 77 frames → 19 outputs of 4.
        assert_eq!(whole.len(), 19);
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
                    e.push(start, chunk, &mut |s| out.push(s));
                    start += chunk.len() as u64;
                }
                e.finish(&mut |s| out.push(s));
                out
            };
            let (one, two) = (run(1), run(2));
            assert_eq!(one.len(), two.len(), "k={k:?}");
            for (a, b) in one.iter().zip(&two) {
                assert_eq!(
                    (a.frames, a.first_sample, a.end_sample),
                    (b.frames, b.first_sample, b.end_sample)
                );
                // Same f32 batch rounding as above.
                for (p, q) in a.psd.iter().zip(&b.psd) {
                    assert!((p - q).abs() <= 1e-5 * p.abs().max(1e-30), "k={k:?}: {p} vs {q}");
                }
            }
        }
    }

    #[test]
    fn a_gap_restarts_framing() {
        let x = seeded(1000, 5);
        let mut out = Vec::new();
        let mut e = Engine::new(cfg(256, 0.0, None), 1e6, 0.0);
        e.push(0, &x[..300], &mut |s| out.push(s)); // one frame, 44 samples left over
        e.push(5000, &x[300..], &mut |s| out.push(s)); // gap: the 44 are discarded
        e.finish(&mut |s| out.push(s));
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
