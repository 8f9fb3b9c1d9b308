//! `bandwarden watch`: the live monitor on a file, stdin or the demo scene.
//!
//! Files play at their recorded rate (times `--speed`) so the waterfall moves as the band did;
//! stdin and the demo scene are live, and samples the DSP cannot keep up with are dropped and
//! counted on screen rather than queued without bound.

use crate::app::note;
use crate::cli::{DspArgs, InputArgs};
use crate::pipeline::Input;
use crate::plan::{parse_channel_arg, ChannelArg, Plan};
use crate::source::reader::ReaderOptions;
use crate::source::{self, sanitize};
use crate::tui::app::{App, Channel, SourceSummary};
use crate::tui::colour::Depth;
use crate::tui::dsp_thread::{DspSettings, DspThread};
use crate::tui::{self, RunOptions};
use anyhow::{bail, Result};
use clap::{Args, Parser};
use std::io::IsTerminal;
use std::process::ExitCode;
use std::sync::atomic::Ordering;
use std::time::{Duration, Instant};

#[derive(Args, Debug)]
pub struct WatchArgs {
    /// Input: a file (raw, .sigmf-meta/.sigmf-data, .wav) or - for stdin. Default: the demo scene.
    #[arg(value_name = "INPUT")]
    pub input: Option<String>,
    #[command(flatten)]
    pub source: InputArgs,
    #[command(flatten)]
    pub dsp: DspArgs,
    /// Screen updates per second at most, 1 ..= 60.
    #[arg(long, value_name = "N", default_value_t = 20.0)]
    pub fps: f64,
    /// Waterfall rows per second of input, 0.1 ..= 200; each row averages the FFT frames of
    /// its time.
    #[arg(long, value_name = "N", default_value_t = 20.0)]
    pub row_rate: f64,
    /// Play a file at this multiple of its recorded rate (1 = as recorded).
    #[arg(long, value_name = "X", default_value_t = 1.0)]
    pub speed: f64,
    /// Start a file again when it ends.
    #[arg(long = "loop")]
    pub loop_input: bool,
    /// Add this many dB to every level shown, turning dBFS into dBm for a calibrated receiver.
    #[arg(long, value_name = "DB", allow_negative_numbers = true)]
    pub ref_offset: Option<f64>,
    /// A channel to mark on the spectrum and in the table, NAME=CENTER:WIDTH in absolute Hz
    /// (e.g. gate=433.2625M:12.5k); repeatable, combines with --plan.
    #[arg(long = "channel", value_name = "NAME=CENTER:WIDTH", value_parser = parse_channel_arg)]
    pub channels: Vec<ChannelArg>,
    #[arg(
        long,
        value_name = "FILE.toml",
        help = "A channel plan to show: a TOML file of [[channel]] tables with name, center and width"
    )]
    pub plan: Option<String>,
    /// Colours: auto (24-bit when COLORTERM says truecolor or 24bit, none under NO_COLOR,
    /// else 256), 24bit, 256 or mono.
    #[arg(long, value_name = "MODE", default_value = "auto", value_parser = parse_colour)]
    pub colour: ColourChoice,
    /// Redraw the waterfall cell by cell instead of scrolling it with the terminal's scroll
    /// region; for a terminal that mishandles scroll regions (sends many more bytes).
    #[arg(long)]
    pub no_scroll_region: bool,
    /// Leave the mouse to the terminal (e.g. for selecting text) instead of placing markers.
    #[arg(long)]
    pub no_mouse: bool,
}

/// `--colour`: automatic or forced.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ColourChoice {
    Auto,
    Forced(Depth),
}

pub fn parse_colour(text: &str) -> Result<ColourChoice, String> {
    match text {
        "auto" => Ok(ColourChoice::Auto),
        "24bit" | "truecolor" => Ok(ColourChoice::Forced(Depth::TrueColour)),
        "256" => Ok(ColourChoice::Forced(Depth::Palette256)),
        "mono" => Ok(ColourChoice::Forced(Depth::Mono)),
        _ => Err(format!("'{text}' is not a colour mode; choose auto, 24bit, 256 or mono")),
    }
}

