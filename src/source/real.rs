//! Real-valued samples (SigMF `r…` datatypes) turned into complex ones.
//!
//! A real signal sampled at `fs` has a mirror-symmetric spectrum: everything it holds lies in
//! 0 … fs/2, and −fs/2 … 0 is the same again, conjugated. Shown as it is, every emission would
//! appear twice and the census would count it twice. So the stream is turned into the complex
//! signal of its positive half:
//!
//! 1. mix by −fs/4 (multiply sample n by (−j)ⁿ: 1, −j, −1, j, no arithmetic), which moves
//!    0 … fs/2 to −fs/4 … fs/4;
//! 2. low-pass with a half-band FIR (cut-off fs/4, every other tap zero);
//! 3. keep every other sample.
//!
//! The result has rate fs/2 and covers 0 … fs/2 of the real signal: its centre frequency is the
//! recording's frequency plus fs/4. The source keeps naming the real datatype (messages about
//! the input name what was read); recordings of it are written in its complex twin.
//! The filter is a windowed sinc of [`TAPS`] taps with a
//! 4-term Blackman–Harris window (Harris 1978: −92 dB side lobes), so the band within about
//! 2.5 % of fs of 0 Hz or of fs/2 is in the filter's transition: a signal there is attenuated and
//! its mirror not fully removed. The filter's delay is taken off, so a sample's time stamp is
//! that of the real sample it came from (output i is real sample 2i).

use super::{InputIssues, SampleSource, SourceInfo};
use anyhow::Result;
use num_complex::Complex32;

/// Taps of the half-band filter (odd; its centre and every odd offset are non-zero).
pub const TAPS: usize = 191;
/// Half the filter: its delay in input samples.
const HALF: usize = (TAPS - 1) / 2;

/// The half-band low-pass: `h[t] = ½·sinc(t/2)·w(t)` for `t = −HALF … HALF`, normalised to unit
/// gain at 0 Hz, with the 4-term Blackman–Harris window (Harris 1978, table 1).
pub fn halfband_taps() -> Vec<f32> {
    let n = TAPS as f64 - 1.0;
    let window = |k: usize| {
        let x = 2.0 * std::f64::consts::PI * k as f64 / n;
        0.35875 - 0.48829 * x.cos() + 0.14128 * (2.0 * x).cos() - 0.01168 * (3.0 * x).cos()
    };
    let mut h: Vec<f64> = (0..TAPS)
        .map(|k| {
            let t = k as f64 - HALF as f64;
            let sinc = if t == 0.0 {
                1.0
            } else {
                let a = std::f64::consts::PI * t / 2.0;
                a.sin() / a
            };
            0.5 * sinc * window(k)
        })
        .collect();
    let sum: f64 = h.iter().sum();
    h.iter_mut().for_each(|v| *v /= sum);
    h.into_iter().map(|v| v as f32).collect()
}

/// A real-valued source seen as complex samples of its positive half (module doc).
pub struct HalfRate {
    inner: Box<dyn SampleSource>,
    info: SourceInfo,
    taps: Vec<f32>,
    /// Mixed input samples, from input index `base` on (negative: the zeros before the first).
    line: Vec<Complex32>,
    base: i64,
    /// Input samples taken so far (the mixer's phase is their count mod 4).
    taken: i64,
    /// Next output sample to make.
    next: i64,
    buf: Vec<Complex32>,
    /// Input samples lost (network outage) not yet passed on as whole output samples.
    lost_in: u64,
    ended: bool,
}

impl HalfRate {
    /// Wraps a source whose samples are real (`x + 0j` at the input rate).
    pub fn new(inner: Box<dyn SampleSource>) -> HalfRate {
        let mut info = inner.info().clone();
        let fs = info.sample_rate_hz;
        info.sample_rate_hz = fs / 2.0;
        info.center_hz += fs / 4.0;
        info.total_samples = info.total_samples.map(|n| n.div_ceil(2));
        for s in &mut info.segments {
            s.sample_start = s.sample_start.div_ceil(2);
            s.center_hz += fs / 4.0;
        }
        let mut me = HalfRate {
            inner,
            info,
            taps: halfband_taps(),
            line: Vec::new(),
            base: 0,
            taken: 0,
            next: 0,
            buf: Vec::new(),
            lost_in: 0,
            ended: false,
        };
        me.reset();
        me
    }

