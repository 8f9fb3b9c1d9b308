//! `bandwarden snapshot`: the whole input (or `--skip`/`--seconds` of it) as one picture.
//!
//! Rows are sized from the input's length so the picture gets about two rows per pixel row
//! (fewer, longer rows for a long file; 50 ms rows when the length is unknown, as on a pipe); the
//! accumulator averages them into at most twice the picture's height, so memory does not grow
//! with the input.

use crate::cli::SnapshotConfig;
use crate::messages::note;
use crate::output::picture::snapshot::{Snapshot, SnapshotPlan};
use crate::output::picture::waterfall::{
    draw_waterfall, ChannelBand, PictureSettings, WaterfallView,
};
use crate::output::progress::Progress;
use crate::output::sink;
use crate::pipeline::stop::Escalation;
use crate::pipeline::{open_input_stoppable, run_to_end, Run, RunSpec, StopSignals, TimeSource};
use crate::source::reader::ReaderOptions;
use crate::source::sanitize;
use anyhow::{bail, Result};
use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

/// Length of a row when the input's length is unknown.
const ROW_S_UNKNOWN: f64 = 0.05;

pub fn run(mut cfg: SnapshotConfig) -> Result<ExitCode> {
    let signals = StopSignals::install(false, Escalation::SecondSignalExits)?;
    let src = open_input_stoppable(&cfg.input, &signals)?;
    let info = src.info().clone();
    super::settle_calibration(&mut cfg.calibration, &info)?;
    let rate = info.sample_rate_hz;
    // A retuned input is one panorama (holes drawn as gaps); a grid too large is refused here.
    let (lo, hi) = crate::pipeline::stitch::span_of(&info, cfg.dsp.fft_size)?;
    if !cfg.plan.is_empty() {
        cfg.plan.check_span(lo, hi)?;
    }
    let mut inputs: Vec<PathBuf> = cfg.plan_path.iter().map(PathBuf::from).collect();
    inputs.extend(cfg.input.files());
    sink::refuse_overwrite(&cfg.out, "-o", &inputs)?;

    let skip = (cfg.skip_s * rate).round() as u64;
    let max_samples = cfg.seconds.map(|s| skip + (s * rate).round() as u64);
    let total = match (max_samples, info.total_samples) {
        (Some(m), Some(t)) => Some(m.min(t)),
        (m, t) => m.or(t),
    };
    let hop = cfg.dsp.hop() as f64;
    let row_samples = match total {
        Some(t) => t.saturating_sub(skip) as f64 / (2.0 * cfg.height as f64),
        None => ROW_S_UNKNOWN * rate,
    };
    let frames = ((row_samples / hop).round() as u64).max(1);
    let mut spec = RunSpec::new(info.clone(), cfg.dsp.engine(Some(frames)), cfg.dsp.threads);
    if cfg.input.start_time.is_some() {
        spec.time_source = TimeSource::Option;
    }
    spec.check_work()?;
    let mut snapshot = Snapshot::new(SnapshotPlan {
        skip_samples: skip,
        max_rows: 2 * cfg.height as usize,
        // Two columns per pixel at most: finer than the eye, so a column's grouping of bins
        // never moves a narrow signal by a visible amount.
        max_columns: 2 * cfg.width as usize,
        find_emissions: cfg.outline,
    });
    let mut progress = Progress::for_file(total, rate);
    let opts = ReaderOptions { max_samples, ..Default::default() };
    let outcome =
        run_to_end(src, opts, Run::new(spec, vec![&mut progress, &mut snapshot]), Some(&signals))?;
    outcome.conclude(&info.label)?;
    // One offset for the picture: the calibration's at the centre frequency.
    let ref_offset = cfg.calibration.as_ref().map(|c| c.offset_db(info.center_hz));
    let offset = ref_offset.unwrap_or(0.0);
    let unit = if ref_offset.is_some() { "dBm" } else { "dBFS" };
    let Some(got) = snapshot.collect(offset, unit) else {
        bail!(
            "no spectrum of '{}' to draw: the input (after --skip) is shorter than one FFT frame of {}; use a smaller --fft or --skip",
            sanitize(&info.label),
            cfg.dsp.fft_size
        );
    };
    let settings = PictureSettings {
        width: cfg.width,
        height: cfg.height,
        map: cfg.map,
        scale: cfg.scale,
        ref_offset_db: ref_offset,
        title: cfg.title.clone().unwrap_or_else(|| got.title()),
        footer: got.footer(),
        channels: cfg
            .plan
            .channels
            .iter()
            .map(|c| ChannelBand { name: c.name.clone(), low_hz: c.low_hz(), high_hz: c.high_hz() })
            .collect(),
        marks: got.marks.clone(),
        newest_at_top: false,
    };
    let bytes =
        draw_waterfall(&WaterfallView::of(&got.held), &got.timeline, &settings, cfg.format)?;
    let mut out = sink::open(&cfg.out, false, "picture")?.out;
    out.write_all(&bytes)?;
    out.flush()?;
    if outcome.end.reason.is_signal() {
        note(&format!(
            "stopped by {}; the picture shows the input up to then",
            signals.signal_name()
        ));
    }
    note(&format!(
        "wrote {} ({}×{} px, {} of input)",
        sanitize(&cfg.out),
        cfg.width,
        cfg.height,
        crate::output::picture::snapshot::format_duration(got.timeline.duration_s())
    ));
    Ok(ExitCode::SUCCESS)
}
