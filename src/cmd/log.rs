//! `bandwarden log`: record how busy each channel of a plan is, unattended, for hours or weeks.
//!
//! The reader thread feeds sample blocks; this thread turns them into measurement samples (one
//! averaged STFT row each, see [`crate::measure::occupancy`]) and writes the records of
//! [`crate::output::log`] as they become final. A run ends at the end of the input, after
//! `--seconds`, or on SIGINT/SIGTERM; in every case the open interval and any open emission are
//! written with `"partial": true`, then a `stop` record, and the process exits 0. A second
//! SIGINT/SIGTERM during that short wind-down exits at once (code 130/143) for users who insist.
//!
//! Live input (stdin) is read in small blocks so records follow the signal closely; if processing
//! falls behind, whole blocks are dropped, counted and logged (`dropped` records), never hidden.
//! `--no-drop` makes the reader wait instead (the writer upstream then blocks).

use crate::app::note;
use crate::cli::{DspArgs, InputArgs};
use crate::dsp::average::SpectrumSum;
use crate::dsp::stft::welch_dof;
use crate::dsp::{Engine, EngineConfig, Spectrum, Window};
use crate::measure::occupancy::{
    self, frames_per_sample, noise_false_occupancy, ChannelDef, Event, Occupancy, Timing,
    DEFAULT_HANG_S, DEFAULT_INTERVAL_S, FLOOR_MEMORY_S, FLOOR_SMOOTHING_S, OBW_PERCENT,
};
use crate::output::log::{
    ChannelRecord, DroppedRecord, EmissionRecord, IntervalRecord, LogFormat, LogWriter, Record,
    StartRecord, StopRecord,
};
use crate::output::progress::Progress;
use crate::pipeline::Input;
use crate::plan::{ChannelArgs, Plan};
use crate::source::reader::{Block, ReaderOptions};
use crate::source::{self, SourceInfo};
use crate::units::{db, parse_duration};
use anyhow::{bail, Context, Result};
use crossbeam_channel::RecvTimeoutError;
use std::io::Write;
use std::process::ExitCode;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Duration;
use time::macros::format_description;
use time::{OffsetDateTime, UtcOffset};

#[derive(clap::Args, Debug)]
pub struct LogArgs {
    /// Input: a file (raw, .sigmf-meta/.sigmf-data, .wav) or - for stdin (live).
    #[arg(value_name = "INPUT")]
    pub input: String,
    #[command(flatten)]
    pub source: InputArgs,
    #[command(flatten)]
    pub dsp: DspArgs,
    /// Length of each occupancy record (interval), e.g. 10s, 15m, 1h.
    #[arg(long, value_name = "DURATION", default_value = "60s", value_parser = parse_duration)]
    pub interval: Duration,
    /// An emission ends after this long below threshold (rounded up to whole samples).
    #[arg(long, value_name = "DURATION", default_value = "25ms", value_parser = parse_duration)]
    pub hang: Duration,
    /// Write the log here (default stdout, -); a file is replaced unless --append.
    #[arg(short = 'o', long = "out", value_name = "FILE", default_value = "-")]
    pub out: String,
    /// Add to the end of --out instead of replacing it.
    #[arg(long)]
    pub append: bool,
    /// CSV with a header row instead of JSON Lines.
    #[arg(long)]
    pub csv: bool,
    /// Live input: make the source wait when processing falls behind, instead of dropping (and
    /// logging) blocks.
    #[arg(long)]
    pub no_drop: bool,
    /// Stop after this many seconds of input.
    #[arg(long, value_name = "SECONDS")]
    pub seconds: Option<f64>,
    #[command(flatten)]
    pub channels: ChannelArgs,
}

/// Why a run ended, as written in the `stop` record.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum StopReason {
    EndOfInput,
    Limit,
    Interrupted,
    Terminated,
    InputError,
}

impl StopReason {
    pub fn as_str(self) -> &'static str {
        match self {
            StopReason::EndOfInput => "end_of_input",
            StopReason::Limit => "limit",
            StopReason::Interrupted => "interrupted",
            StopReason::Terminated => "terminated",
            StopReason::InputError => "input_error",
        }
    }
}

