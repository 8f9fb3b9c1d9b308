//! The time base of occupancy measurement: how long a measurement sample lasts, how many make an
//! interval or close an emission, and what noise alone is expected to do at a threshold.
//!
//! Kept apart from the tracker because the commands need these figures before any row exists:
//! to validate options, to print the dwell and the predicted false occupancy, and to size
//! the engine's rows.

use crate::dsp::Spectrum;
use crate::measure::stats::gamma_p;
use crate::units::undb;

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
