//! The visible frequency window (zoom and pan) and how spectrum bins fall into screen columns.
//!
//! Both the spectrum and the waterfall share one mapping, so a signal sits in the same column in
//! both. A column shows the *largest* bin it covers: a narrow tone must not vanish when many bins
//! share a column (a peak detector, as bench analyzers use when zoomed out; common practice).

use std::ops::Range;

/// Narrowest view, in bins of the current FFT.
pub const MIN_VIEW_BINS: f64 = 16.0;

/// A frequency interval of the captured span, absolute Hz.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct View {
    pub lo_hz: f64,
    pub hi_hz: f64,
}

impl View {
    pub fn new(lo_hz: f64, hi_hz: f64) -> View {
        View { lo_hz, hi_hz }
    }

    pub fn width_hz(&self) -> f64 {
        self.hi_hz - self.lo_hz
    }

    pub fn centre_hz(&self) -> f64 {
        0.5 * (self.lo_hz + self.hi_hz)
    }

    /// Zooms by `factor` (< 1 narrows) keeping `anchor_hz` where it is on screen, then fits the
    /// result inside `span` and no narrower than `min_width_hz`.
    pub fn zoom(&self, factor: f64, anchor_hz: f64, span: View, min_width_hz: f64) -> View {
        let anchor = anchor_hz.clamp(self.lo_hz, self.hi_hz);
        let width =
            (self.width_hz() * factor).clamp(min_width_hz.min(span.width_hz()), span.width_hz());
        let frac =
            if self.width_hz() > 0.0 { (anchor - self.lo_hz) / self.width_hz() } else { 0.5 };
        let lo = anchor - frac * width;
        View::new(lo, lo + width).inside(span)
    }

    /// Moves by `fraction` of the view's width, staying inside `span`.
    pub fn pan(&self, fraction: f64, span: View) -> View {
        let d = fraction * self.width_hz();
        View::new(self.lo_hz + d, self.hi_hz + d).inside(span)
    }

    /// Centres on `freq_hz` at the same width, inside `span`.
    pub fn centred_on(&self, freq_hz: f64, span: View) -> View {
        let half = 0.5 * self.width_hz();
        View::new(freq_hz - half, freq_hz + half).inside(span)
    }

    /// Shifts (without resizing, unless wider than `span`) so the view lies inside `span`.
    pub fn inside(&self, span: View) -> View {
        let w = self.width_hz().min(span.width_hz());
        let lo = self.lo_hz.clamp(span.lo_hz, span.hi_hz - w);
        View::new(lo, lo + w)
    }

    /// Frequency edges of column `col` of `ncols`.
    pub fn column_edges(&self, col: usize, ncols: usize) -> (f64, f64) {
        let w = self.width_hz() / ncols.max(1) as f64;
        (self.lo_hz + col as f64 * w, self.lo_hz + (col + 1) as f64 * w)
    }

    /// Centre frequency of column `col`.
    pub fn column_centre(&self, col: usize, ncols: usize) -> f64 {
        let (a, b) = self.column_edges(col, ncols);
        0.5 * (a + b)
    }

    /// Column showing `freq_hz`, if it is in view.
    pub fn column_of(&self, freq_hz: f64, ncols: usize) -> Option<usize> {
        if !(self.lo_hz..self.hi_hz).contains(&freq_hz) {
            return None;
        }
        let c = ((freq_hz - self.lo_hz) / self.width_hz() * ncols as f64).floor() as usize;
        Some(c.min(ncols.saturating_sub(1)))
    }
}

/// Where a row of bins lies in frequency: bin `i` is centred at `first_hz + i·bin_hz`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BinGrid {
    pub first_hz: f64,
    pub bin_hz: f64,
    pub len: usize,
}

impl BinGrid {
    /// The bins whose centres fall in `[lo, hi)`; when none does (zoomed in past the bin width),
    /// the one bin nearest the middle, so every column shows something.
    pub fn bins_in(&self, lo_hz: f64, hi_hz: f64) -> Range<usize> {
        if self.len == 0 {
            return 0..0;
        }
        let start = ((lo_hz - self.first_hz) / self.bin_hz).ceil();
        let end = ((hi_hz - self.first_hz) / self.bin_hz).ceil();
        let (s, e) = (start.max(0.0), end.min(self.len as f64));
        if e > s {
            return s as usize..e as usize;
        }
        let mid = (0.5 * (lo_hz + hi_hz) - self.first_hz) / self.bin_hz;
        let edge = 0.5; // half a bin beyond the outer bins still shows them
        if mid < -edge || mid > self.len as f64 - 1.0 + edge {
            return 0..0;
        }
        let i = (mid.round().max(0.0) as usize).min(self.len - 1);
        i..i + 1
    }