pub fn run(args: LogArgs) -> Result<ExitCode> {
    let plan = args.channels.plan()?;
    if plan.is_empty() {
        bail!("log needs channels: give --plan FILE.toml or --channel NAME=CENTER:WIDTH");
    }
    if args.interval.is_zero() {
        bail!("--interval must be longer than zero (e.g. 60s)");
    }
    if let Some(s) = args.seconds {
        if !(s > 0.0 && s.is_finite()) {
            bail!("--seconds {s} must be a positive number");
        }
    }
    let base = args.dsp.engine(None).map_err(anyhow::Error::msg)?;
    let mut notes = Vec::new();
    let src = source::open(&args.source.request(Some(args.input.clone())), &mut notes)?;
    notes.iter().for_each(|n| note(n));
    let info = src.info().clone();
    let mut setup = Setup::new(&info, &base, &plan, &args.channels, args.interval, args.hang)?;
    setup.threads = args.dsp.threads();
    setup.describe(&plan);

    let format = if args.csv { LogFormat::Csv } else { LogFormat::JsonLines };
    let (out, header) = open_output(&args.out, args.append)?;
    let writer = LogWriter::new(out, format, header)
        .with_context(|| format!("cannot write the log to '{}'", args.out))?;
    let (time_source, start_time) = match (args.source.start, info.start_time) {
        (Some(t), _) => ("option", Some(t)),
        (None, Some(t)) => ("sigmf", Some(t)),
        (None, None) if info.live => ("wall_clock", None),
        (None, None) => {
            note(
                "the time of the first sample is unknown (give --start): start/end fields are null",
            );
            ("none", None)
        }
    };
    let mut session = Session::new(&setup, &plan, &info, writer);
    session.set_start(start_time, time_source);

    let flags = StopFlags::register()?;
    let max_samples = args.seconds.map(|s| (s * info.sample_rate_hz).round() as u64);
    let live = info.live;
    let opts = ReaderOptions {
        block_len: if live {
            (info.sample_rate_hz / 100.0).clamp(1024.0, 65536.0) as usize
        } else {
            65536
        },
        drop_when_full: live && !args.no_drop,
        max_samples,
        ..Default::default()
    };
    let input = Input::start(src, opts);
    let total = match (max_samples, info.total_samples) {
        (Some(m), Some(t)) => Some(m.min(t)),
        (_, t) => t,
    };
    let mut progress = Progress::for_file(total, info.sample_rate_hz);
    let reason = pump(&input, &mut session, &flags, &mut progress, live)?;
    progress.clear();

    match reason {
        StopReason::Interrupted | StopReason::Terminated => {
            input.request_stop();
            session.finish(reason)?;
            // A file reader stops at its next block; stdin may sit in a read that no flag
            // interrupts, so it is left behind (the process exits now).
            if !live {
                let _ = input.finish();
            }
            note(&format!("stopped by {}; the log is complete", signal_name(reason)));
        }
        _ => {
            let read = input.stats.samples.load(Ordering::SeqCst);
            match input.finish() {
                Ok(issues) => {
                    session.lost_tail(read)?;
                    let reason = if max_samples.is_some_and(|m| read >= m) {
                        StopReason::Limit
                    } else {
                        StopReason::EndOfInput
                    };
                    session.finish(reason)?;
                    crate::app::report_input_issues(&issues);
                    if read == 0 {
                        bail!(
                            "the input '{}' holds no samples; check the file, or that the pipe delivers data",
                            info.label
                        );
                    }
                }
                Err(e) => {
                    session.finish(StopReason::InputError)?;
                    return Err(e);
                }
            }
        }
    }
    if session.dropped_total() > 0 {
        note(&format!(
            "{} input samples were dropped because processing fell behind (see the dropped records); a smaller --fft or a lower rate helps",
            session.dropped_total()
        ));
    }
    Ok(ExitCode::SUCCESS)
}

/// Moves blocks from the reader to the session until the input ends or a stop is asked for.
fn pump<W: Write>(
    input: &Input,
    session: &mut Session<W>,
    flags: &StopFlags,
    progress: &mut Progress,
    live: bool,
) -> Result<StopReason> {
    loop {
        if let Some(reason) = flags.reason() {
            return Ok(reason);
        }
        match input.blocks.recv_timeout(Duration::from_millis(100)) {
            Ok(block) => {
                if live && !session.has_start_time() {
                    // Wall clock for live input: the arrival of the first block, less its length.
                    let len = block.samples.len() as f64 / session.clock.rate;
                    session.set_start(
                        Some(OffsetDateTime::now_utc() - time::Duration::seconds_f64(len)),
                        "wall_clock",
                    );
                }
                session.feed(&block)?;
                progress.update(session.next_sample);
            }
            Err(RecvTimeoutError::Timeout) => {}
            Err(RecvTimeoutError::Disconnected) => return Ok(StopReason::EndOfInput),
        }
    }
}

