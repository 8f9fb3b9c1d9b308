//! Channelising one emission: shift it to 0 Hz, low-pass it to its band and decimate it to a few
//! times its occupied bandwidth, all in one FFT (the bins of the band are copied into a shorter
//! inverse transform, so the decimation factor need not be whole). Also the noise: the in-band
//! noise power of the result, from the caller's noise PSD or estimated from the bins outside
//! the emission.

use super::spectrum::{bin_hz, fft, fft_f32, quantile};
use super::EmissionIq;
use num_complex::{Complex32, Complex64};
use std::sync::OnceLock;

/// At most this many input samples are read (the first ones): one FFT of this size bounds the
/// cost of channelising (about 2^20 · 20 operations).
pub const MAX_INPUT_SAMPLES: usize = 1 << 20;
/// At most this many samples after decimation (about 2^17, e.g. 1.3 s of a 25 kHz-wide emission
/// at 4 × OBW); longer input is cut to fit before the FFT.
pub const MAX_BASEBAND_SAMPLES: usize = 1 << 17;
/// Output rate over the (effective) occupied bandwidth.
const RATE_OVER_OBW: f64 = 4.0;
/// Pass band, each side of the centre, as a fraction of the OBW; the response falls as a raised
/// cosine to zero at `STOP` × OBW.
const PASS: f64 = 0.6;
const STOP: f64 = 0.75;
/// The narrowest band analysed, in FFT bins of the input: a carrier's measured OBW can be a
/// single resolution bandwidth or less.
const MIN_BINS: f64 = 64.0;

/// One emission at baseband.
pub(super) struct Baseband {
    pub x: Vec<Complex64>,
    pub rate_hz: f64,
    /// Bandwidth the classifier took as the emission's (the caller's OBW, or a floor).
    pub obw_hz: f64,
    /// Noise PSD (|x|² per Hz) and the in-band noise power per sample of `x`.
    pub noise_psd: f64,
    pub noise_power: f64,
    /// Whether the noise came from the caller (true) or was estimated here.
    pub noise_given: bool,
    /// Power response of the channel filter on the bins of `x` (FFT order), for noise bookkeeping
    /// of later filters.
    pub response: Vec<f64>,
    /// Duration of the input used, s.
    pub seconds: f64,
}

impl Baseband {
    /// Keeps only the samples `[a, b)` of `x` (`a < b ≤ x.len()`). The channel filter's response
    /// is carried over to the shorter FFT grid by frequency, and the duration scaled, so the
    /// noise bookkeeping of later filters still holds.
    pub fn keep(&mut self, a: usize, b: usize) {
        let old_n = self.x.len();
        if a >= b || b > old_n {
            return;
        }
        self.x = self.x[a..b].to_vec();
        let n = self.x.len();
        let old = std::mem::take(&mut self.response);
        self.response = (0..n)
            .map(|k| {
                let f = bin_hz(k, n, self.rate_hz);
                let j = (f / self.rate_hz * old_n as f64).round() as i64;
                old.get(j.rem_euclid(old_n as i64) as usize).copied().unwrap_or(0.0)
            })
            .collect();
        self.seconds *= n as f64 / old_n as f64;
    }
}

/// The forward transform of one stretch of input, made once and read by every emission
/// channelised from that stretch: `measure` classifies all its peaks from the same newest
/// samples, and each peak then only copies its band's bins into its own short inverse
/// transform. Safe to share between threads (`Arc<Forward>`); the transform is made by the
/// first emission that needs it.
#[derive(Default)]
pub struct Forward {
    cell: OnceLock<Transform>,
    /// Classify on the calling thread only (see [`Forward::one_thread`]).
    pub(super) one_thread: bool,
}

/// The spectrum of the first `n` samples (unshifted, FFT order) and its power per bin.
struct Transform {
    spec: Vec<Complex32>,
    /// |X|² / (n · rate) per bin, the PSD the noise estimate takes its median of (made when
    /// first asked: not at all when the caller gives the noise).
    psd: OnceLock<Vec<f64>>,
    rate: f64,
}

impl Forward {
    /// A transform for a caller that bounds its share of a core by the time it works (the live
    /// monitor's classifier): no work of the classification runs on another thread.
    pub fn one_thread() -> Forward {
        Forward { cell: OnceLock::new(), one_thread: true }
    }

    /// The transform of `samples[..n]` at `rate`, made now if this is the first call (every
    /// call must pass the same samples, `n` and rate: the first one's are kept).
    fn get(&self, samples: &[Complex32], n: usize, rate: f64) -> &Transform {
        self.cell.get_or_init(|| Transform::of(&samples[..n], rate))
    }
}

