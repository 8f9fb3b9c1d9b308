//! `bandwarden watch`: the live monitor on a file, stdin or the demo scene.
//!
//! Files and stdin play at their recorded rate (times `--speed`) so the waterfall moves as the
//! band did: a recording piped in faster than real time waits rather than drops. A receiver on
//! stdin never runs ahead, so pacing costs it nothing; it and the demo scene are live, and
//! samples the DSP cannot keep up with are dropped and counted on screen rather than queued
//! without bound.

use crate::cli::alarms::AlarmConfig;
use crate::cli::{ColourChoice, WatchConfig};
use crate::measure::census::sweep::SweepView;
use crate::messages::{note, sanitize};
use crate::output::log::alarms::load_baseline;
use crate::output::log::changes::{open_change_log, WatchChanges};
use crate::output::sigmf::outputs::{recorded_note, recorder};
use crate::output::sink;
use crate::pipeline::clock::Clock;
use crate::pipeline::input::live_block_len;
use crate::pipeline::kinds::live;
use crate::pipeline::latest::RowFeed;
use crate::pipeline::stitch::{grid_of, span_of};
use crate::pipeline::stop::Escalation;
use crate::pipeline::{open_input_stoppable, Consumer, Input, RunSpec, StopSignals};
use crate::source::reader::ReaderOptions;
use crate::source::SourceInfo;
use crate::tui::app::{AlarmLog, App, ChannelMark, SourceSummary, SweepSummary};
use crate::tui::colour::Depth;
use crate::tui::{self, RunOptions};
use anyhow::{bail, Result};
use std::io::IsTerminal;
use std::process::ExitCode;
use std::time::Instant;
use time::OffsetDateTime;

/// Plain `bandwarden`: the monitor on the demo scene when there is a terminal to draw on, else
/// the one-shot report.
pub fn run_default() -> Result<ExitCode> {
    if !std::io::stdout().is_terminal() {
        note("standard output is not a terminal, so here is a report on the demo scene instead of the live monitor");
        return crate::cmd::measure::run(crate::cli::default_measure().validate()?);
    }
    run(crate::cli::default_watch().validate()?)
}

