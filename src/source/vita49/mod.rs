//! `vita49://ADDR:PORT`: IQ in VITA 49 (ANSI/VITA-49.0 / 49.2, "VRT") packets over UDP, one
//! packet per datagram.
//!
//! **Binding.** The port is bound on ADDR, loopback only unless `--listen-public` (as for
//! `tcp-listen://`). The socket's receive buffer is asked to hold about a second of samples
//! at the stream's rate (the kernel may cap it), so a short stall of the DSP does not lose
//! datagrams in the kernel.
//!
//! **Streams.** `--stream-id ID` (decimal or 0x hex) picks one stream; without it the first
//! stream seen is taken and named in a note. Packets of other streams are counted, not read.
//!
//! **Context.** Before the first sample the source waits (up to [`CONTEXT_WAIT`]) for a context
//! packet of the stream, which gives the sample rate, the RF reference frequency (the centre)
//! and the payload format; `--rate`, `--center` and `--format` override them, and with all three
//! given no context is needed. The payload format maps onto a SigMF datatype: complex
//! Cartesian, signed fixed point of 8/16/32 bits or IEEE single/double, items packed in their
//! own width, big-endian (VITA 49's byte order); other formats are refused with the reason.
//! The reference level (CIF0 bit 24) goes into [`SourceInfo::reference_level_dbm`], from which
//! the run takes its dBm calibration unless `--calibration` or `--ref-offset` is given (see
//! `measure::calibration::from_stream`); the gain (bit 23) is only named in the start note.
//!
//! **Retunes.** With `--hop-plan FILE` the stream may move its centre (RF reference frequency
//! or offset) between the plan's centres: each move is a retune handed to the reader
//! ([`SampleSource::take_retunes`]) with the index of the first sample it applies to, and the
//! run stitches the dwells into one panorama (see [`super::tuning`] for why the plan gives the
//! grid). That index is the context packet's own time stamp when it has a fractional one
//! (placed on the time line as a data packet's would be), else the end of the data placed so
//! far: a sender that sends the context before the first packet at the new centre, as the
//! standard expects, is then exact. The context's bandwidth field, when present, gives the
//! usable band of every step (unless `--usable`). Without `--hop-plan` the same is learnt from
//! the stream's first sweep, read ahead at open (module `learn`); a stream that does not retune
//! within `--learn` is read at one tuning.
//!
//! **Other context changes.** A context packet that changes the sample rate or the payload
//! format after samples have begun (or the centre, when no sweep is followed) means the samples that
//! follow are of another band or must be decoded otherwise; one run measures one tuning, so the
//! source delivers every sample it holds from before the change, then ends the input with an
//! error naming the change and the sample where it happened (the run stops as `input_error`,
//! every log record is flushed, the exit status is 1). Data packets that arrive after the change
//! are not taken as samples. A context packet that repeats the same values (senders repeat
//! them) changes nothing; nor does one that changes only the reference level or gain (noted).
//! The values compared are the context's own, so flags that override them do not hide a change.
//!
//! **Time and loss.** Each data packet's place on the time line comes from its time stamps:
//! TSF sample count (with a UTC/GPS/other integer second: seconds × rate + count), real time
//! (seconds + picoseconds × 10⁻¹² × rate, rounded) or a free-running count (taken as a sample
//! count); with no fractional stamp, from the 4-bit packet count × the samples per packet. The
//! first packet is sample 0 and, with a UTC integer stamp, gives the time of the first sample.
//! Samples between the expected and the stamped place are lost (`take_lost`, cause
//! `packet_lost`), so 16 or more packets lost in a row are still counted exactly when stamps
//! are present. Packets that arrive out of order within [`REORDER_WINDOW`] packets are put back
//! in order; a packet for a place already delivered (a duplicate or one too late) is dropped and
//! counted. Malformed datagrams are counted, noted once, and never taken as samples.

mod learn;
pub mod packet;

use super::{sanitize, InputIssues, InputRequest, SampleFormat, SampleSource, SourceInfo};
use anyhow::{bail, Context as _, Result};
use num_complex::Complex32;
use packet::{Header, Packet, PayloadFormat, Tsf, Tsi};
use std::collections::BTreeMap;
use std::net::{SocketAddr, UdpSocket};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};
use time::OffsetDateTime;

