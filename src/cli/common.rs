//! Flag groups several commands share: where samples come from, how the spectrum is estimated,
//! which channels are measured; and the value parsers every flag uses, each written once.

use crate::dsp::{DspConfig, EngineConfig, WindowKind};
use crate::measure::calibration::Calibration;
use crate::measure::signals::DEFAULT_FALSE_ALARM;
use crate::measure::Detection;
use crate::messages::sanitize;
use crate::output::report::Band;
use crate::plan::{check_threshold_db, parse_channel_flag, Channel, Plan, DEFAULT_THRESHOLD_DB};
use crate::source::{InputRequest, SampleFormat};
use crate::units::{
    format_num, parse_duration, parse_hz, parse_positive_hz, parse_rate, MAX_SECONDS,
};
use anyhow::Result;
use clap::Args;
use std::time::Duration;
use time::format_description::well_known::Rfc3339;
use time::OffsetDateTime;

/// The help of every command's INPUT, written once: each kind of input every command reads.
/// A macro, not a const, so that a command can `concat!` its own sentence after it.
macro_rules! input_help {
    () => {
        "Input: a file (raw, .sigmf-meta/.sigmf-data, .wav), - for stdin, tcp://HOST:PORT \
         (connect to a receiver serving raw IQ), tcp-listen://ADDR:PORT (accept one sender) or \
         vita49://ADDR:PORT (VITA 49 packets over UDP)."
    };
}
pub(crate) use input_help;

/// Where samples come from and how to read them.
#[derive(Args, Debug, Clone, Default)]
pub struct InputArgs {
    /// Sample format, any SigMF datatype (cu8, ci8, ci16_le, cf32_le, …, real ri16_le, rf32_le, …;
    /// big-endian _be too). Overrides a SigMF file; guessed from .cu8/.cs8/.cs16/.cf32 when absent.
    #[arg(long, value_name = "FORMAT", value_parser = parse_format)]
    pub format: Option<SampleFormat>,
    /// Sample rate in samples/s (e.g. 2.4M); overrides the file's own.
    #[arg(long, value_name = "HZ", allow_hyphen_values = true, value_parser = parse_rate)]
    pub rate: Option<f64>,
    /// Centre frequency in Hz (e.g. 433.92M) so the axis shows absolute frequency.
    #[arg(long, value_name = "HZ", allow_hyphen_values = true, value_parser = parse_hz)]
    pub center: Option<f64>,
    /// Time of the first sample, RFC 3339 (e.g. 2026-05-01T08:00:00Z); overrides SigMF
    /// core:datetime.
    #[arg(long, value_name = "TIME", value_parser = parse_time)]
    pub start: Option<OffsetDateTime>,
    /// Of a SigMF recording, read only capture segment N (its index in "captures", from 0);
    /// segments recorded at different frequencies are otherwise stitched into a panorama.
    #[arg(long, value_name = "N", allow_negative_numbers = true, value_parser = parse_count::<usize>)]
    pub segment: Option<usize>,
    /// Of a multi-channel SigMF recording (core:num_channels above 1), analyse channel C (from
    /// 0).
    #[arg(long, value_name = "C", allow_negative_numbers = true, value_parser = parse_count::<u64>)]
    pub input_channel: Option<u64>,
    /// Listen beyond loopback (e.g. 0.0.0.0): with INPUT tcp-listen://ADDR:PORT, accept samples
    /// from other hosts; in `log`, serve --metrics there too. Without it only loopback addresses
    /// may be used.
    #[arg(long)]
    pub listen_public: bool,
    /// With INPUT vita49://ADDR:PORT: read the VITA 49 stream with this ID (decimal or 0x hex);
    /// without it the first stream seen is read.
    #[arg(long, value_name = "ID", value_parser = crate::source::vita49::parse_stream_id)]
    pub stream_id: Option<u32>,
    /// A retuned raw stream: FILE lists the centres the receiver visits in order, one
    /// 'CENTER DWELL' a line (e.g. '433.05M 50ms'), repeated until the input ends; the steps
    /// are stitched into one panorama.
    #[arg(long, value_name = "FILE")]
    pub hop_plan: Option<String>,
    /// Of a retuned input, skip this long after every retune (the receiver settling), e.g. 2ms.
    #[arg(long, value_name = "DURATION", value_parser = parse_settle)]
    pub settle: Option<f64>,
    /// Of a retuned input, the share of each step's span stitched into the panorama (default
    /// 0.8: the central 80 %, clear of the receiver's filter edges).
    #[arg(long, value_name = "FRACTION", value_parser = crate::source::tuning::parse_usable)]
    pub usable: Option<f64>,
    /// With INPUT vita49://ADDR:PORT and no --hop-plan: read this much of the stream ahead
    /// (default 1s) for a first retune; a stream that retunes in it has its first sweep learnt
    /// and stitched into a panorama; 0 never learns (a retune ends the input).
    #[arg(long, value_name = "DURATION", value_parser = parse_settle)]
    pub learn: Option<f64>,
}