    /// For each of `ncols` columns of `view`, the range of bins it covers.
    pub fn column_map(&self, view: &View, ncols: usize) -> Vec<Range<usize>> {
        (0..ncols)
            .map(|c| {
                let (lo, hi) = view.column_edges(c, ncols);
                self.bins_in(lo, hi)
            })
            .collect()
    }

    /// Nearest bin to a frequency, if within the grid.
    pub fn nearest(&self, freq_hz: f64) -> Option<usize> {
        let x = ((freq_hz - self.first_hz) / self.bin_hz).round();
        (x >= 0.0 && x < self.len as f64).then_some(x as usize)
    }

    pub fn freq(&self, bin: usize) -> f64 {
        self.first_hz + bin as f64 * self.bin_hz
    }
}

/// The largest value in each column (`NEG_INFINITY` where a column covers no bin).
pub fn column_max<T: Copy + Into<f64>>(values: &[T], map: &[Range<usize>]) -> Vec<f64> {
    map.iter()
        .map(|r| values[r.clone()].iter().map(|v| (*v).into()).fold(f64::NEG_INFINITY, f64::max))
        .collect()
}

/// A unit for frequency labels chosen for a magnitude: (divisor, suffix).
pub fn freq_unit(max_abs_hz: f64) -> (f64, &'static str) {
    if max_abs_hz >= 1e9 {
        (1e9, "GHz")
    } else if max_abs_hz >= 1e6 {
        (1e6, "MHz")
    } else if max_abs_hz >= 1e3 {
        (1e3, "kHz")
    } else {
        (1.0, "Hz")
    }
}

/// A labelled tick on the frequency axis.
#[derive(Clone, Debug, PartialEq)]
pub struct Tick {
    pub col: usize,
    pub label: String,
}

/// Ticks at round frequencies (1, 2, 5 × 10ⁿ) far enough apart that their labels (which start one
/// column right of the tick) never touch. Returns the ticks and the unit of their labels.
pub fn freq_ticks(view: &View, ncols: usize) -> (Vec<Tick>, &'static str) {
    let (div, unit) = freq_unit(view.lo_hz.abs().max(view.hi_hz.abs()));
    if ncols < 8 || view.width_hz() <= 0.0 {
        return (Vec::new(), unit);
    }
    for step in nice_steps(view.width_hz() / ncols as f64) {
        let decimals = decimals_for(step / div);
        let first = (view.lo_hz / step).ceil() as i64;
        let last = (view.hi_hz / step).floor() as i64;
        if last < first {
            continue;
        }
        let ticks: Vec<Tick> = (first..=last)
            .filter_map(|k| {
                let f = k as f64 * step;
                let col = view.column_of(f, ncols)?;
                Some(Tick { col, label: format!("{:.*}", decimals, f / div) })
            })
            .collect();
        let fits = ticks.windows(2).all(|w| w[0].col + w[0].label.len() + 2 < w[1].col);
        if fits {
            let ticks = ticks.into_iter().filter(|t| t.col + 1 + t.label.len() <= ncols).collect();
            return (ticks, unit);
        }
    }
    (Vec::new(), unit)
}

/// 1-2-5 steps from just below `min_step` upwards.
fn nice_steps(min_step: f64) -> impl Iterator<Item = f64> {
    let start = 10f64.powf(min_step.max(1e-3).log10().floor());
    (0..40).map(move |i| start * [1.0, 2.0, 5.0][i % 3] * 10f64.powi((i / 3) as i32))
}

/// Decimals needed to tell labels `step` apart.
fn decimals_for(step: f64) -> usize {
    let mut d = 0;
    while d < 9
        && ((step * 10f64.powi(d as i32)).round() - step * 10f64.powi(d as i32)).abs() > 1e-6
    {
        d += 1;
    }
    d
}

/// A round step (1, 2, 5 × 10ⁿ dB) for level labels at least `min_rows` text rows apart.
pub fn level_step(range_db: f64, rows: usize, min_rows: f64) -> f64 {
    let per_row = range_db / rows.max(1) as f64;
    for step in nice_steps(0.1) {
        if step / per_row >= min_rows {
            return step;
        }
    }
    range_db
}

#[cfg(test)]
mod tests {
    use super::*;

    const SPAN: View = View { lo_hz: 432.3e6, hi_hz: 434.7e6 };

