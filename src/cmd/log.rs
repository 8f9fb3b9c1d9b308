//! `bandwarden log`: record how busy each channel of a plan is, unattended, for hours or weeks.
//!
//! The pipeline turns blocks into measurement samples (one averaged STFT row each, see
//! [`crate::measure::occupancy`]) and the occupancy log writes the records of
//! [`crate::output::log`] as they become final. A run ends at the end of the input, after
//! `--seconds`, or on SIGINT/SIGTERM; in every case the open interval and any open emission are
//! written with `"partial": true`, then a `stop` record, and the process exits 0. A second
//! SIGINT/SIGTERM during that short wind-down exits at once (code 130/143) for users who insist.
//!
//! Live input (stdin) is read in small blocks so records follow the signal closely; if processing
//! falls behind, whole blocks are dropped, counted and logged (`dropped` records), never hidden.
//! `--no-drop` makes the reader wait instead (the writer upstream then blocks).

use crate::cli::alarms::AlarmConfig;
use crate::cli::LogConfig;
use crate::messages::{note, notes};
use crate::net::metrics::log::LogMetrics;
use crate::net::publish::Publisher;
use crate::output::log::alarms::{load_baseline, AlarmLog};
use crate::output::log::occupancy::OccupancyLog;
use crate::output::log::rotation::{Opener, Rotation};
use crate::output::log::LogWriter;
use crate::output::progress::{Progress, StatusLine};
use crate::output::sigmf::outputs::{SigmfOutputs, SigmfRequest};
use crate::output::sink;
use crate::pipeline::input::unattended_options;
use crate::pipeline::occupancy::{OccupancyRequest, OccupancySetup};
use crate::pipeline::stop::Escalation;
use crate::pipeline::{
    open_input_stoppable, run_to_end, Consumer, Run, RunSpec, StopSignals, TimeSource,
};
use crate::plan::Plan;
use anyhow::{bail, Context, Result};
use std::path::PathBuf;
use std::process::ExitCode;

