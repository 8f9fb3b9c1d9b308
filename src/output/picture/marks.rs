//! Emissions to outline on a waterfall picture: the shared detector
//! ([`crate::measure::signals::find_signals`]) run on every row, and detections that overlap in
//! frequency on consecutive rows joined into one box (time × occupied band).
//!
//! A box stays open while each new row has a detection overlapping its band; after
//! [`HANG_ROWS`] rows without one it closes, so a fading row does not split a transmission in
//! two. A box of a single row is kept only if it stood [`MIN_SINGLE_SNR_DB`] clear of the noise
//! (one row's detection has few averages and the detector's false-alarm rate, per spectrum, is
//! what it is). At most [`MAX_MARKS`] boxes are kept, the strongest, so memory stays bounded for
//! any length of input and a picture stays readable.

use crate::dsp::{Spectrum, Window};
use crate::measure::noise::NoiseFloor;
use crate::measure::signals::{find_signals, Detection};
use crate::output::picture::ticks::freq_unit;
use crate::output::picture::waterfall::Mark;

/// Rows a box stays open without a detection.
pub const HANG_ROWS: u64 = 2;
/// Most boxes kept.
pub const MAX_MARKS: usize = 60;
/// A detection in a single row only counts this far above the noise in one RBW.
pub const MIN_SINGLE_SNR_DB: f64 = 15.0;
/// Most signals looked for per row.
const PER_ROW: usize = 32;
/// Rows are pooled until they hold this many FFT frames before the detector looks: a single
/// frame's χ² spread (2 degrees of freedom) breaks a wide noise-like emission into fragments.
pub const MIN_FRAMES: u64 = 16;

#[derive(Clone, Debug)]
struct Open {
    low_hz: f64,
    high_hz: f64,
    first: u64,
    end: u64,
    rows: u64,
    missed: u64,
    peak_dbfs: f64,
    peak_freq_hz: f64,
    best_snr_db: f64,
}

/// Joins per-row detections into emission boxes.
pub struct EmissionFinder {
    window: Option<Window>,
    floor: NoiseFloor,
    open: Vec<Open>,
    closed: Vec<Open>,
    /// Rows pooled so far (PSD weighted by frames, then divided on use).
    pool: Option<Spectrum>,
}

impl Default for EmissionFinder {
    fn default() -> Self {
        EmissionFinder::new()
    }
}

impl EmissionFinder {
    pub fn new() -> EmissionFinder {
        EmissionFinder {
            window: None,
            floor: NoiseFloor::new(),
            open: Vec::new(),
            closed: Vec::new(),
            pool: None,
        }
    }

    /// Takes one row; the detector runs once the pooled rows hold [`MIN_FRAMES`] frames.
    pub fn push(&mut self, row: &Spectrum) {
        let frames = row.frames.max(1);
        match self.pool.as_mut() {
            Some(p) if p.geometry == row.geometry => {
                if p.frames == 0 {
                    p.first_sample = row.first_sample;
                }
                for (a, b) in p.psd.iter_mut().zip(&row.psd) {
                    *a += b * frames as f64;
                }
                p.frames += frames;
                p.dof += row.dof;
                p.end_sample = row.end_sample;
            }
            _ => {
                let mut p = row.clone();
                p.psd.iter_mut().for_each(|v| *v *= frames as f64);
                p.frames = frames;
                self.pool = Some(p);
            }
        }
        if self.pool.as_ref().is_some_and(|p| p.frames >= MIN_FRAMES) {
            let mut p = self.pool.take().expect("checked above");
            let scale = 1.0 / p.frames as f64;
            p.psd.iter_mut().for_each(|v| *v *= scale);
            self.detect(&p);
            // Keep the buffer for the next pool.
            p.frames = 0;
            p.psd.iter_mut().for_each(|v| *v = 0.0);
            p.dof = 0.0;
            self.pool = Some(p);
        }
    }

