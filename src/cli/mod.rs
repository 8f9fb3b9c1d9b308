//! Command-line interface, in two stages: raw flags parsed by clap, then one validated config
//! per command (`XArgs::validate(self) -> XConfig`), plain structs the commands are built from.
//!
//! Every flag states its unit in its help text. Frequencies and rates accept SI suffixes
//! (`2.4M`, `12.5k`, `1e6`), durations accept `10ms`, `2s`, `15m`, `1h`. Nothing below this layer
//! imports clap or an `*Args` type.

pub mod alarms;
pub mod calibrate;
pub mod census;
pub mod change;
pub mod common;
pub mod db;
pub mod demo;
pub mod log;
pub mod measure;
pub mod metrics;
pub mod net;
pub mod package;
pub mod report;
pub mod sigmf_out;
pub mod snapshot;
pub mod watch;

pub use calibrate::{CalibrateArgs, CalibrateConfig};
pub use census::{CensusArgs, CensusConfig};
pub use common::{ChannelArgs, ChannelConfig, DspArgs, InputArgs, PlanArgs};
pub use db::{DbArgs, ImportArgs, ImportConfig};
pub use demo::{DemoArgs, DemoConfig};
pub use log::{LogArgs, LogConfig};
pub use measure::{MeasureArgs, MeasureConfig};
pub use net::{CollectArgs, CollectConfig};
pub use report::{ReportArgs, ReportConfig};
pub use sigmf_out::{CaptureConfig, EmissionOutArgs, RecordArgs};
pub use snapshot::{SnapshotArgs, SnapshotConfig};
pub use watch::{ColourChoice, WatchArgs, WatchConfig};

use clap::{Parser, Subcommand};

#[derive(Parser, Debug)]
#[command(
    name = "bandwarden",
    version,
    about = "Watch, measure and log a radio band from complex IQ samples",
    long_about = "Watch, measure and log a radio band from complex IQ samples.\n\n\
        With no subcommand, bandwarden shows the live monitor on its built-in demo scene.\n\
        Levels are in dBFS (a complex sample of magnitude 1.0 is 0 dBFS); without a calibrated\n\
        receiver they are relative, not absolute power."
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Option<Command>,
}

// Parsed once per process, so the size of the largest variant costs nothing worth a Box.
#[allow(clippy::large_enum_variant)]
#[derive(Subcommand, Debug)]
pub enum Command {
    /// One-shot measurement of a whole input: PSD, noise floor, strongest signals, band power and
    /// occupied bandwidth.
    Measure(MeasureArgs),
    /// Write the built-in demo scene as IQ samples (to a file or stdout), to try pipes and files.
    Demo(DemoArgs),
    /// Live monitor in the terminal: spectrum, waterfall and the strongest signals.
    Watch(WatchArgs),
    /// Log how busy each channel of a plan is (ITU-R SM.1880 occupancy) and every emission, as
    /// JSON Lines or CSV, for unattended runs.
    Log(LogArgs),
    /// Find every emitter in the band without a plan: emissions detected row by row, tracked
    /// and grouped by frequency; a table, one JSON object, or a channel plan for `log --plan`.
    Census(CensusArgs),
    /// Draw the whole input (or part of it) as one picture, PNG or SVG: a waterfall with the
    /// averaged spectrum above it, axes in absolute frequency and time, a colour bar in dBFS.
    Snapshot(SnapshotArgs),
    /// Summarise occupancy logs written by `log`: per channel, the whole period and each hour, as
    /// a table, CSV, JSON or a heat map picture.
    Report(ReportArgs),
    /// Calibrate levels to dBm: measure generator tones of known power into a calibration file
    /// for --calibration, or the noise figure of a terminated input.
    Calibrate(CalibrateArgs),
    /// Gather what sites publish to an MQTT broker (log --publish) into one JSON Lines file per
    /// site, as if each had logged locally, and/or a database (--db); runs until Ctrl-C or
    /// SIGTERM.
    Collect(CollectArgs),
    /// Store occupancy logs (JSON Lines or CSV) in a database (--db), each record once, for
    /// `report --db`; logs imported twice, or also collected, are stored once.
    Import(ImportArgs),
    /// Print a shell completion script (bash, zsh or fish) on stdout.
    Completions(package::CompletionsArgs),
    /// Print the manual page (roff) on stdout, e.g. `bandwarden manual > bandwarden.1`.
    Manual,
}

