//! Channel occupancy (ITU-R SM.1880) and emission tracking over a sequence of spectra.
//!
//! This is the pure core of `bandwarden log` (and of the occupancy column of `measure`): it takes
//! averaged STFT rows one at a time and says, per channel, whether the channel was occupied in
//! that row, how busy each channel was per interval, and which emissions came and went. No I/O and
//! no threads, so every rule below is tested on synthetic signals.
//!
//! # Definitions
//!
//! - **Measurement sample** (SM.1880): one averaged STFT row, i.e. `frames_per_sample` FFT frames
//!   taken `hop` samples apart. Its *dwell* is `frames_per_sample · hop / fs` seconds. The frames
//!   of a row cover `dwell + (fft_size − hop)` samples; the row is stamped with the middle
//!   `dwell` of them (`[first + (fft_size − hop)/2, … + dwell)`), where the window gives most
//!   weight, so consecutive rows tile time without overlap. Time resolution is therefore the
//!   longer of the dwell and the FFT frame: an emission far above the threshold is seen by a row
//!   whose window only grazes it, so its start and end can be off by up to half a frame more
//!   than a dwell.
//! - **Channel power** `P`: the integral of the row's PSD over the channel, in FS²
//!   ([`band_power`]).
//! - **Noise floor**: a density `D` (FS²/Hz) shared by all channels, estimated over the *whole*
//!   captured band in three steps:
//!   1. the rows' PSD is smoothed over time with an exponential average of time constant
//!      [`FLOOR_SMOOTHING_S`], which narrows the spread of noise-only bins (its equivalent degrees
//!      of freedom grow from one row's to about `(2 − α)/α` times that) so that step 2 can tell
//!      noise from weak signals;
//!   2. [`noise_floor`] (FCME) estimates the density of that smoothed PSD, setting aside every
//!      bin that stands above the noise: channels that are busy all, or most, of the time are
//!      simply part of the occupied fraction of the band (it may be up to three quarters);
//!   3. the tracked floor is the **median of the step-2 estimates over the last
//!      [`FLOOR_MEMORY_S`] seconds**, so a wideband burst that covers most of the band for less
//!      than half that memory cannot lift it, while a receiver whose gain changes is followed
//!      within about 1.5 s.
//!
//!   The noise in a channel is `D · width`: a steady carrier in one channel raises no other
//!   channel's floor. The method assumes the receiver's noise density is flat across the span;
//!   keep channels off the centre spike and out of the outer edges where the receiver's filters
//!   roll off (common practice).
//! - **Occupied**: `P > D · width · 10^(threshold_db/10)` (SM.1880: level above a threshold set
//!   relative to the noise). Default threshold [`crate::plan::DEFAULT_THRESHOLD_DB`] = 10 dB: at
//!   the default dwell the channel power of noise alone fluctuates by well under 1 dB, so noise
//!   is essentially never read as occupied, even for a channel one bin wide
//!   (see [`noise_false_occupancy`]), while an emission whose power in the channel is 10 dB over
//!   the noise in the channel is always caught.
//! - **Occupancy** of a channel in an interval: occupied samples / samples × 100 %.
//! - **Emission**: a maximal run of occupied samples of one channel, where a run of fewer than
//!   `hang_samples` quiet samples does not end it (the *hang time*, so a burst that dips for a
//!   sample is not split). It starts at the start of its first occupied sample and ends at the
//!   end of its last. Reported: peak and mean channel power over its occupied samples and the
//!   occupied bandwidth (ITU-R SM.328, β = 1 %) of its averaged spectrum, with the noise floor
//!   subtracted bin by bin first so that the figure describes the emission, not the receiver's
//!   noise across the channel.
//! - **Intervals** are aligned to the first sample of the input: interval `k` covers samples
//!   `[k·I, (k+1)·I)`; a row belongs to the interval holding the start of its stamped span.
//! - **Gaps** (samples a live source dropped): the row being built when the gap came is discarded
//!   by the caller, open emissions are closed and flagged partial (what happened in the gap is
//!   unknown), and the gap is counted in the interval it falls in.

use super::band::{band_power, occupied_bandwidth};
use super::noise::noise_floor;
use super::stats::gamma_p;
use crate::dsp::Spectrum;
use crate::units::undb;
use std::collections::VecDeque;

/// The default dwell is the most whole hops that fit in this many seconds.
pub const DEFAULT_MAX_DWELL_S: f64 = 0.010;
/// Default hang time: long enough to bridge a dip of two samples at the default dwell, short
/// enough that two bursts 50 ms apart stay two emissions.
pub const DEFAULT_HANG_S: f64 = 0.025;
/// Default interval between occupancy records: one minute (a common reporting period).
pub const DEFAULT_INTERVAL_S: f64 = 60.0;
/// Memory of the noise-floor tracker (a running median of this many seconds of estimates).
pub const FLOOR_MEMORY_S: f64 = 2.0;
/// Time constant of the PSD smoothing under the noise-floor estimate.
pub const FLOOR_SMOOTHING_S: f64 = 0.5;
/// Percentage for the occupied bandwidth of emissions (ITU-R SM.328: 99 %).
pub const OBW_PERCENT: f64 = 99.0;

/// A channel to watch, in absolute hertz.
#[derive(Clone, Debug, PartialEq)]
pub struct ChannelDef {
    pub low_hz: f64,
    pub high_hz: f64,
    pub threshold_db: f64,
}