    fn detect(&mut self, row: &Spectrum) {
        let stale = match &self.window {
            Some(w) => w.kind != row.window || w.len() != row.fft_size,
            None => true,
        };
        if stale {
            self.window = Some(Window::new(row.window, row.fft_size));
        }
        let window = self.window.as_ref().expect("set above");
        let floor = self.floor.estimate_seen(&row.psd, row.dof, row.seen());
        let found = find_signals(row, window, floor, PER_ROW, Detection::default());
        let slack = row.rbw_hz;
        for o in self.open.iter_mut() {
            o.missed += 1;
        }
        for s in found {
            let (lo, hi) = (s.obw.low_hz.min(s.freq_hz), s.obw.high_hz.max(s.freq_hz));
            let touches = |o: &Open| lo <= o.high_hz + slack && hi >= o.low_hz - slack;
            // One detection spanning several open boxes joins them.
            let mut hits: Vec<usize> =
                (0..self.open.len()).filter(|&k| touches(&self.open[k])).collect();
            while hits.len() > 1 {
                let k = hits.pop().expect("two or more");
                let other = self.open.swap_remove(k);
                let o = &mut self.open[hits[0]];
                o.low_hz = o.low_hz.min(other.low_hz);
                o.high_hz = o.high_hz.max(other.high_hz);
                o.first = o.first.min(other.first);
                o.end = o.end.max(other.end);
                o.rows = o.rows.max(other.rows);
                o.best_snr_db = o.best_snr_db.max(other.best_snr_db);
                if other.peak_dbfs > o.peak_dbfs {
                    o.peak_dbfs = other.peak_dbfs;
                    o.peak_freq_hz = other.peak_freq_hz;
                }
            }
            let hit = hits.first().map(|&k| &mut self.open[k]);
            match hit {
                Some(o) => {
                    o.low_hz = o.low_hz.min(lo);
                    o.high_hz = o.high_hz.max(hi);
                    o.end = row.end_sample;
                    o.rows += 1;
                    o.missed = 0;
                    o.best_snr_db = o.best_snr_db.max(s.snr_db);
                    if s.level_dbfs > o.peak_dbfs {
                        o.peak_dbfs = s.level_dbfs;
                        o.peak_freq_hz = s.freq_hz;
                    }
                }
                None => self.open.push(Open {
                    low_hz: lo,
                    high_hz: hi,
                    first: row.first_sample,
                    end: row.end_sample,
                    rows: 1,
                    missed: 0,
                    peak_dbfs: s.level_dbfs,
                    peak_freq_hz: s.freq_hz,
                    best_snr_db: s.snr_db,
                }),
            }
        }
        let mut k = 0;
        while k < self.open.len() {
            if self.open[k].missed > HANG_ROWS {
                let o = self.open.swap_remove(k);
                self.close(o);
            } else {
                k += 1;
            }
        }
    }

    fn close(&mut self, o: Open) {
        if o.rows == 1 && o.best_snr_db < MIN_SINGLE_SNR_DB {
            return;
        }
        self.closed.push(o);
        if self.closed.len() > 2 * MAX_MARKS {
            self.keep_strongest();
        }
    }

    fn keep_strongest(&mut self) {
        self.closed.sort_by(|a, b| b.peak_dbfs.total_cmp(&a.peak_dbfs));
        self.closed.truncate(MAX_MARKS);
    }

    /// The boxes found, strongest first, labelled with frequency and level (plus `offset_db`,
    /// in `unit`).
    pub fn finish(mut self, offset_db: f64, unit: &str) -> Vec<Mark> {
        if let Some(mut p) = self.pool.take().filter(|p| p.frames > 0) {
            let scale = 1.0 / p.frames as f64;
            p.psd.iter_mut().for_each(|v| *v *= scale);
            self.detect(&p);
        }
        let open = std::mem::take(&mut self.open);
        for o in open {
            self.close(o);
        }
        self.keep_strongest();
        // A weaker box lying within a stronger one's time and touching its band is the stronger
        // emission's skirt, not an emission of its own.
        let boxes = std::mem::take(&mut self.closed);
        for (k, o) in boxes.iter().enumerate() {
            let inside = boxes[..k].iter().any(|b| {
                b.first <= o.first
                    && o.end <= b.end
                    && o.low_hz <= b.high_hz
                    && o.high_hz >= b.low_hz
            });
            if !inside {
                self.closed.push(o.clone());
            }
        }
        self.closed
            .iter()
            .map(|o| Mark {
                low_hz: o.low_hz,
                high_hz: o.high_hz,
                first_sample: o.first,
                end_sample: o.end,
                peak_hz: o.peak_freq_hz,
                level: format!("{:.0} {unit}", o.peak_dbfs + offset_db),
                label: {
                    let u = freq_unit(o.peak_freq_hz);
                    let f = o.peak_freq_hz / u.hz;
                    format!("{f:.4} {} {:.0} {unit}", u.name, o.peak_dbfs + offset_db)
                },
            })
            .collect()
    }
}