/// The flags of `bandwarden NAME` with every default, for commands that stand in for another.
fn defaults_of(name: &str) -> Command {
    Cli::try_parse_from(["bandwarden", name])
        .ok()
        .and_then(|c| c.command)
        .expect("a subcommand with no arguments parses")
}

/// Plain `bandwarden measure` on the demo scene.
pub fn default_measure() -> MeasureArgs {
    match defaults_of("measure") {
        Command::Measure(m) => m,
        _ => unreachable!("parsing 'measure' gives the measure command"),
    }
}

/// Plain `bandwarden watch` on the demo scene.
pub fn default_watch() -> WatchArgs {
    match defaults_of("watch") {
        Command::Watch(w) => w,
        _ => unreachable!("parsing 'watch' gives the watch command"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::WindowKind;
    use clap::CommandFactory;

    #[test]
    fn the_definition_is_consistent() {
        Cli::command().debug_assert();
    }

    #[test]
    fn defaults_parse() {
        assert_eq!(default_measure().peaks, 10);
        assert_eq!(default_watch().fps, 20.0);
    }

    #[test]
    fn measure_flags() {
        let cli = Cli::try_parse_from([
            "bandwarden",
            "measure",
            "x.cu8",
            "--rate",
            "2.4M",
            "--center",
            "433.92M",
            "--fft",
            "1000",
            "--window",
            "kaiser:7",
            "--overlap",
            "0.75",
            "--threads",
            "3",
            "--band",
            "433.9M:100k",
            "--json",
        ])
        .unwrap();
        let Some(Command::Measure(m)) = cli.command else { panic!("not measure") };
        assert_eq!(m.analysis.source.rate, Some(2.4e6));
        assert_eq!(m.analysis.source.center, Some(433.92e6));
        assert_eq!(m.analysis.dsp.fft_size, 1000);
        assert_eq!(m.analysis.dsp.window, WindowKind::Kaiser(7.0));
        assert_eq!(m.bands.len(), 1);
        assert!(m.json);
        let c = m.validate().unwrap();
        assert_eq!(c.dsp.threads, 3);
        assert_eq!(c.seconds, None, "a file is read whole");
        assert!(Cli::try_parse_from(["bandwarden", "measure", "--window", "gauss"]).is_err());
        assert!(Cli::try_parse_from(["bandwarden", "measure", "--format", "s16"]).is_err());
        assert!(Cli::try_parse_from(["bandwarden", "measure", "--threads", "0"]).is_err());
        assert_eq!(default_measure().validate().unwrap().seconds, Some(2.0));
    }

    /// The flags `bandwarden COMMAND --help` lists under each heading, in order.
    fn flags_by_heading(command: &str) -> Vec<(String, Vec<String>)> {
        let mut cli = Cli::command();
        let help = cli.find_subcommand_mut(command).unwrap().render_help().to_string();
        let mut sections: Vec<(String, Vec<String>)> = Vec::new();
        for line in help.lines() {
            if let Some(heading) = line.strip_suffix(':').filter(|_| !line.starts_with(' ')) {
                sections.push((heading.to_string(), Vec::new()));
            } else if let (Some(flag), Some(last)) =
                (line.split_whitespace().find(|w| w.starts_with("--")), sections.last_mut())
            {
                // A flag's own line is indented a little; its wrapped help text far more.
                let indent = line.len() - line.trim_start().len();
                if indent <= 6 && line.trim_start().starts_with('-') {
                    last.1.push(flag.trim_end_matches(',').to_string());
                }
            }
        }
        sections
    }

    #[test]
    fn sigmf_flags_have_a_heading_of_their_own() {
        let emission = ["--annotate", "--capture", "--pre", "--post", "--capture-max-seconds"];
        for command in ["log", "census", "watch"] {
            let sections = flags_by_heading(command);
            let sigmf = sections.iter().find(|(h, _)| h == sigmf_out::SIGMF_HEADING);
            let Some((_, flags)) = sigmf else { panic!("{command}: no SigMF heading") };
            let mut expected = vec!["--record"];
            if command != "watch" {
                expected.extend(emission);
                expected.push("--capture-max-bytes");
            }
            assert_eq!(flags, &expected, "{command}");
            // Not under the broker's heading, nor anywhere else.
            for (heading, flags) in &sections {
                if heading != sigmf_out::SIGMF_HEADING {
                    assert!(!flags.iter().any(|f| f == "--record"), "{command}: {heading}");
                }
            }
        }
        let watch = flags_by_heading("watch");
        assert!(watch.iter().any(|(h, f)| h == "Options" && f.contains(&"--alarm-log".into())));
    }

    #[test]
    fn the_channel_syntax_is_spelt_one_way() {
        for command in ["log", "measure", "watch", "snapshot"] {
            let mut cli = Cli::command();
            let help = cli.find_subcommand_mut(command).unwrap().render_long_help().to_string();
            assert!(!help.contains("CENTRE"), "{command}: {help}");
        }
    }

    /// Why `bandwarden ARGS` is refused: clap's error, or the command's validation error.
    fn refusal(args: &[&str]) -> String {
        let argv = std::iter::once("bandwarden").chain(args.iter().copied());
        let cli = match Cli::try_parse_from(argv) {
            Ok(cli) => cli,
            Err(e) => return e.to_string(),
        };
        let refused = match cli.command {
            Some(Command::Measure(a)) => a.validate().err(),
            Some(Command::Log(a)) => a.validate().err(),
            Some(Command::Watch(a)) => a.validate().err(),
            Some(Command::Census(a)) => a.validate().err(),
            Some(Command::Demo(a)) => a.validate().err(),
            Some(Command::Snapshot(a)) => a.validate().err(),
            _ => panic!("no case for {args:?}"),
        };
        format!("{:#}", refused.unwrap_or_else(|| panic!("{args:?} was accepted")))
    }

    #[test]
    fn negative_values_are_called_negative_not_unknown_flags() {
        let ch = "a=1M:1k";
        let cases: &[(&[&str], &str)] = &[
            (&["log", "f", "--interval", "-5s"], "'-5s' must be a non-negative duration"),
            (&["log", "f", "--hang", "-5ms"], "'-5ms' must be a non-negative duration"),
            (&["log", "f", "--dwell", "-5ms"], "'-5ms' must be a non-negative duration"),
            (&["log", "f", "--publish-linger", "-5s"], "'-5s' must be a non-negative duration"),
            (&["census", "f", "--dwell", "-1s"], "'-1s' must be a non-negative duration"),
            (&["census", "f", "--hang", "-1s"], "'-1s' must be a non-negative duration"),
            (&["log", "f", "--seconds", "-5"], "'-5' must be a positive number of seconds"),
            (&["log", "f", "--pre", "-1"], "'-1' must be a positive number of seconds"),
            (&["log", "f", "--post", "-1"], "'-1' must be a positive number of seconds"),
            (&["log", "f", "--capture-max-seconds", "-1"], "'-1' must be a positive number"),
            (&["census", "f", "--seconds", "-1"], "'-1' must be a positive number of seconds"),
            (&["measure", "--skip", "-1"], "'-1' must be a positive number of seconds"),
            (&["snapshot", "f", "--seconds", "-2"], "'-2' must be a positive number of seconds"),
            (&["demo", "--seconds", "-2"], "'-2' must be a positive number of seconds"),
            (&["log", "f", "--rotate", "-5M"], "'-5M' is not a rotation"),
            (&["log", "f", "--spool-max", "-5M"], "'-5M' is not a size"),
            (&["log", "f", "--spool-max-bytes", "-5M"], "'-5M' is not a size"),
            (&["log", "f", "--spool-max-age", "-1d"], "'-1d' must be a non-negative duration"),
            (&["log", "f", "--capture-max-bytes", "-1G"], "'-1G' is not a size"),
            (&["measure", "--rate", "-2.4M"], "must be positive, and -2.400000 MHz is negative"),
            (&["demo", "--rate", "-1M"], "must be positive, and -1.000000 MHz is negative"),
            (&["measure", "--fft", "-5"], "'-5' is negative"),
            (&["measure", "--peaks", "-3"], "'-3' is negative"),
            (&["measure", "--segment", "-1"], "'-1' is negative"),
            (&["measure", "--input-channel", "-1"], "'-1' is negative"),
            (&["demo", "--seed", "-1"], "'-1' is negative"),
            (&["snapshot", "f", "--width", "-5"], "'-5' is negative"),
            (&["snapshot", "f", "--height", "-5"], "'-5' is negative"),
            (&["measure", "--threads", "-2"], "-2 is not in 1..=256"),
            (&["measure", "--overlap", "-0.5"], "--overlap -0.5 is out of range"),
            (&["measure", "--obw-percent", "-5"], "--obw-percent -5 is out of range"),
            (&["measure", "--xdb", "-5"], "--xdb -5 is out of range"),
            (&["measure", "--false-alarm", "-1e-6"], "--false-alarm -1.0e-6 is out of range"),
            (&["log", "f", "--channel", ch, "--threshold-db", "-5"], "-5 is out of range"),
            (&["watch", "--fps", "-5"], "--fps -5 is out of range"),
            (&["watch", "--row-rate", "-1"], "--row-rate -1 is out of range"),
            (&["watch", "--speed", "-2"], "--speed -2 is out of range"),
        ];
        for (args, expected) in cases {
            let why = refusal(args);
            assert!(why.contains(expected), "{args:?}: {why}");
            assert!(!why.contains("unexpected argument"), "{args:?}: {why}");
        }
        // A negative centre frequency is a value, not a flag (its meaning is checked later).
        assert!(Cli::try_parse_from(["bandwarden", "measure", "--center", "-5M"]).is_ok());
    }

    #[test]
    fn spool_bounds_are_checked_and_the_old_flag_name_still_works() {
        let publish = ["log", "f", "--channel", "a=1M:1k", "--site", "ridge"];
        let with = |extra: &[&'static str]| -> Vec<&'static str> {
            let mut v = publish.to_vec();
            v.extend_from_slice(&["--publish", "mqtt://127.0.0.1/wrenhollow"]);
            if !extra.contains(&"-o") {
                v.extend_from_slice(&["-o", "ridge.jsonl"]);
            }
            v.extend_from_slice(extra);
            v
        };
        let too_small = refusal(&with(&["--spool-max-bytes", "63k"]));
        assert!(too_small.contains("--spool-max-bytes must be at least 64k"), "{too_small}");
        let too_young = refusal(&with(&["--spool-max-age", "500ms"]));
        assert!(too_young.contains("--spool-max-age must be at least 1s"), "{too_young}");
        let parsed = |extra: &[&'static str]| {
            let argv = std::iter::once("bandwarden").chain(with(extra));
            match Cli::try_parse_from(argv).unwrap().command {
                Some(Command::Log(a)) => a.validate().unwrap().publish.unwrap(),
                _ => unreachable!("a log command"),
            }
        };
        let p = parsed(&["--spool-max", "64k", "--spool-max-age", "2d", "-o", "ridge.jsonl"]);
        assert_eq!((p.spool.max_bytes, p.spool.max_age.as_secs()), (64_000, 2 * 86_400));
        assert_eq!(p.local_log.map(|l| l.path), Some("ridge.jsonl".into()));
        // Defaults: 256M and 7 days; a CSV log cannot answer resend requests.
        let p = parsed(&["--csv", "-o", "ridge.csv"]);
        assert_eq!((p.spool.max_bytes, p.spool.max_age.as_secs()), (256_000_000, 7 * 86_400));
        assert!(p.local_log.is_none());
    }
}
