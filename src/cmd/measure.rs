//! `bandwarden measure`: average the whole input into one spectrum and measure it.

use crate::app::note;
use crate::cli::{DspArgs, InputArgs, MeasureArgs};
use crate::cmd::log;
use crate::dsp::{Engine, EngineConfig, Spectrum, Window};
use crate::measure::stats::gamma_quantile_unit_mean;
use crate::measure::{
    band_power, find_signals, noise_floor, occupied_bandwidth, xdb_bandwidth, Detection,
};
use crate::output::report::ChannelRow;
use crate::output::report::{BandRow, IssuesRow, PeakRow, Report};
use crate::pipeline::Input;
use crate::plan::Plan;
use crate::source::reader::ReaderOptions;
use crate::source::{self, InputIssues};
use crate::units::{db, format_hz};
use anyhow::{bail, Result};
use std::process::ExitCode;
use std::sync::atomic::Ordering;

/// Seconds of the demo scene measured when no input and no `--seconds` are given.
const DEMO_SECONDS: f64 = 2.0;

/// What plain `bandwarden` does until the live monitor exists: a report on the demo scene.
pub fn run_default() -> Result<ExitCode> {
    run(MeasureArgs {
        input: None,
        source: InputArgs::default(),
        dsp: DspArgs {
            fft_size: 4096,
            window: crate::dsp::WindowKind::Hann,
            overlap: 0.5,
            threads: None,
        },
        seconds: None,
        peaks: 10,
        bands: Vec::new(),
        obw_percent: 99.0,
        xdb: 26.0,
        json: false,
        channels: crate::plan::ChannelArgs::default(),
    })
}

pub fn run(args: MeasureArgs) -> Result<ExitCode> {
    if args.obw_percent.is_nan() || args.obw_percent <= 0.0 || args.obw_percent >= 100.0 {
        bail!(
            "--obw-percent {} is out of range; choose a value between 0 and 100 (99 is usual)",
            args.obw_percent
        );
    }
    if args.xdb.is_nan() || args.xdb <= 0.0 {
        bail!("--xdb {} must be a positive number of dB (26 is usual)", args.xdb);
    }
    let cfg = args.dsp.engine(None).map_err(anyhow::Error::msg)?;
    let plan = args.channels.plan()?;
    let mut notes = Vec::new();
    let src = source::open(&args.source.request(args.input.clone()), &mut notes)?;
    notes.iter().for_each(|n| note(n));
    let seconds = args.seconds.or(if args.input.is_none() { Some(DEMO_SECONDS) } else { None });
    if let Some(s) = seconds {
        if s.is_nan() || s <= 0.0 {
            bail!("--seconds {s} must be positive");
        }
    }
    let max_samples = seconds.map(|s| (s * src.info().sample_rate_hz).round() as u64);
    let setup = if plan.is_empty() {
        None
    } else {
        let (interval, hang) = log::default_durations();
        let mut setup = log::Setup::new(src.info(), &cfg, &plan, &args.channels, interval, hang)?;
        setup.threads = args.dsp.threads();
        Some(setup)
    };
    let input = Input::start(src, ReaderOptions { max_samples, ..Default::default() });
    let info = input.info.clone();

    let (spectrum, samples, occupancy) = match &setup {
        None => {
            let (spectrum, samples) = average_all(&input, cfg.clone(), args.dsp.threads());
            (spectrum, samples, None)
        }
        Some(setup) => {
            let whole = log::measure_channels(&input, setup);
            (whole.spectrum, whole.samples, Some((whole.occupancy, whole.dwell_s)))
        }
    };
    let dropped = input.stats.dropped.load(Ordering::Relaxed);
    let issues = input.finish()?;
    crate::app::report_input_issues(&issues);
    let Some(spectrum) = spectrum else {
        if samples == 0 {
            bail!(
                "the input '{}' holds no samples; check the file, or that the pipe delivers data",
                info.label
            );
        }
        bail!(
            "the input '{}' holds {samples} samples, fewer than one FFT frame of {}; use a smaller --fft",
            info.label,
            cfg.fft_size
        );
    };
    if spectrum.psd.iter().any(|p| !p.is_finite()) {
        bail!(
            "the spectrum of '{}' overflowed: {} samples are too large to square (float input should lie within ±1); the input is probably not {}; check --format",
            info.label,
            issues.beyond_scale,
            info.format.map_or("in the format it was read as".to_string(), |f| f.to_string())
        );
    }
    let mut report = build_report(&args, &info.label, &spectrum, samples, &issues, dropped)?;
    if let Some((occupancy, dwell_s)) = occupancy {
        report.channels = channel_rows(&plan, &spectrum, &occupancy, dwell_s, args.obw_percent);
    }
    if args.json {
        println!("{}", report.to_json());
    } else {
        print!("{}", report.to_table(args.obw_percent, args.xdb));
    }
    Ok(ExitCode::SUCCESS)
}

