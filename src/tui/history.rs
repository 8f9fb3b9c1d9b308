//! The waterfall's memory: recent spectra as compact rows, newest first.
//!
//! Rows keep their own frequency grid, so a change of FFT size mid-run leaves older rows readable,
//! and zoom or pan can redraw the whole history. A row is stored in dB as `f32` and, past
//! [`MAX_STORED_BINS`] bins, reduced by taking the largest of each group: a 1M-point FFT must not
//! make the history hold gigabytes.

use super::view::BinGrid;
use crate::dsp::Spectrum;
use crate::units::db;
use std::collections::VecDeque;

/// Most values kept per row.
pub const MAX_STORED_BINS: usize = 8192;

/// One waterfall row.
#[derive(Clone, Debug, PartialEq)]
pub struct Row {
    pub grid: BinGrid,
    /// Level of each stored bin, dB (dBFS in one RBW, before any reference offset).
    pub level_db: Vec<f32>,
    /// Input time at the end of the row, seconds from the first sample.
    pub time_s: f64,
}

impl Row {
    /// Makes a row from a spectrum; levels are tone-calibrated (PSD × RBW, dBFS).
    pub fn from_spectrum(spec: &Spectrum) -> Row {
        let group = spec.fft_size.div_ceil(MAX_STORED_BINS).max(1);
        let level_db: Vec<f32> = spec
            .psd
            .chunks(group)
            .map(|c| db(c.iter().copied().fold(0.0, f64::max) * spec.rbw_hz) as f32)
            .collect();
        let bin_hz = spec.bin_hz() * group as f64;
        // A group's value is shown at the centre of its bins.
        let first_hz = spec.freq_of_bin(0.0) + 0.5 * (group - 1) as f64 * spec.bin_hz();
        Row {
            grid: BinGrid { first_hz, bin_hz, len: level_db.len() },
            level_db,
            time_s: spec.end_sample as f64 / spec.sample_rate_hz,
        }
    }
}

/// Rows newest-first, with a running count so the screen knows how many arrived since it last
/// looked.
#[derive(Clone, Debug)]
pub struct History {
    rows: VecDeque<Row>,
    total: u64,
    capacity: usize,
}

impl History {
    pub fn new(capacity: usize) -> History {
        History { rows: VecDeque::with_capacity(capacity), total: 0, capacity: capacity.max(2) }
    }

    pub fn push(&mut self, row: Row) {
        if self.rows.len() == self.capacity {
            self.rows.pop_back();
        }
        self.rows.push_front(row);
        self.total += 1;
    }

    /// Rows ever pushed.
    pub fn total(&self) -> u64 {
        self.total
    }

    /// The row with absolute index `index` (0 = the first ever pushed), if still kept.
    pub fn by_index(&self, index: u64) -> Option<&Row> {
        let age = self.total.checked_sub(index + 1)?;
        self.rows.get(age as usize)
    }

    /// Grows the memory when the screen does (at least two rows per text line).
    pub fn ensure_capacity(&mut self, rows: usize) {
        self.capacity = self.capacity.max(rows);
    }

    pub fn clear(&mut self) {
        self.rows.clear();
    }
}

/// Which rows a waterfall text line shows: two per line (half blocks), newest at the top.
///
/// Rows pair up by absolute index: pair `p` holds rows `2p` (lower half) and `2p + 1` (upper
/// half). The top line holds the newest pair, which is *partial* while only its first row has
/// arrived; then that row fills the whole line.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct LineRows {
    pub upper: Option<u64>,
    pub lower: u64,
}

/// The rows of text line `line` (0 = top) when `total` rows have been pushed.
pub fn line_rows(total: u64, line: u64) -> Option<LineRows> {
    let top_pair = total.checked_sub(1)? / 2;
    let pair = top_pair.checked_sub(line)?;
    let upper = 2 * pair + 1;
    Some(LineRows { upper: (upper < total).then_some(upper), lower: 2 * pair })
}

/// Text lines started (pairs begun) after `total` rows.
pub fn pairs(total: u64) -> u64 {
    total.div_ceil(2)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::{Window, WindowKind};

    fn spectrum(n: usize, peak: usize) -> Spectrum {
        let mut power = vec![1.0; n];
        power[peak] = 1e6;
        let w = Window::new(WindowKind::Hann, n);
        // `peak` is in FFT order; the spectrum holds it at `(peak + n/2) % n`.
        Spectrum::from_power_sum(&power, 1, 2.0, &w, 1e6, 100e6, 0, n as u64)
    }

    #[test]
    fn rows_keep_levels_in_dbfs_per_rbw() {
        let s = spectrum(1024, 0);
        let r = Row::from_spectrum(&s);
        assert_eq!(r.level_db.len(), 1024);
        // Bin 0 of FFT order is the centre after the shift, index 512.
        let expect = db(s.psd[512] * s.rbw_hz) as f32;
        assert!((r.level_db[512] - expect).abs() < 1e-4);
        assert!((r.grid.freq(512) - 100e6).abs() < 1e-6);
        assert!((r.time_s - 1024.0 / 1e6).abs() < 1e-12);
    }

    #[test]
    fn large_ffts_are_reduced_by_maximum() {
        let s = spectrum(4 * MAX_STORED_BINS, 0);
        let r = Row::from_spectrum(&s);
        assert_eq!(r.level_db.len(), MAX_STORED_BINS);
        let centre = 2 * MAX_STORED_BINS; // shifted index of the peak
        let g = centre / 4;
        let expect = db(s.psd[centre] * s.rbw_hz) as f32;
        assert!((r.level_db[g] - expect).abs() < 1e-4);
        // The group's frequency is the middle of its four bins.
        assert!((r.grid.freq(g) - s.freq_of_bin(g as f64 * 4.0 + 1.5)).abs() < 1e-6);
    }

    #[test]
    fn pairs_fill_the_top_line_first() {
        assert_eq!(line_rows(0, 0), None);
        assert_eq!(line_rows(1, 0), Some(LineRows { upper: None, lower: 0 }));
        assert_eq!(line_rows(2, 0), Some(LineRows { upper: Some(1), lower: 0 }));
        assert_eq!(line_rows(3, 0), Some(LineRows { upper: None, lower: 2 }));
        assert_eq!(line_rows(3, 1), Some(LineRows { upper: Some(1), lower: 0 }));
        assert_eq!(line_rows(3, 2), None);
        assert_eq!(pairs(0), 0);
        assert_eq!(pairs(3), 2);
    }

    #[test]
    fn history_forgets_the_oldest() {
        let mut h = History::new(2);
        let s = spectrum(64, 3);
        for _ in 0..3 {
            h.push(Row::from_spectrum(&s));
        }
        assert_eq!(h.total(), 3);
        assert!(h.by_index(0).is_none());
        assert!(h.by_index(1).is_some() && h.by_index(2).is_some());
        assert!(h.by_index(3).is_none());
    }
}
