//! The time base of occupancy measurement: how long a measurement sample lasts, how many make an
//! interval or close an emission, and what noise alone is expected to do at a threshold.
//!
//! Kept apart from the tracker because the commands need these figures before any row exists:
//! to validate options, to print the dwell and the predicted false occupancy, and to size
//! the engine's rows.

use crate::dsp::Spectrum;
use crate::measure::stats::gamma_p;
use crate::units::{format_num, samples_in, undb};

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
/// Most measurement samples (rows) per second of input: a dwell of at least 1 ms. Every row runs
/// the noise tracker and every channel, and the tracker remembers [`FLOOR_MEMORY_S`] of rows, so
/// the work per second of input grows with the square of the row rate: at 1 000 rows a second a
/// debug build still keeps up with the input, at 10 000 it was six times slower than the input.
pub const MAX_ROWS_PER_S: f64 = 1_000.0;
/// Most FFT frames per second of input that `--fft`, `--overlap` and the rate may imply:
/// about the engine's throughput for the smallest frames, so beyond it no setting keeps up.
pub const MAX_FRAMES_PER_S: f64 = 1e7;
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
        let stride = frames_per_sample.checked_mul(hop as u64).ok_or_else(|| {
            format!("{frames_per_sample} FFT frames of hop {hop} make too long a sample; use a shorter --dwell")
        })?;
        let dwell_s = stride as f64 / sample_rate_hz;
        let interval = if interval_s.is_infinite() {
            u64::MAX
        } else {
            samples_in(interval_s, sample_rate_hz).map_err(|e| format!("--interval: {e}"))?
        };
        // A hang must be countable in samples too (the tracker counts them in rows).
        samples_in(hang_s, sample_rate_hz).map_err(|e| format!("--hang: {e}"))?;
        if interval < stride {
            return Err(format!(
                "the interval {} s is shorter than one measurement sample ({:.3} ms); use a longer --interval",
                format_num(interval_s),
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

/// Refuses settings that ask for more than [`MAX_FRAMES_PER_S`] FFT frames per second of input:
/// every command checks this before it runs, so a setting cannot make a second of input take
/// minutes.
pub fn check_frame_rate(sample_rate_hz: f64, hop: usize) -> Result<(), String> {
    let frames_per_s = sample_rate_hz / hop as f64;
    if frames_per_s.is_nan() || frames_per_s > MAX_FRAMES_PER_S {
        return Err(format!(
            "--fft and --overlap give a hop of {hop} samples, {} FFT frames per second of input at this rate; at most {} are allowed: use a larger --fft or a smaller --overlap",
            format_num(frames_per_s.round()),
            format_num(MAX_FRAMES_PER_S)
        ));
    }
    Ok(())
}

/// FFT frames per measurement sample for a requested dwell: the nearest whole number of hops, or
/// by default the most that fit in [`DEFAULT_MAX_DWELL_S`] (at least one).
pub fn frames_per_sample(
    sample_rate_hz: f64,
    hop: usize,
    requested_s: Option<f64>,
) -> Result<u64, String> {
    let hop_s = hop as f64 / sample_rate_hz;
    check_frame_rate(sample_rate_hz, hop)?;
    let frames_per_s = sample_rate_hz / hop as f64;
    let k = match requested_s {
        None => ((DEFAULT_MAX_DWELL_S / hop_s + 1e-9).floor()).max(1.0),
        Some(d) => {
            let k = (d / hop_s).round();
            if k.is_nan() || k < 1.0 {
                return Err(format!(
                    "--dwell {:.3} ms is shorter than one FFT hop ({:.3} ms); use a longer dwell or a smaller --fft",
                    d * 1e3,
                    hop_s * 1e3
                ));
            }
            k
        }
    };
    let rows_per_s = frames_per_s / k;
    if rows_per_s > MAX_ROWS_PER_S * (1.0 + 1e-9) {
        return Err(format!(
            "--dwell {:.3} ms makes {} measurement samples per second of input; at most {} are allowed: use --dwell {} ms or longer",
            k * hop_s * 1e3,
            format_num(rows_per_s.round()),
            format_num(MAX_ROWS_PER_S),
            format_num(1e3 / MAX_ROWS_PER_S)
        ));
    }
    // k ≤ rate · dwell ≤ MAX_RATE_HZ · MAX_SECONDS < 2^64 for checked inputs; refuse the rest.
    if k >= 18_446_744_073_709_551_616.0 {
        return Err("--dwell is too long; use a shorter one".into());
    }
    Ok(k as u64)
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

#[cfg(test)]
mod limits {
    use super::*;

    #[test]
    fn the_work_a_setting_implies_is_capped() {
        // 2.4 MS/s, hop 1: 2.4 M frames/s is allowed, a 1 µs dwell (1.2 M rows/s) is not.
        assert!(frames_per_sample(2.4e6, 1, Some(1e-6)).unwrap_err().contains("--dwell"));
        // 1 ms is exactly the cap: 1 000 rows a second.
        assert_eq!(frames_per_sample(2.4e6, 1, Some(1e-3)).unwrap(), 2400);
        assert!(frames_per_sample(2.4e6, 1, Some(0.9e-3)).is_err());
        // Frames: 100 MS/s at hop 1 is 1e8 frames a second, above MAX_FRAMES_PER_S.
        let e = frames_per_sample(1e8, 1, None).unwrap_err();
        assert!(e.contains("--fft") && e.contains("--overlap"), "{e}");
        // The default dwell never trips the row cap, at any hop.
        for hop in [1, 7, 100, 1 << 19] {
            assert!(frames_per_sample(1e6, hop, None).is_ok(), "hop {hop}");
        }
    }

    #[test]
    fn sample_counts_are_checked() {
        assert!(Timing::new(1e6, 16, 8, u64::MAX, 60.0, 0.025).unwrap_err().contains("--dwell"));
        assert!(Timing::new(1e11, 16, 8, 1, 1e300, 0.025).unwrap_err().contains("--interval"));
        assert!(Timing::new(1e11, 16, 8, 1, 60.0, 1e300).unwrap_err().contains("--hang"));
        let t = Timing::new(1e11, 16, 8, 1, f64::INFINITY, 1.0).unwrap();
        assert_eq!(t.interval, u64::MAX);
    }
}
