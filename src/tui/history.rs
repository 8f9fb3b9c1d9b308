//! The waterfall's memory: recent spectra as compact rows, newest first, kept for scrolling back
//! through time.
//!
//! Rows keep their own frequency grid, so a change of FFT size mid-run leaves older rows readable,
//! and zoom or pan can redraw the whole history. A row is stored in hundredths of a dB as `i16`
//! (±327 dB at 0.01 dB, far finer than the 32 colour steps of the waterfall) and, past
//! [`MAX_STORED_BINS`] bins, reduced by taking the largest of each group.
//!
//! **Memory is capped at [`HISTORY_BYTES`] (64 MiB)**: the oldest rows go when a new one would
//! pass it. At the default FFT of 4096 bins a row takes about 8 KiB, so the history holds some
//! 8000 rows: 6.7 minutes at 20 rows/s, 67 minutes at 2 rows/s. A row that kept every bin also
//! keeps the spectrum's geometry and averaging, so scrolled back it can be rebuilt for the
//! spectrum trace and the signal table.
//!
//! Rows come from the DSP as averages of every FFT frame of their time (see
//! [`crate::pipeline::latest::RowSettings::engine`]): a slower row rate averages more frames into
//! each row rather than skipping any.

use super::view::{column_max, BinGrid};
use crate::dsp::{Geometry, Spectrum};
use crate::units::db;
use std::collections::VecDeque;
use std::ops::Range;
use std::sync::Arc;

/// Most values kept per row.
pub const MAX_STORED_BINS: usize = 8192;
/// Most memory the rows may take, bytes (their levels plus a fixed allowance per row).
pub const HISTORY_BYTES: usize = 64 << 20;
/// Bytes counted for a row besides its levels (the struct, the deque slot, allocator slack).
const ROW_OVERHEAD: usize = 128;
/// Levels are kept in these units of dB.
const CENTI: f64 = 100.0;

/// What a row needs, besides its levels, to become a [`Spectrum`] again.
#[derive(Clone, Debug, PartialEq)]
pub struct RowSource {
    pub geometry: Arc<Geometry>,
    pub frames: u64,
    pub dof: f64,
    pub first_sample: u64,
}

/// One waterfall row.
#[derive(Clone, Debug, PartialEq)]
pub struct Row {
    pub grid: BinGrid,
    /// Level of each stored bin, hundredths of a dB (dBFS in one RBW, before any offset).
    level_cdb: Vec<i16>,
    /// Input time at the end of the row, seconds from the first sample.
    pub time_s: f64,
    /// Index of the sample after the row's last one.
    pub end_sample: u64,
    /// Present when every bin was kept.
    pub source: Option<RowSource>,
    /// Of a sweep: per stored bin, whether it was not seen within a revisit time of the row's
    /// end (its level is an older sweep's).
    pub stale: Option<Vec<bool>>,
}

impl Row {
    /// Makes a row from a spectrum; levels are tone-calibrated (PSD × RBW, dBFS).
    pub fn from_spectrum(spec: &Spectrum) -> Row {
        let group = spec.fft_size.div_ceil(MAX_STORED_BINS).max(1);
        let levels: Vec<f32> = spec
            .psd
            .chunks(group)
            .map(|c| db(c.iter().copied().fold(0.0, f64::max) * spec.rbw_hz) as f32)
            .collect();
        let bin_hz = spec.bin_hz() * group as f64;
        // A group's value is shown at the centre of its bins.
        let first_hz = spec.freq_of_bin(0.0) + 0.5 * (group - 1) as f64 * spec.bin_hz();
        let source = (group == 1).then(|| RowSource {
            geometry: spec.geometry.clone(),
            frames: spec.frames,
            dof: spec.dof,
            first_sample: spec.first_sample,
        });
        let mut row = Row::new(
            BinGrid { first_hz, bin_hz, len: levels.len() },
            &levels,
            spec.end_sample as f64 / spec.sample_rate_hz,
        );
        row.end_sample = spec.end_sample;
        row.source = source;
        row
    }

