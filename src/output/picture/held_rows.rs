//! Waterfall rows for a picture, held in bounded memory however long the input.
//!
//! A picture has a few hundred pixel rows; an hour of input has hundreds of thousands of spectra.
//! [`RowAccumulator`] keeps at most [`RowAccumulator::new`]'s `max_rows` stored rows: each stored
//! row is the average (linear power, weighted by FFT frames) of a run of input rows, and when the
//! store is full every two neighbours are merged into one, so a stored row covers twice as many.
//! Nothing is dropped: every input row is in exactly one stored row. Memory is `max_rows ×
//! columns` values whatever the length of the input, and the work per input row is one pass over
//! its bins.
//!
//! **Columns.** When the FFT has more bins than the picture has pixel columns, the bins are
//! gathered into columns of `group` bins and a column takes the *largest* of its bins (the
//! positive-peak detector of a swept analyser, common practice): a narrow tone keeps its level
//! instead of being diluted by the noise beside it. The live monitor's history reduces its rows
//! the same way.
//!
//! **Levels** are in dBFS in one RBW (PSD × RBW), so a steady tone reads its own power, as on the
//! live monitor.

use crate::dsp::{Geometry, Spectrum};
use crate::units::db;
use std::sync::Arc;

/// One row of a waterfall as a picture takes it: levels of evenly spaced columns over the span,
/// and the input samples it covers.
#[derive(Clone, Debug, PartialEq)]
pub struct HeldRow {
    /// First input sample of the row.
    pub first_sample: u64,
    /// One past its last sample.
    pub end_sample: u64,
    /// Level of each column, dBFS in one RBW; NaN for a column of a panorama's hole (never in
    /// view: no level, drawn as a gap).
    pub level_db: Vec<f32>,
}

/// What an accumulator holds at the end: the rows (oldest first), where the columns lie, and the
/// whole input's average and highest level per column.
#[derive(Clone, Debug)]
pub struct HeldRows {
    pub geometry: Arc<Geometry>,
    /// Lowest and highest frequency the columns cover, absolute Hz.
    pub low_hz: f64,
    pub high_hz: f64,
    pub rows: Vec<HeldRow>,
    /// Average over every input row (linear, weighted by frames), dBFS in one RBW.
    pub average_db: Vec<f32>,
    /// Highest level of any stored row (after averaging into it), dBFS in one RBW.
    pub peak_db: Vec<f32>,
    /// Input rows taken.
    pub input_rows: u64,
    /// Input rows averaged into one stored row at the end.
    pub rows_per_stored: u64,
}

/// A stored row being filled: sums of linear power × frames.
#[derive(Clone, Debug)]
struct Sum {
    first: u64,
    end: u64,
    frames: f64,
    power: Vec<f64>,
}

impl Sum {
    fn add(&mut self, other: &Sum) {
        self.end = other.end;
        self.frames += other.frames;
        for (a, b) in self.power.iter_mut().zip(&other.power) {
            *a += b;
        }
    }
}

/// Averages incoming spectra into at most `max_rows` rows of at most `max_columns` columns.
pub struct RowAccumulator {
    max_rows: usize,
    max_columns: usize,
    geometry: Option<Arc<Geometry>>,
    group: usize,
    rows: Vec<Sum>,
    pending: Option<Sum>,
    pending_count: u64,
    per_row: u64,
    column: Vec<f64>,
    total: Vec<f64>,
    total_frames: f64,
    input_rows: u64,
    /// Per column, true when none of its bins was ever in view (a panorama's hole).
    never_seen: Vec<bool>,
}

impl RowAccumulator {
    /// `max_rows` is at least 2 (merging needs pairs); twice the picture's height keeps every
    /// pixel row an average of one or more stored rows.
    pub fn new(max_rows: usize, max_columns: usize) -> RowAccumulator {
        RowAccumulator {
            max_rows: max_rows.max(2),
            max_columns: max_columns.max(1),
            geometry: None,
            group: 1,
            rows: Vec::new(),
            pending: None,
            pending_count: 0,
            per_row: 1,
            column: Vec::new(),
            total: Vec::new(),
            total_frames: 0.0,
            input_rows: 0,
            never_seen: Vec::new(),
        }
    }

    /// Takes one spectrum. The first fixes the geometry; a spectrum of another shape (a retuned
    /// engine) starts nothing new and is refused with `false`.
    pub fn push(&mut self, row: &Spectrum) -> bool {
        match &self.geometry {
            None => {
                let n = row.fft_size;
                self.group = n.div_ceil(self.max_columns).max(1);
                let cols = n.div_ceil(self.group);
                self.column = vec![0.0; cols];
                self.total = vec![0.0; cols];
                self.geometry = Some(row.geometry.clone());
                if let Some(seen) = row.seen() {
                    let seen: Vec<bool> = seen.collect();
                    self.never_seen =
                        seen.chunks(self.group).map(|c| c.iter().all(|s| !s)).collect();
                }
            }
            Some(g) if **g != *row.geometry => return false,
            Some(_) => {}
        }
        let frames = row.frames.max(1) as f64;
        let rbw = row.rbw_hz;
        for (c, bins) in self.column.iter_mut().zip(row.psd.chunks(self.group)) {
            *c = bins.iter().copied().fold(0.0, f64::max) * rbw * frames;
        }
        for (t, c) in self.total.iter_mut().zip(&self.column) {
            *t += c;
        }
        self.total_frames += frames;
        self.input_rows += 1;
        let add = Sum {
            first: row.first_sample,
            end: row.end_sample,
            frames,
            power: std::mem::take(&mut self.column),
        };
        match self.pending.as_mut() {
            Some(p) => {
                p.add(&add);
                self.column = add.power;
            }
            None => {
                self.column = add.power.clone();
                self.pending = Some(add);
            }
        }
        self.pending_count += 1;
        if self.pending_count >= self.per_row {
            self.store();
        }
        true
    }