/// How long to wait for the first context packet when a flag does not give what it holds.
pub const CONTEXT_WAIT: Duration = Duration::from_secs(10);
/// Packets held back to put reordered ones in place.
pub const REORDER_WINDOW: usize = 32;
/// A held-back packet is released after this long without the one before it.
const HOLD_LIMIT: Duration = Duration::from_millis(200);
/// How often a blocked receive looks at the stop flag.
const TICK: Duration = Duration::from_millis(100);
/// Delivered packets' sample buffers kept for reuse (more than the reorder window holds).
const SPARE_PACKETS: usize = 2 * REORDER_WINDOW;
/// Largest UDP datagram.
const MAX_DATAGRAM: usize = 65_536;
/// The UDP receive buffer asked for: about 0.8 s of 20 MS/s of 16-bit complex samples, so a
/// pause of the reader (a page fault, the scheduler) does not make the kernel drop packets.
pub const RECEIVE_BUFFER: usize = 64 << 20;

/// Reads `vita49://ADDR:PORT`; `None` for any other input name.
pub fn parse_endpoint(input: &str) -> Option<Result<SocketAddr>> {
    let rest = input.strip_prefix("vita49://")?;
    Some(rest.parse::<SocketAddr>().with_context(|| {
        format!(
            "'{}': give a numeric address and port to bind, e.g. vita49://127.0.0.1:4991",
            sanitize(input)
        )
    }))
}

/// Reads `--stream-id`: decimal or `0x` hexadecimal, 32 bits.
pub fn parse_stream_id(text: &str) -> Result<u32, String> {
    let t = text.trim();
    let parsed = match t.strip_prefix("0x").or_else(|| t.strip_prefix("0X")) {
        Some(hex) => u32::from_str_radix(hex, 16),
        None => t.parse::<u32>(),
    };
    parsed.map_err(|_| format!("'{}' is not a 32-bit stream ID (e.g. 7 or 0x1a2b)", sanitize(text)))
}

/// What the stream's context said, and what the flags override.
#[derive(Clone, Debug, Default)]
struct Tuning {
    rate: Option<f64>,
    center: Option<f64>,
    format: Option<SampleFormat>,
    reference_level_dbm: Option<f64>,
    gain_db: Option<(f64, f64)>,
}

/// The SigMF datatype of a VITA 49 payload format, or why it cannot be read.
pub fn datatype_of(f: &PayloadFormat) -> Result<SampleFormat, String> {
    if f.real_complex != 1 {
        let kind =
            ["real", "complex Cartesian", "complex polar", "reserved"][f.real_complex as usize & 3];
        return Err(format!("{kind} samples (bandwarden reads complex Cartesian)"));
    }
    if f.packing_bits != f.item_bits {
        return Err(format!(
            "{}-bit items packed in {}-bit fields (bandwarden reads items packed in their own width)",
            f.item_bits, f.packing_bits
        ));
    }
    match (f.item_format, f.item_bits) {
        (0, 8) => Ok(SampleFormat::Ci8),
        (0, 16) => Ok(SampleFormat::Ci16Be),
        (0, 32) => Ok(SampleFormat::Ci32Be),
        (0x0e, 32) => Ok(SampleFormat::Cf32Be),
        (0x0f, 64) => Ok(SampleFormat::Cf64Be),
        (fmt, bits) => Err(format!(
            "item format {fmt:#x} of {bits} bits (bandwarden reads signed fixed point of 8, 16 or 32 bits and IEEE single or double)"
        )),
    }
}

/// How `new` differs from `old` in what the samples mean (rate, centre, format), in words;
/// `None` when it does not. The centre is left out when `retunes` (a retune is then no change
/// of meaning: see [`moved_centre`]).
fn change_between(old: &packet::Context, new: &packet::Context, retunes: bool) -> Option<String> {
    if let Some((a, b)) = moved(old.sample_rate_hz, new.sample_rate_hz) {
        return Some(format!("its sample rate from {a} to {b} S/s"));
    }
    if let Some((a, b)) = moved_centre(old, new).filter(|_| !retunes) {
        return Some(format!("its centre from {a} to {b} Hz"));
    }
    match (&old.payload_format, &new.payload_format) {
        (Some(a), Some(b)) if a != b => Some("its payload format".to_string()),
        _ => None,
    }
}