impl Transform {
    fn of(x: &[Complex32], rate: f64) -> Transform {
        // The long transform in single precision, as the input is: its rounding (about 1e-7 of
        // the strongest bin, 140 dB down) stays far below any noise floor the classifier works
        // at. Non-finite samples count as zero.
        let mut spec: Vec<Complex32> =
            x.iter().map(|v| if v.is_finite() { *v } else { Complex32::new(0.0, 0.0) }).collect();
        fft_f32(&mut spec, false);
        Transform { spec, psd: OnceLock::new(), rate }
    }

    fn psd(&self) -> &[f64] {
        self.psd.get_or_init(|| {
            let scale = 1.0 / (self.spec.len() as f64 * self.rate);
            self.spec.iter().map(|v| v.norm_sqr() as f64 * scale).collect()
        })
    }
}

/// Why the input could not be channelised.
pub(super) fn channelise(input: &EmissionIq, forward: &Forward) -> Result<Baseband, String> {
    let rate = input.rate_hz;
    if !(rate.is_finite() && rate > 0.0) {
        return Err(format!("sample rate {rate} Hz is not a positive number"));
    }
    if input.samples.is_empty() {
        return Err("no samples".into());
    }
    let offset = if input.offset_hz.is_finite() { input.offset_hz } else { 0.0 };
    let n_all = input.samples.len().min(MAX_INPUT_SAMPLES);
    let floor = MIN_BINS * rate / n_all as f64;
    let obw = if input.obw_hz.is_finite() && input.obw_hz > 0.0 {
        input.obw_hz.clamp(floor.min(rate), rate)
    } else {
        floor.min(rate)
    };
    let out_rate_goal = (RATE_OVER_OBW * obw).min(rate);
    let max_in = (MAX_BASEBAND_SAMPLES as f64 * rate / out_rate_goal).floor() as usize;
    let n_in = n_all.min(max_in.max(1));
    let n_out = ((n_in as f64 * out_rate_goal / rate).round() as usize).clamp(1, n_in);
    let out_rate = n_out as f64 * rate / n_in as f64;

    // The shared transform holds all the input; an emission too wide for that many samples
    // at its output rate transforms its own, shorter, input.
    let own;
    let t = if n_in == n_all {
        forward.get(input.samples, n_all, rate)
    } else {
        own = Transform::of(&input.samples[..n_in], rate);
        &own
    };
    // The shift to 0 Hz: a whole number of bins by reading the spectrum from bin `k0`, the
    // rest (under half a bin) by mixing the short output.
    let bin_width = rate / n_in as f64;
    let k0 = (offset / bin_width).round();
    let residual = offset - k0 * bin_width;
    let k0 = (k0 as i64).rem_euclid(n_in as i64) as usize;
    let at = |k: usize| (k + k0) % n_in;

    let noise_given = input.noise_psd.is_some_and(|p| p.is_finite() && p >= 0.0);
    let noise_psd = match input.noise_psd {
        Some(p) if noise_given => p,
        _ => estimate_noise_psd(t.psd(), rate, obw, k0).unwrap_or(0.0),
    };

    let response_at = |f: f64| -> f64 {
        let a = f.abs();
        let (p, s) = (PASS * obw, STOP * obw);
        if a <= p {
            1.0
        } else if a >= s {
            0.0
        } else {
            let t = (a - p) / (s - p);
            let amp = 0.5 + 0.5 * (std::f64::consts::PI * t).cos();
            amp * amp
        }
    };
    let mut out = vec![Complex64::new(0.0, 0.0); n_out];
    let mut response = vec![0.0; n_out];
    for (k, (o, r)) in out.iter_mut().zip(response.iter_mut()).enumerate() {
        let f = bin_hz(k, n_out, out_rate);
        // The same frequency on the input grid (the bin widths are equal by construction).
        let kin = if k >= n_out.div_ceil(2) { n_in + k - n_out } else { k };
        if kin >= n_in {
            continue;
        }
        let h2 = response_at(f);
        *r = h2;
        let v = t.spec[at(kin)];
        *o = Complex64::new(v.re as f64, v.im as f64) * h2.sqrt() / n_in as f64;
    }
    fft(&mut out, true);
    mix(&mut out, -residual / out_rate);
    let noise_power = noise_psd * response.iter().sum::<f64>() * bin_width;
    Ok(Baseband {
        x: out,
        rate_hz: out_rate,
        obw_hz: obw,
        noise_psd,
        noise_power,
        noise_given,
        response,
        seconds: n_in as f64 / rate,
    })
}

/// Samples between two exact phasors of the shift: the phasor in between is stepped by one
/// complex multiplication per sample (a sine and cosine per sample cost more than the FFT),
/// and its rounding error, about 1e-16 per step, stays under 1e-12 over this many.
const PHASOR_RESYNC: usize = 1024;

