//! The `measure` report: one JSON object (`--json`) or a table for people.
//!
//! JSON keys (all levels computed from the input; frequencies absolute):
//! `source, sample_rate_hz, center_hz, fft_size, window, rbw_hz, enbw_bins, frames, samples,
//! duration_s, dof, psd_uncertainty_db, total_power_dbfs, noise_floor_dbfs_per_hz, peaks, bands,
//! input_issues`.
//! `peaks[]`: `freq_hz, level_dbfs, snr_db, power_dbfs, obw_hz`, strongest `power_dbfs` (the
//! signal's integrated power) first; `level_dbfs` is a sinusoid's power at the peak, in one RBW;
//! then its kind, classified from the last samples of the input (at most 0.5 s, see
//! [`crate::pipeline::kinds`]): `class, class_confidence, class_params, designator`.
//! `bands[]`: `center_hz, width_hz, power_dbfs, obw_hz, obw_low_hz, obw_high_hz,
//! xdb_bandwidth_hz` over the whole recording, then `on_air_pct` (share of measurement samples in
//! which the band was on the air) and `on_air_obw_hz, on_air_obw_low_hz, on_air_obw_high_hz,
//! on_air_xdb_bandwidth_hz` over those samples only, noise taken off (null if never on the air;
//! see [`crate::output::report::on_air`]).
//! `channels[]` (only with `--channel`/`--plan`): `name, center_hz, width_hz, power_dbfs, obw_hz,
//! occupancy_pct, samples, dwell_s`.
//! With a calibration every `_dbfs` key gets a `_dbm` twin, and `calibration` and
//! `level_offset_db` are added ([`crate::output::levels`]); the table prints dBm.

pub mod on_air;
pub mod whole;

use crate::dsp::{Spectrum, Window};
use crate::measure::calibration::Calibration;
use crate::measure::stats::gamma_quantile_unit_mean;
use crate::measure::{
    band_power, find_signals, occupied_bandwidth, spectrum_floor, xdb_bandwidth, Detection,
};
use crate::output::class_fields::ClassFields;
use crate::output::levels::level_unit;
use crate::output::report::on_air::OnAirFigures;
use crate::plan::Plan;
use crate::source::InputIssues;
use crate::units::{db, format_hz, format_hz_short, format_hz_within};
use anyhow::{bail, Result};
use serde::Serialize;
use std::fmt::Write as _;

/// A band given as `CENTER:WIDTH` in absolute hertz (`measure --band`).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Band {
    pub center_hz: f64,
    pub width_hz: f64,
}

/// What the report measures beyond the fixed figures.
#[derive(Clone, Debug, PartialEq)]
pub struct ReportSettings {
    /// How many of the strongest signals to list.
    pub peaks: usize,
    pub bands: Vec<Band>,
    pub obw_percent: f64,
    pub xdb: f64,
    /// Probability per bin that noise alone is listed as a signal.
    pub false_alarm_per_bin: f64,
}

/// What the run counted besides the spectrum.
#[derive(Clone, Debug, Default)]
pub struct InputCounts {
    pub samples: u64,
    pub issues: InputIssues,
    pub dropped: u64,
}

/// Measures the whole-input spectrum for the report.
pub fn build_report(
    settings: &ReportSettings,
    label: &str,
    spec: &Spectrum,
    counts: &InputCounts,
) -> Result<Report> {
    let window = Window::new(spec.window, spec.fft_size);
    let floor = spectrum_floor(spec);
    let det = Detection {
        obw_percent: settings.obw_percent,
        false_alarm_per_bin: settings.false_alarm_per_bin,
        ..Detection::default()
    };
    let peaks = find_signals(spec, &window, floor, settings.peaks, det)
        .into_iter()
        .map(|s| PeakRow {
            freq_hz: s.freq_hz,
            level_dbfs: s.level_dbfs,
            snr_db: s.snr_db,
            power_dbfs: s.power_dbfs,
            obw_hz: s.obw.width_hz(),
            classified: None,
        })
        .collect();
    let (span_lo, span_hi) = spec.span_hz();
    let mut bands = Vec::new();
    for b in &settings.bands {
        let (lo, hi) = (b.center_hz - b.width_hz / 2.0, b.center_hz + b.width_hz / 2.0);
        if lo < span_lo - 1e-6 || hi > span_hi + 1e-6 {
            bail!(
                "band {} wide at {} reaches outside the captured span {} .. {}; check --band and --center",
                format_hz(b.width_hz),
                format_hz(b.center_hz),
                format_hz_within(span_lo, spec.bin_hz()),
                format_hz_within(span_hi, spec.bin_hz())
            );
        }
        let obw = occupied_bandwidth(spec, lo, hi, settings.obw_percent);
        let xdb = xdb_bandwidth(spec, lo, hi, settings.xdb);
        bands.push(BandRow {
            center_hz: b.center_hz,
            width_hz: b.width_hz,
            power_dbfs: db(band_power(spec, lo, hi)),
            obw_hz: obw.map_or(0.0, |e| e.width_hz()),
            obw_low_hz: obw.map_or(b.center_hz, |e| e.low_hz),
            obw_high_hz: obw.map_or(b.center_hz, |e| e.high_hz),
            xdb_bandwidth_hz: xdb.map_or(0.0, |e| e.width_hz()),
            on_air_pct: 0.0,
            on_air_obw_hz: None,
            on_air_obw_low_hz: None,
            on_air_obw_high_hz: None,
            on_air_xdb_bandwidth_hz: None,
        });
    }
    let issues = &counts.issues;
    Ok(Report {
        source: label.to_string(),
        sample_rate_hz: spec.sample_rate_hz,
        center_hz: spec.center_hz,
        fft_size: spec.fft_size,
        window: spec.window.to_string(),
        rbw_hz: spec.rbw_hz,
        enbw_bins: spec.enbw_bins,
        frames: spec.frames,
        samples: counts.samples,
        duration_s: counts.samples as f64 / spec.sample_rate_hz,
        panorama_span_hz: None,
        dof: spec.dof,
        psd_uncertainty_db: uncertainty_db(spec.dof),
        total_power_dbfs: db(spec.total_power()),
        noise_floor_dbfs_per_hz: db(floor),
        peaks,
        bands,
        channels: Vec::new(),
        input_issues: IssuesRow {
            non_finite_samples: issues.non_finite,
            beyond_scale_samples: issues.beyond_scale,
            trailing_bytes: issues.trailing_bytes,
            dropped_samples: counts.dropped,
        },
    })
}