/// The plan's channels as the monitor shows them, names cleaned of control characters.
fn overlay(plan: &Plan) -> Vec<Channel> {
    plan.channels
        .iter()
        .map(|c| Channel { name: sanitize(&c.name), center_hz: c.center_hz, width_hz: c.width_hz })
        .collect()
}

/// Plain `bandwarden`: the monitor on the demo scene when there is a terminal to draw on, else
/// the one-shot report.
pub fn run_default() -> Result<ExitCode> {
    if !std::io::stdout().is_terminal() {
        note("standard output is not a terminal, so here is a report on the demo scene instead of the live monitor");
        return crate::cmd::measure::run_default();
    }
    let cli = crate::cli::Cli::try_parse_from(["bandwarden", "watch"])?;
    match cli.command {
        Some(crate::cli::Command::Watch(args)) => run(args),
        _ => unreachable!("parsing 'watch' gives the watch command"),
    }
}

pub fn run(args: WatchArgs) -> Result<ExitCode> {
    validate(&args)?;
    let settings = DspSettings {
        fft_size: args.dsp.fft_size,
        window: args.dsp.window,
        overlap: args.dsp.overlap,
        row_rate: args.row_rate,
        threads: args.dsp.threads(),
    };
    let plan = Plan::from_args(args.plan.as_deref(), &args.channels)?;
    let mut notes = Vec::new();
    let mut req = args.source.request(args.input.clone());
    req.realtime = args.input.is_none();
    let src = source::open(&req, &mut notes)?;
    notes.iter().for_each(|n| note(n));
    let info = src.info().clone();
    let half = info.sample_rate_hz / 2.0;
    plan.check_span(info.center_hz - half, info.center_hz + half)?;
    // Checked after the input and the plan, so their mistakes are reported first.
    if !std::io::stdout().is_terminal() {
        bail!("watch draws on a terminal and standard output is not one; use `bandwarden measure` for a report");
    }
    let is_file = args.input.as_deref().is_some_and(|p| p != "-");
    if args.loop_input && !is_file {
        note("--loop only replays files; ignored for this input");
    }
    let rate = info.sample_rate_hz;
    let opts = ReaderOptions {
        // About 10 ms a block, so paced playback is smooth and a row never waits on a block.
        block_len: (rate / 100.0).clamp(1024.0, 65536.0) as usize,
        drop_when_full: info.live,
        pace: is_file.then_some(args.speed),
        loop_input: args.loop_input && is_file,
        max_samples: None,
    };
    let input = Input::start(src, opts);
    let dsp = DspThread::spawn(input.blocks.clone(), rate, info.center_hz, settings);
    let summary = SourceSummary {
        label: sanitize(&info.label),
        sample_rate_hz: rate,
        center_hz: info.center_hz,
        total_samples: info.total_samples,
        live: info.live,
        speed: is_file.then_some(args.speed),
        looping: args.loop_input && is_file,
    };
    let depth = match args.colour {
        ColourChoice::Auto => Depth::detect(),
        ColourChoice::Forced(d) => d,
    };
    let app = App::new(summary, settings, depth, args.ref_offset, overlay(&plan), Instant::now());
    let run_opts =
        RunOptions { fps: args.fps, scroll_region: !args.no_scroll_region, mouse: !args.no_mouse };
    let result = tui::run(app, &dsp, &input.stats, run_opts);
    input.request_stop();
    dsp.stop();
    shut_down(input);
    result?;
    Ok(ExitCode::SUCCESS)
}

fn validate(args: &WatchArgs) -> Result<()> {
    args.dsp.engine(None).map_err(anyhow::Error::msg)?;
    if !(1.0..=60.0).contains(&args.fps) {
        bail!("--fps {} is out of range; choose 1 ..= 60 (20 is usual)", args.fps);
    }
    if !(0.1..=200.0).contains(&args.row_rate) {
        bail!("--row-rate {} is out of range; choose 0.1 ..= 200 rows per second", args.row_rate);
    }
    if !(args.speed > 0.0 && args.speed.is_finite()) {
        bail!("--speed {} must be a positive number (1 plays at the recorded rate)", args.speed);
    }
    if args.ref_offset.is_some_and(|o| !o.is_finite()) {
        bail!("--ref-offset must be a finite number of dB");
    }
    Ok(())
}