pub fn run(mut cfg: LogConfig) -> Result<ExitCode> {
    let signals = StopSignals::install(false, Escalation::SecondSignalExits)?;
    let src = open_input_stoppable(&cfg.input, &signals)?;
    let info = src.info().clone();
    super::settle_calibration(&mut cfg.calibration, &info)?;
    let plan = &cfg.channels.plan;
    let request = OccupancyRequest {
        dwell_s: cfg.channels.dwell_s,
        threshold_db: cfg.channels.threshold_db,
        interval_s: cfg.interval_s,
        hang_s: cfg.hang_s,
    };
    let setup = OccupancySetup::new(&info, &cfg.dsp, plan, &request)?;
    notes(&setup.notes(plan));
    // Before any file is opened: a port in use stops the run with nothing written.
    let mut metrics = cfg.metrics.map(|a| LogMetrics::serve(a, cfg.site.as_deref())).transpose()?;
    if let Some(m) = &metrics {
        note(&format!("metrics at http://{}/metrics", m.addr()));
    }

    let mut inputs: Vec<PathBuf> = cfg.channels.plan_path.iter().map(PathBuf::from).collect();
    inputs.extend(cfg.input.files());
    sink::refuse_overwrite(&cfg.out, "-o", &inputs)?;
    let log = match cfg.rotate {
        None => {
            let out = sink::open(&cfg.out, cfg.append, "log")?;
            let writer = LogWriter::new(out.out, cfg.format, out.empty)
                .with_context(|| format!("cannot write the log to '{}'", cfg.out))?;
            OccupancyLog::new(writer, plan, &setup)
        }
        Some(policy) => {
            let open: Opener<Box<dyn std::io::Write>> = Box::new(|name: &str| {
                let s = sink::open(name, true, "log").map_err(std::io::Error::other)?;
                Ok((s.out, s.empty))
            });
            OccupancyLog::rotating(Rotation::new(policy, &cfg.out, cfg.format, open), plan, &setup)
        }
    };
    let publisher = cfg.publish.clone().map(Publisher::start).transpose()?;
    let mut log = log.with_site(cfg.site.clone()).with_calibration(cfg.calibration.clone());
    if let Some(a) = &cfg.alarms {
        log = log.with_alarms(alarm_log(a, plan, cfg.site.as_deref(), cfg.interval_s)?);
    }
    if let Some(p) = &publisher {
        log = log.with_tap(p.tap());
    }
    if let Some(m) = &metrics {
        log = log.with_tap(m.tap());
    }
    let mut spec = RunSpec::new(info.clone(), setup.engine.clone(), cfg.dsp.threads);
    spec.tracker = Some(setup.tracker());
    // Each emission's kind, from its samples when it ends (bounded: see pipeline::kinds).
    spec.classify = true;
    if cfg.input.start_time.is_some() {
        spec.time_source = TimeSource::Option;
    } else if spec.start_time.is_none() && !info.live {
        note("the time of the first sample is unknown (give --start): start/end fields are null");
    }

    let (opts, total) = unattended_options(&info, cfg.seconds, cfg.no_drop);
    let request = SigmfRequest::of(&cfg.sigmf, cfg.no_drop);
    let mut sigmf_out =
        SigmfOutputs::new(request, &cfg.input, &info, plan, &inputs, opts.block_len)?;
    let names = plan.channels.iter().map(|c| c.name.clone()).collect();
    let mut status = StatusLine::new(cfg.progress, info.live, names, info.sample_rate_hz);
    let total = total.filter(|_| !status.enabled());
    let mut progress = Progress::for_file(total, info.sample_rate_hz);
    let mut consumers: Vec<&mut dyn Consumer> = vec![&mut progress, &mut status];
    consumers.extend(sigmf_out.consumers());
    consumers.push(&mut log);
    consumers.extend(metrics.as_mut().map(|m| &mut m.gauges as &mut dyn Consumer));
    let outcome = run_to_end(src, opts, Run::new(spec, consumers), Some(&signals));
    drop(log);
    let mut refused_login = None;
    if let Some(p) = publisher {
        let summary = p.finish();
        notes(&summary.notes());
        refused_login = summary.refused_login;
    }
    let outcome = outcome?;

    if outcome.end.reason.is_signal() {
        note(&format!("stopped by {}; the log is complete", signals.signal_name()));
    }
    outcome.conclude(&info.label)?;
    if let Some(lost) = outcome.lost.note() {
        note(&format!("{lost} (see the dropped records)"));
    }
    if let Some(why) = refused_login {
        // A setting to fix, not an outage: the run fails though the local log is complete.
        bail!("the broker would not take this site's records: {why}; the local log is complete and the records wait in the spool for the next run");
    }
    Ok(ExitCode::SUCCESS)
}

/// The change watch of `--alarms`, seeded from `--baseline` if given; says when it is armed.
fn alarm_log(
    a: &AlarmConfig,
    plan: &Plan,
    site: Option<&str>,
    interval_s: f64,
) -> Result<AlarmLog> {
    let seed = a.baseline.as_deref().map(|path| load_baseline(path, site)).transpose()?;
    let warm = a.settings.warmup;
    let unseeded = seed.as_ref().map(|s| AlarmLog::unseeded(plan, s));
    let learning = match &unseeded {
        None => "every channel".to_string(),
        Some(u) if u.is_empty() => "no channel: all armed from the baseline".to_string(),
        Some(u) => format!("{} (the others are armed from the baseline)", u.join(", ")),
    };
    let secs = crate::units::format_num(warm as f64 * interval_s);
    let method = a.settings.method.name();
    note(&format!(
        "alarms ({method}): {warm} intervals ({secs} s) of learning before alarms are armed, for {learning}"
    ));
    Ok(AlarmLog::new(a.settings, plan, seed.as_ref()))
}