/// Everything derived from the options and the input before the first sample is read.
pub struct Setup {
    pub engine: EngineConfig,
    pub timing: Timing,
    pub channels: Vec<ChannelDef>,
    pub sample_rate_hz: f64,
    pub center_hz: f64,
    pub interval_s: f64,
    pub hang_s: f64,
    pub default_threshold_db: f64,
    pub rbw_hz: f64,
    pub row_dof: f64,
    /// Transform threads (one per core unless `--threads` says otherwise).
    pub threads: usize,
}

impl Setup {
    /// Checks the plan against the captured span and works out dwell, hang and interval.
    pub fn new(
        info: &SourceInfo,
        base: &EngineConfig,
        plan: &Plan,
        args: &ChannelArgs,
        interval: Duration,
        hang: Duration,
    ) -> Result<Setup> {
        let rate = info.sample_rate_hz;
        let n = base.fft_size;
        let bin = rate / n as f64;
        let span_lo = info.center_hz - (n / 2) as f64 * bin - bin / 2.0;
        plan.check_span(span_lo, span_lo + rate)?;
        let hop = base.hop();
        let k = frames_per_sample(rate, hop, args.dwell.map(|d| d.as_secs_f64()))
            .map_err(anyhow::Error::msg)?;
        let engine = EngineConfig { frames_per_output: Some(k), ..base.clone() };
        let interval_s = interval.as_secs_f64();
        let timing = Timing::new(rate, n, hop, k, interval_s, hang.as_secs_f64())
            .map_err(anyhow::Error::msg)?;
        let window = Window::new(base.window, n);
        let channels = plan
            .channels
            .iter()
            .map(|c| ChannelDef {
                low_hz: c.low_hz(),
                high_hz: c.high_hz(),
                threshold_db: c.threshold_db.unwrap_or(args.threshold_db),
            })
            .collect();
        Ok(Setup {
            hang_s: timing.hang_samples as f64 * timing.stride as f64 / rate,
            engine,
            timing,
            channels,
            sample_rate_hz: rate,
            center_hz: info.center_hz,
            interval_s,
            default_threshold_db: args.threshold_db,
            rbw_hz: window.enbw_bins() * bin,
            row_dof: welch_dof(&window, hop, k),
            threads: std::thread::available_parallelism().map_or(1, |n| n.get()),
        })
    }

    /// The engine for these settings on `threads` threads: frames are independent, and batching
    /// them delays a row by a few frames at most.
    pub fn new_engine(&self) -> Engine {
        let mut e = Engine::new(self.engine.clone(), self.sample_rate_hz, self.center_hz);
        e.set_threads(self.threads);
        e
    }

    pub fn dwell_s(&self) -> f64 {
        self.timing.stride as f64 / self.sample_rate_hz
    }

    /// Tells the user, once, what one measurement sample is and warns about thresholds that
    /// noise alone would cross.
    fn describe(&self, plan: &Plan) {
        let k = self.engine.frames_per_output.unwrap_or(1);
        note(&format!(
            "{} channel(s); one measurement sample = {:.3} ms ({k} FFT frames of {}, hop {}); hang {:.1} ms; interval {} s",
            plan.channels.len(),
            self.dwell_s() * 1e3,
            self.engine.fft_size,
            self.engine.hop(),
            self.hang_s * 1e3,
            self.interval_s
        ));
        if self.dwell_s() > occupancy::DEFAULT_MAX_DWELL_S * 1.5 {
            note(&format!(
                "one FFT hop is {:.1} ms, longer than the usual 10 ms sample; a smaller --fft gives finer time resolution",
                self.engine.hop() as f64 / self.sample_rate_hz * 1e3
            ));
        }
        let bin = self.sample_rate_hz / self.engine.fft_size as f64;
        let enbw = self.rbw_hz / bin;
        for (c, def) in plan.channels.iter().zip(&self.channels) {
            let p =
                noise_false_occupancy(def.threshold_db, def.width_hz(), bin, enbw, self.row_dof);
            if p > 0.01 {
                note(&format!(
                    "channel '{}': at {} dB, noise alone would read as occupied in about {:.1} % of samples; raise the threshold or the dwell",
                    c.name,
                    def.threshold_db,
                    p * 100.0
                ));
            }
        }
    }
}

