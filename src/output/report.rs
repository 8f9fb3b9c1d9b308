//! The `measure` report: one JSON object (`--json`) or a table for people.
//!
//! JSON keys (all levels computed from the input; frequencies absolute):
//! `source, sample_rate_hz, center_hz, fft_size, window, rbw_hz, enbw_bins, frames, samples,
//! duration_s, dof, psd_uncertainty_db, total_power_dbfs, noise_floor_dbfs_per_hz, peaks, bands,
//! input_issues`.
//! `peaks[]`: `freq_hz, level_dbfs, snr_db, power_dbfs, obw_hz` (strongest first).
//! `bands[]`: `center_hz, width_hz, power_dbfs, obw_hz, obw_low_hz, obw_high_hz,
//! xdb_bandwidth_hz`.
//! `channels[]` (only with `--channel`/`--plan`): `name, center_hz, width_hz, power_dbfs, obw_hz,
//! occupancy_pct, samples, dwell_s`.

use crate::units::{format_hz, format_hz_short};
use serde::Serialize;
use std::fmt::Write as _;

#[derive(Serialize, Debug, Clone)]
pub struct Report {
    pub source: String,
    pub sample_rate_hz: f64,
    pub center_hz: f64,
    pub fft_size: usize,
    pub window: String,
    pub rbw_hz: f64,
    pub enbw_bins: f64,
    pub frames: u64,
    pub samples: u64,
    pub duration_s: f64,
    /// Equivalent degrees of freedom of each PSD bin.
    pub dof: f64,
    /// Half-width of the 95 % confidence interval of a noise-only PSD bin, in dB.
    pub psd_uncertainty_db: f64,
    pub total_power_dbfs: f64,
    pub noise_floor_dbfs_per_hz: f64,
    pub peaks: Vec<PeakRow>,
    pub bands: Vec<BandRow>,
    /// Plan channels (`--channel`/`--plan`); absent from the JSON when none were given.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub channels: Vec<ChannelRow>,
    pub input_issues: IssuesRow,
}

#[derive(Serialize, Debug, Clone)]
pub struct PeakRow {
    pub freq_hz: f64,
    pub level_dbfs: f64,
    pub snr_db: f64,
    pub power_dbfs: f64,
    pub obw_hz: f64,
}

#[derive(Serialize, Debug, Clone)]
pub struct BandRow {
    pub center_hz: f64,
    pub width_hz: f64,
    pub power_dbfs: f64,
    pub obw_hz: f64,
    pub obw_low_hz: f64,
    pub obw_high_hz: f64,
    pub xdb_bandwidth_hz: f64,
}

/// A plan channel over the whole input: power and OBW of the average spectrum, and occupancy
/// (ITU-R SM.1880) over `samples` measurement samples of `dwell_s` each.
#[derive(Serialize, Debug, Clone)]
pub struct ChannelRow {
    pub name: String,
    pub center_hz: f64,
    pub width_hz: f64,
    pub power_dbfs: f64,
    pub obw_hz: f64,
    pub occupancy_pct: f64,
    pub samples: u64,
    pub dwell_s: f64,
}

#[derive(Serialize, Debug, Clone, Default)]
pub struct IssuesRow {
    pub non_finite_samples: u64,
    /// Float samples beyond ±1e6, a sign of a wrong `--format`.
    pub beyond_scale_samples: u64,
    pub trailing_bytes: u64,
    pub dropped_samples: u64,
}

impl Report {
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).expect("report is plain data")
    }

    /// The table printed without `--json`.
    pub fn to_table(&self, obw_percent: f64, xdb: f64) -> String {
        let mut s = String::new();
        let _ = writeln!(s, "source     {}", self.source);
        let _ = writeln!(
            s,
            "span       {} ± {}   ({} samples, {:.3} s)",
            format_hz(self.center_hz),
            format_hz(self.sample_rate_hz / 2.0),
            self.samples,
            self.duration_s
        );
        let _ = writeln!(
            s,
            "analysis   FFT {}  {}  RBW {}  {} frames averaged (ν ≈ {:.0}, ±{:.2} dB at 95 %)",
            self.fft_size,
            self.window,
            format_hz(self.rbw_hz),
            self.frames,
            self.dof,
            self.psd_uncertainty_db
        );
        let _ = writeln!(s, "total      {:.2} dBFS", self.total_power_dbfs);
        let _ = writeln!(s, "noise      {:.2} dBFS/Hz", self.noise_floor_dbfs_per_hz);
        let _ = writeln!(s);
        if self.peaks.is_empty() {
            let _ = writeln!(s, "no signal stands clear of the noise floor");
        } else {
            let _ = writeln!(
                s,
                "{:>3}  {:>18}  {:>11}  {:>8}  {:>11}  {:>12}",
                "#",
                "frequency",
                "level dBFS",
                "SNR dB",
                "power dBFS",
                format!("OBW {obw_percent}%")
            );
            for (i, p) in self.peaks.iter().enumerate() {
                let _ = writeln!(
                    s,
                    "{:>3}  {:>18}  {:>11.2}  {:>8.1}  {:>11.2}  {:>12}",
                    i + 1,
                    format_hz(p.freq_hz),
                    p.level_dbfs,
                    p.snr_db,
                    p.power_dbfs,
                    format_hz_short(p.obw_hz, 2)
                );
            }
        }
        if !self.bands.is_empty() {
            let _ = writeln!(s);
            let _ = writeln!(
                s,
                "{:>18}  {:>10}  {:>11}  {:>12}  {:>12}",
                "band centre",
                "width",
                "power dBFS",
                format!("OBW {obw_percent}%"),
                format!("{xdb} dB BW")
            );
            for b in &self.bands {
                let _ = writeln!(
                    s,
                    "{:>18}  {:>10}  {:>11.2}  {:>12}  {:>12}",
                    format_hz(b.center_hz),
                    format_hz_short(b.width_hz, 2),
                    b.power_dbfs,
                    format_hz_short(b.obw_hz, 2),
                    format_hz_short(b.xdb_bandwidth_hz, 2)
                );
            }
        }
        if !self.channels.is_empty() {
            let _ = writeln!(s);
            let _ = writeln!(
                s,
                "{:<16}  {:>18}  {:>9}  {:>11}  {:>12}  {:>10}",
                "channel",
                "centre",
                "width",
                "power dBFS",
                format!("OBW {obw_percent}%"),
                "occupancy"
            );
            for c in &self.channels {
                let _ = writeln!(
                    s,
                    "{:<16}  {:>18}  {:>9}  {:>11.2}  {:>12}  {:>8.1} %",
                    c.name,
                    format_hz(c.center_hz),
                    format_hz_short(c.width_hz, 2),
                    c.power_dbfs,
                    format_hz_short(c.obw_hz, 2),
                    c.occupancy_pct
                );
            }
            if let Some(c) = self.channels.first() {
                let _ = writeln!(
                    s,
                    "occupancy over {} samples of {:.2} ms (ITU-R SM.1880)",
                    c.samples,
                    c.dwell_s * 1e3
                );
            }
        }
        let i = &self.input_issues;
        if i.non_finite_samples + i.beyond_scale_samples + i.trailing_bytes + i.dropped_samples > 0
        {
            let _ = writeln!(s);
            let _ = writeln!(
                s,
                "input      {} non-finite samples skipped, {} beyond full scale, {} trailing bytes dropped, {} samples dropped",
                i.non_finite_samples, i.beyond_scale_samples, i.trailing_bytes, i.dropped_samples
            );
        }
        s
    }
}
