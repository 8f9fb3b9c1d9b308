//! `watch` flags and their validation.

use super::alarms::{AlarmArgs, AlarmConfig};
use super::common::{parse_number, AnalysisArgs, DetectArgs, PlanArgs};
use super::sigmf_out::RecordArgs;
use crate::cli::common::input_help;
use crate::measure::calibration::Calibration;
use crate::measure::Detection;
use crate::pipeline::latest::RowSettings;
use crate::plan::Plan;
use crate::source::InputRequest;
use crate::tui::colour::Depth;
use crate::units::{format_num, parse_duration};
use anyhow::{bail, Result};
use clap::Args;

#[derive(Args, Debug)]
pub struct WatchArgs {
    #[arg(value_name = "INPUT", help = concat!(input_help!(), " Default: the demo scene."))]
    pub input: Option<String>,
    #[command(flatten)]
    pub analysis: AnalysisArgs,
    #[command(flatten)]
    pub detect: DetectArgs,
    /// Screen updates per second at most, 1 ..= 60.
    #[arg(long, value_name = "N", default_value_t = 20.0, allow_negative_numbers = true, value_parser = parse_number)]
    pub fps: f64,
    /// Waterfall rows per second of input, 0.1 ..= 200; each row averages the FFT frames of
    /// its time.
    #[arg(long, value_name = "N", default_value_t = 20.0, allow_negative_numbers = true, value_parser = parse_number)]
    pub row_rate: f64,
    /// Play a file at this multiple of its recorded rate (1 = as recorded), 0.001 ..= 1000.
    #[arg(long, value_name = "X", default_value_t = 1.0, allow_negative_numbers = true, value_parser = parse_number)]
    pub speed: f64,
    /// Start a file again when it ends.
    #[arg(long = "loop")]
    pub loop_input: bool,
    #[command(flatten)]
    pub channels: PlanArgs,
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
    /// Append a JSON Lines record to FILE when a channel alarm opens and when it ends (alarms
    /// come from the plan's alarm_dbfs or the A key), and with --alarms each change alarm and
    /// clear.
    #[arg(long, value_name = "FILE")]
    pub alarm_log: Option<String>,
    /// How long a channel's power must stay under its alarm threshold before the alarm ends
    /// (key-ups closer together than this are one alarm).
    #[arg(long, value_name = "DURATION", default_value = "5s", allow_hyphen_values = true, value_parser = parse_duration)]
    pub alarm_hold: std::time::Duration,
    #[command(flatten)]
    pub alarms: AlarmArgs,
    /// With --alarms: the length of the intervals whose floor and occupancy are tested, as
    /// `log --interval` (e.g. 1s, 60s).
    #[arg(long, value_name = "DURATION", default_value = "60s", allow_hyphen_values = true, value_parser = parse_duration, requires = "alarms", help_heading = "Change alarms")]
    pub interval: std::time::Duration,
    /// Folder for the files the e (evidence) and g (picture) keys write; it must exist and be
    /// writable (checked at start).
    #[arg(long, value_name = "DIR", default_value = ".")]
    pub evidence_dir: String,
    // Last: its heading (SigMF output) holds for the flags that follow it.
    #[command(flatten)]
    pub record: RecordArgs,
}

/// Slowest and fastest playback of a file: a thousandth of the recorded rate is already a slide
/// show, and a thousand times it is faster than the screen can show rows anyway.
pub const MIN_SPEED: f64 = 0.001;
pub const MAX_SPEED: f64 = 1000.0;

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

/// A validated `watch`.
#[derive(Clone, Debug)]
pub struct WatchConfig {
    pub input: InputRequest,
    pub rows: RowSettings,
    pub fps: f64,
    pub speed: f64,
    pub loop_input: bool,
    /// dBFS → dBm, when calibrated.
    pub calibration: Option<Calibration>,
    pub plan: Plan,
    pub colour: ColourChoice,
    pub scroll_region: bool,
    pub mouse: bool,
    pub alarm_log: Option<String>,
    /// The channel-alarm hold-off, seconds.
    pub alarm_hold_s: f64,
    /// `--alarms`: the change test and its baseline, on intervals of `interval_s`.
    pub alarms: Option<AlarmConfig>,
    pub interval_s: f64,
    /// Where `e` and `g` write their files.
    pub evidence_dir: String,
    /// How signals are told from noise.
    pub detection: Detection,
    /// `--record`: the input teed to this SigMF recording.
    pub record: Option<String>,
}