/// `--settle` and `--learn`: a duration, zero allowed.
fn parse_settle(text: &str) -> Result<f64, String> {
    crate::units::parse_duration(text).map(|d| d.as_secs_f64())
}

impl InputArgs {
    /// The request for `path` (`None`: the demo scene, `-`: stdin).
    pub fn request(&self, path: Option<String>) -> InputRequest {
        InputRequest {
            path,
            format: self.format,
            sample_rate_hz: self.rate,
            center_hz: self.center,
            start_time: self.start,
            realtime: false,
            segment: self.segment,
            input_channel: self.input_channel,
            listen_public: self.listen_public,
            stream_id: self.stream_id,
            hop_plan: self.hop_plan.clone(),
            settle_s: self.settle,
            usable: self.usable,
            learn_s: self.learn,
            stop: None,
        }
    }
}

/// The flags of every command that analyses an input, declared once: where the samples come
/// from, how the spectrum is estimated, and what its levels mean.
#[derive(Args, Debug, Clone)]
pub struct AnalysisArgs {
    #[command(flatten)]
    pub source: InputArgs,
    #[command(flatten)]
    pub dsp: DspArgs,
    #[command(flatten)]
    pub levels: LevelArgs,
}

/// How the spectrum is estimated.
#[derive(Args, Debug, Clone)]
pub struct DspArgs {
    /// FFT size in samples, 16 ..= 1048576 (any length; powers of two are fastest).
    #[arg(long = "fft", value_name = "N", default_value_t = 4096, allow_negative_numbers = true, value_parser = parse_count::<usize>)]
    pub fft_size: usize,
    /// Window: rect, hann, hamming, blackman, blackman-harris, flattop, kaiser:BETA.
    #[arg(long, value_name = "NAME", default_value = "hann", value_parser = parse_window)]
    pub window: WindowKind,
    /// Fraction of each FFT frame shared with the next, 0 ..= 0.95.
    #[arg(long, value_name = "FRACTION", default_value_t = 0.5, allow_negative_numbers = true, value_parser = parse_number)]
    pub overlap: f64,
    /// Threads for the transforms [default: one per core, at most 8]; 1 leaves the other cores
    /// free.
    #[arg(long, value_name = "N", allow_negative_numbers = true, value_parser = clap::value_parser!(u16).range(1..=256))]
    pub threads: Option<u16>,
}

impl Default for DspArgs {
    fn default() -> Self {
        DspArgs { fft_size: 4096, window: WindowKind::Hann, overlap: 0.5, threads: None }
    }
}

impl DspArgs {
    /// Checks the ranges; threads default to one per core.
    pub fn validate(&self) -> Result<DspConfig> {
        let threads = self.threads.map_or_else(
            || std::thread::available_parallelism().map_or(1, |n| n.get()),
            |t| t as usize,
        );
        let cfg = DspConfig {
            fft_size: self.fft_size,
            window: self.window,
            overlap: self.overlap,
            threads,
        };
        EngineConfig::validate(&cfg.engine(None)).map_err(anyhow::Error::msg)?;
        Ok(cfg)
    }
}