    #[test]
    fn zoom_keeps_the_anchor_and_stays_inside() {
        let v = SPAN.zoom(0.5, 433.5e6, SPAN, 1e3);
        assert!((v.width_hz() - 1.2e6).abs() < 1e-3);
        assert!((v.centre_hz() - 433.5e6).abs() < 1e-3);
        // Anchor near the edge: the view is shifted back inside the span.
        let v = SPAN.zoom(0.5, 432.31e6, SPAN, 1e3).zoom(0.5, 432.31e6, SPAN, 1e3);
        assert!(v.lo_hz >= SPAN.lo_hz && v.hi_hz <= SPAN.hi_hz);
        assert!((v.width_hz() - 0.6e6).abs() < 1e-3);
        // Zooming out past the span stops at the span.
        assert_eq!(v.zoom(100.0, 433e6, SPAN, 1e3), SPAN);
        // Zooming in stops at the minimum width.
        assert!((SPAN.zoom(1e-9, 433e6, SPAN, 5e3).width_hz() - 5e3).abs() < 1e-6);
    }

    #[test]
    fn pan_stops_at_the_edges() {
        let v = View::new(433e6, 433.6e6);
        assert_eq!(v.pan(0.25, SPAN), View::new(433.15e6, 433.75e6));
        let far = v.pan(10.0, SPAN);
        assert!((far.hi_hz - SPAN.hi_hz).abs() < 1e-3 && (far.width_hz() - 0.6e6).abs() < 1e-3);
    }

    #[test]
    fn columns_cover_bins_once() {
        // 16 bins of 1 kHz centred 0..15 kHz; 4 columns over −0.5 .. 15.5 kHz get 4 bins each.
        let g = BinGrid { first_hz: 0.0, bin_hz: 1e3, len: 16 };
        let v = View::new(-500.0, 15_500.0);
        let map = g.column_map(&v, 4);
        assert_eq!(map, vec![0..4, 4..8, 8..12, 12..16]);
        let vals: Vec<f32> = (0..16).map(|i| if i == 9 { 5.0 } else { 0.0 }).collect();
        assert_eq!(column_max(&vals, &map), vec![0.0, 0.0, 5.0, 0.0]);
    }

    #[test]
    fn zoomed_past_a_bin_each_column_shows_the_nearest() {
        let g = BinGrid { first_hz: 0.0, bin_hz: 1e3, len: 16 };
        let v = View::new(2_000.0, 4_000.0);
        let map = g.column_map(&v, 8);
        // Columns of 250 Hz: centres 2125, 2375, … ; bin 2 owns the first, then bin 3 etc.
        assert_eq!(map[0], 2..3);
        assert_eq!(map[3], 3..4); // 2750..3000 holds the centre of bin 3 (3000 is excluded)…
        assert_eq!(map[4], 3..4); // …3000..3250 contains 3000
        assert_eq!(map[7], 4..5);
        // Outside the grid nothing is shown.
        assert_eq!(g.bins_in(-5_000.0, -4_000.0), 0..0);
    }

    #[test]
    fn ticks_are_round_and_do_not_overlap() {
        let (ticks, unit) = freq_ticks(&SPAN, 74);
        assert_eq!(unit, "MHz");
        let labels: Vec<&str> = ticks.iter().map(|t| t.label.as_str()).collect();
        assert_eq!(labels, vec!["432.5", "433.0", "433.5", "434.0", "434.5"]);
        for w in ticks.windows(2) {
            assert!(w[0].col + w[0].label.len() + 2 < w[1].col);
        }
        // 433.0 MHz is 0.7 MHz into a 2.4 MHz view of 74 columns: column ⌊0.7/2.4·74⌋ = 21.
        assert_eq!(ticks[1].col, 21);
        // Wider screens get finer steps.
        let (wide, _) = freq_ticks(&SPAN, 154);
        assert!(wide.len() > ticks.len());
        // Baseband (no centre frequency) in kHz with signs.
        let (bb, unit) = freq_ticks(&View::new(-24e3, 24e3), 74);
        assert_eq!(unit, "kHz");
        assert!(bb.iter().any(|t| t.label == "-10" || t.label == "-10.0"), "{bb:?}");
    }

    #[test]
    fn level_steps_leave_room() {
        assert_eq!(level_step(80.0, 6, 2.0), 50.0);
        assert_eq!(level_step(80.0, 14, 2.0), 20.0);
        assert_eq!(level_step(80.0, 40, 2.0), 5.0);
    }
}
