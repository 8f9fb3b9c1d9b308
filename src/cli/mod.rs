//! Command-line interface, in two stages: raw flags parsed by clap, then one validated config
//! per command (`XArgs::validate(self) -> XConfig`), plain structs the commands are built from.
//!
//! Every flag states its unit in its help text. Frequencies and rates accept SI suffixes
//! (`2.4M`, `12.5k`, `1e6`), durations accept `10ms`, `2s`, `15m`, `1h`. Nothing below this layer
//! imports clap or an `*Args` type.

pub mod census;
pub mod common;
pub mod demo;
pub mod log;
pub mod measure;
pub mod net;
pub mod package;
pub mod report;
pub mod sigmf_out;
pub mod snapshot;
pub mod watch;

pub use census::{CensusArgs, CensusConfig};
pub use common::{ChannelArgs, ChannelConfig, DspArgs, InputArgs, PlanArgs};
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
    /// Gather what sites publish to an MQTT broker (log --publish) into one JSON Lines file per
    /// site, as if each had logged locally; runs until Ctrl-C or SIGTERM.
    Collect(CollectArgs),
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
        assert_eq!(m.source.rate, Some(2.4e6));
        assert_eq!(m.source.center, Some(433.92e6));
        assert_eq!(m.dsp.fft_size, 1000);
        assert_eq!(m.dsp.window, WindowKind::Kaiser(7.0));
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
}