/// Smallest and largest false-alarm probability `--false-alarm` accepts: below 10⁻¹² the χ²
/// quantile leaves the range where it is computed accurately, above 10⁻² noise alone would fill a
/// table with signals.
pub const FALSE_ALARM_RANGE: (f64, f64) = (1e-12, 1e-2);

/// How signals are told from noise (`measure`, `watch`, `census`).
#[derive(Args, Debug, Clone)]
pub struct DetectArgs {
    /// Probability that one bin of noise alone crosses the detection threshold in one averaged
    /// spectrum (per bin, per row), 1e-12 ..= 1e-2. Smaller finds fewer false signals and misses
    /// more weak ones; the threshold follows from the χ² statistics of the average, so it falls
    /// as more frames are averaged.
    #[arg(
        long = "false-alarm",
        value_name = "P",
        default_value_t = DEFAULT_FALSE_ALARM,
        allow_hyphen_values = true,
        value_parser = parse_number,
        help_heading = "Detection"
    )]
    pub false_alarm: f64,
}

impl Default for DetectArgs {
    fn default() -> Self {
        DetectArgs { false_alarm: DEFAULT_FALSE_ALARM }
    }
}

impl DetectArgs {
    /// The detection settings, with the probability checked.
    pub fn validate(&self, obw_percent: f64) -> Result<Detection> {
        let (lo, hi) = FALSE_ALARM_RANGE;
        if !(lo..=hi).contains(&self.false_alarm) {
            anyhow::bail!(
                "--false-alarm {} is out of range; choose a probability per bin from {lo:e} to {hi:e} (1e-6 is the default)",
                format_num(self.false_alarm),
            );
        }
        Ok(Detection { false_alarm_per_bin: self.false_alarm, obw_percent, ..Detection::default() })
    }
}

/// The channels of a run: a plan file and channels given one by one (`log`, `measure`, `watch`).
#[derive(Args, Debug, Clone, Default)]
pub struct PlanArgs {
    /// A channel, NAME=CENTER:WIDTH in absolute Hz (e.g. north-gate=433.1M:25k); repeatable,
    /// combines with --plan.
    #[arg(
        long = "channel",
        value_name = "NAME=CENTER:WIDTH",
        value_parser = parse_channel_flag,
        help_heading = "Channels"
    )]
    pub channels: Vec<Channel>,
    #[arg(
        long,
        value_name = "FILE.toml",
        help_heading = "Channels",
        help = "A channel plan: a TOML file of [[channel]] tables with name, center, width and an optional threshold_db"
    )]
    pub plan: Option<String>,
}

impl PlanArgs {
    /// The plan file and the flags combined, checked (possibly empty).
    pub fn validate(&self) -> Result<Plan> {
        Plan::from_parts(self.plan.as_deref(), &self.channels)
    }
}

/// Options shared by every command that measures channels (`log`, `measure`).
#[derive(Args, Debug, Clone)]
pub struct ChannelArgs {
    #[command(flatten)]
    pub plan: PlanArgs,
    /// Length of one measurement sample (one averaged row of FFT frames), e.g. 10ms; rounded to
    /// a whole number of FFT hops. Default: the most hops that fit in 10 ms.
    #[arg(long, value_name = "DURATION", allow_hyphen_values = true, value_parser = parse_duration, help_heading = "Channels")]
    pub dwell: Option<Duration>,
    /// A channel is occupied in a sample when its power exceeds the noise in its width by this
    /// many dB (ITU-R SM.1880); a plan's threshold_db overrides it per channel.
    #[arg(
        long,
        value_name = "DB",
        default_value_t = DEFAULT_THRESHOLD_DB,
        allow_negative_numbers = true,
        value_parser = parse_db,
        help_heading = "Channels"
    )]
    pub threshold_db: f64,
}