    /// A row of levels (dB) on a grid, with no spectrum behind it.
    pub fn new(grid: BinGrid, levels_db: &[f32], time_s: f64) -> Row {
        let level_cdb = levels_db.iter().map(|&l| to_cdb(l)).collect();
        Row { grid, level_cdb, time_s, end_sample: 0, source: None, stale: None }
    }

    /// The row with `stale` (one flag per bin of its spectrum) kept at its stored resolution:
    /// a stored bin that groups several is stale when any of them is.
    pub fn with_stale(mut self, stale: &[bool]) -> Row {
        let group = stale.len().div_ceil(self.level_cdb.len().max(1)).max(1);
        self.stale = Some(stale.chunks(group).map(|c| c.iter().any(|s| *s)).collect());
        self
    }

    /// Whether each range of stored bins holds a stale one; `None` when no bin is stale.
    pub fn stale_columns(&self, map: &[Range<usize>]) -> Option<Vec<bool>> {
        let stale = self.stale.as_ref().filter(|s| s.iter().any(|x| *x))?;
        Some(
            map.iter()
                .map(|r| stale.get(r.clone()).is_some_and(|s| s.iter().any(|x| *x)))
                .collect(),
        )
    }

    /// Level of stored bin `i`, dB.
    pub fn level_db(&self, i: usize) -> f32 {
        (self.level_cdb[i] as f64 / CENTI) as f32
    }

    /// Every stored level, dB, lowest frequency first.
    pub fn levels_db(&self) -> impl Iterator<Item = f32> + '_ {
        (0..self.level_cdb.len()).map(|i| self.level_db(i))
    }

    /// The largest level (dB) of each range of stored bins (`NEG_INFINITY` for an empty one).
    pub fn column_levels(&self, map: &[Range<usize>]) -> Vec<f64> {
        column_max(&self.level_cdb, map).into_iter().map(|v| v / CENTI).collect()
    }

    /// The spectrum the row was made from, to the 0.01 dB of its storage; `None` for a reduced
    /// row.
    pub fn to_spectrum(&self) -> Option<Spectrum> {
        let src = self.source.as_ref()?;
        let rbw = src.geometry.rbw_hz;
        let psd = self.level_cdb.iter().map(|&c| 10f64.powf(c as f64 / CENTI / 10.0) / rbw);
        Some(Spectrum {
            geometry: src.geometry.clone(),
            psd: psd.collect(),
            frames: src.frames,
            dof: src.dof,
            first_sample: src.first_sample,
            end_sample: self.end_sample,
            last_seen: None,
        })
    }

    /// Memory the row is counted as taking.
    fn bytes(&self) -> usize {
        self.level_cdb.len() * std::mem::size_of::<i16>()
            + self.stale.as_ref().map_or(0, Vec::len)
            + ROW_OVERHEAD
    }
}

/// A level in hundredths of a dB, clamped to what `i16` holds (−327.68 dB stands for "nothing").
fn to_cdb(level_db: f32) -> i16 {
    if level_db.is_nan() {
        return i16::MIN;
    }
    (level_db as f64 * CENTI).round().clamp(i16::MIN as f64, i16::MAX as f64) as i16
}

/// Rows newest-first, with a running count so the screen knows how many arrived since it last
/// looked.
#[derive(Clone, Debug)]
pub struct History {
    rows: VecDeque<Row>,
    total: u64,
    bytes: usize,
    budget: usize,
}

impl History {
    /// A history holding rows up to `budget` bytes (at least two rows whatever their size).
    pub fn new(budget: usize) -> History {
        History { rows: VecDeque::new(), total: 0, bytes: 0, budget }
    }

    pub fn push(&mut self, row: Row) {
        self.bytes += row.bytes();
        self.rows.push_front(row);
        self.total += 1;
        while self.bytes > self.budget && self.rows.len() > 2 {
            if let Some(old) = self.rows.pop_back() {
                self.bytes -= old.bytes();
            }
        }
    }

    /// Rows ever pushed.
    pub fn total(&self) -> u64 {
        self.total
    }