/// Two frequencies when they differ by more than 0.5 Hz (the 64-bit radix-20 fields resolve
/// about 1 µHz, so this is no rounding, only a guard against arithmetic noise).
fn moved(a: Option<f64>, b: Option<f64>) -> Option<(f64, f64)> {
    match (a, b) {
        (Some(a), Some(b)) if !super::tuning::same_centre(a, b) => Some((a, b)),
        _ => None,
    }
}

/// The centre (RF reference plus offset) before and after, when `new` moves it.
fn moved_centre(old: &packet::Context, new: &packet::Context) -> Option<(f64, f64)> {
    let centre = |c: &packet::Context| c.rf_reference_hz.map(|f| f + c.rf_offset_hz.unwrap_or(0.0));
    let new_centre =
        new.rf_reference_hz.map(|f| f + new.rf_offset_hz.or(old.rf_offset_hz).unwrap_or(0.0));
    moved(centre(old), new_centre)
}

/// A data packet waiting for its turn.
struct Held {
    samples: Vec<Complex32>,
    since: Instant,
}

pub struct Vita49Source {
    socket: UdpSocket,
    info: SourceInfo,
    format: SampleFormat,
    stream: Option<u32>,
    datagram: Vec<u8>,
    /// First packet's stamp: (integer seconds, fractional), the origin of the time line.
    origin: Option<(u32, u64)>,
    /// Next sample index to deliver.
    next: u64,
    /// Packet count and length of the last packet placed (for streams without stamps).
    last_count: Option<(u8, u64)>,
    held: BTreeMap<u64, Held>,
    /// Samples of the packet being delivered, from `offset` on.
    current: Vec<Complex32>,
    offset: usize,
    lost: u64,
    issues: InputIssues,
    stop: Option<Arc<AtomicBool>>,
    tuning: Tuning,
    /// The stream's own context as first seen: what a later context is compared with.
    seen: Option<packet::Context>,
    /// A change of tuning mid-stream (module doc): why the input ends once what came before it
    /// is delivered.
    changed: Option<String>,
    /// Retunes are followed, not an end (`--hop-plan` given): what the stream says of them.
    follow: Option<super::tuning::StreamRetunes>,
    /// Sample buffers of packets already delivered, for the next packets (no allocation per
    /// packet once the stream runs).
    spare: Vec<Vec<Complex32>>,
    /// Retunes found and not yet taken by the reader.
    retuned: Vec<super::tuning::Step>,
    /// Samples read ahead while the tuning was learnt, delivered before the live stream.
    ahead: learn::Ahead,
    /// Counts for the notes.
    pub counts: Counts,
}

/// What the source counted besides samples.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Counts {
    pub malformed: u64,
    pub other_streams: u64,
    pub duplicates: u64,
    pub reordered: u64,
    pub retunes: u64,
}

/// Opens the socket and waits for what the stream must say about itself (module doc).
pub fn open(addr: SocketAddr, req: &InputRequest, notes: &mut Vec<String>) -> Result<Vita49Source> {
    if !addr.ip().is_loopback() && !req.listen_public {
        bail!(
            "vita49://{addr} would take packets from other hosts; add --listen-public to allow that, or bind a loopback address such as 127.0.0.1"
        );
    }
    let learning = learn::wanted(req)?;
    let socket = UdpSocket::bind(addr).with_context(|| format!("cannot bind UDP {addr}"))?;
    socket.set_read_timeout(Some(TICK))?;
    if let Some(note) = size_receive_buffer(&socket, RECEIVE_BUFFER, addr) {
        notes.push(note);
    }
    let mut src = Vita49Source {
        socket,
        info: SourceInfo::live(format!("vita49://{addr}"), SampleFormat::Ci16Be, 1.0, req),
        format: req.format.unwrap_or(SampleFormat::Ci16Be),
        stream: req.stream_id,
        datagram: vec![0; MAX_DATAGRAM],
        origin: None,
        next: 0,
        last_count: None,
        held: BTreeMap::new(),
        current: Vec::new(),
        offset: 0,
        lost: 0,
        issues: InputIssues::default(),
        stop: req.stop.clone(),
        tuning: Tuning {
            rate: req.sample_rate_hz,
            center: req.center_hz,
            format: req.format,
            ..Tuning::default()
        },
        seen: None,
        changed: None,
        follow: (req.hop_plan.is_some() || learning.is_some())
            .then(super::tuning::StreamRetunes::default),
        retuned: Vec::new(),
        spare: Vec::new(),
        ahead: learn::Ahead::default(),
        counts: Counts::default(),
    };
    src.await_context(notes)?;
    if let Some(wait) = learning {
        src.learn(wait, notes)?;
    }
    Ok(src)
}