impl ChannelDef {
    pub fn width_hz(&self) -> f64 {
        self.high_hz - self.low_hz
    }
}

/// Time base of the measurement, all in samples of the input.
#[derive(Clone, Debug, PartialEq)]
pub struct Timing {
    /// Samples between row starts (the dwell): `frames_per_sample · hop`.
    pub stride: u64,
    /// How far a row's last frame reaches past its stride: `fft_size − hop`.
    pub overhang: u64,
    /// Samples per interval (`u64::MAX` for one interval over the whole input).
    pub interval: u64,
    /// Quiet samples that close an emission (at least 1).
    pub hang_samples: u64,
    /// Rows remembered by the noise-floor tracker.
    pub floor_rows: usize,
    /// Weight of a new row in the smoothed PSD under the floor estimate.
    pub floor_alpha: f64,
}

impl Timing {
    /// The time span a row stands for: `stride` samples centred in the span its frames cover,
    /// where the window gives most weight (a longer span if the row straddles dropped samples).
    pub fn row_span(&self, row: &Spectrum) -> (u64, u64) {
        let start = row.first_sample + self.overhang / 2;
        let end = (start + self.stride).max(row.end_sample.saturating_sub(self.overhang / 2));
        (start, end)
    }

    /// Builds the time base from durations in seconds.
    pub fn new(
        sample_rate_hz: f64,
        fft_size: usize,
        hop: usize,
        frames_per_sample: u64,
        interval_s: f64,
        hang_s: f64,
    ) -> Result<Timing, String> {
        let stride = frames_per_sample * hop as u64;
        let dwell_s = stride as f64 / sample_rate_hz;
        let interval = if interval_s.is_infinite() {
            u64::MAX
        } else {
            (interval_s * sample_rate_hz).round() as u64
        };
        if interval < stride {
            return Err(format!(
                "the interval {interval_s} s is shorter than one measurement sample ({:.3} ms); use a longer --interval",
                dwell_s * 1e3
            ));
        }
        Ok(Timing {
            stride,
            overhang: fft_size.saturating_sub(hop) as u64,
            interval,
            hang_samples: ((hang_s / dwell_s - 1e-9).ceil() as u64).max(1),
            floor_rows: ((FLOOR_MEMORY_S / dwell_s).round() as usize).max(1) | 1,
            floor_alpha: (dwell_s / FLOOR_SMOOTHING_S).min(1.0),
        })
    }
}

/// FFT frames per measurement sample for a requested dwell: the nearest whole number of hops, or
/// by default the most that fit in [`DEFAULT_MAX_DWELL_S`] (at least one).
pub fn frames_per_sample(
    sample_rate_hz: f64,
    hop: usize,
    requested_s: Option<f64>,
) -> Result<u64, String> {
    let hop_s = hop as f64 / sample_rate_hz;
    match requested_s {
        None => Ok(((DEFAULT_MAX_DWELL_S / hop_s + 1e-9).floor() as u64).max(1)),
        Some(d) => {
            let k = (d / hop_s).round();
            if k.is_nan() || k < 1.0 {
                return Err(format!(
                    "--dwell {:.3} ms is shorter than one FFT hop ({:.3} ms); use a longer dwell or a smaller --fft",
                    d * 1e3,
                    hop_s * 1e3
                ));
            }
            Ok(k as u64)
        }
    }
}

/// Approximate probability that noise alone reads as occupied in one sample: the channel power of
/// noise is modelled as `χ²_ν/ν` with `ν = row_dof · width/bin / enbw_bins` (bins closer than the
/// window's ENBW are correlated; common practice), at least `row_dof`.
pub fn noise_false_occupancy(
    threshold_db: f64,
    width_hz: f64,
    bin_hz: f64,
    enbw_bins: f64,
    row_dof: f64,
) -> f64 {
    let nu = (row_dof * (width_hz / bin_hz) / enbw_bins).max(row_dof);
    let a = nu / 2.0;
    1.0 - gamma_p(a, a * undb(threshold_db))
}

/// An interval's summary for one channel. Powers are linear: FS², density FS²/Hz.
#[derive(Clone, Debug, PartialEq)]
pub struct IntervalSummary {
    pub channel: usize,
    pub start_sample: u64,
    pub end_sample: u64,
    /// Measurement samples (rows) in the interval.
    pub samples: u64,
    pub occupied: u64,
    pub mean_power: f64,
    pub peak_power: f64,
    /// Mean of the tracked noise density over the interval.
    pub noise_density: f64,
    /// Input samples lost in this interval (a live source fell behind).
    pub dropped_samples: u64,
    /// The interval was cut short (end of input, stop).
    pub partial: bool,
}

impl IntervalSummary {
    pub fn occupancy_pct(&self) -> f64 {
        100.0 * self.occupied as f64 / self.samples.max(1) as f64
    }
}

/// One emission. Powers are linear (FS²).
#[derive(Clone, Debug, PartialEq)]
pub struct EmissionSummary {
    pub channel: usize,
    pub start_sample: u64,
    pub end_sample: u64,
    /// Occupied measurement samples in it.
    pub samples: u64,
    pub mean_power: f64,
    pub peak_power: f64,
    /// 99 % occupied bandwidth of the noise-corrected average spectrum; `None` if nothing is left
    /// above the noise.
    pub obw_hz: Option<f64>,
    /// Cut short by end of input, a stop or a gap: it may have gone on.
    pub partial: bool,
}

