//! One emission followed across rows, and the sub-row timing of its edges.
//!
//! A row is an average of several FFT frames, so an emission that starts or ends inside a row
//! raises that row's band energy only in part. As in the occupancy tracker, the share of a row an
//! emission filled is the fraction of its full energy that row reached, `E / E_full`, where `E`
//! is the band's power less the noise in it and `E_full` the mean of the rows wholly inside the
//! emission. The edges are then placed within the row, and in the quiet row on either side (a
//! burst can start late in the row before the one in which it is first detected).

/// A run of detections: bins `lo..=hi` of the rows (the footprint: detected edges widened by one
/// main lobe), first and last detected row, and the energies that time its edges.
#[derive(Clone, Debug)]
pub struct Track {
    /// Unique in one census, in the order tracks began.
    pub id: u64,
    pub emitter: usize,
    pub lo: usize,
    pub hi: usize,
    /// Union of the detected occupied-band edges, absolute Hz.
    pub low_hz: f64,
    pub high_hz: f64,
    pub first_row: u64,
    /// Span (samples) of the first and of the last detected row.
    pub first_span: (u64, u64),
    pub last_span: (u64, u64),
    pub last_row: u64,
    pub e_before: f64,
    pub e_first: f64,
    pub e_last: f64,
    /// Energy of the first quiet row after the last detection, once seen.
    pub e_after: Option<f64>,
    /// Highest band energy of a detected row.
    pub e_peak: f64,
    interior_sum: f64,
    interior_rows: u32,
    /// Rows since the last detection.
    pub missed: u32,
    /// Rows in which the emission was detected.
    pub detected: u32,
    /// Whether the current row detected it.
    pub seen: bool,
}

/// Where an emission lay, in samples `[start, end)`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Extent {
    pub start: u64,
    pub end: u64,
}

impl Track {
    /// A track born in row `row` (span `span`) on bins `lo..=hi`; `e_before` is the energy of
    /// the same bins in the row before (0 if there is none).
    pub fn new(emitter: usize, (lo, hi): (usize, usize), row: u64, span: (u64, u64)) -> Track {
        Track {
            id: 0,
            emitter,
            lo,
            hi,
            low_hz: f64::INFINITY,
            high_hz: f64::NEG_INFINITY,
            first_row: row,
            first_span: span,
            last_span: span,
            last_row: row,
            e_before: 0.0,
            e_first: 0.0,
            e_last: 0.0,
            e_after: None,
            e_peak: 0.0,
            interior_sum: 0.0,
            interior_rows: 0,
            missed: 0,
            detected: 0,
            seen: false,
        }
    }

    /// Widens the footprint and the detected edges with one more detection.
    pub fn extend(&mut self, (lo, hi): (usize, usize), (low_hz, high_hz): (f64, f64)) {
        self.lo = self.lo.min(lo);
        self.hi = self.hi.max(hi);
        self.low_hz = self.low_hz.min(low_hz);
        self.high_hz = self.high_hz.max(high_hz);
        self.seen = true;
    }

    /// Takes row `row`'s band energy `e` (power less noise, FS²) once the row's detections are
    /// known.
    pub fn take(&mut self, row: u64, span: (u64, u64), e: f64) {
        if !self.seen {
            self.missed += 1;
            if self.missed == 1 {
                self.e_after = Some(e);
            }
            return;
        }
        if row == self.first_row {
            self.e_first = e;
        } else {
            // The previous last row is now inside the emission.
            if self.last_row != self.first_row {
                self.interior_sum += self.e_last;
                self.interior_rows += 1;
            }
            self.last_row = row;
            self.last_span = span;
        }
        self.e_last = e;
        self.e_peak = self.e_peak.max(e);
        self.e_after = None;
        self.missed = 0;
        self.detected += 1;
        self.seen = false;
    }

    /// The band energy of a row wholly inside the emission (the mean of the interior rows, or
    /// the stronger edge row of a short one): its power while on the air, noise taken off.
    pub fn full_energy(&self) -> f64 {
        if self.interior_rows > 0 {
            self.interior_sum / self.interior_rows as f64
        } else {
            self.e_first.max(self.e_last)
        }
    }

    /// The emission's extent: each edge row counts by its share of the full energy, and so does
    /// the quiet row beyond it. `input_start`/`input_end` stretch an emission that was on the air
    /// in the first or last row of the input to the input's own ends.
    pub fn extent(&self, input_start: bool, input_end: Option<u64>) -> Extent {
        let full = self.full_energy();
        let share = |e: f64| if full > 0.0 { (e / full).clamp(0.0, 1.0) } else { 0.0 };
        let stride = (self.first_span.1 - self.first_span.0) as f64;
        let start = if input_start {
            0
        } else {
            let back = stride * (share(self.e_first) + share(self.e_before));
            self.first_span.1.saturating_sub(back.round() as u64)
        };
        let end = match input_end {
            Some(end) => end,
            None => {
                let after = self.e_after.map_or(0.0, share);
                let stride = (self.last_span.1 - self.last_span.0) as f64;
                self.last_span.0 + (stride * (share(self.e_last) + after)).round() as u64
            }
        };
        Extent { start, end: end.max(start) }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn edges_fall_inside_their_rows_by_share() {
        // Rows of 100 samples; a burst of energy 4 fills 30 % of row 1 (E = 1.2), rows 2 and 3
        // wholly, and 60 % of row 4 (E = 2.4): it ran from sample 170 to 460.
        let mut t = Track::new(0, (10, 20), 1, (100, 200));
        t.e_before = 0.0;
        for (row, e) in [(1u64, 1.2), (2, 4.0), (3, 4.0), (4, 2.4)] {
            t.extend((10, 20), (1.0, 2.0));
            t.take(row, (row * 100, row * 100 + 100), e);
        }
        t.take(5, (500, 600), 0.0);
        assert_eq!(t.extent(false, None), Extent { start: 170, end: 460 });
        assert_eq!(t.detected, 4);
        // The input's ends stretch an emission that touches them.
        assert_eq!(t.extent(true, Some(777)), Extent { start: 0, end: 777 });
    }
}
