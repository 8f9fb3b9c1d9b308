//! Sample sources: raw files, stdin, SigMF recordings, WAV files and the built-in demo scene.
//!
//! Every source yields `Complex32` samples at full scale (see [`self::format`]) and describes itself
//! with a [`SourceInfo`]. The [`reader`] module runs a source on its own thread and hands blocks
//! to the DSP over a bounded channel.

pub mod demo;
pub mod format;
pub mod plausible;
pub mod raw;
pub mod reader;
pub mod real;
pub mod sigmf;
pub mod tcp;
pub mod tuning;
pub mod vita49;
pub mod wav;

pub use crate::messages::sanitize;
pub use format::SampleFormat;

use crate::units;
use anyhow::{bail, Context, Result};
use num_complex::Complex32;
use time::OffsetDateTime;

/// What a source knows about itself; command-line options override file metadata.
#[derive(Clone, Debug)]
pub struct SourceInfo {
    /// For people: a path, `stdin` or `demo scene`. Control characters are removed before it is
    /// shown (see [`sanitize`]).
    pub label: String,
    pub format: Option<SampleFormat>,
    pub sample_rate_hz: f64,
    pub center_hz: f64,
    /// Time of the first sample, when the recording says (SigMF `core:datetime`) or `--start`.
    pub start_time: Option<OffsetDateTime>,
    /// Number of samples when known in advance (files), for progress and ETA.
    pub total_samples: Option<u64>,
    /// True when samples arrive in real time and are lost if not taken (stdin, paced demo).
    pub live: bool,
    /// The recording's capture segments in the order delivered (SigMF `captures`); empty for
    /// sources without segments. The first one starts at sample 0.
    pub segments: Vec<Segment>,
    /// The power (dBm) at the stream's reference point that full scale (0 dBFS) stands for,
    /// when the stream says (a VITA 49 context's reference level); `None` for other sources.
    pub reference_level_dbm: Option<f64>,
    /// Where the receiver was tuned over the stream, when it was retuned (SigMF captures at
    /// different `core:frequency`, `--hop-plan`): the run then stitches a panorama.
    pub tuning: Option<tuning::Tuning>,
}

impl SourceInfo {
    /// A file of synthetic samples: no format, time, length or segments (tests, benches).
    #[doc(hidden)]
    pub fn synthetic(rate_hz: f64, center_hz: f64) -> SourceInfo {
        SourceInfo {
            label: "synthetic".into(),
            format: None,
            sample_rate_hz: rate_hz,
            center_hz,
            start_time: None,
            total_samples: None,
            live: false,
            segments: Vec::new(),
            reference_level_dbm: None,
            tuning: None,
        }
    }

    /// A stream that arrives in real time (stdin, a socket), described by the request's flags.
    pub fn live(label: String, format: SampleFormat, rate: f64, req: &InputRequest) -> SourceInfo {
        SourceInfo {
            label,
            format: Some(format),
            sample_rate_hz: rate,
            center_hz: req.center_hz.unwrap_or(0.0),
            start_time: req.start_time,
            total_samples: None,
            live: true,
            segments: Vec::new(),
            reference_level_dbm: None,
            tuning: None,
        }
    }
}

/// One capture segment of a recording, as delivered.
#[derive(Clone, Debug, PartialEq)]
pub struct Segment {
    /// Index of its first sample in the delivered sample stream.
    pub sample_start: u64,
    /// Its centre frequency (SigMF `core:frequency`, or `--center`).
    pub center_hz: f64,
    /// Time of its first sample (its `core:datetime`, else carried from a neighbouring
    /// segment's), when known.
    pub start_time: Option<OffsetDateTime>,
}

/// Counts of input problems that do not stop the run but must be reported.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct InputIssues {
    /// Samples with a NaN or infinite component: a gap in the measurement.
    pub non_finite: u64,
    /// Bytes at the end that did not make a whole sample, dropped.
    pub trailing_bytes: u64,
    /// Float samples with a component beyond ±1e6 (full scale is ±1), kept but a sign of a
    /// wrong `--format` (see [`format::BEYOND_SCALE`]).
    pub beyond_scale: u64,
}

