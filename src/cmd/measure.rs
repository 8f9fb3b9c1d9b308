//! `bandwarden measure`: average the whole input into one spectrum and measure it.

use crate::cli::MeasureConfig;
use crate::measure::occupancy::{ChannelDef, DEFAULT_HANG_S, DEFAULT_INTERVAL_S};
use crate::output::class_fields::ClassFields;
use crate::output::levels::add_dbm;
use crate::output::report::on_air::OnAirBands;
use crate::output::report::whole::WholeInput;
use crate::output::report::{build_report, channel_rows, InputCounts, ReportSettings};
use crate::output::sink;
use crate::pipeline::kinds::Kinds;
use crate::pipeline::occupancy::{OccupancyRequest, OccupancySetup};
use crate::pipeline::{open_input, run_to_end, Run, RunSpec};
use crate::source::reader::ReaderOptions;
use crate::source::sanitize;
use crate::units::{format_num, samples_in};
use anyhow::{bail, Result};
use std::io::Write;
use std::process::ExitCode;

pub fn run(mut cfg: MeasureConfig) -> Result<ExitCode> {
    let src = open_input(&cfg.input)?;
    let info = src.info().clone();
    super::settle_calibration(&mut cfg.calibration, &info)?;
    let max_samples = cfg.seconds.map(|s| (s * info.sample_rate_hz).round() as u64);
    let skip_samples = samples_in(cfg.skip, info.sample_rate_hz).map_err(anyhow::Error::msg)?;
    let plan = &cfg.channels.plan;
    // A retuned input is measured as one panorama; a grid too large is refused here.
    crate::pipeline::stitch::span_of(&info, cfg.dsp.fft_size)?;
    let mut spec = RunSpec::new(info.clone(), cfg.dsp.engine(None), cfg.dsp.threads);
    let request = OccupancyRequest {
        dwell_s: cfg.channels.dwell_s,
        threshold_db: cfg.channels.threshold_db,
        interval_s: DEFAULT_INTERVAL_S,
        hang_s: DEFAULT_HANG_S,
    };
    // Plan channels and bands are followed row by row (one measurement sample each).
    let setup = OccupancySetup::new(&info, &cfg.dsp, plan, &request)?.whole_input();
    let dwell_s = setup.dwell_s();
    if !plan.is_empty() || !cfg.bands.is_empty() {
        spec.engine = setup.engine.clone();
    }
    if !plan.is_empty() {
        spec.tracker = Some(setup.tracker());
    }
    let bands = cfg.bands.iter().map(|b| ChannelDef {
        low_hz: b.center_hz - b.width_hz / 2.0,
        high_hz: b.center_hz + b.width_hz / 2.0,
        threshold_db: cfg.channels.threshold_db,
    });
    let mut on_air = OnAirBands::new(bands.collect(), &setup.timing);
    spec.check_work()?;
    let mut whole = WholeInput::new(plan.channels.len());
    // The peaks' kinds come from the last samples of the input (they are found at its end).
    let mut kinds = Kinds::newest_only(info.sample_rate_hz, info.center_hz);
    let opts = ReaderOptions { max_samples, skip_samples, ..Default::default() };
    let outcome =
        run_to_end(src, opts, Run::new(spec, vec![&mut whole, &mut on_air, &mut kinds]), None)?;
    if outcome.samples_read == 0 && skip_samples > 0 {
        bail!(
            "the input '{}' ends before the {} s that --skip passes over; skip less",
            sanitize(&info.label),
            format_num(cfg.skip)
        );
    }
    let issues = outcome.issues.clone().unwrap_or_default();
    outcome.conclude(&info.label)?;
    let Some(spectrum) = whole.average(cfg.dsp.hop()) else {
        if issues.non_finite > 0 {
            bail!(
                "the input '{}' has no stretch of {} samples free of NaN or infinity to measure; the input is probably not {}; check --format (or use a smaller --fft)",
                sanitize(&info.label),
                cfg.dsp.fft_size,
                info.format.map_or("in the format it was read as".to_string(), |f| f.to_string())
            );
        }
        bail!(
            "the input '{}' holds {} samples, fewer than one FFT frame of {}; use a smaller --fft",
            sanitize(&info.label),
            whole.samples,
            cfg.dsp.fft_size
        );
    };
    let settings = ReportSettings {
        peaks: cfg.peaks,
        bands: cfg.bands.clone(),
        obw_percent: cfg.obw_percent,
        xdb: cfg.xdb,
        false_alarm_per_bin: cfg.detection.false_alarm_per_bin,
    };
    let counts = InputCounts { samples: whole.samples, issues, dropped: outcome.reader_dropped };
    let mut report = build_report(&settings, &info.label, &spectrum, &counts)?;
    if info.tuning.is_some() {
        // A panorama's geometry is its grid (its "rate" the span): say the input's own rate and
        // time, and the step's FFT size.
        report.panorama_span_hz = Some(report.sample_rate_hz);
        report.sample_rate_hz = info.sample_rate_hz;
        report.duration_s = counts.samples as f64 / info.sample_rate_hz;
        report.fft_size = cfg.dsp.fft_size;
    }
    let wanted: Vec<(f64, f64)> = report.peaks.iter().map(|p| (p.freq_hz, p.obw_hz)).collect();
    for (p, c) in report.peaks.iter_mut().zip(kinds.classify_newest_all(&wanted)) {
        p.classified = Some(ClassFields::of(&c));
    }
    for (row, f) in report.bands.iter_mut().zip(on_air.figures(cfg.obw_percent, cfg.xdb)) {
        row.set_on_air(&f);
    }
    if !plan.is_empty() {
        report.channels = channel_rows(plan, &spectrum, &whole.occupancy, dwell_s, cfg.obw_percent);
    }
    let cal = cfg.calibration.as_ref();
    let text = match (cfg.json, cal) {
        (true, None) => format!("{}\n", report.to_json()),
        (true, Some(c)) => {
            let mut v = serde_json::to_value(&report)?;
            add_dbm(&mut v, c, info.center_hz);
            format!("{}\n", serde_json::to_string_pretty(&v)?)
        }
        (false, _) => report.to_table(cfg.obw_percent, cfg.xdb, cal),
    };
    let mut out = sink::open("-", false, "report")?.out;
    out.write_all(text.as_bytes())?;
    out.flush()?;
    Ok(ExitCode::SUCCESS)
}