impl WatchArgs {
    pub fn validate(self) -> Result<WatchConfig> {
        let dsp = self.analysis.dsp.validate()?;
        let detection = self.detect.validate(Detection::default().obw_percent)?;
        if !(1.0..=60.0).contains(&self.fps) {
            bail!("--fps {} is out of range; choose 1 ..= 60 (20 is usual)", format_num(self.fps));
        }
        if !(0.1..=200.0).contains(&self.row_rate) {
            bail!(
                "--row-rate {} is out of range; choose 0.1 ..= 200 rows per second",
                format_num(self.row_rate)
            );
        }
        if !(MIN_SPEED..=MAX_SPEED).contains(&self.speed) {
            bail!(
                "--speed {} is out of range; choose {MIN_SPEED} ..= {MAX_SPEED} (1 plays at the recorded rate)",
                format_num(self.speed)
            );
        }
        let calibration = self.analysis.levels.validate()?;
        let plan = self.channels.validate()?;
        let alarms = self.alarms.validate()?;
        if alarms.is_some() && plan.channels.is_empty() {
            bail!("--alarms follows the channels of a plan; give --plan FILE or --channel");
        }
        if self.interval.is_zero() {
            bail!("--interval must be longer than zero (e.g. 60s)");
        }
        let mut input = self.analysis.source.request(self.input);
        input.realtime = input.path.is_none();
        Ok(WatchConfig {
            input,
            rows: RowSettings::new(dsp, self.row_rate),
            fps: self.fps,
            speed: self.speed,
            loop_input: self.loop_input,
            calibration,
            plan,
            colour: self.colour,
            scroll_region: !self.no_scroll_region,
            mouse: !self.no_mouse,
            alarm_log: self.alarm_log,
            alarm_hold_s: self.alarm_hold.as_secs_f64(),
            alarms,
            interval_s: self.interval.as_secs_f64(),
            evidence_dir: self.evidence_dir,
            detection,
            record: self.record.validate()?,
        })
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

    fn error(args: &[&str]) -> String {
        parse(args).validate().unwrap_err().to_string()
    }

    #[test]
    fn change_alarms_need_a_plan_and_take_log_s_flags() {
        let plan = ["--channel", "mast=433.5M:12.5k", "--alarms", "--interval", "1s"];
        let c = parse(&plan).validate().unwrap();
        assert_eq!(c.interval_s, 1.0);
        assert_eq!(c.alarms.unwrap().settings.method, crate::measure::change::DEFAULT_CUSUM);
        assert!(error(&["--alarms"]).contains("--plan"));
        let no_alarms = Cli::try_parse_from(["bandwarden", "watch", "--interval", "1s"]);
        assert!(no_alarms.is_err(), "--interval needs --alarms");
    }

    #[test]
    fn false_alarm_reaches_the_signal_list() {
        let c = parse(&["--false-alarm", "1e-3"]).validate().unwrap();
        assert_eq!(c.detection.false_alarm_per_bin, 1e-3);
        let d = parse(&[]).validate().unwrap().detection;
        assert_eq!(d.false_alarm_per_bin, crate::measure::signals::DEFAULT_FALSE_ALARM);
        assert!(error(&["--false-alarm", "0.2"]).contains("--false-alarm"));
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
        let c = w.validate().unwrap();
        assert!(c.input.realtime, "the demo scene plays live");
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
        assert_eq!(w.analysis.dsp.fft_size, 8192);
        assert_eq!(w.speed, 4.0);
        assert!(w.loop_input);
        assert_eq!(w.analysis.levels.ref_offset, Some(-30.5));
        let c = &w.channels.channels[0];
        assert_eq!((c.name.as_str(), c.center_hz), ("gate", 433.2625e6));
        assert_eq!(w.channels.plan.as_deref(), Some("site.toml"));
        assert_eq!(w.colour, ColourChoice::Forced(Depth::Mono));
        assert_eq!(w.fps, 15.0);
    }

    #[test]
    fn bad_values_are_explained() {
        assert!(error(&["--fps", "0"]).contains("1 ..= 60"));
        assert!(parse(&["--speed=-1"]).validate().is_err());
        assert!(error(&["--speed", "0"]).contains("--speed"));
        assert!(error(&["--row-rate", "1000"]).contains("--row-rate"));
        assert!(error(&["--fft", "8"]).contains("FFT size"));
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