impl InputIssues {
    /// What the user should hear about these problems, one note each.
    pub fn notes(&self) -> Vec<String> {
        let mut notes = Vec::new();
        if self.non_finite > 0 {
            notes.push(format!(
                "{} samples hold NaN or infinity; they were left out of the measurement as a gap (time stays exact)",
                self.non_finite
            ));
        }
        if self.beyond_scale > 0 {
            notes.push(format!(
                "{} float samples lie beyond ±1e6 while full scale is ±1: the input is probably not in the format it was read as; check --format",
                self.beyond_scale
            ));
        }
        if self.trailing_bytes > 0 {
            notes.push(format!(
                "dropped {} bytes at the end that do not make a whole sample (wrong --format, or a cut file?)",
                self.trailing_bytes
            ));
        }
        notes
    }
}

/// A stream of samples.
pub trait SampleSource: Send {
    fn info(&self) -> &SourceInfo;

    /// Fills the start of `out` with up to `out.len()` samples; returns how many. Zero means end
    /// of input. Filling a caller's buffer lets the reader reuse its blocks.
    fn read(&mut self, out: &mut [Complex32]) -> Result<usize>;

    /// True when every sample of the last read is known to be finite (the source screened them
    /// as it decoded), so the run need not look at them again; false when not known.
    fn last_read_finite(&self) -> bool {
        false
    }

    /// Problems seen so far.
    fn issues(&self) -> InputIssues {
        InputIssues::default()
    }

    /// Starts again from the first sample, for `watch --loop`. Sources that cannot (stdin)
    /// return an error.
    fn rewind(&mut self) -> Result<()> {
        bail!("this input cannot be replayed")
    }

    /// Samples known lost just before those of the last `read` (a network input's outage);
    /// taking them resets the count. The reader moves the time line on by them.
    fn take_lost(&mut self) -> u64 {
        0
    }

    /// What the samples of [`take_lost`](Self::take_lost) were lost to.
    fn lost_cause(&self) -> LinkLoss {
        LinkLoss::Disconnected
    }

    /// The reader's stop flag, for sources whose `read` may wait long (a network input waiting
    /// to reconnect): they return 0 soon after it is set.
    fn watch_stop(&mut self, _stop: std::sync::Arc<std::sync::atomic::AtomicBool>) {}

    /// `Some` for a source that reports its own retunes while it runs (a VITA 49 stream read
    /// with `--hop-plan`, see [`tuning`]): what it says about its steps.
    fn retunes(&self) -> Option<tuning::StreamRetunes> {
        None
    }

    /// True while the source delivers samples it read ahead before the run began (a VITA 49
    /// stream whose sweep was learnt): they arrived at the stream's rate while it was read
    /// ahead, so the reader neither drops them when it is behind nor times them.
    fn replaying(&self) -> bool {
        false
    }

    /// The retunes found since the last call, each with the index of the first sample it applies
    /// to. A source hands a retune out no later than with the `read` that delivers that sample.
    fn take_retunes(&mut self) -> Vec<tuning::Step> {
        Vec::new()
    }
}

/// How a network input lost samples.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum LinkLoss {
    /// The link was down (TCP).
    #[default]
    Disconnected,
    /// Packets never arrived (VITA 49 over UDP): counted from packet counts and time stamps.
    PacketLost,
}

/// What the user asked for on the command line.
#[derive(Clone, Debug, Default)]
pub struct InputRequest {
    /// `None` for the demo scene, `-` for stdin, `tcp://HOST:PORT` or `tcp-listen://ADDR:PORT`
    /// for IQ over TCP, otherwise a path.
    pub path: Option<String>,
    pub format: Option<SampleFormat>,
    pub sample_rate_hz: Option<f64>,
    pub center_hz: Option<f64>,
    pub start_time: Option<OffsetDateTime>,
    /// For the demo scene: deliver samples at the sample rate (as a receiver would).
    pub realtime: bool,
    /// Of a SigMF recording, read only this capture segment (index in `captures`, from 0).
    pub segment: Option<usize>,
    /// Of a multi-channel SigMF recording, read this channel (from 0).
    pub input_channel: Option<u64>,
    /// `tcp-listen://` on an address beyond loopback was asked for explicitly.
    pub listen_public: bool,
    /// Of a VITA 49 input, the stream to read (`None`: the first seen).
    pub stream_id: Option<u32>,
    /// A raw stream's tuning: a file of `CENTER DWELL` lines (see [`tuning::parse_hop_plan`]).
    pub hop_plan: Option<String>,
    /// Seconds skipped after every retune of a retuned input.
    pub settle_s: Option<f64>,
    /// Share of each step's span kept in a panorama (default [`tuning::DEFAULT_USABLE`]).
    pub usable: Option<f64>,
    /// `--learn`: of a VITA 49 stream without `--hop-plan`, how long of it is read ahead for a
    /// first retune (zero: never learn; `None`: [`vita49::DEFAULT_LEARN`]).
    pub learn_s: Option<f64>,
    /// Set by a stop signal: a source that waits while opening gives up
    /// ([`StoppedWhileOpening`]).
    pub stop: Option<std::sync::Arc<std::sync::atomic::AtomicBool>>,
}

