//! The kind of an emission (its modulation family, [`crate::measure::classify`]), from its own
//! samples: an [`IqHistory`] of the stream, cut where the emission lay and handed to the
//! classifier with its centre, occupied bandwidth and the noise density.
//!
//! **Cost.** One classification per emission, when it ends (never per row), on at most
//! [`TAKE_S`] seconds or [`TAKE_MAX`] samples of it, whichever is fewer: its first samples while
//! they are still held, else (an emission longer than the history) its newest. The history's
//! memory is bounded by [`HISTORY_MAX_BYTES`](super::history::HISTORY_MAX_BYTES).

use super::history::{IqHistory, Part, HISTORY_SECONDS};
use super::{Consumer, RunInfo};
use crate::measure::classify::{classify, Classification, EmissionIq};
use crate::source::reader::Block;
use num_complex::Complex32;
use std::io;

/// Longest stretch of one emission classified, seconds.
pub const TAKE_S: f64 = 0.5;
/// Most samples of one emission classified.
pub const TAKE_MAX: usize = 1 << 20;

/// Where an emission lay, in the stream and in frequency.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Span {
    /// Stream samples `[start, end)`.
    pub start: u64,
    pub end: u64,
    /// Centre of its occupied band, absolute Hz.
    pub center_hz: f64,
    /// Its 99 % occupied bandwidth, Hz.
    pub obw_hz: f64,
    /// Noise density, FS²/Hz (= |x|² per Hz), when known.
    pub noise_psd: Option<f64>,
}

/// Classifies emissions from the newest samples of the stream. As a consumer it keeps the
/// samples of every block; a command then asks for the spans it found.
pub struct Kinds {
    history: IqHistory,
    rate_hz: f64,
    center_hz: f64,
    buf: Vec<Complex32>,
}

impl Kinds {
    /// A history of [`HISTORY_SECONDS`] (within the byte cap) of a stream at `rate_hz` centred
    /// on `center_hz`.
    pub fn new(rate_hz: f64, center_hz: f64) -> Kinds {
        Kinds::with_history(IqHistory::for_rate(rate_hz, HISTORY_SECONDS), rate_hz, center_hz)
    }

    /// A history of only what one classification takes ([`Kinds::take_max`]), for
    /// [`Kinds::classify_newest`] at the end of the input.
    pub fn newest_only(rate_hz: f64, center_hz: f64) -> Kinds {
        let k = Kinds::with_history(IqHistory::new(1), rate_hz, center_hz);
        Kinds::with_history(IqHistory::new(k.take_max()), rate_hz, center_hz)
    }

    pub fn with_history(history: IqHistory, rate_hz: f64, center_hz: f64) -> Kinds {
        Kinds { history, rate_hz, center_hz, buf: Vec::new() }
    }

    pub fn push(&mut self, start: u64, samples: &[Complex32]) {
        self.history.push(start, samples);
    }

    pub fn history(&self) -> &IqHistory {
        &self.history
    }

    /// Most samples taken of one emission.
    pub fn take_max(&self) -> usize {
        ((TAKE_S * self.rate_hz).ceil() as usize).clamp(1, TAKE_MAX)
    }

    /// The samples of `span` handed to the classifier: its first [`Kinds::take_max`] while its
    /// start is held, else its newest.
    pub fn cut(&self, span: &Span) -> Option<(u64, u64)> {
        let part = if span.start >= self.history.first() { Part::First } else { Part::Last };
        self.history.cut(span.start, span.end, self.take_max(), part)
    }

    /// Classifies the emission `span` from what the history holds of it (nothing held: the
    /// classifier says it had too little).
    pub fn classify(&mut self, span: &Span) -> Classification {
        let range = self.cut(span);
        self.classify_range(range, span)
    }

    /// Classifies what is on the air at `center_hz` (`obw_hz` wide) in the newest samples held
    /// (at most [`Kinds::take_max`]): for a listing made once the input is over.
    pub fn classify_newest(&mut self, center_hz: f64, obw_hz: f64) -> Classification {
        let (start, end) = (self.history.first(), self.history.end());
        let span = Span { start, end, center_hz, obw_hz, noise_psd: None };
        let range = self.history.cut(start, end, self.take_max(), Part::Last);
        self.classify_range(range, &span)
    }

    fn classify_range(&mut self, range: Option<(u64, u64)>, span: &Span) -> Classification {
        self.buf.clear();
        if let Some((a, b)) = range {
            self.history.copy_range(a, b, &mut self.buf);
        }
        classify(&EmissionIq {
            samples: &self.buf,
            rate_hz: self.rate_hz,
            offset_hz: span.center_hz - self.center_hz,
            obw_hz: span.obw_hz,
            noise_psd: span.noise_psd,
        })
    }
}

impl Consumer for Kinds {
    fn start(&mut self, run: &RunInfo) -> io::Result<()> {
        (self.rate_hz, self.center_hz) = (run.source.sample_rate_hz, run.source.center_hz);
        Ok(())
    }

    fn block(&mut self, block: &Block) -> io::Result<()> {
        self.push(block.start, &block.samples);
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_emission_is_cut_from_its_start_or_its_newest_part() {
        // 1000 S/s: TAKE_S (0.5 s) is 500 samples.
        let mut k = Kinds::with_history(IqHistory::new(2000), 1000.0, 0.0);
        assert_eq!(k.take_max(), 500);
        let samples: Vec<Complex32> = (0..3000).map(|i| Complex32::new(i as f32, 0.0)).collect();
        k.push(0, &samples);
        let span = |start, end| Span { start, end, center_hz: 0.0, obw_hz: 1.0, noise_psd: None };
        // Held: 1000..3000. A short emission whole; a long one from its start.
        assert_eq!(k.cut(&span(1200, 1400)), Some((1200, 1400)));
        assert_eq!(k.cut(&span(1200, 2900)), Some((1200, 1700)));
        // Its start is gone: its newest samples.
        assert_eq!(k.cut(&span(500, 2900)), Some((2400, 2900)));
        assert_eq!(k.cut(&span(0, 900)), None);
    }
}