/// Waits briefly for the reader and reports what it found wrong with the input. A reader stuck
/// in a read of a silent stdin is left behind; the process exits anyway.
fn shut_down(input: Input) {
    let t0 = Instant::now();
    while !input.stats.finished.load(Ordering::SeqCst) && t0.elapsed() < Duration::from_millis(500)
    {
        while input.blocks.try_recv().is_ok() {}
        std::thread::sleep(Duration::from_millis(10));
    }
    if !input.stats.finished.load(Ordering::SeqCst) {
        return;
    }
    match input.finish() {
        Ok(issues) => {
            crate::app::report_input_issues(&issues);
        }
        Err(e) => note(&format!("{e:#}")),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cli::{Cli, Command};
    use clap::Parser;

    fn parse(args: &[&str]) -> WatchArgs {
        let mut all = vec!["bandwarden", "watch"];
        all.extend_from_slice(args);
        match Cli::try_parse_from(all).unwrap().command {
            Some(Command::Watch(w)) => w,
            other => panic!("not watch: {other:?}"),
        }
    }

    #[test]
    fn defaults_are_sensible() {
        let w = parse(&[]);
        assert_eq!(w.input, None);
        assert_eq!(w.fps, 20.0);
        assert_eq!(w.row_rate, 20.0);
        assert_eq!(w.speed, 1.0);
        assert!(!w.loop_input && !w.no_scroll_region);
        assert_eq!(w.colour, ColourChoice::Auto);
        assert!(validate(&w).is_ok());
    }

    #[test]
    fn flags_parse_with_units() {
        let w = parse(&[
            "rec.sigmf-meta",
            "--fft",
            "8192",
            "--speed",
            "4",
            "--loop",
            "--ref-offset",
            "-30.5",
            "--channel",
            "gate=433.2625M:12.5k",
            "--plan",
            "site.toml",
            "--colour",
            "mono",
            "--fps",
            "15",
        ]);
        assert_eq!(w.input.as_deref(), Some("rec.sigmf-meta"));
        assert_eq!(w.dsp.fft_size, 8192);
        assert_eq!(w.speed, 4.0);
        assert!(w.loop_input);
        assert_eq!(w.ref_offset, Some(-30.5));
        assert_eq!((w.channels[0].name.as_str(), w.channels[0].center_hz), ("gate", 433.2625e6));
        assert_eq!(w.plan.as_deref(), Some("site.toml"));
        assert_eq!(w.colour, ColourChoice::Forced(Depth::Mono));
        assert_eq!(w.fps, 15.0);
    }

    #[test]
    fn plans_become_the_overlay() {
        let plan = Plan::parse(
            "[[channel]]\nname = \"gate\"\ncenter = \"433.2625M\"\nwidth = \"12.5k\"\n",
            "t.toml",
        )
        .unwrap();
        let o = overlay(&plan);
        assert_eq!(
            o,
            vec![Channel { name: "gate".into(), center_hz: 433.2625e6, width_hz: 12.5e3 }]
        );
    }

    #[test]
    fn bad_values_are_explained() {
        assert!(validate(&parse(&["--fps", "0"])).unwrap_err().to_string().contains("1 ..= 60"));
        assert!(validate(&parse(&["--speed=-1"])).is_err());
        assert!(validate(&parse(&["--speed", "0"])).unwrap_err().to_string().contains("--speed"));
        assert!(validate(&parse(&["--row-rate", "1000"]))
            .unwrap_err()
            .to_string()
            .contains("--row-rate"));
        assert!(validate(&parse(&["--fft", "8"])).unwrap_err().to_string().contains("FFT size"));
        let bad = |a: &[&str]| {
            let mut all = vec!["bandwarden", "watch"];
            all.extend_from_slice(a);
            Cli::try_parse_from(all).unwrap_err().to_string()
        };
        assert!(bad(&["--channel", "433.92M:25k"]).contains("NAME=CENTER:WIDTH"));
        assert!(bad(&["--channel", "bad\x1b[2J=1M:1k"]).contains("control characters"));
        assert!(parse_colour("16").unwrap_err().contains("auto, 24bit, 256 or mono"));
    }
}
