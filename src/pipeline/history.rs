//! The newest IQ samples of the stream, by stream index, for the consumers that look back at
//! what was received: the pre-trigger part of a capture, and the samples of an emission to
//! classify once it has ended (log, census, measure, the live monitor).
//!
//! **Bound.** The buffer is allocated once; [`IqHistory::for_rate`] sizes it for
//! [`HISTORY_SECONDS`] of input but never more than [`HISTORY_MAX_BYTES`] (64 MiB, 8 Mi
//! samples: 4 s at 2 MS/s, 0.42 s at 20 MS/s). Pushing a block copies it in (one copy that
//! bypasses the cache), nothing else.
//!
//! **Gaps.** A jump in the stream index (samples lost while the DSP was behind) is remembered as
//! a gap rather than forgetting what came before, so a range that spans it is still answered:
//! [`IqHistory::cut`] gives the longest contiguous piece of the range that is held.

use crate::kernels::copy_streaming;
use num_complex::Complex32;
use std::collections::VecDeque;
use std::mem::MaybeUninit;

/// Most bytes a history sized by [`IqHistory::for_rate`] takes.
pub const HISTORY_MAX_BYTES: usize = 64 << 20;
/// Seconds of input a history sized by [`IqHistory::for_rate`] holds (within the byte cap).
pub const HISTORY_SECONDS: f64 = 4.0;

/// Which end of a range longer than asked for to keep.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Part {
    /// Its first samples (an emission from its start).
    First,
    /// Its newest samples (what is on the air now; an emission whose start is gone).
    Last,
}

/// A ring of the newest samples, with the gaps among them.
pub struct IqHistory {
    /// The ring; it grows to `cap` as the first lap is written (never zero-filled ahead: a
    /// history of 64 MiB filled with zeros up front cost a short run's start-up more than
    /// its copies).
    buf: Vec<Complex32>,
    cap: usize,
    /// Stream index one past the newest sample.
    end: u64,
    /// Stream indices covered back from `end` (held samples and gaps).
    len: usize,
    /// Lost ranges `[from, to)` inside the covered span, oldest first.
    gaps: VecDeque<(u64, u64)>,
}

impl IqHistory {
    pub fn new(capacity: usize) -> IqHistory {
        let cap = capacity.max(1);
        IqHistory { buf: Vec::with_capacity(cap), cap, end: 0, len: 0, gaps: VecDeque::new() }
    }

    /// A history of `seconds` at `rate_hz`, within [`HISTORY_MAX_BYTES`].
    pub fn for_rate(rate_hz: f64, seconds: f64) -> IqHistory {
        let most = HISTORY_MAX_BYTES / std::mem::size_of::<Complex32>();
        let want = (seconds * rate_hz).ceil();
        let n = if want.is_finite() && want > 0.0 { (want as usize).min(most) } else { 1 };
        IqHistory::new(n)
    }

    pub fn capacity(&self) -> usize {
        self.cap
    }

    /// Appends samples whose first has stream index `start`. A jump forward is a gap; a jump
    /// back (a new stream) forgets everything.
    pub fn push(&mut self, start: u64, samples: &[Complex32]) {
        let cap = self.cap;
        if start < self.end || start - self.end >= cap as u64 {
            self.clear();
        } else if start > self.end && self.len > 0 {
            self.gaps.push_back((self.end, start));
            self.len += (start - self.end) as usize;
        }
        let take = &samples[samples.len().saturating_sub(cap)..];
        let skipped = (samples.len() - take.len()) as u64;
        let at = ((start + skipped) % cap as u64) as usize;
        let first = (cap - at).min(take.len());
        self.write_at(at, &take[..first]);
        self.write_at(0, &take[first..]);
        self.end = start + samples.len() as u64;
        self.len = (self.len + take.len()).min(cap);
        let oldest = self.first();
        while self.gaps.front().is_some_and(|g| g.1 <= oldest) {
            self.gaps.pop_front();
        }
    }

