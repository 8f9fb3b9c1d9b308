//! `bandwarden calibrate`: levels in dBm at the antenna port.
//!
//! With `--tone`, the input holds a generator tone of known power at each given frequency; the
//! whole input is averaged with a flat-top window (no scalloping loss, so the tone's bin reads
//! its power wherever it falls) and each tone's offset (dBm − dBFS) is written to a calibration
//! file. With `--terminated`, the input is the receiver with a matched load on its antenna port:
//! its noise floor, calibrated, is the receiver's own noise referred to its input, and the noise
//! figure is that against kT0 (see [`crate::measure::calibration`]).

use crate::cli::calibrate::CalibrateTask;
use crate::cli::CalibrateConfig;
use crate::dsp::Spectrum;
use crate::measure::calibration::{kt_dbm_per_hz, noise_figure_db, tone_dbfs};
use crate::measure::calibration::{CalPoint, Calibration};
use crate::measure::noise_floor;
use crate::output::report::whole::WholeInput;
use crate::output::sink;
use crate::pipeline::{open_input, run_to_end, Run, RunSpec};
use crate::source::reader::ReaderOptions;
use crate::source::sanitize;
use crate::units::{db, format_hz};
use anyhow::{bail, Result};
use std::io::Write;
use std::process::ExitCode;

/// A tone this far above the noise in its bin reads within 10·log10(1 + 10^(−2)) = 0.04 dB.
const MIN_TONE_SNR_DB: f64 = 20.0;

/// A tone this close to full scale may be clipped by the converter (and read low).
const MAX_TONE_DBFS: f64 = -6.0;

pub fn run(cfg: CalibrateConfig) -> Result<ExitCode> {
    let src = open_input(&cfg.input)?;
    let info = src.info().clone();
    let label = sanitize(&info.label);
    if info.tuning.is_some() {
        // A tone calibration reads one generator tone at one tuning; a sweep's steps each have
        // a gain of their own.
        bail!(
            "'{label}' was retuned (several centres): a calibration measures a tone at one tuning, and each step of a sweep has its own receiver gain; record the tone (or the terminated input) at one centre, or pick one capture with --segment N"
        );
    }
    let max_samples = cfg.seconds.map(|s| (s * info.sample_rate_hz).round() as u64);
    let spec = RunSpec::new(info.clone(), cfg.dsp.engine(None), cfg.dsp.threads);
    let mut whole = WholeInput::new(0);
    let opts = ReaderOptions { max_samples, ..Default::default() };
    let outcome = run_to_end(src, opts, Run::new(spec, vec![&mut whole]), None)?;
    outcome.conclude(&info.label)?;
    let Some(spectrum) = whole.average(cfg.dsp.hop()) else {
        bail!(
            "the input '{label}' holds {} samples, fewer than one FFT frame of {}; record longer or use a smaller --fft",
            whole.samples,
            cfg.dsp.fft_size
        );
    };
    let floor = noise_floor(&spectrum.psd, spectrum.dof);
    let text = match &cfg.task {
        CalibrateTask::Tones { tones, out } => {
            let cal = measure_tones(&spectrum, floor, tones, &label, out)?;
            let mut file = sink::open(out, false, "calibration")?.out;
            file.write_all(cal.to_toml().as_bytes())?;
            file.flush()?;
            tone_table(&cal, out)
        }
        CalibrateTask::NoiseFigure(cal) => noise_figure(&spectrum, floor, cal)?,
    };
    let mut out = sink::open("-", false, "calibration")?.out;
    out.write_all(text.as_bytes())?;
    out.flush()?;
    Ok(ExitCode::SUCCESS)
}

/// Each tone's offset, refusing a tone not found, buried in noise or near full scale.
fn measure_tones(
    spec: &Spectrum,
    floor: f64,
    tones: &[(f64, f64)],
    label: &str,
    out: &str,
) -> Result<Calibration> {
    let (lo, hi) = spec.span_hz();
    let mut points = Vec::new();
    for &(freq_hz, dbm) in tones {
        if freq_hz < lo || freq_hz > hi {
            bail!(
                "the tone at {} lies outside what '{label}' covers ({} .. {}); check --tone and --center",
                format_hz(freq_hz),
                format_hz(lo),
                format_hz(hi)
            );
        }
        // A generator off by 20 ppm, or a few bins, is still found (common practice).
        let search = (freq_hz.abs() * 20e-6).max(10.0 * spec.rbw_hz);
        let Some(dbfs) = tone_dbfs(spec, freq_hz, search) else {
            bail!("no spectrum around {} in '{label}'", format_hz(freq_hz));
        };
        let snr = dbfs - db(floor * spec.rbw_hz);
        if snr < MIN_TONE_SNR_DB {
            bail!(
                "the tone at {} stands only {snr:.1} dB above the noise in '{label}' (at least {MIN_TONE_SNR_DB} dB is needed to read it to 0.1 dB); raise the generator's level or check its frequency",
                format_hz(freq_hz)
            );
        }
        if dbfs > MAX_TONE_DBFS {
            bail!(
                "the tone at {} reads {dbfs:.2} dBFS, within {} dB of full scale, where the converter may clip; lower the generator's level",
                format_hz(freq_hz),
                -MAX_TONE_DBFS
            );
        }
        // The generator's frequency, as given: the point belongs to it, not to an FFT bin.
        points.push(CalPoint {
            freq_hz,
            offset_db: ((dbm - dbfs) * 1000.0).round() / 1000.0,
            tone_dbm: Some(dbm),
            measured_dbfs: Some((dbfs * 1000.0).round() / 1000.0),
        });
    }
    Calibration::from_points(points, format!("file {}", sanitize(out)))
}

fn tone_table(cal: &Calibration, out: &str) -> String {
    let mut s =
        format!("{:>18}  {:>10}  {:>12}  {:>10}\n", "tone", "dBm", "read dBFS", "offset dB");
    for p in cal.points() {
        s += &format!(
            "{:>18}  {:>10.2}  {:>12.2}  {:>10.2}\n",
            format_hz(p.freq_hz),
            p.tone_dbm.unwrap_or(f64::NAN),
            p.measured_dbfs.unwrap_or(f64::NAN),
            p.offset_db
        );
    }
    s + &format!("written to {}; dBm = dBFS + offset\n", sanitize(out))
}

/// The noise figure the terminated input's floor implies; refuses one below 0 dB (impossible).
fn noise_figure(spec: &Spectrum, floor: f64, cal: &Calibration) -> Result<String> {
    let offset = cal.offset_db(spec.center_hz);
    let n0_dbfs = db(floor);
    let n0_dbm = n0_dbfs + offset;
    let nf = noise_figure_db(n0_dbm);
    if nf < 0.0 {
        bail!(
            "the floor reads {n0_dbm:.2} dBm/Hz, below kT at 290 K ({:.2} dBm/Hz): a noise figure of {nf:.2} dB, which no receiver has; the calibration ({}) reads levels too low, or the input's noise is not the receiver's own",
            kt_dbm_per_hz(290.0),
            cal.origin
        );
    }
    Ok(format!(
        "floor      {n0_dbfs:.2} dBFS/Hz = {n0_dbm:.2} dBm/Hz at the antenna port (offset {offset:.2} dB, {})\n\
         kT0        {:.2} dBm/Hz (290 K)\n\
         noise figure {nf:.2} dB (NF = N0 - kT0; Friis 1944)\n",
        cal.origin,
        kt_dbm_per_hz(290.0)
    ))
}