/// Asks the kernel for a receive buffer of `bytes`; a note when it grants less (Linux caps it at
/// net.core.rmem_max, and reports twice what it keeps for its own bookkeeping).
fn size_receive_buffer(socket: &UdpSocket, bytes: usize, addr: SocketAddr) -> Option<String> {
    let sock = socket2::SockRef::from(socket);
    let asked = sock.set_recv_buffer_size(bytes);
    let granted = sock.recv_buffer_size().ok()?;
    let mib = |b: usize| b as f64 / (1 << 20) as f64;
    (asked.is_err() || granted < bytes).then(|| {
        format!(
            "vita49://{addr}: the kernel granted a receive buffer of {:.1} MiB of the {:.0} MiB asked; a fast sender may lose packets (counted as packet_lost) when the reader pauses; on Linux raise the cap with sysctl -w net.core.rmem_max={bytes}",
            mib(granted),
            mib(bytes)
        )
    })
}

impl Vita49Source {
    /// Reads datagrams until the rate, centre and format are known (module doc); data packets
    /// that arrive first are kept and delivered once they can be read.
    fn await_context(&mut self, notes: &mut Vec<String>) -> Result<()> {
        let started = Instant::now();
        let mut early: Vec<Vec<u8>> = Vec::new();
        while self.tuning.rate.is_none()
            || self.tuning.center.is_none()
            || self.tuning.format.is_none()
        {
            if self.stop.as_ref().is_some_and(|s| s.load(Ordering::Relaxed)) {
                return Err(super::StoppedWhileOpening(format!(
                    "stopped by a signal while waiting for the first context packet of {}; nothing was read",
                    self.info.label
                ))
                .into());
            }
            if started.elapsed() > CONTEXT_WAIT {
                let missing: Vec<&str> = [
                    (self.tuning.rate.is_none(), "--rate"),
                    (self.tuning.center.is_none(), "--center"),
                    (self.tuning.format.is_none(), "--format"),
                ]
                .iter()
                .filter(|(m, _)| *m)
                .map(|(_, f)| *f)
                .collect();
                bail!(
                    "{}: no VITA 49 context packet{} arrived within {} s to give the sample rate, centre frequency and payload format; check that the sender sends context, or give {}",
                    self.info.label,
                    self.stream.map(|s| format!(" of stream {s:#x}")).unwrap_or_default(),
                    CONTEXT_WAIT.as_secs(),
                    missing.join(", ")
                );
            }
            let Some(n) = self.receive()? else { continue };
            let bytes = self.datagram[..n].to_vec();
            match packet::parse(&bytes) {
                Err(e) => self.malformed(&e.0, notes),
                Ok(Packet::Context { header, context }) => {
                    if self.take_stream(&header, notes) {
                        self.apply_context(&context, notes)?;
                    }
                }
                Ok(Packet::Data { header, .. }) => {
                    if self.take_stream(&header, notes) && early.len() < 4 * REORDER_WINDOW {
                        early.push(bytes);
                    }
                }
                Ok(Packet::Other { .. }) => {}
            }
        }
        let t = &self.tuning;
        self.format = t.format.unwrap_or(SampleFormat::Ci16Be);
        self.info.sample_rate_hz = t.rate.unwrap_or(1.0);
        self.info.center_hz = t.center.unwrap_or(0.0);
        self.info.format = Some(self.format);
        self.info.reference_level_dbm = t.reference_level_dbm;
        if let Some(level) = t.reference_level_dbm {
            let gain =
                t.gain_db.map(|(a, b)| format!(", gain {a:.2} + {b:.2} dB")).unwrap_or_default();
            notes.push(format!(
                "{}: the stream's context gives a reference level of {level:.2} dBm{gain}",
                self.info.label
            ));
        }
        for bytes in early {
            if let Ok(Packet::Data { header, payload }) = packet::parse(&bytes) {
                self.place(&header, payload);
            }
        }
        Ok(())
    }