#[derive(Clone, Debug, PartialEq)]
pub enum Event {
    Interval(IntervalSummary),
    Emission(EmissionSummary),
}

/// What one row said about one channel.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Reading {
    /// Channel power, FS².
    pub power: f64,
    /// Noise power expected in the channel, FS².
    pub noise_power: f64,
    pub occupied: bool,
}

/// The SM.1880 decision for one channel in one row, given the noise density.
pub fn read_channel(row: &Spectrum, ch: &ChannelDef, noise_density: f64) -> Reading {
    let power = band_power(row, ch.low_hz, ch.high_hz);
    let noise_power = noise_density * ch.width_hz();
    Reading { power, noise_power, occupied: power > noise_power * undb(ch.threshold_db) }
}

/// The rows' PSD averaged over time: a cumulative mean for the first `1/α` rows, an exponential
/// average of weight `α` after that.
#[derive(Clone, Debug)]
pub struct SmoothedPsd {
    alpha: f64,
    psd: Vec<f64>,
    rows: u64,
}

impl SmoothedPsd {
    pub fn new(alpha: f64) -> SmoothedPsd {
        SmoothedPsd { alpha: alpha.clamp(1e-6, 1.0), psd: Vec::new(), rows: 0 }
    }

    /// Adds a row; returns the smoothed PSD and its equivalent degrees of freedom (the row's times
    /// the number of rows averaged, at most `(2 − α)/α`, the steady-state variance ratio of an
    /// exponential average of independent values; rows are treated as independent).
    pub fn push(&mut self, row: &Spectrum) -> (&[f64], f64) {
        if self.psd.len() != row.psd.len() {
            self.psd = vec![0.0; row.psd.len()];
            self.rows = 0;
        }
        self.rows += 1;
        let a = (1.0 / self.rows as f64).max(self.alpha);
        for (s, p) in self.psd.iter_mut().zip(&row.psd) {
            *s += a * (p - *s);
        }
        let averages = (self.rows as f64).min((2.0 - self.alpha) / self.alpha);
        (&self.psd, row.dof * averages)
    }
}

/// Median of the per-row noise densities over a sliding window of rows.
#[derive(Clone, Debug)]
pub struct FloorTracker {
    capacity: usize,
    recent: VecDeque<f64>,
    sorted: Vec<f64>,
}

impl FloorTracker {
    pub fn new(rows: usize) -> FloorTracker {
        let capacity = rows.max(1);
        FloorTracker {
            capacity,
            recent: VecDeque::with_capacity(capacity),
            sorted: Vec::with_capacity(capacity),
        }
    }

    /// Adds one row's estimate and returns the tracked density.
    pub fn push(&mut self, density: f64) -> f64 {
        let density = if density.is_finite() { density.max(0.0) } else { 0.0 };
        if self.recent.len() == self.capacity {
            let old = self.recent.pop_front().expect("full");
            let at = self.sorted.partition_point(|v| *v < old);
            self.sorted.remove(at);
        }
        self.recent.push_back(density);
        let at = self.sorted.partition_point(|v| *v < density);
        self.sorted.insert(at, density);
        self.current()
    }

    /// The median of what is remembered (the lower middle for an even count), 0 before any row.
    pub fn current(&self) -> f64 {
        match self.sorted.len() {
            0 => 0.0,
            n => self.sorted[(n - 1) / 2],
        }
    }
}

#[derive(Clone, Debug, Default)]
struct IntervalAcc {
    rows: u64,
    occupied: u64,
    power_sum: f64,
    peak: f64,
    floor_sum: f64,
}

#[derive(Clone, Debug)]
struct OpenEmission {
    start: u64,
    end: u64,
    rows: u64,
    power_sum: f64,
    peak: f64,
    floor_sum: f64,
    quiet_rows: u64,
    /// Sum of the PSD over the channel's bins (`bins.0 ..= bins.1`).
    psd_sum: Vec<f64>,
}

#[derive(Clone, Debug)]
struct ChannelState {
    def: ChannelDef,
    bins: (usize, usize),
    acc: IntervalAcc,
    open: Option<OpenEmission>,
}

/// Follows every channel of a plan through a sequence of rows.
pub struct Occupancy {
    timing: Timing,
    channels: Vec<ChannelState>,
    floor: FloorTracker,
    smoothed: SmoothedPsd,
    interval: Option<u64>,
    last_row_end: u64,
    gaps: Vec<(u64, u64)>,
    /// The first row, with its PSD zeroed: the shape from which emission spectra are rebuilt.
    shape: Option<Spectrum>,
}

impl Occupancy {
    pub fn new(timing: Timing, channels: Vec<ChannelDef>) -> Occupancy {
        let channels = channels
            .into_iter()
            .map(|def| ChannelState { def, bins: (0, 0), acc: IntervalAcc::default(), open: None })
            .collect();
        Occupancy {
            floor: FloorTracker::new(timing.floor_rows),
            smoothed: SmoothedPsd::new(timing.floor_alpha),
            timing,
            channels,
            interval: None,
            last_row_end: 0,
            gaps: Vec::new(),
            shape: None,
        }
    }

    pub fn timing(&self) -> &Timing {
        &self.timing
    }

    /// The tracked noise density (FS²/Hz), 0 before the first row.
    pub fn noise_density(&self) -> f64 {
        self.floor.current()
    }