/// Power and occupied bandwidth of each plan channel in the whole-input average, with the
/// channel's occupancy over the whole input: (occupancy %, measurement samples) per channel,
/// the occupancy `None` for a panorama's channel never in view (not measured).
pub fn channel_rows(
    plan: &Plan,
    spec: &Spectrum,
    occupancy: &[(Option<f64>, u64)],
    dwell_s: f64,
    obw_percent: f64,
) -> Vec<ChannelRow> {
    plan.channels
        .iter()
        .zip(occupancy)
        .map(|(c, &(pct, n))| ChannelRow {
            name: c.name.clone(),
            center_hz: c.center_hz,
            width_hz: c.width_hz,
            // A panorama's channel never in view has no level (its bins hold none).
            power_dbfs: pct.map(|_| db(band_power(spec, c.low_hz(), c.high_hz()))),
            obw_hz: occupied_bandwidth(spec, c.low_hz(), c.high_hz(), obw_percent)
                .map_or(0.0, |e| e.width_hz()),
            occupancy_pct: pct,
            samples: n,
            dwell_s,
        })
        .collect()
}

/// Half-width in dB of the 95 % interval of `χ²_ν/ν` (the larger side).
pub fn uncertainty_db(dof: f64) -> f64 {
    let a = dof / 2.0;
    let lo = gamma_quantile_unit_mean(0.025, a);
    let hi = gamma_quantile_unit_mean(0.975, a);
    (-db(lo)).max(db(hi))
}

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
    /// Of a panorama (a retuned input stitched into one spectrum), the width it covers, Hz;
    /// `sample_rate_hz` is then the receiver's own rate. Absent from the JSON otherwise, where
    /// the span is the sample rate.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub panorama_span_hz: Option<f64>,
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
    /// Its kind, from the newest samples of the input (`class`, `class_confidence`,
    /// `class_params`, `designator`; see [`crate::pipeline::kinds`]).
    #[serde(flatten)]
    pub classified: Option<ClassFields>,
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
    /// Share of the measurement samples in which the band was on the air, percent.
    pub on_air_pct: f64,
    /// OBW and x-dB bandwidth over those samples only, noise taken off (null: never on the air).
    pub on_air_obw_hz: Option<f64>,
    pub on_air_obw_low_hz: Option<f64>,
    pub on_air_obw_high_hz: Option<f64>,
    pub on_air_xdb_bandwidth_hz: Option<f64>,
}

impl BandRow {
    /// Adds what was measured over the samples in which the band was on the air.
    pub fn set_on_air(&mut self, f: &OnAirFigures) {
        self.on_air_pct = f.on_air_pct;
        self.on_air_obw_hz = f.obw.map(|(lo, hi)| hi - lo);
        self.on_air_obw_low_hz = f.obw.map(|e| e.0);
        self.on_air_obw_high_hz = f.obw.map(|e| e.1);
        self.on_air_xdb_bandwidth_hz = f.xdb_hz;
    }
}

/// A plan channel over the whole input: power and OBW of the average spectrum, and occupancy
/// (ITU-R SM.1880) over `samples` measurement samples of `dwell_s` each.
#[derive(Serialize, Debug, Clone)]
pub struct ChannelRow {
    pub name: String,
    pub center_hz: f64,
    pub width_hz: f64,
    /// `null` for a panorama's channel never in view (not measured), as its occupancy.
    pub power_dbfs: Option<f64>,
    pub obw_hz: f64,
    pub occupancy_pct: Option<f64>,
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