    /// One datagram into `self.datagram`; `None` after a quiet tick.
    fn receive(&mut self) -> Result<Option<usize>> {
        match self.socket.recv(&mut self.datagram) {
            Ok(n) => Ok(Some(n)),
            Err(e)
                if matches!(
                    e.kind(),
                    std::io::ErrorKind::WouldBlock
                        | std::io::ErrorKind::TimedOut
                        | std::io::ErrorKind::Interrupted
                ) =>
            {
                Ok(None)
            }
            Err(e) => Err(e).with_context(|| format!("receiving from {}", self.info.label)),
        }
    }

    fn malformed(&mut self, why: &str, notes: &mut Vec<String>) {
        self.counts.malformed += 1;
        if self.counts.malformed == 1 {
            notes.push(format!(
                "{}: a datagram is not a VITA 49 packet ({why}); such datagrams are counted and skipped",
                self.info.label
            ));
        }
    }

    /// True when the packet belongs to the chosen stream (the first seen when none was asked).
    fn take_stream(&mut self, header: &Header, notes: &mut Vec<String>) -> bool {
        let id = header.stream_id.unwrap_or(0);
        match self.stream {
            Some(s) if s == id => true,
            Some(_) => {
                self.counts.other_streams += 1;
                false
            }
            None => {
                self.stream = Some(id);
                notes.push(format!(
                    "{}: reading stream {id:#x}, the first seen (--stream-id picks another)",
                    self.info.label
                ));
                true
            }
        }
    }

    /// Takes the context fields the flags did not give.
    fn apply_context(&mut self, c: &packet::Context, notes: &mut Vec<String>) -> Result<()> {
        let t = &mut self.tuning;
        if t.rate.is_none() {
            t.rate = c.sample_rate_hz;
        }
        if t.center.is_none() {
            t.center = c.rf_reference_hz.map(|f| f + c.rf_offset_hz.unwrap_or(0.0));
        }
        if t.format.is_none() {
            if let Some(pf) = &c.payload_format {
                match datatype_of(pf) {
                    Ok(f) => t.format = Some(f),
                    Err(why) => bail!(
                        "{}: the stream's payload format is {why}; it cannot be read",
                        self.info.label
                    ),
                }
            }
        }
        t.reference_level_dbm = c.reference_level_dbm.or(t.reference_level_dbm);
        t.gain_db = c.gain_db.or(t.gain_db);
        if let Some(f) = self.follow.as_mut() {
            f.bandwidth_hz = c.bandwidth_hz.or(f.bandwidth_hz);
        }
        self.remember(c);
        let _ = notes;
        Ok(())
    }

    /// Keeps the fields of a context packet as the stream's own (each field as last given).
    fn remember(&mut self, c: &packet::Context) {
        let seen = self.seen.get_or_insert_with(|| c.clone());
        seen.sample_rate_hz = c.sample_rate_hz.or(seen.sample_rate_hz);
        seen.rf_reference_hz = c.rf_reference_hz.or(seen.rf_reference_hz);
        seen.rf_offset_hz = c.rf_offset_hz.or(seen.rf_offset_hz);
        seen.payload_format = c.payload_format.or(seen.payload_format);
    }

    /// A context after the start: a retune is handed on when followed; any other change of
    /// rate, centre or format ends the input once what came before it is delivered (module doc).
    fn later_context(&mut self, h: &Header, c: &packet::Context) {
        let Some(seen) = self.seen.as_ref() else { return self.remember(c) };
        if self.changed.is_none() {
            let follow = self.follow.is_some();
            if let Some(what) = change_between(seen, c, follow) {
                self.counts.retunes += 1;
                self.changed = Some(what);
            } else if let Some((_, to)) = moved_centre(seen, c).filter(|_| follow) {
                self.counts.retunes += 1;
                let start = self.stamped_index(h).unwrap_or_else(|| self.end_of_placed());
                self.retuned.push(super::tuning::Step { start, center_hz: to });
            }
        }
        self.remember(c);
    }