    /// Takes one measurement sample; finished intervals and emissions are appended to `out`.
    pub fn push(&mut self, row: &Spectrum, out: &mut Vec<Event>) {
        if self.shape.is_none() {
            self.learn_shape(row);
        }
        let (row_start, row_end) = self.timing.row_span(row);
        let k = row_start / self.timing.interval;
        if self.interval != Some(k) {
            if let Some(prev) = self.interval {
                let end = (prev + 1).saturating_mul(self.timing.interval);
                self.close_interval(prev, end, false, out);
            }
            self.interval = Some(k);
        }
        let (psd, dof) = self.smoothed.push(row);
        let density = self.floor.push(noise_floor(psd, dof));
        let hang = self.timing.hang_samples;
        for (index, ch) in self.channels.iter_mut().enumerate() {
            let r = read_channel(row, &ch.def, density);
            let acc = &mut ch.acc;
            acc.rows += 1;
            acc.occupied += r.occupied as u64;
            acc.power_sum += r.power;
            acc.peak = acc.peak.max(r.power);
            acc.floor_sum += density;
            if r.occupied {
                let (b0, b1) = ch.bins;
                let e = ch.open.get_or_insert_with(|| OpenEmission {
                    start: row_start,
                    end: row_end,
                    rows: 0,
                    power_sum: 0.0,
                    peak: 0.0,
                    floor_sum: 0.0,
                    quiet_rows: 0,
                    psd_sum: vec![0.0; b1 + 1 - b0],
                });
                e.end = row_end;
                e.rows += 1;
                e.power_sum += r.power;
                e.peak = e.peak.max(r.power);
                e.floor_sum += density;
                e.quiet_rows = 0;
                for (s, p) in e.psd_sum.iter_mut().zip(&row.psd[b0..=b1]) {
                    *s += p;
                }
            } else if let Some(e) = ch.open.as_mut() {
                e.quiet_rows += 1;
                if e.quiet_rows >= hang {
                    let e = ch.open.take().expect("open");
                    out.push(Event::Emission(summarise(index, ch, e, self.shape.as_ref(), false)));
                }
            }
        }
        self.last_row_end = row_end;
    }

    /// Notes that samples `[from, to)` were lost: open emissions end here, flagged partial.
    pub fn gap(&mut self, from: u64, to: u64, out: &mut Vec<Event>) {
        if to <= from {
            return;
        }
        self.close_emissions(out);
        self.gaps.push((from, to));
    }

    /// Ends the run: the open interval (ending at `input_end`, one past the last input sample)
    /// and any open emission are reported with `partial` set.
    pub fn finish(&mut self, input_end: u64, out: &mut Vec<Event>) {
        self.close_emissions(out);
        if let Some(k) = self.interval.take() {
            let end =
                (k + 1).saturating_mul(self.timing.interval).min(input_end.max(self.last_row_end));
            self.close_interval(k, end, true, out);
        }
    }

    fn close_emissions(&mut self, out: &mut Vec<Event>) {
        for (index, ch) in self.channels.iter_mut().enumerate() {
            if let Some(e) = ch.open.take() {
                out.push(Event::Emission(summarise(index, ch, e, self.shape.as_ref(), true)));
            }
        }
    }

    fn close_interval(&mut self, k: u64, end: u64, partial: bool, out: &mut Vec<Event>) {
        let start = k.saturating_mul(self.timing.interval);
        let dropped: u64 =
            self.gaps.iter().map(|&(a, b)| b.min(end).saturating_sub(a.max(start))).sum();
        self.gaps.retain(|&(_, b)| b > end);
        for (index, ch) in self.channels.iter_mut().enumerate() {
            let acc = std::mem::take(&mut ch.acc);
            let n = acc.rows.max(1) as f64;
            out.push(Event::Interval(IntervalSummary {
                channel: index,
                start_sample: start,
                end_sample: end,
                samples: acc.rows,
                occupied: acc.occupied,
                mean_power: acc.power_sum / n,
                peak_power: acc.peak,
                noise_density: acc.floor_sum / n,
                dropped_samples: dropped,
                partial,
            }));
        }
    }

    fn learn_shape(&mut self, row: &Spectrum) {
        let mut shape = row.clone();
        shape.psd.iter_mut().for_each(|p| *p = 0.0);
        let n = row.fft_size as isize;
        for ch in &mut self.channels {
            let first = (row.bin_of_freq(ch.def.low_hz) - 0.5).floor().clamp(0.0, (n - 1) as f64);
            let last = (row.bin_of_freq(ch.def.high_hz) + 0.5).ceil().clamp(first, (n - 1) as f64);
            ch.bins = (first as usize, last as usize);
        }
        self.shape = Some(shape);
    }
}