pub fn run(mut cfg: WatchConfig) -> Result<ExitCode> {
    // Signals caught while the input opens (the monitor installs its own once drawing).
    let opening = StopSignals::install(false, Escalation::SecondSignalExits)?;
    let src = open_input_stoppable(&cfg.input, &opening)?;
    drop(opening);
    let info = src.info().clone();
    super::settle_calibration(&mut cfg.calibration, &info)?;
    // A retuned input is one panorama (holes drawn stale); a grid too large is refused here.
    let (lo, hi) = span_of(&info, cfg.rows.dsp().fft_size)?;
    cfg.plan.check_span(lo, hi)?;
    let sweep = sweep_summary(&info, cfg.rows.dsp().fft_size)?;
    sink::check_folder(&cfg.evidence_dir, "--evidence-dir")?;
    // Checked after the input and the plan, so their mistakes are reported first.
    if !std::io::stdout().is_terminal() {
        bail!("watch draws on a terminal and standard output is not one; use `bandwarden measure` for a report");
    }
    let is_file = cfg.input.path.as_deref().is_some_and(|p| p != "-");
    // A recording piped in plays at its recorded rate too, once it runs ahead of real time.
    let piped = cfg.input.path.as_deref() == Some("-");
    if cfg.loop_input && !is_file {
        note("--loop only replays files; ignored for this input");
    }
    let rate = info.sample_rate_hz;
    let opts = ReaderOptions {
        block_len: live_block_len(rate),
        drop_when_full: info.live,
        pace: is_file.then_some(cfg.speed),
        pace_recordings: piped.then_some(cfg.speed),
        loop_input: cfg.loop_input && is_file,
        ..Default::default()
    };
    let mut spec = RunSpec::new(info.clone(), cfg.rows.engine(rate), cfg.rows.threads);
    spec.check_work()?;
    let changes = cfg.alarms.as_ref().map(|a| change_watch(&cfg, a, &info)).transpose()?;
    let input = Input::start(src, opts);
    let reader_stats = input.stats.clone();
    let recorder =
        cfg.record.as_deref().map(|r| recorder(r, &cfg.input, &info, live_block_len(rate)));
    let recorder = recorder.transpose()?;
    let status = recorder.as_ref().map(|r| (r.status(), r.meta_path().to_path_buf()));
    let mut extra: Vec<Box<dyn Consumer + Send>> =
        recorder.into_iter().map(|r| Box::new(r) as Box<dyn Consumer + Send>).collect();
    // Each listed signal's kind, classified on a thread of its own (pipeline::kinds); not over
    // a sweep, whose samples come from whichever step the receiver is in.
    let kinds = match sweep {
        None => {
            let (tap, kinds) = live(rate, info.center_hz)?;
            extra.push(Box::new(tap));
            Some(kinds)
        }
        Some(_) => None,
    };
    let board = changes.map(|c| {
        spec.tracker = Some(c.tracker);
        extra.push(Box::new(c.consumer));
        c.board
    });
    let feed = RowFeed::spawn_with(input, spec, extra)?;
    let summary = SourceSummary {
        label: sanitize(&info.label),
        sample_rate_hz: rate,
        center_hz: sweep.map_or(info.center_hz, |s| s.center_hz),
        total_samples: info.total_samples,
        live: info.live,
        speed: (is_file || piped).then_some(cfg.speed),
        looping: cfg.loop_input && is_file,
        // Live input without a start time is timed by the wall clock from now.
        clock: Clock::for_source(
            &info,
            info.start_time.or_else(|| info.live.then(OffsetDateTime::now_utc)),
        ),
    };
    let depth = match cfg.colour {
        ColourChoice::Auto => Depth::detect(),
        ColourChoice::Forced(d) => d,
    };
    let marks = ChannelMark::from_plan(&cfg.plan);
    let ref_offset = cfg.calibration.as_ref().map(|c| c.offset_db(info.center_hz));
    let mut app = App::new(summary, cfg.rows, depth, ref_offset, marks, Instant::now())
        .with_detection(cfg.detection)
        .with_files_dir(&cfg.evidence_dir)
        .with_alarm_hold(cfg.alarm_hold_s);
    if let Some(k) = kinds {
        app = app.with_kinds(k);
    }
    if let Some(s) = sweep {
        app = app.with_sweep(s);
    }
    if let Some(path) = &cfg.alarm_log {
        app = app.with_alarm_log(AlarmLog::new(sink::open(path, true, "alarm log")?.out));
    }
    if let Some(board) = board {
        app = app.with_changes(board);
    }
    let run_opts = RunOptions { fps: cfg.fps, scroll_region: cfg.scroll_region, mouse: cfg.mouse };
    let result = tui::run(app, &feed, &reader_stats, run_opts);
    // The run ends as every command's does; what the input came to is said after the screen
    // is restored.
    let outcome = feed.stop();
    result?;
    let outcome = outcome?;
    outcome.conclude(&info.label)?;
    if let Some((status, meta)) = status {
        recorded_note(&*status.lock().map_err(|_| anyhow::anyhow!("the recorder failed"))?, &meta)?;
    }
    Ok(ExitCode::SUCCESS)
}

/// Of a retuned input: the sweep as the header tells it (steps, revisit time) and the age past
/// which a bin is drawn stale, one revisit time; `None` for a receiver that stays put.
fn sweep_summary(info: &SourceInfo, fft_size: usize) -> Result<Option<SweepSummary>> {
    let (Some(grid), Some(t)) = (grid_of(info, fft_size)?, info.tuning.clone()) else {
        return Ok(None);
    };
    let view = SweepView::new(t, grid, (info.sample_rate_hz, fft_size), info.total_samples);
    let facts = view.facts();
    let g = &view.grid;
    Ok(Some(SweepSummary {
        center_hz: g.first_hz + (g.bins / 2) as f64 * g.bin_hz,
        steps: facts.steps,
        revisit_s: facts.revisit_s,
        stale_after: view.sweep_samples,
    }))
}

/// `--alarms`: the change watch of every plan channel on the monitor's rows, seeded from
/// `--baseline`, its records appended to `--alarm-log` (a file: the screen is on stdout).
fn change_watch(cfg: &WatchConfig, a: &AlarmConfig, info: &SourceInfo) -> Result<WatchChanges> {
    let seed = a.baseline.as_deref().map(|p| load_baseline(p, None)).transpose()?;
    let out = open_change_log(cfg.alarm_log.as_deref())?;
    WatchChanges::new(info, &cfg.rows, &cfg.plan, a.settings, seed.as_ref(), cfg.interval_s, out)
}