    /// Writes `data` into the ring from index `at` (`at + data.len() <= cap`), growing it
    /// as far as needed. The copy goes around the cache ([`copy_streaming`]): the ring is far larger than the
    /// cache and read only when an emission is classified.
    fn write_at(&mut self, at: usize, data: &[Complex32]) {
        if at > self.buf.len() {
            self.buf.resize(at, Complex32::default());
        }
        let over = (self.buf.len() - at).min(data.len());
        let held = &mut self.buf[at..at + over];
        // SAFETY: a `Complex32` written through `MaybeUninit` is still a valid `Complex32`, and
        // the copy writes every element of the slice.
        let held: &mut [MaybeUninit<Complex32>] =
            unsafe { &mut *(std::ptr::from_mut(held) as *mut [MaybeUninit<Complex32>]) };
        copy_streaming(held, &data[..over]);
        let rest = &data[over..];
        self.buf.reserve(rest.len());
        let len = self.buf.len();
        copy_streaming(&mut self.buf.spare_capacity_mut()[..rest.len()], rest);
        // SAFETY: the copy initialised the `rest.len()` elements past `len`, within capacity.
        unsafe { self.buf.set_len(len + rest.len()) };
    }

    /// Oldest stream index covered (held, or inside a gap).
    pub fn first(&self) -> u64 {
        self.end - self.len as u64
    }

    /// One past the newest sample held.
    pub fn end(&self) -> u64 {
        self.end
    }

    /// First stream index of the newest run of samples with no gap in it.
    pub fn contiguous_start(&self) -> u64 {
        self.gaps.back().map_or(self.first(), |g| g.1.max(self.first()))
    }

    pub fn clear(&mut self) {
        self.len = 0;
        self.gaps.clear();
    }

    /// Copies stream samples `[from, end())`, clipped to the newest contiguous run, into `out`.
    pub fn copy_from(&self, from: u64, out: &mut Vec<Complex32>) {
        let from = from.clamp(self.contiguous_start(), self.end);
        self.copy_range(from, self.end, out);
    }

    /// The held samples of `[from, to)` to take: the longest piece with no gap in it (the
    /// earliest of equals), cut to its first or last `max` samples. `None` when none is held.
    pub fn cut(&self, from: u64, to: u64, max: usize, part: Part) -> Option<(u64, u64)> {
        let (from, to) = (from.max(self.first()), to.min(self.end));
        let mut best: Option<(u64, u64)> = None;
        let mut at = from;
        let mut consider = |a: u64, b: u64| {
            if b > a && best.map_or(true, |(x, y)| b - a > y - x) {
                best = Some((a, b));
            }
        };
        for &(g0, g1) in &self.gaps {
            if g1 <= at || g0 >= to {
                continue;
            }
            consider(at, g0.max(at));
            at = g1;
        }
        consider(at, to);
        let (a, b) = best?;
        let max = max.max(1) as u64;
        Some(match part {
            Part::First => (a, b.min(a + max)),
            Part::Last => (b.saturating_sub(max).max(a), b),
        })
    }