/// `x` shifted in place by `cycles` per sample (times e^{j2π·cycles·n}).
fn mix(x: &mut [Complex64], cycles: f64) {
    if cycles == 0.0 {
        return;
    }
    let step = 2.0 * std::f64::consts::PI * cycles;
    let rot = Complex64::from_polar(1.0, step);
    let mut phasor = Complex64::new(1.0, 0.0);
    for (n, v) in x.iter_mut().enumerate() {
        if n % PHASOR_RESYNC == 0 {
            phasor = Complex64::from_polar(1.0, step * n as f64);
        }
        *v *= phasor;
        phasor *= rot;
    }
}

/// Noise PSD from the bins of the input spectrum (`psd`, unshifted; the emission's centre at
/// bin `k0`) well outside the emission, away from the band edges (where a receiver's anti-alias
/// filter falls): the median of an exponential variable is ln 2 times its mean (design notes
/// §3), and the median ignores other emitters that take less than half of those bins. None
/// when fewer than 64 bins qualify.
fn estimate_noise_psd(psd: &[f64], rate: f64, obw: f64, k0: usize) -> Option<f64> {
    let n = psd.len();
    let p: Vec<f64> = (0..n)
        .filter(|&k| {
            let from_emission = bin_hz((k + n - k0) % n, n, rate);
            from_emission.abs() > STOP * obw * 1.2 && bin_hz(k, n, rate).abs() < 0.45 * rate
        })
        .map(|k| psd[k])
        .collect();
    if p.len() < 64 {
        return None;
    }
    Some(quantile(&p, 0.5) / std::f64::consts::LN_2)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_stepped_phasor_shifts_as_sine_and_cosine_do() {
        let x: Vec<Complex64> =
            (0..100_000).map(|i| Complex64::new(1.0, (i % 7) as f64 * 0.1)).collect();
        let cycles = 0.123_456_789;
        let mut got = x.clone();
        mix(&mut got, cycles);
        let worst = x
            .iter()
            .zip(&got)
            .enumerate()
            .map(|(n, (v, g))| {
                let want =
                    v * Complex64::from_polar(1.0, 2.0 * std::f64::consts::PI * cycles * n as f64);
                (want - g).norm()
            })
            .fold(0.0, f64::max);
        // The resync bound above (1024 steps of about 1e-16 each), plus the rounding of the
        // reference itself: its phase, up to 8e4 rad here, is held to about 1e-11 rad.
        assert!(worst < 1e-10, "{worst}");
    }

    /// A tone between two bins of the input grid comes out at 0 Hz: the whole bins are read
    /// off the spectrum, the fraction mixed off the output. A complex exponential shifted by its
    /// own frequency is a constant (e^{j2πfn}·e^{−j2πfn} = 1, common practice).
    #[test]
    fn a_tone_off_the_bin_grid_is_shifted_to_zero_hz() {
        let (rate, n) = (1e6, 1 << 16);
        let f0 = 123_456.789;
        let x: Vec<Complex32> = (0..n)
            .map(|i| {
                let v =
                    Complex64::from_polar(1.0, 2.0 * std::f64::consts::PI * f0 * i as f64 / rate);
                Complex32::new(v.re as f32, v.im as f32)
            })
            .collect();
        let input =
            EmissionIq { samples: &x, rate_hz: rate, offset_hz: f0, obw_hz: 2e3, noise_psd: None };
        let bb = channelise(&input, &Forward::default()).unwrap();
        // Away from the ends (the filter's transient wraps round a circular transform), the
        // phase is flat: under a degree of drift from first to last.
        let m = bb.x.len();
        let (a, b) = (bb.x[m / 8], bb.x[7 * m / 8]);
        let drift = (b / a).arg().abs();
        assert!(drift < 1f64.to_radians(), "{drift} rad over {m} samples");
        assert!((a.norm() - 1.0).abs() < 0.01, "{}", a.norm());
    }

    /// Emissions channelised from one shared transform come out as from a transform each.
    #[test]
    fn a_shared_transform_gives_what_one_of_its_own_gives() {
        let x = crate::testkit::noise(50_000, 1e-2, 11);
        let shared = Forward::default();
        for (offset, obw) in [(1e3, 5e3), (-2e5, 2e4), (3.3e5, 1e3), (0.0, 4.5e5)] {
            let input = EmissionIq {
                samples: &x,
                rate_hz: 1e6,
                offset_hz: offset,
                obw_hz: obw,
                noise_psd: None,
            };
            let one = channelise(&input, &Forward::default()).unwrap();
            let both = channelise(&input, &shared).unwrap();
            assert_eq!(one.x, both.x);
            assert_eq!(one.noise_psd, both.noise_psd);
        }
    }
}