fn summarise(
    index: usize,
    ch: &ChannelState,
    e: OpenEmission,
    shape: Option<&Spectrum>,
    partial: bool,
) -> EmissionSummary {
    let n = e.rows.max(1) as f64;
    let floor = e.floor_sum / n;
    let obw_hz = shape.and_then(|shape| {
        let mut spec = shape.clone();
        let (b0, _) = ch.bins;
        for (i, s) in e.psd_sum.iter().enumerate() {
            spec.psd[b0 + i] = (s / n - floor).max(0.0);
        }
        occupied_bandwidth(&spec, ch.def.low_hz, ch.def.high_hz, OBW_PERCENT)
            .map(|edges| edges.width_hz())
    });
    EmissionSummary {
        channel: index,
        start_sample: e.start,
        end_sample: e.end,
        samples: e.rows,
        mean_power: e.power_sum / n,
        peak_power: e.peak,
        obw_hz,
        partial,
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::dsp::{Engine, EngineConfig, WindowKind};
    use crate::units::db;
    use num_complex::Complex32;
    use std::f64::consts::PI;

    pub(crate) const FS: f64 = 200e3;
    pub(crate) const CENTER: f64 = 100e6;
    /// Total noise power of the synthetic band, dBFS: density −40 − 10·log10(200 k) = −93 dBFS/Hz.
    pub(crate) const NOISE_DBFS: f64 = -40.0;

    /// Deterministic Gaussian numbers (xorshift64 + Box–Muller).
    pub(crate) struct Gauss(u64);

    impl Gauss {
        pub(crate) fn new(seed: u64) -> Gauss {
            Gauss(seed | 1)
        }
        fn uniform(&mut self) -> f64 {
            self.0 ^= self.0 << 13;
            self.0 ^= self.0 >> 7;
            self.0 ^= self.0 << 17;
            ((self.0 >> 11) as f64 + 0.5) / (1u64 << 53) as f64
        }
        pub(crate) fn next(&mut self) -> f64 {
            let (u1, u2) = (self.uniform(), self.uniform());
            (-2.0 * u1.ln()).sqrt() * (2.0 * PI * u2).cos()
        }
    }

    /// A carrier `offset_hz` from the centre at `level_dbfs`, switched by `on(sample index)`.
    pub(crate) struct Keyed<'a> {
        pub(crate) offset_hz: f64,
        pub(crate) level_dbfs: f64,
        pub(crate) on: &'a dyn Fn(u64) -> bool,
    }

    /// Complex white noise of total power `NOISE_DBFS` plus keyed carriers.
    pub(crate) fn band(n: usize, carriers: &[Keyed], seed: u64) -> Vec<Complex32> {
        let sigma = (undb(NOISE_DBFS) / 2.0).sqrt();
        let mut g = Gauss::new(seed);
        (0..n as u64)
            .map(|i| {
                let mut v = Complex32::new((sigma * g.next()) as f32, (sigma * g.next()) as f32);
                for c in carriers {
                    if (c.on)(i) {
                        let a = undb(c.level_dbfs).sqrt();
                        let ph = 2.0 * PI * c.offset_hz * i as f64 / FS;
                        v += Complex32::new((a * ph.cos()) as f32, (a * ph.sin()) as f32);
                    }
                }
                v
            })
            .collect()
    }

    pub(crate) fn channel(offset_hz: f64, width_hz: f64) -> ChannelDef {
        ChannelDef {
            low_hz: CENTER + offset_hz - width_hz / 2.0,
            high_hz: CENTER + offset_hz + width_hz / 2.0,
            threshold_db: crate::plan::DEFAULT_THRESHOLD_DB,
        }
    }

    /// Runs samples through the engine (Hann, 50 % overlap) and the tracker; returns the events
    /// and the timing used.
    pub(crate) fn run(
        x: &[Complex32],
        fft: usize,
        dwell_s: Option<f64>,
        interval_s: f64,
        hang_s: f64,
        channels: Vec<ChannelDef>,
    ) -> (Vec<Event>, Timing) {
        let hop = fft / 2;
        let k = frames_per_sample(FS, hop, dwell_s).unwrap();
        let cfg = EngineConfig {
            fft_size: fft,
            window: WindowKind::Hann,
            overlap: 0.5,
            frames_per_output: Some(k),
        };
        let timing = Timing::new(FS, fft, hop, k, interval_s, hang_s).unwrap();
        let mut occ = Occupancy::new(timing.clone(), channels);
        let mut engine = Engine::new(cfg, FS, CENTER);
        let mut events = Vec::new();
        for (i, chunk) in x.chunks(10_007).enumerate() {
            engine.push((i * 10_007) as u64, chunk, &mut |row| occ.push(row, &mut events));
        }
        occ.finish(x.len() as u64, &mut events);
        (events, timing)
    }

    fn intervals(events: &[Event], ch: usize) -> Vec<IntervalSummary> {
        events
            .iter()
            .filter_map(|e| match e {
                Event::Interval(i) if i.channel == ch => Some(i.clone()),
                _ => None,
            })
            .collect()
    }

    fn emissions(events: &[Event], ch: usize) -> Vec<EmissionSummary> {
        events
            .iter()
            .filter_map(|e| match e {
                Event::Emission(m) if m.channel == ch => Some(m.clone()),
                _ => None,
            })
            .collect()
    }

    fn s(seconds: f64) -> u64 {
        (seconds * FS).round() as u64
    }

    #[test]
    fn default_dwell_is_at_most_10_ms_and_whole_hops() {
        // 256-sample hops at 200 kS/s are 1.28 ms: 7 fit in 10 ms (8.96 ms).
        assert_eq!(frames_per_sample(FS, 256, None).unwrap(), 7);
        assert_eq!(frames_per_sample(FS, 256, Some(0.02)).unwrap(), 16);
        // A hop longer than 10 ms: one hop.
        assert_eq!(frames_per_sample(48e3, 2048, None).unwrap(), 1);
        assert!(frames_per_sample(FS, 256, Some(0.0005)).unwrap_err().contains("shorter"));
        let t = Timing::new(FS, 512, 256, 7, 60.0, DEFAULT_HANG_S).unwrap();
        assert_eq!((t.stride, t.overhang, t.interval), (1792, 256, 12_000_000));
        // 25 ms of hang over 8.96 ms samples: 3 quiet samples close an emission.
        assert_eq!(t.hang_samples, 3);
        assert!(Timing::new(FS, 512, 256, 7, 0.001, 0.0).unwrap_err().contains("interval"));
    }

    #[test]
    fn keyed_carriers_read_their_duty_cycle() {
        // ITU-R SM.1880: occupancy = occupied samples / samples. Three channels carry a carrier
        // keyed with a known duty cycle (1 s period): 30 %, always on, never on. Each carrier
        // stands 20 dB over the noise in its 10 kHz channel (channel noise −40 − 13 = −53 dBFS).
        let thirty = |i: u64| i % s(1.0) < s(0.3);
        let always = |_: u64| true;
        let never = |_: u64| false;
        let x = band(
            s(20.0) as usize,
            &[
                Keyed { offset_hz: -50e3, level_dbfs: -33.0, on: &thirty },
                Keyed { offset_hz: 20e3, level_dbfs: -33.0, on: &always },
                Keyed { offset_hz: 60e3, level_dbfs: -33.0, on: &never },
            ],
            11,
        );
        let chans = vec![channel(-50e3, 10e3), channel(20e3, 10e3), channel(60e3, 10e3)];
        let (events, _) = run(&x, 512, None, 5.0, DEFAULT_HANG_S, chans);
        for (ch, truth) in [(0, 30.0), (1, 100.0), (2, 0.0)] {
            let iv = intervals(&events, ch);
            assert_eq!(iv.len(), 4, "four 5 s intervals in 20 s");
            for i in &iv {
                let pct = i.occupancy_pct();
                eprintln!("channel {ch} interval {}: {pct:.2} % (truth {truth} %)", i.start_sample);
                assert!((pct - truth).abs() <= 2.0, "channel {ch}: {pct:.2} % vs {truth} %");
            }
        }
        let iv = intervals(&events, 0);
        assert!(!iv[0].partial && !iv[2].partial);
        assert_eq!((iv[1].start_sample, iv[1].end_sample), (s(5.0), s(10.0)));
    }

    #[test]
    fn well_separated_bursts_are_counted_exactly_with_their_times() {
        // Bursts of 50 .. 600 ms separated by at least 200 ms, starting off the sample grid.
        let bursts: Vec<(u64, u64)> = [
            (0.1234, 0.05),
            (0.5, 0.2),
            (1.0317, 0.6),
            (2.0, 0.1),
            (2.4444, 0.33),
            (3.1, 0.07),
            (3.5, 0.4),
            (4.2, 0.15),
        ]
        .iter()
        .map(|&(t, d)| (s(t), s(t + d)))
        .collect();
        let on = |i: u64| bursts.iter().any(|&(a, b)| i >= a && i < b);
        let x = band(s(5.0) as usize, &[Keyed { offset_hz: 30e3, level_dbfs: -33.0, on: &on }], 5);
        let (events, timing) = run(&x, 512, None, 60.0, DEFAULT_HANG_S, vec![channel(30e3, 10e3)]);
        let found = emissions(&events, 0);
        assert_eq!(found.len(), bursts.len(), "{found:?}");
        for (e, &(a, b)) in found.iter().zip(&bursts) {
            // Start and end within one dwell of the truth.
            let ds = e.start_sample.abs_diff(a);
            let de = e.end_sample.abs_diff(b);
            eprintln!(
                "emission start error {ds}, end error {de} samples (dwell {})",
                timing.stride
            );
            assert!(ds <= timing.stride && de <= timing.stride, "{e:?} vs {a}..{b}");
            assert!(!e.partial);
            // The emission's mean power is the carrier's −33 dBFS plus the channel's noise
            // (−53 dBFS), i.e. −32.96 dBFS, less the edge samples only partly filled.
            assert!((db(e.peak_power) + 32.96).abs() < 0.5, "{}", db(e.peak_power));
        }
    }

    #[test]
    fn bursts_50_ms_apart_stay_two_emissions_and_a_short_dip_does_not_split() {
        // Pairs of 100 ms bursts with a 50 ms gap, at different phases against the sample grid;
        // then a 100 ms burst with a 5 ms dip, which the default hang time must bridge.
        let mut bursts = Vec::new();
        for p in 0..5 {
            let t0 = 0.1 + p as f64 * 0.5 + p as f64 * 0.0019;
            bursts.push((s(t0), s(t0 + 0.1)));
            bursts.push((s(t0 + 0.15), s(t0 + 0.25)));
        }
        let dip = (s(3.0), s(3.05), s(3.055), s(3.1));
        let on = |i: u64| {
            bursts.iter().any(|&(a, b)| i >= a && i < b)
                || (i >= dip.0 && i < dip.1)
                || (i >= dip.2 && i < dip.3)
        };
        let x = band(s(3.5) as usize, &[Keyed { offset_hz: 0.0, level_dbfs: -33.0, on: &on }], 9);
        let (events, _) = run(&x, 512, None, 60.0, DEFAULT_HANG_S, vec![channel(0.0, 10e3)]);
        let found = emissions(&events, 0);
        assert_eq!(found.len(), 11, "{found:#?}");
        let last = found.last().unwrap();
        assert!(last.start_sample.abs_diff(dip.0) < s(0.01) && last.end_sample >= dip.3 - s(0.01));
    }

    #[test]
    fn a_steady_carrier_does_not_raise_its_neighbours_floor() {
        // A strong carrier (−10 dBFS, 43 dB over the channel noise) sits in the middle channel all
        // the time. The floor reported for every channel must stay at the true density of the
        // synthetic noise: total power / fs (Parseval) = −93.01 dBFS/Hz.
        let always = |_: u64| true;
        let x =
            band(s(3.0) as usize, &[Keyed { offset_hz: 0.0, level_dbfs: -10.0, on: &always }], 3);
        let chans = vec![channel(-12.5e3, 12.5e3), channel(0.0, 12.5e3), channel(12.5e3, 12.5e3)];
        let (events, _) = run(&x, 512, None, 60.0, DEFAULT_HANG_S, chans);
        let truth = NOISE_DBFS - db(FS);
        for ch in 0..3 {
            let iv = &intervals(&events, ch)[0];
            let got = db(iv.noise_density);
            eprintln!("channel {ch}: floor {got:.3} dBFS/Hz, truth {truth:.3}");
            assert!((got - truth).abs() < 0.2, "channel {ch}: floor {got:.2} vs {truth:.2}");
        }
        assert_eq!(intervals(&events, 1)[0].occupancy_pct(), 100.0);
        assert_eq!(intervals(&events, 0)[0].occupied, 0);
        assert_eq!(intervals(&events, 2)[0].occupied, 0);
    }

    /// Gaussian noise with a flat spectrum `width_hz` wide around `offset_hz` and total power
    /// `level_dbfs`, built in the frequency domain (`n` a power of two).
    fn flat_block(
        n: usize,
        offset_hz: f64,
        width_hz: f64,
        level_dbfs: f64,
        seed: u64,
    ) -> Vec<Complex32> {
        use rustfft::FftPlanner;
        let mut g = Gauss::new(seed);
        let mut spec: Vec<num_complex::Complex64> = (0..n)
            .map(|k| {
                let f = if k < n / 2 { k as f64 } else { k as f64 - n as f64 } * FS / n as f64;
                if (f - offset_hz).abs() < width_hz / 2.0 {
                    num_complex::Complex64::new(g.next(), g.next())
                } else {
                    num_complex::Complex64::new(0.0, 0.0)
                }
            })
            .collect();
        FftPlanner::new().plan_fft_inverse(n).process(&mut spec);
        let p: f64 = spec.iter().map(|c| c.norm_sqr()).sum::<f64>() / n as f64;
        let gain = (undb(level_dbfs) / p).sqrt();
        spec.iter().map(|c| Complex32::new((c.re * gain) as f32, (c.im * gain) as f32)).collect()
    }

    #[test]
    fn emission_obw_of_a_flat_block_is_99_percent_of_its_width() {
        // ITU-R SM.328: for a spectrum flat over B and empty elsewhere, 0.5 % of the power lies
        // below each limit, so the 99 % bandwidth is 0.99·B. Band-limited Gaussian noise (10 kHz
        // wide) is keyed on for 1.5 s in a 25 kHz channel, 11 dB over the channel's noise.
        let n = 1 << 19;
        let b_hz = 10e3;
        let block = flat_block(n, 40e3, b_hz, -38.0, 21);
        let noise = band(n, &[], 4);
        let (a, b) = (s(0.5) as usize, s(2.0) as usize);
        let x: Vec<Complex32> = noise
            .iter()
            .zip(&block)
            .enumerate()
            .map(|(i, (v, w))| if (a..b).contains(&i) { v + w } else { *v })
            .collect();
        let (events, _) = run(&x, 4096, None, 60.0, DEFAULT_HANG_S, vec![channel(40e3, 25e3)]);
        let found = emissions(&events, 0);
        assert_eq!(found.len(), 1, "{found:?}");
        let obw = found[0].obw_hz.unwrap();
        eprintln!("emission OBW {obw:.1} Hz, expected {:.1} Hz", 0.99 * b_hz);
        assert!((obw / (0.99 * b_hz) - 1.0).abs() < 0.02, "OBW {obw:.0} Hz");
    }

    #[test]
    fn a_wideband_link_that_never_stops_does_not_lift_the_floor() {
        // A noise-like link 60 kHz wide (30 % of the band) at −25 dBFS, 19 dB over the noise in
        // its width, on all the time, plus a keyed carrier elsewhere. The tracked floor must stay
        // within 0.3 dB of the true density of the synthetic noise (total power / fs, Parseval).
        let n = 1 << 20;
        let link = flat_block(n, -40e3, 60e3, -25.0, 12);
        let keyed = |i: u64| i % s(0.5) < s(0.2);
        let noise = band(n, &[Keyed { offset_hz: 70e3, level_dbfs: -35.0, on: &keyed }], 6);
        let x: Vec<Complex32> = noise.iter().zip(&link).map(|(a, b)| a + b).collect();
        let chans = vec![channel(-40e3, 60e3), channel(70e3, 10e3), channel(40e3, 10e3)];
        let (events, _) = run(&x, 512, None, 60.0, DEFAULT_HANG_S, chans);
        let iv = intervals(&events, 2);
        let truth = NOISE_DBFS - db(FS);
        let got = db(iv[0].noise_density);
        eprintln!("busy band: floor {got:.3} dBFS/Hz, truth {truth:.3}");
        assert!((got - truth).abs() < 0.3, "floor {got:.2} vs {truth:.2}");
        assert_eq!(intervals(&events, 0)[0].occupancy_pct(), 100.0);
        assert_eq!(iv[0].occupied, 0);
    }

    #[test]
    fn a_gap_closes_emissions_as_partial_and_is_counted() {
        let always = |_: u64| true;
        let x =
            band(s(2.0) as usize, &[Keyed { offset_hz: 0.0, level_dbfs: -30.0, on: &always }], 8);
        let k = frames_per_sample(FS, 256, None).unwrap();
        let timing = Timing::new(FS, 512, 256, k, 1.0, DEFAULT_HANG_S).unwrap();
        let mut occ = Occupancy::new(timing, vec![channel(0.0, 10e3)]);
        let cfg = EngineConfig {
            fft_size: 512,
            window: WindowKind::Hann,
            overlap: 0.5,
            frames_per_output: Some(k),
        };
        let mut engine = Engine::new(cfg, FS, CENTER);
        let mut ev = Vec::new();
        // 0.5 s delivered, 0.1 s lost, then the rest (indices keep counting the lost samples).
        let (cut, resume) = (s(0.5) as usize, s(0.6) as usize);
        engine.push(0, &x[..cut], &mut |r| occ.push(r, &mut ev));
        engine.finish(&mut |_| {});
        occ.gap(cut as u64, resume as u64, &mut ev);
        engine.push(resume as u64, &x[resume..], &mut |r| occ.push(r, &mut ev));
        occ.finish(x.len() as u64, &mut ev);
        let em = emissions(&ev, 0);
        assert_eq!(em.len(), 2, "{em:?}");
        assert!(em[0].partial && em[0].end_sample <= cut as u64);
        assert!(em[1].start_sample >= resume as u64 && em[1].partial);
        let iv = intervals(&ev, 0);
        assert_eq!(iv.len(), 2);
        assert_eq!(iv[0].dropped_samples, s(0.1));
        assert_eq!(iv[1].dropped_samples, 0);
        assert_eq!(iv[0].occupancy_pct(), 100.0);
    }

    #[test]
    fn the_floor_tracker_is_a_running_median() {
        let mut t = FloorTracker::new(5);
        for v in [1.0, 1.0, 100.0, 1.0, 100.0] {
            t.push(v);
        }
        assert_eq!(t.current(), 1.0);
        // Outliers are outvoted while they are fewer than half of the memory...
        t.push(1.0); // 1, 100, 1, 100, 1
        assert_eq!(t.current(), 1.0);
        // ...and followed once they are the majority: 100, 1, 100, 1, 100.
        t.push(100.0);
        assert_eq!(t.current(), 100.0);
        assert_eq!(FloorTracker::new(3).current(), 0.0);
    }

    #[test]
    fn the_smoothed_psd_averages_then_forgets() {
        let row = |v: f64| {
            let mut s = crate::measure::band::tests::spectrum_with(vec![v; 4]);
            s.dof = 2.0;
            s
        };
        let mut sm = SmoothedPsd::new(0.25);
        // Cumulative mean for the first 1/α = 4 rows: (4 + 0 + 2 + 2)/4 = 2.
        for v in [4.0, 0.0, 2.0] {
            sm.push(&row(v));
        }
        let (psd, dof) = sm.push(&row(2.0));
        assert_eq!((psd[0], dof), (2.0, 8.0));
        // Then weight α: 2 + 0.25·(10 − 2) = 4.
        let (psd, dof) = sm.push(&row(10.0));
        assert_eq!((psd[0], dof), (4.0, 10.0));
        // ν stops growing at (2 − α)/α = 7 rows' worth.
        for _ in 0..5 {
            sm.push(&row(4.0));
        }
        assert_eq!(sm.push(&row(4.0)).1, 14.0);
    }

    #[test]
    fn predicted_false_occupancy_of_noise_matches_a_simulation() {
        // Noise only, one FFT frame per sample (dwell = one hop), a 2 kHz channel (about 5 bins)
        // and a low 3 dB threshold, so that noise does cross it. The χ² model of
        // `noise_false_occupancy` (common practice) must predict the simulated rate within ±35 %.
        let x = band(s(30.0) as usize, &[], 17);
        let mut ch = channel(-30e3, 2e3);
        ch.threshold_db = 3.0;
        let (events, _) = run(&x, 512, Some(0.00128), 60.0, 0.0, vec![ch]);
        let iv = &intervals(&events, 0)[0];
        let simulated = iv.occupancy_pct() / 100.0;
        let w = crate::dsp::Window::new(WindowKind::Hann, 512);
        let predicted = noise_false_occupancy(3.0, 2e3, FS / 512.0, w.enbw_bins(), 2.0);
        eprintln!("noise false occupancy: simulated {simulated:.4}, predicted {predicted:.4}");
        assert!(iv.samples > 20_000);
        assert!(
            (simulated / predicted - 1.0).abs() < 0.35,
            "simulated {simulated:.4}, predicted {predicted:.4}"
        );
        // At the default 10 dB the same channel is practically never occupied by noise.
        assert!(noise_false_occupancy(10.0, 2e3, FS / 512.0, w.enbw_bins(), 2.0) < 1e-3);
    }
}