    /// Appends the samples of `[from, to)` to `out`; the range must lie within what is held
    /// (as [`IqHistory::cut`] gives it), else it is clipped to that.
    pub fn copy_range(&self, from: u64, to: u64, out: &mut Vec<Complex32>) {
        let (from, to) = (from.max(self.first()), to.min(self.end));
        if to <= from {
            return;
        }
        let cap = self.cap as u64;
        let a = (from % cap) as usize;
        let n = (to - from) as usize;
        let first = (self.cap - a).min(n);
        out.extend_from_slice(&self.buf[a..a + first]);
        out.extend_from_slice(&self.buf[..n - first]);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn c(i: u64) -> Complex32 {
        Complex32::new(i as f32, 0.0)
    }

    fn run(from: u64, to: u64) -> Vec<Complex32> {
        (from..to).map(c).collect()
    }

    fn taken(h: &IqHistory, from: u64, to: u64, max: usize, part: Part) -> Vec<Complex32> {
        let mut out = Vec::new();
        if let Some((a, b)) = h.cut(from, to, max, part) {
            h.copy_range(a, b, &mut out);
        }
        out
    }

    #[test]
    fn the_newest_samples_come_back_in_order() {
        let mut r = IqHistory::new(10);
        r.push(0, &run(0, 7));
        r.push(7, &run(7, 15));
        assert_eq!((r.first(), r.end()), (5, 15));
        let mut out = Vec::new();
        r.copy_from(8, &mut out);
        assert_eq!(out, run(8, 15));
        out.clear();
        r.copy_from(0, &mut out);
        assert_eq!(out, run(5, 15), "clipped to what is held");
        // A block longer than the ring leaves its own last samples.
        r.push(15, &run(15, 40));
        out.clear();
        r.copy_from(0, &mut out);
        assert_eq!(out, run(30, 40));
    }

    #[test]
    fn a_range_comes_back_exactly_across_the_wrap() {
        let mut r = IqHistory::new(16);
        for k in 0..10 {
            r.push(k * 7, &run(k * 7, k * 7 + 7));
        }
        // Held: 54..70, stored from index 54 % 16 = 6 round to 5.
        assert_eq!((r.first(), r.end()), (54, 70));
        assert_eq!(taken(&r, 55, 69, 100, Part::First), run(55, 69));
        assert_eq!(taken(&r, 0, 1000, 100, Part::First), run(54, 70));
        assert_eq!(taken(&r, 0, 1000, 5, Part::First), run(54, 59));
        assert_eq!(taken(&r, 0, 1000, 5, Part::Last), run(65, 70));
        assert_eq!(r.cut(0, 54, 10, Part::First), None, "gone already");
        assert_eq!(r.cut(70, 80, 10, Part::First), None, "not yet come");
    }

    #[test]
    fn a_gap_is_remembered_and_never_bridged() {
        let mut r = IqHistory::new(32);
        r.push(0, &run(0, 10));
        r.push(10, &run(10, 14));
        // Samples 14..20 were lost.
        r.push(20, &run(20, 26));
        assert_eq!((r.first(), r.end(), r.contiguous_start()), (0, 26, 20));
        // The longest piece of a range across the gap, then its first or last samples.
        assert_eq!(taken(&r, 8, 26, 100, Part::First), run(8, 14));
        assert_eq!(taken(&r, 12, 26, 100, Part::First), run(20, 26));
        assert_eq!(taken(&r, 12, 26, 3, Part::Last), run(23, 26));
        assert_eq!(r.cut(14, 20, 100, Part::First), None, "only lost samples");
        let mut out = Vec::new();
        r.copy_from(0, &mut out);
        assert_eq!(out, run(20, 26), "a capture takes the contiguous run only");
        // Once the samples before it are overwritten, the gap is forgotten.
        r.push(26, &run(26, 50));
        assert_eq!((r.first(), r.contiguous_start()), (18, 20));
        r.push(50, &run(50, 60));
        assert_eq!(r.contiguous_start(), r.first());
        assert_eq!(taken(&r, 0, 100, 100, Part::First), run(28, 60));
        // A jump longer than the ring, or back, forgets everything.
        r.push(200, &run(200, 205));
        assert_eq!((r.first(), r.end()), (200, 205));
        r.push(0, &run(0, 3));
        assert_eq!((r.first(), r.end()), (0, 3));
    }

    #[test]
    fn sized_by_seconds_within_the_byte_cap() {
        assert_eq!(IqHistory::for_rate(1e6, 4.0).capacity(), 4_000_000);
        let cap = HISTORY_MAX_BYTES / 8;
        assert_eq!(IqHistory::for_rate(20e6, 4.0).capacity(), cap);
        assert_eq!(IqHistory::for_rate(f64::NAN, 4.0).capacity(), 1);
    }
}
