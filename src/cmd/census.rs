//! `bandwarden census`: every emitter in the band, found without a plan.
//!
//! The pipeline turns blocks into rows (one measurement sample each, as `log` uses); the census
//! ([`crate::measure::census`]) detects, tracks and groups emissions row by row. At the end of
//! input (or SIGINT/SIGTERM) the inventory is printed (table or JSON; dBm when calibrated) and,
//! with `--plan-out`, written as a plan. A second signal during the wind-down exits at once.
//!
//! SigMF outputs as `log`'s: `--record` tees the input, `--annotate` writes every emission
//! (labelled with its emitter) at the end, `--capture` saves each emission's IQ as it happens.

use crate::cli::CensusConfig;
use crate::measure::census::{Census, CensusSettings};
use crate::measure::occupancy::DEFAULT_INTERVAL_S;
use crate::messages::note;
use crate::output::census::{
    capture_list, settle_kinds, to_json_value, to_plan, to_table_with_kinds, CensusConsumer,
};
use crate::output::change::BaselineStep;
use crate::output::progress::{Progress, StatusLine};
use crate::output::sigmf::outputs::{annotated_note, SigmfOutputs, SigmfRequest};
use crate::output::sigmf::write as sigmf_write;
use crate::output::sink;
use crate::pipeline::input::unattended_options;
use crate::pipeline::occupancy::{OccupancyRequest, OccupancySetup};
use crate::pipeline::stitch::sweep_view;
use crate::pipeline::stop::Escalation;
use crate::pipeline::{open_input_stoppable, run_to_end, Consumer, Run, RunSpec, StopSignals};
use crate::plan::{Plan, DEFAULT_THRESHOLD_DB};
use crate::source::sanitize;
use anyhow::{bail, Result};
use std::io::Write;
use std::process::ExitCode;

/// Most signals taken from one row, and most emitters kept.
const MAX_SIGNALS: usize = 64;
const MAX_EMITTERS: usize = 256;

pub fn run(mut cfg: CensusConfig) -> Result<ExitCode> {
    let signals = StopSignals::install(false, Escalation::SecondSignalExits)?;
    let src = open_input_stoppable(&cfg.input, &signals)?;
    let info = src.info().clone();
    super::settle_calibration(&mut cfg.calibration, &info)?;
    let sweep = sweep_view(&info, cfg.dsp.fft_size, cfg.sigmf.capture.is_some())?;
    let request = OccupancyRequest {
        dwell_s: cfg.dwell_s,
        threshold_db: DEFAULT_THRESHOLD_DB,
        interval_s: DEFAULT_INTERVAL_S,
        hang_s: cfg.hang_s,
    };
    let setup = OccupancySetup::new(&info, &cfg.dsp, &Plan::default(), &request)?;
    let inputs = cfg.input.files();
    if let Some(out) = &cfg.plan_out {
        sink::refuse_overwrite(out, "--plan-out", &inputs)?;
    }
    let mut settings = CensusSettings {
        detection: cfg.detection,
        timing: setup.timing.clone(),
        hang_rows: setup.timing.hang_samples as u32,
        max_signals: MAX_SIGNALS,
        max_emitters: MAX_EMITTERS,
    };
    if let Some(v) = &sweep {
        v.fit(&mut settings, cfg.hang_s);
    }
    if let Some(out) = &cfg.save_baseline {
        sink::refuse_overwrite(out, "--save-baseline", &inputs)?;
    }
    let baseline =
        BaselineStep::open(cfg.baseline.as_deref(), cfg.save_baseline.as_deref(), cfg.thresholds)?;
    let spec = RunSpec::new(info.clone(), setup.engine.clone(), cfg.dsp.threads);
    spec.check_work()?;

    let (opts, total) = unattended_options(&info, cfg.seconds, cfg.no_drop);
    // The census writes its own annotations (labelled with the emitters' names).
    let sigmf_request =
        SigmfRequest { annotate: None, ..SigmfRequest::of(&cfg.sigmf, cfg.no_drop) };
    let mut sigmf_out = SigmfOutputs::new(
        sigmf_request,
        &cfg.input,
        &info,
        &Plan::default(),
        &inputs,
        opts.block_len,
    )?;
    let mut census = Census::new(settings);
    if let Some(v) = sweep.clone() {
        census = census.with_sweep(v);
    }
    let mut census = CensusConsumer::new(census);
    if cfg.kinds && sweep.is_none() {
        census = census.with_kinds(info.sample_rate_hz, info.center_hz);
    }
    if let Some(path) = &cfg.sigmf.annotate {
        census =
            census.with_annotations(sigmf_out.annotation_writer(path, &cfg.input, &info, &inputs)?);
    }
    if sigmf_out.captures.is_some() {
        census = census.with_triggers();
    }
    let mut status = StatusLine::new(cfg.progress, info.live, Vec::new(), info.sample_rate_hz);
    let total = total.filter(|_| !status.enabled());
    let mut progress = Progress::for_file(total, info.sample_rate_hz);
    let mut consumers: Vec<&mut dyn Consumer> = vec![&mut progress, &mut status];
    if let Some(r) = sigmf_out.recorder.as_mut() {
        consumers.push(r);
    }
    consumers.push(&mut census);
    if let Some(c) = sigmf_out.captures.as_mut() {
        consumers.push(c);
    }
    let outcome = run_to_end(src, opts, Run::new(spec, consumers), Some(&signals))?;
    if outcome.end.reason.is_signal() {
        note(&format!(
            "stopped by {}; the census covers the input read so far",
            signals.signal_name()
        ));
    }
    outcome.conclude(&info.label)?;
    if let Some(lost) = outcome.lost.note() {
        note(&format!("{lost}; emissions across those gaps were cut"));
    }
    sigmf_out.report()?;
    if let (Some(s), Some(path)) = (&census.annotated, &cfg.sigmf.annotate) {
        annotated_note(s, &sigmf_write::pair(path).map_err(anyhow::Error::msg)?.0);
    }
    let Some(result) = census.result() else {
        bail!(
            "the input '{}' is shorter than one measurement sample ({:.1} ms); nothing to count",
            sanitize(&info.label),
            setup.dwell_s() * 1e3
        );
    };
    let mut v = to_json_value(result);
    // The kinds go in before the comparison, which reads today's census from this JSON.
    let kinds = &settle_kinds(&mut v, result, &census.emitter_kinds, cfg.kinds && sweep.is_some());
    let cal = cfg.calibration.as_ref();
    let mut text = if cfg.json {
        String::new()
    } else {
        to_table_with_kinds(result, &sanitize(&info.label), kinds, cal)
    };
    let saved = baseline.apply(&mut v, &mut text, cfg.json)?;
    if cfg.json {
        if cfg.sigmf.capture.is_some() {
            v["captures"] = capture_list(&census.captures);
        }
        cal.iter().for_each(|c| crate::output::levels::add_dbm(&mut v, c, info.center_hz));
        text = format!("{v}\n")
    }
    let mut out = sink::open("-", false, "census")?.out;
    out.write_all(text.as_bytes())?;
    out.flush()?;
    if let Some(path) = &cfg.plan_out {
        let mut file = sink::open(path, false, "plan")?.out;
        file.write_all(to_plan(result, &sanitize(&info.label)).as_bytes())?;
        file.flush()?;
    }
    if let Some(n) = saved {
        note(&n);
    }
    Ok(ExitCode::SUCCESS)
}