    /// Rows held now.
    pub fn len(&self) -> usize {
        self.rows.len()
    }

    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }

    /// Memory the held rows are counted as taking, bytes.
    pub fn bytes(&self) -> usize {
        self.bytes
    }

    /// Absolute index of the oldest row still held.
    pub fn oldest_index(&self) -> u64 {
        self.total - self.rows.len() as u64
    }

    /// The row with absolute index `index` (0 = the first ever pushed), if still kept.
    pub fn by_index(&self, index: u64) -> Option<&Row> {
        let age = self.total.checked_sub(index + 1)?;
        self.rows.get(age as usize)
    }

    /// The held rows oldest first, each with its time (seconds from the first sample), its
    /// frequency grid and its levels: what a picture of the history needs.
    pub fn rows_oldest_first(&self) -> impl Iterator<Item = &Row> {
        self.rows.iter().rev()
    }

    pub fn clear(&mut self) {
        self.rows.clear();
        self.bytes = 0;
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
        assert_eq!(r.levels_db().count(), 1024);
        // Bin 0 of FFT order is the centre after the shift, index 512; kept to 0.01 dB.
        let expect = db(s.psd[512] * s.rbw_hz) as f32;
        assert!((r.level_db(512) - expect).abs() <= 0.005);
        // The whole spectrum comes back within the storage step (0.005 dB is a factor of
        // 10^(0.0005) ≈ 1.00115).
        let back = r.to_spectrum().unwrap();
        assert_eq!((back.fft_size, back.end_sample), (s.fft_size, s.end_sample));
        for (a, b) in back.psd.iter().zip(&s.psd) {
            assert!((a / b - 1.0).abs() < 1.2e-3, "{a} vs {b}");
        }
        assert!((r.grid.freq(512) - 100e6).abs() < 1e-6);
        assert!((r.time_s - 1024.0 / 1e6).abs() < 1e-12);
    }

    #[test]
    fn large_ffts_are_reduced_by_maximum() {
        let s = spectrum(4 * MAX_STORED_BINS, 0);
        let r = Row::from_spectrum(&s);
        assert_eq!(r.levels_db().count(), MAX_STORED_BINS);
        assert!(r.to_spectrum().is_none(), "a reduced row cannot be rebuilt");
        let centre = 2 * MAX_STORED_BINS; // shifted index of the peak
        let g = centre / 4;
        let expect = db(s.psd[centre] * s.rbw_hz) as f32;
        assert!((r.level_db(g) - expect).abs() <= 0.005);
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
    fn history_forgets_the_oldest_past_its_memory() {
        let s = spectrum(64, 3);
        let one = Row::from_spectrum(&s).bytes();
        assert_eq!(one, 64 * 2 + ROW_OVERHEAD);
        let mut h = History::new(2 * one);
        for _ in 0..3 {
            h.push(Row::from_spectrum(&s));
        }
        assert_eq!((h.len(), h.bytes(), h.oldest_index()), (2, 2 * one, 1));
        assert_eq!(h.total(), 3);
        assert!(h.by_index(0).is_none());
        assert!(h.by_index(1).is_some() && h.by_index(2).is_some());
        assert!(h.by_index(3).is_none());
        let times: Vec<u64> = h.rows_oldest_first().map(|r| r.end_sample).collect();
        assert_eq!(times, vec![64, 64]);
    }

    #[test]
    fn the_cap_holds_minutes_at_the_default_fft() {
        // 4096 bins: 8192 + 128 bytes a row; 64 MiB hold 8065 rows, 6.7 minutes at 20 rows/s.
        let rows = HISTORY_BYTES / (4096 * 2 + ROW_OVERHEAD);
        assert_eq!(rows, 8065);
        assert!(rows as f64 / 20.0 > 6.5 * 60.0);
    }

    #[test]
    fn levels_are_kept_to_a_hundredth_of_a_db_and_clamped() {
        assert_eq!(to_cdb(-23.456), -2346);
        assert_eq!(to_cdb(f32::NEG_INFINITY), i16::MIN);
        assert_eq!(to_cdb(f32::NAN), i16::MIN);
        assert_eq!(to_cdb(400.0), i16::MAX);
    }
}
