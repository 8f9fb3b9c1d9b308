//! `measure --band` over the rows in which each band is on the air: the width of a keyed
//! transmission, not of the receiver's noise between its bursts.
//!
//! A row is *on the air* for a band when the band's power exceeds the noise in it by the
//! occupancy threshold (ITU-R SM.1880's decision, the same as `log`'s, with the same tracked
//! noise floor). The PSD of those rows is averaged, the noise density is taken off every bin
//! (so what is left is the emission's own spectrum), and the occupied bandwidth (ITU-R SM.328)
//! and the x-dB bandwidth are measured on it. On a channel keyed 30 % of the time the
//! whole-recording average is 70 % noise, whose flat spectrum spreads the 99 % OBW across the
//! channel; the on-air figure is the emission's.

use crate::dsp::Spectrum;
use crate::measure::noise::tracker::NoiseTracker;
use crate::measure::occupancy::{read_channel, ChannelDef, Timing};
use crate::measure::{occupied_bandwidth, xdb_bandwidth};
use crate::pipeline::{Consumer, Flow};
use crate::units::undb;
use std::io;

/// How far (dB) the x-dB points must lie above the noise density for the on-air x-dB bandwidth
/// to be reported: at 3 dB the noise left after subtraction (a few per cent of the floor for
/// the averages of a second or more) moves the points by well under a bin.
pub const XDB_MARGIN_DB: f64 = 3.0;

/// The on-air figures of one band.
#[derive(Clone, Debug, PartialEq)]
pub struct OnAirFigures {
    /// Share of the measurement samples in which the band was on the air, percent.
    pub on_air_pct: f64,
    /// OBW edges of the noise-corrected on-air spectrum (`None` if never on the air).
    pub obw: Option<(f64, f64)>,
    /// x-dB bandwidth of the same spectrum; `None` when its x-dB points would lie less than
    /// [`XDB_MARGIN_DB`] above the noise density (they cannot be told from what is left of it).
    pub xdb_hz: Option<f64>,
}

struct Band {
    def: ChannelDef,
    /// First and last bin of the band, learned from the first row.
    bins: (usize, usize),
    /// PSD summed over the on-air rows, band bins only.
    sum: Vec<f64>,
    floor_sum: f64,
    on: u64,
}

/// Measures bands over the rows in which they are on the air.
pub struct OnAirBands {
    bands: Vec<Band>,
    noise: NoiseTracker,
    rows: u64,
    /// A row kept for its geometry, to measure the result on.
    template: Option<Spectrum>,
}

impl OnAirBands {
    /// Bands (absolute Hz, each with its threshold over the noise); the noise floor is tracked
    /// as the occupancy tracker does at the same `timing`.
    pub fn new(bands: Vec<ChannelDef>, timing: &Timing) -> OnAirBands {
        let bands = bands
            .into_iter()
            .map(|def| Band { def, bins: (0, 0), sum: Vec::new(), floor_sum: 0.0, on: 0 })
            .collect();
        OnAirBands {
            bands,
            noise: NoiseTracker::new(timing.floor_alpha, timing.floor_rows),
            rows: 0,
            template: None,
        }
    }

    /// The figures of every band, in the order given.
    pub fn figures(&self, obw_percent: f64, x_db: f64) -> Vec<OnAirFigures> {
        self.bands
            .iter()
            .map(|b| {
                let on_air_pct = 100.0 * b.on as f64 / self.rows.max(1) as f64;
                let Some(mut spec) = self.template.clone().filter(|_| b.on > 0) else {
                    return OnAirFigures { on_air_pct, obw: None, xdb_hz: None };
                };
                let floor = b.floor_sum / b.on as f64;
                spec.psd.iter_mut().for_each(|p| *p = 0.0);
                for (p, s) in spec.psd[b.bins.0..=b.bins.1].iter_mut().zip(&b.sum) {
                    *p = (s / b.on as f64 - floor).max(0.0);
                }
                let (lo, hi) = (b.def.low_hz, b.def.high_hz);
                // The x-dB points must stand clear of what is left of the noise after the
                // floor is taken off (a few per cent of it): at least `XDB_MARGIN_DB` over it.
                let peak = spec.psd.iter().fold(0.0f64, |m, &p| m.max(p));
                let measurable = peak >= floor * undb(x_db + XDB_MARGIN_DB);
                OnAirFigures {
                    on_air_pct,
                    obw: occupied_bandwidth(&spec, lo, hi, obw_percent)
                        .map(|e| (e.low_hz, e.high_hz)),
                    xdb_hz: xdb_bandwidth(&spec, lo, hi, x_db)
                        .filter(|_| measurable)
                        .map(|e| e.width_hz()),
                }
            })
            .collect()
    }
}

impl Consumer for OnAirBands {
    fn row(&mut self, row: &Spectrum) -> io::Result<Flow> {
        if self.template.is_none() {
            let n = row.fft_size as f64;
            for b in &mut self.bands {
                let first = (row.bin_of_freq(b.def.low_hz) - 0.5).floor().clamp(0.0, n - 1.0);
                let last = (row.bin_of_freq(b.def.high_hz) + 0.5).ceil().clamp(first, n - 1.0);
                b.bins = (first as usize, last as usize);
                b.sum = vec![0.0; b.bins.1 + 1 - b.bins.0];
            }
            self.template = Some(row.clone());
        }
        let density = self.noise.push(row);
        self.rows += 1;
        for b in &mut self.bands {
            if read_channel(row, &b.def, density).occupied {
                b.on += 1;
                b.floor_sum += density;
                for (s, p) in b.sum.iter_mut().zip(&row.psd[b.bins.0..=b.bins.1]) {
                    *s += p;
                }
            }
        }
        Ok(Flow::Continue)
    }
}
