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
//!   weight, so consecutive rows tile time without overlap. The decision (occupied or not) is
//!   made per measurement sample, but a sample at the edge of an emission counts by the share of
//!   it the emission filled, and the emission's edges are placed by those shares, to about one
//!   FFT hop (see [`tracker`]).
//! - **Channel power** `P`: the integral of the row's PSD over the channel, in FS²
//!   ([`band_power`]).
//! - **Noise floor**: a density `D` (FS²/Hz) shared by all channels, estimated over the *whole*
//!   captured band in three steps:
//!   1. the rows' PSD is smoothed over time with an exponential average of time constant
//!      [`FLOOR_SMOOTHING_S`], which narrows the spread of noise-only bins (its equivalent degrees
//!      of freedom grow from one row's to about `(2 − α)/α` times that) so that step 2 can tell
//!      noise from weak signals;
//!   2. [`noise_floor`](crate::measure::noise::noise_floor) (FCME) estimates the density of that smoothed PSD, setting aside every
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
//! - **Occupancy** of a channel in an interval: occupied samples / samples × 100 %, where a
//!   sample at an emission's edge counts by its share (see [`tracker`]).
//! - **Emission**: a maximal run of occupied samples of one channel, where a run of fewer than
//!   `hang_samples` quiet samples does not end it (the *hang time*, so a burst that dips for a
//!   sample is not split). Its start and end lie inside its edge samples, placed by the shares
//!   of them it filled (so within about one FFT hop of the truth for a steady emission). Reported: peak and mean channel power over its occupied samples and the
//!   occupied bandwidth (ITU-R SM.328, β = 1 %) of its averaged spectrum, with the noise floor
//!   subtracted bin by bin first so that the figure describes the emission, not the receiver's
//!   noise across the channel.
//! - **Intervals** are aligned to the first sample of the input: interval `k` covers samples
//!   `[k·I, (k+1)·I)`; a row belongs to the interval holding the start of its stamped span.
//! - **Gaps** (samples a live source dropped): the row being built when the gap came is discarded
//!   by the caller, open emissions are closed and flagged partial (what happened in the gap is
//!   unknown), and the gap is counted in the interval it falls in.
//!
//! # Where things are
//!
//! - [`timing`]: the time base (dwell, interval, hang time) and the defaults;
//! - [`tracker`]: [`Occupancy`], which follows every channel through the rows;
//! - the noise floor is tracked by [`crate::measure::noise::tracker`].

pub mod timing;
pub mod tracker;

pub use timing::{
    frames_per_sample, noise_false_occupancy, Timing, DEFAULT_HANG_S, DEFAULT_INTERVAL_S,
    DEFAULT_MAX_DWELL_S, FLOOR_MEMORY_S, FLOOR_SMOOTHING_S, OBW_PERCENT,
};
pub use tracker::Occupancy;

use super::band::{band_power, Edges};
use super::classify::Classification;
use crate::dsp::Spectrum;
use crate::units::undb;

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

/// An interval's summary for one channel. Powers are linear: FS², density FS²/Hz.
#[derive(Clone, Debug, PartialEq)]
pub struct IntervalSummary {
    pub channel: usize,
    pub start_sample: u64,
    pub end_sample: u64,
    /// Measurement samples (rows) in the interval.
    pub samples: u64,
    /// Occupied measurement samples; a sample an emission filled only in part counts by the
    /// share it filled (see [`tracker`]).
    pub occupied: f64,
    pub mean_power: f64,
    pub peak_power: f64,
    /// Mean of the tracked noise density over the interval.
    pub noise_density: f64,
    /// Samples of the interval that no emission touched (not occupied, no share of one), and
    /// the channel's mean power over them: the channel's own floor, which shows interference
    /// that stays under the threshold where the shared density cannot.
    pub quiet_samples: u64,
    pub quiet_power: f64,
    /// Input samples lost in this interval (a live source fell behind).
    pub dropped_samples: u64,
    /// The interval was cut short (end of input, stop).
    pub partial: bool,
    /// False for a channel of a panorama that no step sees whole (in a hole between steps,
    /// or beyond the span): nothing of it was measured, so its interval is "not measured",
    /// never idle (ITU-R Report SM.2256, from memory: occupancy is over the observation time,
    /// and it has none).
    pub in_view: bool,
}

impl IntervalSummary {
    pub fn occupancy_pct(&self) -> f64 {
        100.0 * self.occupied / self.samples.max(1) as f64
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
    /// The edges of that occupied band, absolute Hz.
    pub obw: Option<Edges>,
    /// Noise power expected in the channel (mean tracked density × channel width), FS², so
    /// `mean_power / noise_power` is the emission's SNR in the channel.
    pub noise_power: f64,
    /// Cut short by end of input, a stop or a gap: it may have gone on.
    pub partial: bool,
    /// Its kind, when the run classifies emissions (the tracker leaves it `None`; the run fills
    /// it in from the emission's samples before any consumer sees it).
    pub class: Option<Box<Classification>>,
}

/// An emission has begun: told as soon as its first occupied sample is read, for consumers
/// that must act at its start (a triggered capture); its summary follows as
/// [`Event::Emission`] when it ends.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct EmissionStart {
    pub channel: usize,
    pub start_sample: u64,
}

#[derive(Clone, Debug, PartialEq)]
pub enum Event {
    Interval(IntervalSummary),
    Emission(EmissionSummary),
    Opened(EmissionStart),
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

#[cfg(test)]
pub(crate) mod tests;