    fn store(&mut self) {
        if let Some(p) = self.pending.take() {
            self.rows.push(p);
        }
        self.pending_count = 0;
        if self.rows.len() >= self.max_rows {
            let old = std::mem::take(&mut self.rows);
            let mut it = old.into_iter();
            while let Some(mut a) = it.next() {
                if let Some(b) = it.next() {
                    a.add(&b);
                }
                self.rows.push(a);
            }
            self.per_row *= 2;
        }
    }

    /// The rows held, or `None` if no spectrum came.
    pub fn finish(mut self) -> Option<HeldRows> {
        let geometry = self.geometry.clone()?;
        self.store();
        let never = |i: usize| self.never_seen.get(i).copied().unwrap_or(false);
        let levels = |power: &[f64], frames: f64| -> Vec<f32> {
            let level = |(i, &p): (usize, &f64)| {
                if never(i) {
                    f32::NAN
                } else {
                    db(p / frames.max(1.0)) as f32
                }
            };
            power.iter().enumerate().map(level).collect()
        };
        let rows: Vec<HeldRow> = self
            .rows
            .iter()
            .map(|s| HeldRow {
                first_sample: s.first,
                end_sample: s.end,
                level_db: levels(&s.power, s.frames),
            })
            .collect();
        let cols = self.total.len();
        let mut peak_db: Vec<f32> =
            (0..cols).map(|i| if never(i) { f32::NAN } else { f32::NEG_INFINITY }).collect();
        for r in &rows {
            for (m, &v) in peak_db.iter_mut().zip(&r.level_db) {
                if !m.is_nan() {
                    *m = m.max(v);
                }
            }
        }
        let average_db = levels(&self.total, self.total_frames);
        let bin_hz = geometry.bin_hz();
        let low_hz = geometry.freq_of_bin(-0.5);
        let high_hz = low_hz + (cols * self.group) as f64 * bin_hz;
        Some(HeldRows {
            geometry,
            low_hz,
            high_hz,
            rows,
            average_db,
            peak_db,
            input_rows: self.input_rows,
            rows_per_stored: self.per_row,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::{Window, WindowKind};

    fn spectrum(geometry: &Arc<Geometry>, first: u64, value: f64) -> Spectrum {
        let mut s = Spectrum::empty(geometry.clone());
        s.psd.iter_mut().for_each(|p| *p = value);
        s.frames = 1;
        s.first_sample = first;
        s.end_sample = first + 16;
        s
    }

    /// Every input row lands in one stored row: the stored rows tile the input without gaps and
    /// their frame-weighted mean is the mean of the input (a rule of averaging, not a tolerance).
    #[test]
    fn merging_keeps_every_row_and_the_mean() {
        let g = Arc::new(Geometry::new(&Window::new(WindowKind::Rect, 16), 16.0, 0.0));
        let mut acc = RowAccumulator::new(4, 16);
        let values: Vec<f64> = (0..11).map(|i| 1.0 + i as f64).collect();
        for (i, v) in values.iter().enumerate() {
            assert!(acc.push(&spectrum(&g, 16 * i as u64, *v)));
        }
        let held = acc.finish().unwrap();
        assert!(held.rows.len() <= 4, "{} rows", held.rows.len());
        assert_eq!(held.rows[0].first_sample, 0);
        for w in held.rows.windows(2) {
            assert_eq!(w[0].end_sample, w[1].first_sample);
        }
        assert_eq!(held.rows.last().unwrap().end_sample, 16 * 11);
        // Rect window at 16 S/s over 16 bins: RBW = 1 Hz, so levels are 10·log10(value).
        let mean = values.iter().sum::<f64>() / values.len() as f64;
        assert!((held.average_db[0] as f64 - 10.0 * mean.log10()).abs() < 1e-4);
        // The first stored row averages the first `rows_per_stored` inputs.
        let k = held.rows_per_stored as usize;
        let first = values[..k].iter().sum::<f64>() / k as f64;
        assert!((held.rows[0].level_db[0] as f64 - 10.0 * first.log10()).abs() < 1e-4);
    }

    #[test]
    fn columns_take_the_largest_bin() {
        let g = Arc::new(Geometry::new(&Window::new(WindowKind::Rect, 16), 16.0, 0.0));
        let mut acc = RowAccumulator::new(8, 4);
        let mut s = spectrum(&g, 0, 1.0);
        s.psd[5] = 100.0;
        acc.push(&s);
        let held = acc.finish().unwrap();
        assert_eq!(held.average_db.len(), 4);
        assert_eq!(held.average_db[1], 20.0);
        assert_eq!(held.average_db[0], 0.0);
        assert_eq!((held.low_hz, held.high_hz), (-8.5, 7.5));
    }
}