impl Default for ChannelArgs {
    fn default() -> Self {
        ChannelArgs { plan: PlanArgs::default(), dwell: None, threshold_db: DEFAULT_THRESHOLD_DB }
    }
}

/// Channels to measure, validated: the plan (possibly empty) and how they are sampled.
#[derive(Clone, Debug, PartialEq)]
pub struct ChannelConfig {
    pub plan: Plan,
    /// The plan file, if one was given (an output must never overwrite it).
    pub plan_path: Option<String>,
    /// Length of one measurement sample, seconds; `None` for the default.
    pub dwell_s: Option<f64>,
    pub threshold_db: f64,
}

impl ChannelArgs {
    pub fn validate(&self) -> Result<ChannelConfig> {
        check_threshold_db(self.threshold_db)?;
        Ok(ChannelConfig {
            plan: self.plan.validate()?,
            plan_path: self.plan.plan.clone(),
            dwell_s: self.dwell.map(|d| d.as_secs_f64()),
            threshold_db: self.threshold_db,
        })
    }
}

/// `--band CENTER:WIDTH` in absolute hertz.
pub fn parse_band(text: &str) -> Result<Band, String> {
    let shown = sanitize(text);
    let (c, w) = text
        .split_once(':')
        .ok_or_else(|| format!("band '{shown}' must be CENTER:WIDTH, e.g. 433.92M:25k"))?;
    let center_hz = parse_hz(c)?;
    let width_hz = parse_positive_hz(w).map_err(|e| format!("band '{shown}': width {e}"))?;
    Ok(Band { center_hz, width_hz })
}

pub fn parse_format(text: &str) -> Result<SampleFormat, String> {
    text.parse()
}

pub fn parse_window(text: &str) -> Result<WindowKind, String> {
    text.parse()
}

pub fn parse_time(text: &str) -> Result<OffsetDateTime, String> {
    OffsetDateTime::parse(text.trim(), &Rfc3339).map_err(|e| {
        format!("'{}' is not an RFC 3339 time such as 2026-05-01T08:00:00Z ({e})", sanitize(text))
    })
}

/// `--progress PERIOD` (`log`, `census`): a status line every PERIOD (`1m`, `30s`), or `off`.
/// Returns seconds, 0 for off.
pub fn parse_progress(text: &str) -> Result<f64, String> {
    if text.trim().eq_ignore_ascii_case("off") {
        return Ok(0.0);
    }
    let d = parse_duration(text)?;
    if d < std::time::Duration::from_secs(1) {
        return Err(format!(
            "--progress '{}': give a period of a second or more (e.g. 1m), or off",
            sanitize(text)
        ));
    }
    Ok(d.as_secs_f64())
}

/// `--seconds`: how much input to take, a positive number of seconds, at most
/// [`MAX_SECONDS`] (so that seconds × any accepted rate is a count of samples a `u64` holds).
pub fn parse_seconds(text: &str) -> Result<f64, String> {
    let shown = sanitize(text);
    let s: f64 =
        text.trim().parse().map_err(|_| format!("'{shown}' is not a number of seconds"))?;
    if !(s > 0.0 && s.is_finite()) {
        return Err(format!("'{shown}' must be a positive number of seconds"));
    }
    if s > MAX_SECONDS {
        return Err(format!(
            "'{shown}' is more than {} s (about three years), the longest run accepted",
            format_num(MAX_SECONDS)
        ));
    }
    Ok(s)
}

/// Levels in dBm instead of dBFS: a calibration file (`bandwarden calibrate`) or one offset.
#[derive(Args, Debug, Clone, Default)]
pub struct LevelArgs {
    /// Add this many dB to every level, turning dBFS into dBm at the antenna port of a
    /// calibrated receiver (the same at every frequency).
    #[arg(long, value_name = "DB", allow_negative_numbers = true, value_parser = parse_db, conflicts_with = "calibration")]
    pub ref_offset: Option<f64>,
    /// Levels in dBm from a calibration file written by `bandwarden calibrate` (an offset per
    /// frequency, interpolated between its points).
    #[arg(long, value_name = "FILE")]
    pub calibration: Option<String>,
}