    /// Back to the first sample: the line holds the zeros before it.
    fn reset(&mut self) {
        self.line.clear();
        self.line.resize(HALF, Complex32::default());
        self.base = -(HALF as i64);
        self.taken = 0;
        self.next = 0;
        self.ended = false;
    }

    /// Mixes by −fs/4 and appends (module doc, step 1).
    fn push_input(&mut self, samples: &[Complex32]) {
        for s in samples {
            let x = s.re;
            let m = match self.taken & 3 {
                0 => Complex32::new(x, 0.0),
                1 => Complex32::new(0.0, -x),
                2 => Complex32::new(-x, 0.0),
                _ => Complex32::new(0.0, x),
            };
            self.line.push(m);
            self.taken += 1;
        }
    }

    /// Makes every output sample whose filter span is in the line, into `out`; returns how many.
    fn filter_into(&mut self, out: &mut [Complex32]) -> usize {
        let mut made = 0;
        let end = self.base + self.line.len() as i64;
        while made < out.len() && 2 * self.next + (HALF as i64) < end {
            if self.ended && 2 * self.next >= self.taken {
                break;
            }
            let start = (2 * self.next - HALF as i64 - self.base) as usize;
            let span = &self.line[start..start + TAPS];
            // Every odd offset from the centre (an even index, as HALF is odd) holds a tap;
            // the even offsets are zero except the centre.
            let mut acc = span[HALF] * self.taps[HALF];
            for k in (0..TAPS).step_by(2) {
                acc += span[k] * self.taps[k];
            }
            out[made] = acc;
            made += 1;
            self.next += 1;
        }
        let keep_from = (2 * self.next - HALF as i64 - self.base).max(0) as usize;
        self.line.drain(..keep_from.min(self.line.len()));
        self.base += keep_from as i64;
        made
    }
}

impl SampleSource for HalfRate {
    fn info(&self) -> &SourceInfo {
        &self.info
    }

    fn read(&mut self, out: &mut [Complex32]) -> Result<usize> {
        if out.is_empty() {
            return Ok(0);
        }
        loop {
            let made = self.filter_into(out);
            if made > 0 || self.ended {
                return Ok(made);
            }
            self.buf.resize(2 * out.len().max(1024), Complex32::default());
            let mut buf = std::mem::take(&mut self.buf);
            let got = self.inner.read(&mut buf);
            let got = match got {
                Ok(n) => n,
                Err(e) => {
                    self.buf = buf;
                    return Err(e);
                }
            };
            self.lost_in += self.inner.take_lost();
            if got == 0 {
                // Flush: the zeros after the last sample let the filter reach it.
                self.ended = true;
                self.line.resize(self.line.len() + HALF + 1, Complex32::default());
            } else {
                self.push_input(&buf[..got]);
            }
            self.buf = buf;
        }
    }

    fn issues(&self) -> InputIssues {
        self.inner.issues()
    }

    fn rewind(&mut self) -> Result<()> {
        self.inner.rewind()?;
        self.reset();
        Ok(())
    }

    fn take_lost(&mut self) -> u64 {
        self.lost_in += self.inner.take_lost();
        let whole = self.lost_in / 2;
        self.lost_in -= 2 * whole;
        whole
    }

