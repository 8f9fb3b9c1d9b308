//! One emitter: every emission at the same place in frequency, with the PSD of the rows in which
//! it was on the air summed so that its figures are measured on its own averaged spectrum.

use super::{EmitterFigures, Layout};
use crate::dsp::Window;
use crate::measure::band::{occupied_bandwidth_of, BinRun};
use crate::measure::signals::WIDE_RBW;
use crate::units::db;

/// What is gathered for one emitter while rows go by.
#[derive(Clone, Debug)]
pub struct EmitterAcc {
    /// PSD summed over the rows in which one of its emissions was open (FS²/Hz · rows).
    sum: Vec<f64>,
    /// Noise density summed over the same rows.
    floor_sum: f64,
    rows: u64,
    /// The rows summed, as runs `[first, last]`, in order: an emitter that took in another
    /// ([`EmitterAcc::absorb`]) summed some rows twice, and its dilution is counted over the
    /// rows it covered, once each.
    runs: Vec<(u64, u64)>,
    pub last_row: Option<u64>,
    /// Footprint (bins) and detected edges (Hz), the union of its emissions'.
    pub lo: usize,
    pub hi: usize,
    pub low_hz: f64,
    pub high_hz: f64,
    /// Power-weighted centre of its detections, for grouping.
    centre_weighted: f64,
    weight: f64,
    pub emissions: u64,
    pub airtime: u64,
    pub first: u64,
    pub last: u64,
    pub detected_rows: u64,
}

impl EmitterAcc {
    pub fn new(bins: usize, (lo, hi): (usize, usize)) -> EmitterAcc {
        EmitterAcc {
            sum: vec![0.0; bins],
            floor_sum: 0.0,
            rows: 0,
            runs: Vec::new(),
            last_row: None,
            lo,
            hi,
            low_hz: f64::INFINITY,
            high_hz: f64::NEG_INFINITY,
            centre_weighted: 0.0,
            weight: 0.0,
            emissions: 0,
            airtime: 0,
            first: u64::MAX,
            last: 0,
            detected_rows: 0,
        }
    }

    /// The power-weighted centre of its detections so far, Hz.
    pub fn centre(&self) -> f64 {
        self.centre_weighted / self.weight.max(f64::MIN_POSITIVE)
    }

    /// The width of its detected band so far, Hz.
    pub fn width(&self) -> f64 {
        (self.high_hz - self.low_hz).max(0.0)
    }

    /// Adds a detection of `power` (FS²) centred at `centre_hz`.
    pub fn detected(&mut self, centre_hz: f64, power: f64, (low_hz, high_hz): (f64, f64)) {
        self.centre_weighted += centre_hz * power;
        self.weight += power;
        self.low_hz = self.low_hz.min(low_hz);
        self.high_hz = self.high_hz.max(high_hz);
    }

    /// Whether an emission centred at `centre_hz`, `width_hz` wide, is at this emitter's place:
    /// centres within 2 RBW plus a quarter of the wider of the two.
    pub fn is_near(&self, centre_hz: f64, width_hz: f64, rbw_hz: f64) -> bool {
        (self.centre() - centre_hz).abs() <= 2.0 * rbw_hz + 0.25 * self.width().max(width_hz)
    }

    /// Takes in another emitter found at the same place (a burst whose first row showed only a
    /// fragment of it can start an emitter of its own, a wide one split by a dip can run as
    /// two). Rows both summed count twice in the mean spectrum, which stays a mean; the rows
    /// covered are counted once. Emissions and airtime are recounted afterwards.
    pub fn absorb(&mut self, o: &EmitterAcc) {
        for (s, p) in self.sum.iter_mut().zip(&o.sum) {
            *s += p;
        }
        self.floor_sum += o.floor_sum;
        self.rows += o.rows;
        self.runs.extend_from_slice(&o.runs);
        self.runs.sort_unstable();
        let mut merged: Vec<(u64, u64)> = Vec::with_capacity(self.runs.len());
        for &(a, b) in &self.runs {
            match merged.last_mut() {
                Some(m) if a <= m.1 + 1 => m.1 = m.1.max(b),
                _ => merged.push((a, b)),
            }
        }
        self.runs = merged;
        self.lo = self.lo.min(o.lo);
        self.hi = self.hi.max(o.hi);
        self.low_hz = self.low_hz.min(o.low_hz);
        self.high_hz = self.high_hz.max(o.high_hz);
        self.centre_weighted += o.centre_weighted;
        self.weight += o.weight;
        self.detected_rows += o.detected_rows;
    }