/// Seconds and wall-clock stamps from sample indices.
#[derive(Clone, Debug)]
pub struct Clock {
    pub rate: f64,
    pub start: Option<OffsetDateTime>,
}

impl Clock {
    pub fn seconds(&self, sample: u64) -> f64 {
        sample as f64 / self.rate
    }

    /// RFC 3339 UTC with milliseconds, if the time of the first sample is known.
    pub fn stamp(&self, sample: u64) -> Option<String> {
        let ms = (self.seconds(sample) * 1e3).round() as i64;
        let t = self.start? + time::Duration::milliseconds(ms);
        rfc3339_ms(t)
    }
}

/// `2026-05-01T08:00:00.250Z`.
pub fn rfc3339_ms(t: OffsetDateTime) -> Option<String> {
    let fmt =
        format_description!("[year]-[month]-[day]T[hour]:[minute]:[second].[subsecond digits:3]Z");
    t.to_offset(UtcOffset::UTC).format(&fmt).ok()
}

struct ChannelLabel {
    name: String,
    center_hz: f64,
    width_hz: f64,
}

/// One logging run: DSP, occupancy tracking and the writer, fed block by block. Kept apart from
/// threads and signals so tests can drive it with any blocks, gaps included.
pub struct Session<W: Write> {
    engine: Engine,
    occupancy: Occupancy,
    writer: LogWriter<W>,
    pub clock: Clock,
    labels: Vec<ChannelLabel>,
    start: Option<StartRecord>,
    channel_records: Vec<ChannelRecord>,
    started: bool,
    /// One past the last input sample handled (delivered or known dropped).
    pub next_sample: u64,
    dropped_total: u64,
    events: Vec<Event>,
}

impl<W: Write> Session<W> {
    pub fn new(setup: &Setup, plan: &Plan, info: &SourceInfo, writer: LogWriter<W>) -> Session<W> {
        let labels: Vec<ChannelLabel> = plan
            .channels
            .iter()
            .map(|c| ChannelLabel {
                name: c.name.clone(),
                center_hz: c.center_hz,
                width_hz: c.width_hz,
            })
            .collect();
        let channel_records = labels
            .iter()
            .zip(&setup.channels)
            .map(|(l, d)| ChannelRecord {
                channel: l.name.clone(),
                center_hz: l.center_hz,
                width_hz: l.width_hz,
                threshold_db: d.threshold_db,
            })
            .collect();
        let start = StartRecord {
            version: env!("CARGO_PKG_VERSION").to_string(),
            source: info.label.clone(),
            sample_rate_hz: setup.sample_rate_hz,
            center_hz: setup.center_hz,
            fft_size: setup.engine.fft_size,
            window: setup.engine.window.to_string(),
            overlap: setup.engine.overlap,
            rbw_hz: round_to(setup.rbw_hz, 3),
            dwell_s: setup.dwell_s(),
            frames_per_sample: setup.engine.frames_per_output.unwrap_or(1),
            interval_s: setup.interval_s,
            hang_s: setup.hang_s,
            threshold_db: setup.default_threshold_db,
            obw_percent: OBW_PERCENT,
            floor_memory_s: FLOOR_MEMORY_S,
            floor_smoothing_s: FLOOR_SMOOTHING_S,
            t_start_s: 0.0,
            start: None,
            time_source: "none".into(),
        };
        Session {
            engine: setup.new_engine(),
            occupancy: Occupancy::new(setup.timing.clone(), setup.channels.clone()),
            writer,
            clock: Clock { rate: setup.sample_rate_hz, start: None },
            labels,
            start: Some(start),
            channel_records,
            started: false,
            next_sample: 0,
            dropped_total: 0,
            events: Vec::new(),
        }
    }

    /// Sets the time of the first sample (before the first block).
    pub fn set_start(&mut self, start: Option<OffsetDateTime>, time_source: &str) {
        self.clock.start = start;
        if let Some(rec) = self.start.as_mut() {
            rec.start = start.and_then(rfc3339_ms);
            rec.time_source = if start.is_some() { time_source } else { "none" }.to_string();
        }
    }

    pub fn has_start_time(&self) -> bool {
        self.clock.start.is_some()
    }