    /// The table printed without `--json`; with a calibration, levels in dBm, each at its own
    /// frequency.
    pub fn to_table(&self, obw_percent: f64, xdb: f64, cal: Option<&Calibration>) -> String {
        let unit = level_unit(cal);
        let at = |dbfs: f64, freq_hz: f64| dbfs + cal.map_or(0.0, |c| c.offset_db(freq_hz));
        let mut s = String::new();
        let _ = writeln!(s, "source     {}", self.source);
        let _ = writeln!(
            s,
            "span       {} ± {}   ({} samples, {:.3} s)",
            format_hz(self.center_hz),
            format_hz(self.panorama_span_hz.unwrap_or(self.sample_rate_hz) / 2.0),
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
        let centre = self.center_hz;
        let _ = writeln!(s, "total      {:.2} {unit}", at(self.total_power_dbfs, centre));
        let _ = writeln!(s, "noise      {:.2} {unit}/Hz", at(self.noise_floor_dbfs_per_hz, centre));
        if let Some(c) = cal {
            let _ = writeln!(s, "levels     dBm at the antenna port, calibrated by {}", c.origin);
        }
        let _ = writeln!(s);
        if self.peaks.is_empty() {
            let _ = writeln!(s, "no signal stands clear of the noise floor");
        } else {
            let _ = writeln!(
                s,
                "{:>3}  {:>18}  {:>11}  {:>13}  {:>8}  {:>12}",
                "#",
                "frequency",
                format!("power {unit}"),
                format!("peak/RBW {unit}"),
                "SNR dB",
                format!("OBW {obw_percent}%")
            );
            for (i, p) in self.peaks.iter().enumerate() {
                let _ = writeln!(
                    s,
                    "{:>3}  {:>18}  {:>11.2}  {:>13.2}  {:>8.1}  {:>12}",
                    i + 1,
                    format_hz(p.freq_hz),
                    at(p.power_dbfs, p.freq_hz),
                    at(p.level_dbfs, p.freq_hz),
                    p.snr_db,
                    format_hz_short(p.obw_hz, 2)
                );
            }
            let _ = writeln!(
                s,
                "power: over the signal's band; peak/RBW and SNR: a sinusoid at its peak in one RBW"
            );
            let _ = writeln!(
                s,
                "(all less the noise); strongest power first; a wide signal's frequency is its OBW centre"
            );
        }
        if !self.bands.is_empty() {
            let _ = writeln!(s);
            let _ = writeln!(
                s,
                "{:>18}  {:>10}  {:>11}  {:>12}  {:>12}  {:>7}  {:>12}  {:>12}",
                "band centre",
                "width",
                format!("power {unit}"),
                format!("OBW {obw_percent}%"),
                format!("{xdb} dB BW"),
                "on air",
                "OBW on air",
                "BW on air"
            );
            let or_dash = |v: Option<f64>| v.map_or("-".to_string(), |v| format_hz_short(v, 2));
            for b in &self.bands {
                let _ = writeln!(
                    s,
                    "{:>18}  {:>10}  {:>11.2}  {:>12}  {:>12}  {:>5.1} %  {:>12}  {:>12}",
                    format_hz(b.center_hz),
                    format_hz_short(b.width_hz, 2),
                    at(b.power_dbfs, b.center_hz),
                    format_hz_short(b.obw_hz, 2),
                    format_hz_short(b.xdb_bandwidth_hz, 2),
                    b.on_air_pct,
                    or_dash(b.on_air_obw_hz),
                    or_dash(b.on_air_xdb_bandwidth_hz)
                );
            }
            let _ = writeln!(
                s,
                "whole recording, then over the samples in which the band was on the air (noise taken off)"
            );
        }
        if !self.channels.is_empty() {
            let _ = writeln!(s);
            let _ = writeln!(
                s,
                "{:<16}  {:>18}  {:>9}  {:>11}  {:>12}  {:>10}",
                "channel",
                "centre",
                "width",
                format!("power {unit}"),
                format!("OBW {obw_percent}%"),
                "occupancy"
            );
            for c in &self.channels {
                let (power, occupancy) = match (c.power_dbfs, c.occupancy_pct) {
                    (Some(p), Some(o)) => {
                        (format!("{:.2}", at(p, c.center_hz)), format!("{o:.1} %"))
                    }
                    _ => ("-".to_string(), "not measured".to_string()),
                };
                let _ = writeln!(
                    s,
                    "{:<16}  {:>18}  {:>9}  {power:>11}  {:>12}  {occupancy:>10}",
                    c.name,
                    format_hz(c.center_hz),
                    format_hz_short(c.width_hz, 2),
                    format_hz_short(c.obw_hz, 2),
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