    /// Adds row `row` (once per row) with its noise density.
    pub fn add_row(&mut self, row: u64, psd: &[f64], density: f64) {
        if self.last_row.is_some_and(|r| r >= row) {
            return;
        }
        self.last_row = Some(row);
        for (s, p) in self.sum.iter_mut().zip(psd) {
            *s += p;
        }
        self.floor_sum += density;
        self.rows += 1;
        match self.runs.last_mut() {
            Some(r) if r.1 + 1 == row => r.1 = row,
            _ => self.runs.push((row, row)),
        }
    }

    /// How many rows were summed, each counted once.
    fn rows_covered(&self) -> u64 {
        self.runs.iter().map(|(a, b)| b - a + 1).sum()
    }

    /// Its figures, or `None` when it was never on the air for a measurable time. The centre is
    /// the middle of the 99 % occupied band, or with `xdb_centre` that of the x-dB band
    /// ([`XDB_CENTRE_DB`]).
    pub fn figures(&self, g: &Layout, window: &Window, xdb_centre: bool) -> Option<EmitterFigures> {
        if self.rows == 0 || self.airtime == 0 {
            return None;
        }
        let rows = self.rows as f64;
        let floor = self.floor_sum / rows;
        // The mean PSD over the rows summed less the noise: the emitter's own spectrum, diluted
        // by the quiet parts of its edge and hang rows; of the rows it covered, `on_air` rows is
        // what it really filled.
        let on_air = self.airtime as f64 / g.stride as f64;
        let scale = self.rows_covered() as f64 / on_air.max(f64::MIN_POSITIVE);
        let clean: Vec<f64> =
            self.sum[self.lo..=self.hi].iter().map(|s| (s / rows - floor) * scale).collect();
        let power: f64 = clean.iter().sum::<f64>() * g.bin_hz;
        let positive: Vec<f64> = clean.iter().map(|v| v.max(0.0)).collect();
        let run = BinRun {
            psd: &positive,
            center_hz: g.center_hz,
            first: self.lo as i64 - (g.fft_size / 2) as i64,
            bin_hz: g.bin_hz,
        };
        let freq = |i: f64| g.center_hz + (i - (g.fft_size / 2) as f64) * g.bin_hz;
        let (lo_hz, hi_hz) = (freq(self.lo as f64 - 0.5), freq(self.hi as f64 + 0.5));
        let obw = occupied_bandwidth_of(run, lo_hz, hi_hz, g.obw_percent)?;
        let p = (0..positive.len()).max_by(|&a, &b| positive[a].total_cmp(&positive[b]))?;
        let at = |i: Option<usize>| i.and_then(|i| positive.get(i)).copied().unwrap_or(0.0);
        // A narrow emission's peak is a sinusoid's level, corrected for where it sits in its
        // bin; a wide one's is its power in the RBW around its highest bin.
        let gain = if obw.width_hz() > WIDE_RBW * g.rbw_hz {
            1.0
        } else {
            window.tone_offset(at(p.checked_sub(1)), positive[p], at(Some(p + 1))).1
        };
        let peak = positive[p] * g.rbw_hz / gain.max(1e-12);
        let center_hz = if xdb_centre {
            let (a, b) = xdb_span(&positive, p);
            freq(self.lo as f64 + 0.5 * (a + b) as f64)
        } else {
            0.5 * (obw.low_hz + obw.high_hz)
        };
        Some(EmitterFigures {
            name: String::new(),
            center_hz,
            obw_hz: obw.width_hz(),
            first_s: self.first as f64 / g.sample_rate_hz,
            last_s: self.last as f64 / g.sample_rate_hz,
            emissions: self.emissions,
            airtime_pct: 100.0 * self.airtime as f64 / g.duration_samples.max(1) as f64,
            airtime_s: self.airtime as f64 / g.sample_rate_hz,
            observation_s: None,
            peak_dbfs: db(peak),
            power_dbfs: db(power.max(1e-30)),
            attributed: Default::default(),
        })
    }
}

/// The x of the x-dB band (ITU-R SM.328) that centres an emitter with skirts: the skirt rule
/// ([`super::attribute::SKIRT_BELOW_DB`]) takes only pieces at least this far under the
/// emitter's peak, so the band within it of the peak is the emitter's body (a pulse's main
/// lobe, an OFDM block, the tones of FSK). Its middle is the centre whatever the skirts do: a
/// line spectrum's side lobes that wrap around the span, or a skirt seen on one side only,
/// move the middle of the 99 % band by kilohertz.
pub const XDB_CENTRE_DB: f64 = super::attribute::SKIRT_BELOW_DB;

/// The first and last bins of `psd` within [`XDB_CENTRE_DB`] of its peak at `p`.
fn xdb_span(psd: &[f64], p: usize) -> (usize, usize) {
    let thr = psd[p] * crate::units::undb(-XDB_CENTRE_DB);
    let a = psd.iter().position(|&v| v >= thr).unwrap_or(p);
    let b = psd.iter().rposition(|&v| v >= thr).unwrap_or(p);
    (a, b)
}