    fn watch_stop(&mut self, stop: std::sync::Arc<std::sync::atomic::AtomicBool>) {
        self.inner.watch_stop(stop)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A real source of given samples, read in ragged pieces.
    struct Given {
        info: SourceInfo,
        x: Vec<f32>,
        at: usize,
    }

    impl SampleSource for Given {
        fn info(&self) -> &SourceInfo {
            &self.info
        }
        fn read(&mut self, out: &mut [Complex32]) -> Result<usize> {
            let n = out.len().min(self.x.len() - self.at).min(777);
            for (o, v) in out.iter_mut().zip(&self.x[self.at..self.at + n]) {
                *o = Complex32::new(*v, 0.0);
            }
            self.at += n;
            Ok(n)
        }
        fn rewind(&mut self) -> Result<()> {
            self.at = 0;
            Ok(())
        }
    }

    fn convert(x: Vec<f32>, fs: f64) -> (SourceInfo, Vec<Complex32>) {
        let mut info = SourceInfo::synthetic(fs, 1e6);
        info.total_samples = Some(x.len() as u64);
        let mut src = HalfRate::new(Box::new(Given { info, x, at: 0 }));
        let mut all = Vec::new();
        let mut out = vec![Complex32::default(); 1000];
        loop {
            let n = src.read(&mut out).unwrap();
            if n == 0 {
                break;
            }
            all.extend_from_slice(&out[..n]);
        }
        (src.info().clone(), all)
    }

    #[test]
    fn a_real_cosine_becomes_one_complex_tone_at_its_frequency() {
        // cos(2π f n / fs) = ½(e^{jωn} + e^{−jωn}) (Euler): its positive half is one tone of
        // amplitude ½ at f, which lies at f − fs/4 from the new centre.
        let fs = 48_000.0;
        let f = 15_000.0;
        let x: Vec<f32> = (0..20_000)
            .map(|n| (2.0 * std::f64::consts::PI * f * n as f64 / fs).cos() as f32)
            .collect();
        let (info, y) = convert(x, fs);
        assert_eq!(info.sample_rate_hz, fs / 2.0);
        assert_eq!(info.center_hz, 1e6 + fs / 4.0);
        assert_eq!(info.total_samples, Some(10_000));
        assert_eq!(y.len(), 10_000);
        // Away from the filter's start-up at the ends, y[i] = ½·e^{j2π(f − fs/4)(2i)/fs}: the
        // real sample 2i's time, so the delay is taken off.
        for (i, v) in y.iter().enumerate().take(9_900).skip(100) {
            let phase = 2.0 * std::f64::consts::PI * (f - fs / 4.0) * (2 * i) as f64 / fs;
            let want = Complex32::from_polar(0.5, phase as f32);
            assert!((v - want).norm() < 1e-3, "sample {i}: {v} vs {want}");
        }
    }

    #[test]
    fn the_mirror_half_is_suppressed_by_the_half_band_filter() {
        // What keeps the mirror half out is the filter's stop band: beyond fs/4 + 2.5 % of fs
        // its response must lie below −90 dB, the 4-term Blackman–Harris side-lobe level
        // (Harris 1978, table 1: −92 dB).
        let h = halfband_taps();
        let mut worst: f64 = 0.0;
        for k in 0..=1000 {
            let f = 0.275 + 0.225 * k as f64 / 1000.0; // cycles per input sample, stop band
            let (mut re, mut im) = (0.0, 0.0);
            for (n, t) in h.iter().enumerate() {
                let a = -2.0 * std::f64::consts::PI * f * n as f64;
                re += *t as f64 * a.cos();
                im += *t as f64 * a.sin();
            }
            worst = worst.max((re * re + im * im).sqrt());
        }
        assert!(20.0 * worst.log10() < -90.0, "stop band {} dB", 20.0 * worst.log10());
        assert_eq!(h.len() % 2, 1);
        for (k, t) in h.iter().enumerate() {
            let offset = k as i64 - HALF as i64;
            if offset != 0 && offset % 2 == 0 {
                assert!(t.abs() < 1e-9, "half-band tap {offset} should be zero");
            }
        }
    }

    #[test]
    fn rewind_gives_the_same_samples_again() {
        let x: Vec<f32> = (0..5_001).map(|n| ((n * 37 % 101) as f32 / 101.0) - 0.5).collect();
        let mut info = SourceInfo::synthetic(1e5, 0.0);
        info.total_samples = Some(x.len() as u64);
        let mut src = HalfRate::new(Box::new(Given { info, x, at: 0 }));
        let read_all = |src: &mut HalfRate| {
            let mut all = Vec::new();
            let mut out = vec![Complex32::default(); 333];
            while let Ok(n @ 1..) = src.read(&mut out) {
                all.extend_from_slice(&out[..n]);
            }
            all
        };
        let first = read_all(&mut src);
        src.rewind().unwrap();
        assert_eq!(first, read_all(&mut src));
        assert_eq!(first.len(), 2_501, "ceil(5001 / 2)");
    }
}