/// Runs the DSP over the whole input on this thread; returns the average and the sample count.
fn average_all(input: &Input, cfg: EngineConfig, threads: usize) -> (Option<Spectrum>, u64) {
    let mut engine = Engine::new(cfg, input.info.sample_rate_hz, input.info.center_hz);
    engine.set_threads(threads);
    let mut out = None;
    let mut samples = 0u64;
    for block in input.blocks.iter() {
        samples += block.samples.len() as u64;
        engine.push(block.start, &block.samples, &mut |s| out = Some(s));
    }
    engine.finish(&mut |s| out = Some(s));
    (out, samples)
}

fn build_report(
    args: &MeasureArgs,
    label: &str,
    spec: &Spectrum,
    samples: u64,
    issues: &InputIssues,
    dropped: u64,
) -> Result<Report> {
    let window = Window::new(spec.window, spec.fft_size);
    let floor = noise_floor(&spec.psd, spec.dof);
    let det = Detection { obw_percent: args.obw_percent, ..Detection::default() };
    let peaks = find_signals(spec, &window, floor, args.peaks, det)
        .into_iter()
        .map(|s| PeakRow {
            freq_hz: s.freq_hz,
            level_dbfs: s.level_dbfs,
            snr_db: s.snr_db,
            power_dbfs: s.power_dbfs,
            obw_hz: s.obw.width_hz(),
        })
        .collect();
    let (span_lo, span_hi) = spec.span_hz();
    let mut bands = Vec::new();
    for b in &args.bands {
        let (lo, hi) = (b.center_hz - b.width_hz / 2.0, b.center_hz + b.width_hz / 2.0);
        if lo < span_lo - 1e-6 || hi > span_hi + 1e-6 {
            bail!(
                "band {} wide at {} reaches outside the captured span {} .. {}; check --band and --center",
                format_hz(b.width_hz),
                format_hz(b.center_hz),
                format_hz(span_lo),
                format_hz(span_hi)
            );
        }
        let obw = occupied_bandwidth(spec, lo, hi, args.obw_percent);
        let xdb = xdb_bandwidth(spec, lo, hi, args.xdb);
        bands.push(BandRow {
            center_hz: b.center_hz,
            width_hz: b.width_hz,
            power_dbfs: db(band_power(spec, lo, hi)),
            obw_hz: obw.map_or(0.0, |e| e.width_hz()),
            obw_low_hz: obw.map_or(b.center_hz, |e| e.low_hz),
            obw_high_hz: obw.map_or(b.center_hz, |e| e.high_hz),
            xdb_bandwidth_hz: xdb.map_or(0.0, |e| e.width_hz()),
        });
    }
    Ok(Report {
        source: label.to_string(),
        sample_rate_hz: spec.sample_rate_hz,
        center_hz: spec.center_hz,
        fft_size: spec.fft_size,
        window: spec.window.to_string(),
        rbw_hz: spec.rbw_hz,
        enbw_bins: spec.enbw_bins,
        frames: spec.frames,
        samples,
        duration_s: samples as f64 / spec.sample_rate_hz,
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
            dropped_samples: dropped,
        },
    })
}

/// Power and occupied bandwidth of each plan channel in the whole-input average, with the
/// channel's occupancy over the whole input.
fn channel_rows(
    plan: &Plan,
    spec: &Spectrum,
    occupancy: &[(f64, u64)],
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
            power_dbfs: db(band_power(spec, c.low_hz(), c.high_hz())),
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