/// A stop signal came while the input was still opening (waiting for a network stream to say
/// what it is): nothing was read, and the command ends as an orderly stop.
#[derive(Debug)]
pub struct StoppedWhileOpening(pub String);

impl std::fmt::Display for StoppedWhileOpening {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for StoppedWhileOpening {}

impl InputRequest {
    /// The files the run reads (none for the demo, stdin and network input): the path and, for
    /// a SigMF name, the recording's metadata and data, so outputs never write over them.
    pub fn files(&self) -> Vec<std::path::PathBuf> {
        match self.path.as_deref() {
            Some(p)
                if p != "-"
                    && !p.starts_with("tcp://")
                    && !p.starts_with("tcp-listen://")
                    && !p.starts_with("vita49://") =>
            {
                let (meta, data) = sigmf::paths(p);
                vec![p.into(), meta.into(), data.into()]
            }
            _ => Vec::new(),
        }
    }
}

/// Opens the source the request names. Messages about guesses go to `notes` (printed on stderr
/// by the caller) so library code never prints.
///
/// Every source passes [`check_info`] here, so a rate or centre from a flag, a SigMF file or a WAV
/// header is checked once, in one place, before anything is sized from it.
pub fn open(req: &InputRequest, notes: &mut Vec<String>) -> Result<Box<dyn SampleSource>> {
    if let Some(rate) = req.sample_rate_hz {
        // Before a source sizes anything from it (the demo scene builds tables per rate).
        check_rate_of("--rate", rate, "give the rate in samples per second, e.g. --rate 2.4M")?;
    }
    if !req.path.as_deref().is_some_and(is_sigmf_name) {
        refuse_sigmf_choices(req)?;
    }
    if req.learn_s.is_some() && !req.path.as_deref().is_some_and(|p| p.starts_with("vita49://")) {
        bail!(
            "--learn applies to vita49://ADDR:PORT input only (a VITA 49 stream whose context says where it is tuned); drop it, or give --hop-plan FILE for a retuned raw stream"
        );
    }
    let src = tuning::apply(open_unchecked(req, notes)?, req)?;
    check_info(src.info(), notes)?;
    Ok(src)
}

/// Checks what a source says about itself: a sample rate in
/// [`MIN_RATE_HZ`](crate::units::MIN_RATE_HZ) ..= [`MAX_RATE_HZ`](crate::units::MAX_RATE_HZ)
/// (a note below [`LOW_RATE_HZ`](crate::units::LOW_RATE_HZ)), a centre frequency within
/// ±[`MAX_HZ`](crate::units::MAX_HZ). The error names the input and the option that overrides it.
pub fn check_info(info: &SourceInfo, notes: &mut Vec<String>) -> Result<()> {
    let label = sanitize(&info.label);
    check_rate_of(
        &format!("'{label}'"),
        info.sample_rate_hz,
        "give --rate to override the input's own (e.g. --rate 2.4M)",
    )?;
    if let Some(note) = units::low_rate_note(info.sample_rate_hz) {
        notes.push(note);
    }
    let c = info.center_hz;
    if !(c.is_finite() && c.abs() <= units::MAX_HZ) {
        bail!(
            "'{label}': a centre frequency of {} is out of range (at most ±{}); give --center to override it",
            units::format_hz(c),
            units::format_hz(units::MAX_HZ)
        );
    }
    Ok(())
}

fn check_rate_of(what: &str, rate: f64, fix: &str) -> Result<()> {
    units::check_rate(rate).map_err(|e| anyhow::anyhow!("{what}: {e}; {fix}"))
}

fn open_unchecked(req: &InputRequest, notes: &mut Vec<String>) -> Result<Box<dyn SampleSource>> {
    let src: Box<dyn SampleSource> = match req.path.as_deref() {
        None => Box::new(
            demo::DemoSource::new(
                req.sample_rate_hz.unwrap_or(demo::DEFAULT_RATE_HZ),
                req.center_hz.unwrap_or(demo::DEFAULT_CENTER_HZ),
                req.realtime,
            )
            .with_start_time(req.start_time),
        ),
        Some("-") => {
            let format = req.format.context(
                "reading stdin needs --format (a SigMF datatype such as cu8, ci8, ci16_le or cf32_le)",
            )?;
            let rate = req
                .sample_rate_hz
                .context("reading stdin needs --rate (the sample rate, e.g. --rate 2.4M)")?;
            let info = SourceInfo::live("stdin".into(), format, rate, req);
            Box::new(raw::RawSource::new(Box::new(std::io::stdin()), format, info))
        }
        Some(path) => match (tcp::parse_endpoint(path), vita49::parse_endpoint(path)) {
            (Some(ep), _) => Box::new(tcp::open(ep?, req, notes)?),
            (None, Some(addr)) => Box::new(vita49::open(addr?, req, notes)?),
            (None, None) => open_path(path, req, notes)?,
        },
    };
    if src.info().format.is_some_and(|f| f.is_real()) {
        return Ok(Box::new(real::HalfRate::new(src)));
    }
    Ok(src)
}

fn open_path(
    path: &str,
    req: &InputRequest,
    notes: &mut Vec<String>,
) -> Result<Box<dyn SampleSource>> {
    if std::fs::metadata(path).is_ok_and(|m| m.is_dir()) {
        bail!("'{}' is a directory; give a file of samples (or - for stdin)", sanitize(path));
    }
    let lower = path.to_ascii_lowercase();
    if is_sigmf_name(path) {
        return sigmf::open(path, req);
    }
    if [".sigmf.gz", ".sigmf.xz", ".sigmf.zip", ".sigmf.tar.gz"].iter().any(|e| lower.ends_with(e))
    {
        bail!(
            "'{}' is a compressed SigMF archive; bandwarden reads uncompressed .sigmf archives: decompress it first (e.g. gunzip, unxz, unzip) and open the .sigmf or .sigmf-meta",
            sanitize(path)
        );
    }
    if lower.ends_with(".wav") {
        return wav::open(path, req, notes);
    }
    let format = match req.format {
        Some(f) => f,
        None => match SampleFormat::guess_from_extension(path) {
            Some(f) => {
                notes.push(format!("guessed --format {f} from the file name '{}'", sanitize(path)));
                f
            }
            None => bail!(
                "cannot tell the sample format of '{}': give --format (a SigMF datatype such as cu8, ci8, ci16_le or cf32_le)",
                sanitize(path)
            ),
        },
    };
    let rate = req.sample_rate_hz.with_context(|| {
        format!(
            "'{}' is a raw file with no sample rate: give --rate (e.g. --rate 2.4M)",
            sanitize(path)
        )
    })?;
    raw::open_file(path, format, rate, req)
}

fn is_sigmf_name(path: &str) -> bool {
    let lower = path.to_ascii_lowercase();
    [".sigmf-meta", ".sigmf-data", ".sigmf"].iter().any(|e| lower.ends_with(e))
}

/// `--segment` and `--input-channel` mean something for SigMF recordings only.
fn refuse_sigmf_choices(req: &InputRequest) -> Result<()> {
    let what = match (req.segment, req.input_channel) {
        (Some(_), _) => "--segment",
        (None, Some(_)) => "--input-channel",
        (None, None) => return Ok(()),
    };
    let input = match req.path.as_deref() {
        None => "the demo scene".to_string(),
        Some("-") => "standard input".to_string(),
        Some(p) => format!("'{}'", sanitize(p)),
    };
    bail!("{what} applies to SigMF recordings only, and {input} is not one: leave it out")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sanitize_removes_escapes() {
        assert_eq!(sanitize("ok\x1b[2Jbad\x07"), "ok?[2Jbad?");
        assert_eq!(sanitize("Höhenweg ✓"), "Höhenweg ✓");
    }
}
