//! `bandwarden census`: every emitter in the band, found without a plan.
//!
//! The pipeline turns blocks into rows (one measurement sample each, as `log` uses); the census
//! ([`crate::measure::census`]) detects, tracks and groups emissions row by row. When the input
//! ends, or on SIGINT/SIGTERM for live input, the inventory is printed (table or JSON) and, with
//! `--plan-out`, written as a channel plan. A second signal during the wind-down exits at once.
//!
//! The SigMF outputs are those of `log`: `--record` tees the input, `--annotate` writes every
//! emission (labelled with its emitter's name) when the census ends, `--capture` saves each
//! emission's IQ as it happens (named from its detected centre, as emitters are named; the JSON
//! output lists the capture records).

use super::sigmf_out::{annotated_note, SigmfOutputs, SigmfRequest};
use crate::cli::CensusConfig;
use crate::measure::census::{Census, CensusSettings};
use crate::measure::occupancy::DEFAULT_INTERVAL_S;
use crate::messages::{note, notes};
use crate::output::census::{capture_list, to_json_value, to_plan, to_table, CensusConsumer};
use crate::output::log::occupancy::SideRecords;
use crate::output::progress::{Progress, StatusLine};
use crate::output::sigmf::capture::Triggers;
use crate::output::sigmf::write as sigmf_write;
use crate::output::sink;
use crate::pipeline::input::unattended_options;
use crate::pipeline::occupancy::{OccupancyRequest, OccupancySetup};
use crate::pipeline::stop::Escalation;
use crate::pipeline::{run_input, Consumer, Input, Run, RunSpec, StopSignals};
use crate::plan::{Plan, DEFAULT_THRESHOLD_DB};
use crate::source::{self, sanitize};
use anyhow::{bail, Result};
use std::io::Write;
use std::process::ExitCode;

/// Most signals taken from one row, and most emitters kept.
const MAX_SIGNALS: usize = 64;
const MAX_EMITTERS: usize = 256;

pub fn run(cfg: CensusConfig) -> Result<ExitCode> {
    let mut opened = Vec::new();
    let src = source::open(&cfg.input, &mut opened)?;
    notes(&opened);
    let info = src.info().clone();
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
    let settings = CensusSettings {
        detection: cfg.detection,
        timing: setup.timing.clone(),
        hang_rows: setup.timing.hang_samples as u32,
        max_signals: MAX_SIGNALS,
        max_emitters: MAX_EMITTERS,
    };
    let spec = RunSpec::new(info.clone(), setup.engine.clone(), cfg.dsp.threads);
    spec.check_work()?;

    let signals = StopSignals::install(false, Escalation::SecondSignalExits)?;
    let (opts, total) = unattended_options(&info, cfg.seconds, false);
    let side = SideRecords::default();
    // The census writes its own annotations (labelled with the emitters' names).
    let sigmf_request = SigmfRequest { annotate: None, ..SigmfRequest::of(&cfg.sigmf, false) };
    let mut sigmf_out = SigmfOutputs::new(
        sigmf_request,
        &cfg.input,
        &info,
        &Plan::default(),
        &inputs,
        opts.block_len,
        side.clone(),
    )?;
    let mut census = CensusConsumer::new(Census::new(settings));
    if let Some(path) = &cfg.sigmf.annotate {
        census =
            census.with_annotations(sigmf_out.annotation_writer(path, &cfg.input, &info, &inputs)?);
    }
    if let Some(captures) = sigmf_out.captures.take() {
        let triggers = Triggers::default();
        census = census.with_triggers(triggers.clone());
        sigmf_out.captures = Some(captures.with_triggers(triggers));
    }
    let mut status = StatusLine::new(cfg.progress, info.live, Vec::new(), info.sample_rate_hz);
    let total = total.filter(|_| !status.enabled());
    let mut progress = Progress::for_file(total, info.sample_rate_hz);
    let input = Input::start(src, opts);
    // The recording first (annotations of a recording read its finished metadata); the
    // captures after the census that triggers them.
    let mut consumers: Vec<&mut dyn Consumer> = vec![&mut progress, &mut status];
    if let Some(r) = sigmf_out.recorder.as_mut() {
        consumers.push(r);
    }
    consumers.push(&mut census);
    if let Some(c) = sigmf_out.captures.as_mut() {
        consumers.push(c);
    }
    let outcome = run_input(input, Run::new(spec, consumers), Some(&signals))?;
    if outcome.end.reason.is_signal() {
        note(&format!(
            "stopped by {}; the census covers the input read so far",
            signals.signal_name()
        ));
    }
    if let Some(issues) = &outcome.issues {
        notes(&issues.notes());
    }
    outcome.check(&info.label)?;
    if outcome.end.dropped_samples > 0 {
        note(&format!(
            "{} input samples were dropped because processing fell behind; emissions across those gaps were cut",
            outcome.end.dropped_samples
        ));
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
    let text = if cfg.json {
        let mut v = to_json_value(result);
        if cfg.sigmf.capture.is_some() {
            v["captures"] = capture_list(&side);
        }
        format!("{v}\n")
    } else {
        to_table(result, &sanitize(&info.label))
    };
    let mut out = sink::open("-", false, "census")?.out;
    out.write_all(text.as_bytes())?;
    out.flush()?;
    if let Some(path) = &cfg.plan_out {
        let mut file = sink::open(path, false, "plan")?.out;
        file.write_all(to_plan(result, &sanitize(&info.label)).as_bytes())?;
        file.flush()?;
    }
    Ok(ExitCode::SUCCESS)
}