    /// Where a packet's time stamp lies on the time line when it has a fractional one (module
    /// doc), without moving the packet count; `None` without one, or before the first packet.
    fn stamped_index(&self, h: &Header) -> Option<u64> {
        let (int0, frac0) = self.origin?;
        let rate = self.info.sample_rate_hz;
        let seconds = i64::from(h.integer_ts.unwrap_or(0)) - i64::from(int0);
        let frac = h.fractional_ts.unwrap_or(0) as i64 - frac0 as i64;
        let index = match (h.tsf, h.tsi) {
            (Tsf::SampleCount, Tsi::None) | (Tsf::FreeRunning, _) => frac,
            (Tsf::SampleCount, _) => (seconds as f64 * rate).round() as i64 + frac,
            (Tsf::RealTime, _) => ((seconds as f64 + frac as f64 * 1e-12) * rate).round() as i64,
            (Tsf::None, _) => return None,
        };
        u64::try_from(index).ok()
    }

    /// Where a data packet's first sample lies on the time line (module doc), or `None` for a
    /// packet from before the origin.
    fn index_of(&mut self, h: &Header, samples: u64) -> Option<u64> {
        let rate = self.info.sample_rate_hz;
        let int = h.integer_ts.unwrap_or(0);
        let frac = h.fractional_ts.unwrap_or(0);
        let Some((int0, _)) = self.origin else {
            self.origin = Some((int, frac));
            if h.tsi == Tsi::Utc {
                let t = OffsetDateTime::from_unix_timestamp(i64::from(int)).ok();
                let sub = match h.tsf {
                    Tsf::RealTime => frac as f64 * 1e-12,
                    Tsf::SampleCount => frac as f64 / rate,
                    _ => 0.0,
                };
                self.info.start_time =
                    t.and_then(|t| t.checked_add(time::Duration::seconds_f64(sub)));
            }
            self.last_count = Some((h.count, samples));
            return Some(0);
        };
        let seconds = i64::from(int) - i64::from(int0);
        let index = match (h.tsf, h.tsi) {
            (Tsf::SampleCount | Tsf::FreeRunning | Tsf::RealTime, _) => {
                self.last_count = Some((h.count, samples));
                return self.stamped_index(h);
            }
            (Tsf::None, Tsi::None) => {
                // Packet count only: the packets missed since the last one placed.
                let (count, len) = self.last_count.unwrap_or((h.count, samples));
                let step = u64::from(h.count.wrapping_sub(count).wrapping_sub(1) & 0xf);
                self.last_count = Some((h.count, samples));
                return Some(self.end_of_placed() + step * len);
            }
            (Tsf::None, _) => (seconds as f64 * rate).round() as i64,
        };
        self.last_count = Some((h.count, samples));
        u64::try_from(index).ok()
    }

    /// The index just after the last packet delivered or held.
    fn end_of_placed(&self) -> u64 {
        self.held
            .iter()
            .next_back()
            .map(|(k, v)| k + v.samples.len() as u64)
            .unwrap_or(self.next + (self.current.len() - self.offset) as u64)
    }

    /// Decodes a data packet and holds it at its place.
    fn place(&mut self, h: &Header, payload: &[u8]) {
        let bps = self.format.bytes_per_sample();
        let whole = payload.len() / bps;
        if whole == 0 {
            return;
        }
        let mut samples = self.spare.pop().unwrap_or_default();
        samples.clear();
        samples.resize(whole, Complex32::default());
        let screened = self.format.decode(&payload[..whole * bps], &mut samples);
        self.issues.non_finite += screened.non_finite;
        self.issues.beyond_scale += screened.beyond_scale;
        let Some(at) = self.index_of(h, whole as u64) else {
            self.counts.duplicates += 1;
            return;
        };
        let delivered_to = self.next + (self.current.len() - self.offset) as u64;
        if at < delivered_to || self.held.contains_key(&at) {
            self.counts.duplicates += 1;
            return;
        }
        if self.held.keys().next_back().is_some_and(|&last| at < last) {
            self.counts.reordered += 1;
        }
        self.held.insert(at, Held { samples, since: Instant::now() });
    }