    pub fn dropped_total(&self) -> u64 {
        self.dropped_total
    }

    /// Processes one block; a jump in `block.start` is a gap of dropped samples.
    pub fn feed(&mut self, block: &Block) -> std::io::Result<()> {
        self.begin()?;
        if block.start > self.next_sample {
            self.gap(self.next_sample, block.start)?;
        }
        let Session { engine, occupancy, events, .. } = self;
        engine.push(block.start, &block.samples, &mut |row: Spectrum| occupancy.push(&row, events));
        self.next_sample = block.start + block.samples.len() as u64;
        self.flush_events()
    }

    /// At the end of input: samples read but never delivered (dropped at the very end).
    pub fn lost_tail(&mut self, samples_read: u64) -> std::io::Result<()> {
        self.begin()?;
        if samples_read > self.next_sample {
            self.gap(self.next_sample, samples_read)?;
            self.next_sample = samples_read;
        }
        Ok(())
    }

    /// Writes the open interval and emissions (partial) and the `stop` record.
    pub fn finish(&mut self, reason: StopReason) -> std::io::Result<()> {
        self.begin()?;
        self.drain_engine();
        self.occupancy.finish(self.next_sample, &mut self.events);
        self.flush_events()?;
        let rec = Record::Stop(StopRecord {
            t_end_s: self.clock.seconds(self.next_sample),
            end: self.clock.stamp(self.next_sample),
            reason: reason.as_str().into(),
            iq_samples: self.next_sample,
            dropped_samples: self.dropped_total,
        });
        self.writer.write(&rec)
    }

    pub fn into_writer(self) -> W {
        self.writer.into_inner()
    }

    fn begin(&mut self) -> std::io::Result<()> {
        if self.started {
            return Ok(());
        }
        self.started = true;
        if let Some(start) = self.start.take() {
            self.writer.write(&Record::Start(start))?;
        }
        for c in std::mem::take(&mut self.channel_records) {
            self.writer.write(&Record::Channel(c))?;
        }
        Ok(())
    }

    /// Hands every complete row still inside the engine to the tracker and discards the partial
    /// one (it would be a shorter sample, or straddle a gap).
    fn drain_engine(&mut self) {
        let k = self.engine.config().frames_per_output;
        let Session { engine, occupancy, events, .. } = self;
        engine.finish(&mut |row: Spectrum| {
            if Some(row.frames) == k {
                occupancy.push(&row, events);
            }
        });
    }

    fn gap(&mut self, from: u64, to: u64) -> std::io::Result<()> {
        self.drain_engine();
        self.occupancy.gap(from, to, &mut self.events);
        self.flush_events()?;
        self.dropped_total += to - from;
        self.writer.write(&Record::Dropped(DroppedRecord {
            t_start_s: self.clock.seconds(from),
            t_end_s: self.clock.seconds(to),
            start: self.clock.stamp(from),
            end: self.clock.stamp(to),
            dropped_samples: to - from,
        }))
    }

    fn flush_events(&mut self) -> std::io::Result<()> {
        for event in std::mem::take(&mut self.events) {
            let rec = self.record(&event);
            self.writer.write(&rec)?;
        }
        Ok(())
    }

    fn record(&self, event: &Event) -> Record {
        let c = &self.clock;
        match event {
            Event::Interval(i) => {
                let l = &self.labels[i.channel];
                Record::Interval(IntervalRecord {
                    channel: l.name.clone(),
                    center_hz: l.center_hz,
                    width_hz: l.width_hz,
                    t_start_s: c.seconds(i.start_sample),
                    t_end_s: c.seconds(i.end_sample),
                    start: c.stamp(i.start_sample),
                    end: c.stamp(i.end_sample),
                    occupancy_pct: round_to(i.occupancy_pct(), 3),
                    mean_dbfs: round_to(db(i.mean_power), 2),
                    peak_dbfs: round_to(db(i.peak_power), 2),
                    noise_floor_dbfs_per_hz: round_to(db(i.noise_density), 2),
                    samples: i.samples,
                    occupied_samples: i.occupied,
                    dropped_samples: i.dropped_samples,
                    partial: i.partial,
                })
            }
            Event::Emission(e) => {
                let l = &self.labels[e.channel];
                Record::Emission(EmissionRecord {
                    channel: l.name.clone(),
                    center_hz: l.center_hz,
                    t_start_s: c.seconds(e.start_sample),
                    t_end_s: c.seconds(e.end_sample),
                    start: c.stamp(e.start_sample),
                    end: c.stamp(e.end_sample),
                    duration_s: (e.end_sample - e.start_sample) as f64 / c.rate,
                    peak_dbfs: round_to(db(e.peak_power), 2),
                    mean_dbfs: round_to(db(e.mean_power), 2),
                    obw_hz: e.obw_hz.map(|w| round_to(w, 1)),
                    samples: e.samples,
                    partial: e.partial,
                })
            }
        }
    }
}