impl LevelArgs {
    /// The calibration asked for, read and checked; `None`: levels stay in dBFS.
    pub fn validate(&self) -> Result<Option<Calibration>> {
        if let Some(path) = &self.calibration {
            return Calibration::load(std::path::Path::new(path)).map(Some);
        }
        self.ref_offset.map(Calibration::flat).transpose()
    }
}

/// Largest magnitude of a plain number option (`--overlap`, `--fps`, `--speed`, …): far beyond
/// any sensible value, so the range checks after parsing print ordinary numbers.
pub const MAX_NUMBER: f64 = 1e9;
/// Largest magnitude of a level option in dB (`--threshold-db`, `--xdb`, `--ref-offset`): levels
/// in this program lie within ±300 dB (`units::db` floors power at 1e-30).
pub const MAX_DB: f64 = 1000.0;

/// A finite number of ordinary size, for options whose range is checked afterwards.
pub fn parse_number(text: &str) -> Result<f64, String> {
    parse_within(text, MAX_NUMBER, "number")
}

/// A whole number for a count or an index (`--fft`, `--segment`, `--seed`…). Flags taking one
/// accept values that start with `-` (clap's `allow_hyphen_values`), so that a negative value
/// is named as such here instead of being taken for an unknown flag.
pub fn parse_count<T: std::str::FromStr>(text: &str) -> Result<T, String> {
    let shown = sanitize(text);
    let t = text.trim();
    if t.strip_prefix('-').is_some_and(|rest| rest.parse::<f64>().is_ok()) {
        return Err(format!("'{shown}' is negative; give a whole number, 0 or more"));
    }
    t.parse().map_err(|_| format!("'{shown}' is not a whole number"))
}

/// A level or level difference in dB, finite and within ±[`MAX_DB`].
pub fn parse_db(text: &str) -> Result<f64, String> {
    parse_within(text, MAX_DB, "number of dB")
}

fn parse_within(text: &str, limit: f64, what: &str) -> Result<f64, String> {
    let shown = sanitize(text);
    match text.trim().parse::<f64>() {
        Ok(x) if x.is_finite() && x.abs() <= limit => Ok(x),
        Ok(_) => Err(format!("'{shown}' is not a finite {what} within ±{}", format_num(limit))),
        Err(_) => Err(format!("'{shown}' is not a {what}")),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn band_parses_with_suffixes() {
        assert_eq!(
            parse_band("433.92M:25k").unwrap(),
            Band { center_hz: 433.92e6, width_hz: 25e3 }
        );
        assert!(parse_band("433.92M").unwrap_err().contains("CENTER:WIDTH"));
        assert!(parse_band("433.92M:0").unwrap_err().contains("greater than zero"));
    }

    #[test]
    fn start_time_is_rfc3339() {
        assert!(parse_time("2026-05-01T08:00:00Z").is_ok());
        assert!(parse_time("yesterday").unwrap_err().contains("RFC 3339"));
    }

    #[test]
    fn plain_numbers_are_finite_and_of_ordinary_size() {
        assert_eq!(parse_number(" 0.75 "), Ok(0.75));
        assert_eq!(parse_db("-30.5"), Ok(-30.5));
        for bad in ["1e300", "inf", "nan", "x", "1001"] {
            assert!(parse_db(bad).is_err(), "{bad}");
        }
        assert!(parse_number("1e300").unwrap_err().contains("1000000000"));
        assert!(parse_seconds("1e300").unwrap_err().contains("three years"));
    }

    #[test]
    fn seconds_are_positive_and_finite() {
        assert_eq!(parse_seconds("2.5"), Ok(2.5));
        for bad in ["0", "-1", "nan", "inf", "soon"] {
            assert!(parse_seconds(bad).is_err(), "{bad}");
        }
    }
}