    /// Moves the next held packet to `current` when it is due: it is next in line, the window
    /// is full, or it has waited [`HOLD_LIMIT`]. Samples skipped on the way are lost.
    fn release(&mut self, ended: bool) -> bool {
        let Some((&at, held)) = self.held.iter().next() else { return false };
        let due = at == self.next
            || ended
            || self.held.len() > REORDER_WINDOW
            || held.since.elapsed() > HOLD_LIMIT;
        if !due {
            return false;
        }
        let Some(held) = self.held.remove(&at) else { return false };
        self.lost += at.saturating_sub(self.next);
        self.next = at;
        let done = std::mem::replace(&mut self.current, held.samples);
        if self.spare.len() < SPARE_PACKETS {
            self.spare.push(done);
        }
        self.offset = 0;
        true
    }

    /// The stream's next samples into `out` (the source's `read`, without what was read ahead);
    /// with `wait` false, `None` after a quiet tick with nothing to deliver.
    fn read_within(&mut self, out: &mut [Complex32], wait: bool) -> Result<Option<usize>> {
        let mut notes = Vec::new();
        loop {
            if self.offset < self.current.len() {
                let n = out.len().min(self.current.len() - self.offset);
                out[..n].copy_from_slice(&self.current[self.offset..self.offset + n]);
                self.offset += n;
                self.next += n as u64;
                return Ok(Some(n));
            }
            if self.release(false) {
                continue;
            }
            if self.stopped() || self.changed.is_some() {
                // Deliver what is held, then end.
                if self.release(true) {
                    continue;
                }
                if let Some(what) = &self.changed {
                    bail!(
                        "{}: the stream's context changed {what} at sample {} ({:.3} s in); one run measures one tuning, so the input ends here (every sample before the change was measured); start again for the new tuning{}",
                        self.info.label,
                        self.next,
                        self.next as f64 / self.info.sample_rate_hz,
                        if self.follow.is_none() && what.starts_with("its centre") {
                            ", or give --hop-plan FILE listing the centres it visits to stitch them into one panorama (without it a sweep is learnt only when the stream first retunes within --learn of its start, 1 s unless given)"
                        } else {
                            ""
                        }
                    );
                }
                return Ok(Some(0));
            }
            let Some(n) = self.receive()? else {
                if wait {
                    continue;
                }
                return Ok(None);
            };
            // Parsed in place: the datagram buffer is lent out, not copied, per packet.
            let bytes = std::mem::take(&mut self.datagram);
            match packet::parse(&bytes[..n]) {
                Err(e) => self.malformed(&e.0, &mut notes),
                Ok(Packet::Data { header, payload }) => {
                    // After a change of tuning, samples are of another band: not taken.
                    if self.take_stream(&header, &mut notes) && self.changed.is_none() {
                        self.place(&header, payload);
                    }
                }
                Ok(Packet::Context { header, context }) => {
                    if self.take_stream(&header, &mut notes) {
                        self.later_context(&header, &context);
                    }
                }
                Ok(Packet::Other { .. }) => {}
            }
            self.datagram = bytes;
        }
    }

    fn stopped(&self) -> bool {
        self.stop.as_ref().is_some_and(|s| s.load(Ordering::Relaxed))
    }
}

impl SampleSource for Vita49Source {
    fn info(&self) -> &SourceInfo {
        &self.info
    }

    fn read(&mut self, out: &mut [Complex32]) -> Result<usize> {
        if self.ahead.holds() {
            self.top_up()?;
        }
        if let Some(n) = self.ahead.replay(out, &mut self.lost, &mut self.retuned) {
            return Ok(n);
        }
        if let Some(e) = self.ahead.ending.take() {
            return Err(e);
        }
        loop {
            if let Some(n) = self.read_within(out, true)? {
                return Ok(n);
            }
        }
    }

    fn issues(&self) -> InputIssues {
        self.issues.clone()
    }

    fn take_lost(&mut self) -> u64 {
        std::mem::take(&mut self.lost)
    }

    fn lost_cause(&self) -> super::LinkLoss {
        super::LinkLoss::PacketLost
    }

    fn watch_stop(&mut self, stop: Arc<AtomicBool>) {
        self.stop = Some(stop);
    }

    fn retunes(&self) -> Option<super::tuning::StreamRetunes> {
        self.follow
    }

    fn take_retunes(&mut self) -> Vec<super::tuning::Step> {
        std::mem::take(&mut self.retuned)
    }

    fn replaying(&self) -> bool {
        self.ahead.holds()
    }
}