fn round_to(x: f64, decimals: i32) -> f64 {
    let f = 10f64.powi(decimals);
    (x * f).round() / f
}

/// Flags set by SIGINT and SIGTERM.
struct StopFlags {
    interrupt: Arc<AtomicBool>,
    terminate: Arc<AtomicBool>,
}

impl StopFlags {
    fn register() -> Result<StopFlags> {
        use signal_hook::consts::{SIGINT, SIGTERM};
        let flags = StopFlags {
            interrupt: Arc::new(AtomicBool::new(false)),
            terminate: Arc::new(AtomicBool::new(false)),
        };
        for (sig, flag) in [(SIGINT, &flags.interrupt), (SIGTERM, &flags.terminate)] {
            // Registered first, so it sees the flag as it was before this signal: only a second
            // signal ends the process at once.
            signal_hook::flag::register_conditional_shutdown(sig, 128 + sig, Arc::clone(flag))
                .context("cannot install the signal handlers")?;
            signal_hook::flag::register(sig, Arc::clone(flag))
                .context("cannot install the signal handlers")?;
        }
        Ok(flags)
    }

    fn reason(&self) -> Option<StopReason> {
        if self.terminate.load(Ordering::SeqCst) {
            Some(StopReason::Terminated)
        } else if self.interrupt.load(Ordering::SeqCst) {
            Some(StopReason::Interrupted)
        } else {
            None
        }
    }
}

fn signal_name(reason: StopReason) -> &'static str {
    if reason == StopReason::Terminated {
        "SIGTERM"
    } else {
        "SIGINT"
    }
}

/// The log's destination, and whether a CSV header is still needed there.
fn open_output(path: &str, append: bool) -> Result<(Box<dyn Write>, bool)> {
    if path == "-" {
        return Ok((Box::new(std::io::stdout()), true));
    }
    let file = std::fs::OpenOptions::new()
        .create(true)
        .write(true)
        .append(append)
        .truncate(!append)
        .open(path)
        .with_context(|| {
            format!("cannot open '{path}' for the log; check the directory exists and is writable")
        })?;
    let empty = file.metadata().map(|m| m.len() == 0).unwrap_or(true);
    Ok((Box::new(file), empty))
}

/// For `measure --channel/--plan`: the whole-input average (as without channels) plus each
/// channel's occupancy over the whole input.
pub struct WholeInput {
    pub spectrum: Option<Spectrum>,
    pub samples: u64,
    /// Per plan channel: (occupancy %, measurement samples).
    pub occupancy: Vec<(f64, u64)>,
    pub dwell_s: f64,
}

/// Runs the DSP over the whole input with short rows, tracking occupancy per channel.
pub fn measure_channels(input: &Input, setup: &Setup) -> WholeInput {
    let mut engine = setup.new_engine();
    let timing = Timing { interval: u64::MAX, ..setup.timing.clone() };
    let mut occ = Occupancy::new(timing, setup.channels.clone());
    let mut sum = SpectrumSum::new();
    let mut events = Vec::new();
    let mut samples = 0u64;
    let mut end = 0u64;
    for block in input.blocks.iter() {
        samples += block.samples.len() as u64;
        end = block.start + block.samples.len() as u64;
        engine.push(block.start, &block.samples, &mut |row| {
            occ.push(&row, &mut events);
            sum.add(&row);
        });
        events.clear();
    }
    let k = setup.engine.frames_per_output;
    engine.finish(&mut |row| {
        if Some(row.frames) == k {
            occ.push(&row, &mut events);
        }
        sum.add(&row);
    });
    occ.finish(end, &mut events);
    let mut occupancy = vec![(0.0, 0); setup.channels.len()];
    for e in &events {
        if let Event::Interval(i) = e {
            occupancy[i.channel] = (i.occupancy_pct(), i.samples);
        }
    }
    WholeInput {
        spectrum: sum.average(setup.engine.hop()),
        samples,
        occupancy,
        dwell_s: setup.dwell_s(),
    }
}

/// Default interval and hang as durations, for `measure` (which has no such options).
pub fn default_durations() -> (Duration, Duration) {
    (Duration::from_secs_f64(DEFAULT_INTERVAL_S), Duration::from_secs_f64(DEFAULT_HANG_S))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::WindowKind;
    use crate::measure::occupancy::tests::{band, Keyed, CENTER, FS};
    use crate::plan::parse_channel_arg;
    use serde_json::Value;
    use time::format_description::well_known::Rfc3339;

    fn setup(interval_s: u64) -> (Setup, Plan, SourceInfo) {
        let info = SourceInfo {
            label: "synthetic".into(),
            format: None,
            sample_rate_hz: FS,
            center_hz: CENTER,
            start_time: None,
            total_samples: None,
            live: true,
        };
        let base = EngineConfig {
            fft_size: 512,
            window: WindowKind::Hann,
            overlap: 0.5,
            frames_per_output: None,
        };
        let args = ChannelArgs {
            channels: vec![
                parse_channel_arg("busy=100.02M:10k").unwrap(),
                parse_channel_arg("idle=99.95M:10k").unwrap(),
            ],
            ..ChannelArgs::default()
        };
        let plan = args.plan().unwrap();
        let s = Setup::new(
            &info,
            &base,
            &plan,
            &args,
            Duration::from_secs(interval_s),
            Duration::from_millis(25),
        )
        .unwrap();
        (s, plan, info)
    }

    fn lines(bytes: Vec<u8>) -> Vec<Value> {
        String::from_utf8(bytes)
            .unwrap()
            .lines()
            .map(|l| serde_json::from_str(l).expect("every line is one JSON object"))
            .collect()
    }

    #[test]
    fn a_gap_in_block_indices_is_logged_exactly_and_times_follow_the_sample_count() {
        let on = |_: u64| true;
        let x = band(600_000, &[Keyed { offset_hz: 20e3, level_dbfs: -30.0, on: &on }], 2);
        let (setup, plan, info) = setup(1);
        let writer = LogWriter::new(Vec::new(), LogFormat::JsonLines, true).unwrap();
        let mut session = Session::new(&setup, &plan, &info, writer);
        let t0 = OffsetDateTime::parse("2026-05-01T08:00:00Z", &Rfc3339).unwrap();
        session.set_start(Some(t0), "option");
        // Blocks of 10 000 samples; the ones covering 250 000 .. 290 000 never arrive.
        for start in (0..600_000).step_by(10_000) {
            if (250_000..290_000).contains(&start) {
                continue;
            }
            let block = Block::new(start as u64, x[start..start + 10_000].to_vec());
            session.feed(&block).unwrap();
        }
        session.lost_tail(600_000).unwrap();
        session.finish(StopReason::EndOfInput).unwrap();
        let recs = lines(session.into_writer());
        let kinds: Vec<&str> = recs.iter().map(|r| r["kind"].as_str().unwrap()).collect();
        assert_eq!(&kinds[..3], ["start", "channel", "channel"]);
        assert_eq!(*kinds.last().unwrap(), "stop");
        let dropped: Vec<&Value> = recs.iter().filter(|r| r["kind"] == "dropped").collect();
        assert_eq!(dropped.len(), 1);
        assert_eq!(dropped[0]["dropped_samples"], 40_000);
        assert_eq!(dropped[0]["t_start_s"], 1.25);
        assert_eq!(dropped[0]["start"], "2026-05-01T08:00:01.250Z");
        assert_eq!(dropped[0]["end"], "2026-05-01T08:00:01.450Z");
        // The busy channel's emission is cut by the gap: two partial pieces, then the last one
        // cut by the end of input.
        let em: Vec<&Value> = recs.iter().filter(|r| r["kind"] == "emission").collect();
        assert_eq!(em.len(), 2, "{em:?}");
        assert!(em.iter().all(|e| e["channel"] == "busy" && e["partial"] == true));
        // Intervals of 1 s: [0,1) full, [1,2) full with the gap counted, [2,3) partial.
        let iv: Vec<&Value> =
            recs.iter().filter(|r| r["kind"] == "interval" && r["channel"] == "busy").collect();
        assert_eq!(iv.len(), 3);
        assert_eq!(iv[1]["dropped_samples"], 40_000);
        assert_eq!(iv[1]["t_end_s"], 2.0);
        assert_eq!(iv[1]["end"], "2026-05-01T08:00:02.000Z");
        assert_eq!(iv[2]["partial"], true);
        assert_eq!(iv[2]["t_end_s"], 3.0);
        assert!(iv.iter().all(|i| i["occupancy_pct"] == 100.0));
        let idle: Vec<&Value> =
            recs.iter().filter(|r| r["kind"] == "interval" && r["channel"] == "idle").collect();
        assert!(idle.iter().all(|i| i["occupancy_pct"] == 0.0));
        let stop = recs.last().unwrap();
        assert_eq!(stop["iq_samples"], 600_000);
        assert_eq!(stop["dropped_samples"], 40_000);
        assert_eq!(stop["reason"], "end_of_input");
    }

    #[test]
    fn an_empty_run_still_writes_start_and_stop() {
        let (setup, plan, info) = setup(60);
        let writer = LogWriter::new(Vec::new(), LogFormat::JsonLines, true).unwrap();
        let mut session = Session::new(&setup, &plan, &info, writer);
        session.finish(StopReason::Interrupted).unwrap();
        let recs = lines(session.into_writer());
        let kinds: Vec<&str> = recs.iter().map(|r| r["kind"].as_str().unwrap()).collect();
        assert_eq!(kinds, ["start", "channel", "channel", "stop"]);
        assert_eq!(recs[0]["time_source"], "none");
        assert_eq!(recs[3]["reason"], "interrupted");
    }

    #[test]
    fn log_flags_parse_with_units() {
        use crate::cli::{Cli, Command};
        use clap::Parser;
        let cli = Cli::try_parse_from([
            "bandwarden",
            "log",
            "-",
            "--format",
            "cu8",
            "--rate",
            "2.4M",
            "--channel",
            "a=433.1M:25k",
            "--plan",
            "site.toml",
            "--dwell",
            "20ms",
            "--threshold-db",
            "6",
            "--interval",
            "15m",
            "--hang",
            "100ms",
            "--csv",
            "--append",
            "--no-drop",
            "-o",
            "x.csv",
            "--seconds",
            "3600",
        ])
        .unwrap();
        let Some(Command::Log(a)) = cli.command else { panic!("not log") };
        assert_eq!(a.input, "-");
        assert_eq!(a.channels.channels[0].center_hz, 433.1e6);
        assert_eq!(a.channels.plan.as_deref(), Some("site.toml"));
        assert_eq!(a.channels.dwell, Some(Duration::from_millis(20)));
        assert_eq!(a.channels.threshold_db, 6.0);
        assert_eq!(a.interval, Duration::from_secs(900));
        assert_eq!(a.hang, Duration::from_millis(100));
        assert!(a.csv && a.append && a.no_drop);
        assert_eq!((a.out.as_str(), a.seconds), ("x.csv", Some(3600.0)));
        let defaults = Cli::try_parse_from(["bandwarden", "log", "f.cu8"]).unwrap();
        let Some(Command::Log(d)) = defaults.command else { panic!("not log") };
        assert_eq!((d.interval, d.hang), default_durations());
        assert_eq!(d.channels.threshold_db, crate::plan::DEFAULT_THRESHOLD_DB);
        assert_eq!(d.out, "-");
        assert!(Cli::try_parse_from(["bandwarden", "log", "f", "--interval", "soon"]).is_err());
        assert!(Cli::try_parse_from(["bandwarden", "log", "f", "--channel", "a=1M"]).is_err());
        assert!(Cli::try_parse_from(["bandwarden", "log"]).is_err(), "INPUT is required");
    }

    #[test]
    fn stamps_are_rfc3339_utc_with_milliseconds() {
        let t0 = OffsetDateTime::parse("2026-05-01T10:00:00+02:00", &Rfc3339).unwrap();
        let c = Clock { rate: 2.4e6, start: Some(t0) };
        assert_eq!(c.stamp(2_400_000 * 61 + 600).unwrap(), "2026-05-01T08:01:01.000Z");
        assert_eq!(c.stamp(1_200_000).unwrap(), "2026-05-01T08:00:00.500Z");
        assert_eq!(Clock { rate: 1.0, start: None }.stamp(5), None);
    }
}
