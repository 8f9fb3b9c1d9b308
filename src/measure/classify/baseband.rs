//! Channelising one emission: shift it to 0 Hz, low-pass it to its band and decimate it to a few
//! times its occupied bandwidth, all in one FFT (the bins of the band are copied into a shorter
//! inverse transform, so the decimation factor need not be whole). Also the noise: the in-band
//! noise power of the result, from the caller's noise PSD or estimated from the bins outside
//! the emission.

use super::spectrum::{above, bin_hz, fft, fft_f32, phasors, quantile};
use super::EmissionIq;
use super::MIN_BASEBAND;
use num_complex::{Complex32, Complex64};
use std::sync::OnceLock;

/// At most this many input samples are read (the first ones): one FFT of this size bounds the
/// cost of channelising (about 2^20 · 20 operations).
pub const MAX_INPUT_SAMPLES: usize = 1 << 20;
/// At most this many samples after decimation (0.65 s of a 25 kHz-wide emission at 4 × OBW,
/// 12 000 symbols of a PSK, four times the 16 000-sample scenes of tests/classify.rs); longer
/// input is cut to fit before the FFT. The analysis of a wide emission (a dozen transforms of
/// this length) is the tail of a listing made when the input ends: at 2^17 it was about 45 ms.
pub const MAX_BASEBAND_SAMPLES: usize = 1 << 16;
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
    // When the cap binds, the input is cut to a length whose transform is cheap to plan (a
    // product of 2, 3, 5 and 7, under 2 % shorter): the long transform of an arbitrary length
    // cost more to plan (its twiddle factors, one sine and cosine each) than to run.
    let n_in = if max_in < n_all { smooth_below(max_in.max(1)) } else { n_all };
    // ... and the output is then exactly the cap, a power of two, at a rate a little above the
    // goal (the same 2 % at most).
    let out_rate_goal = if max_in < n_all {
        (MAX_BASEBAND_SAMPLES as f64 * rate / n_in as f64).min(rate)
    } else {
        out_rate_goal
    };

    let noise_given = input.noise_psd.is_some_and(|p| p.is_finite() && p >= 0.0);
    // A narrow emission whose noise the caller gives is first brought near its own band
    // ([`predecimate`]): the long transform of the whole band is then never made.
    let d = (rate / (PRE_RATE_OVER_OBW * obw)).floor();
    if noise_given && d >= PRE_MIN_FACTOR as f64 {
        let noise_psd = input.noise_psd.unwrap_or(0.0);
        let (mut spec, rate1) = predecimate(&input.samples[..n_in], rate, offset, d as usize);
        if spec.len() >= MIN_BASEBAND {
            fft(&mut spec, false);
            let n1 = spec.len();
            let cic = |f: f64| cic_gain(f / rate, d as usize);
            let (x, response) = band_bins(|k| spec[k], n1, rate1, out_rate_goal, obw, 0, cic);
            let grid = Grid { rate: rate1, len: n1, seconds: n_in as f64 / rate };
            return Ok(Baseband::of(x, response, grid, obw, noise_psd, noise_given));
        }
    }

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

    let noise_psd = match input.noise_psd {
        Some(p) if noise_given => p,
        _ => estimate_noise_psd(t.psd(), rate, obw, k0).unwrap_or(0.0),
    };
    let bin = |k: usize| Complex64::new(t.spec[k].re as f64, t.spec[k].im as f64);
    let (mut out, response) = band_bins(bin, n_in, rate, out_rate_goal, obw, k0, |_| 1.0);
    let out_rate = out.len() as f64 * rate / n_in as f64;
    mix(&mut out, -residual / out_rate);
    let grid = Grid { rate, len: n_in, seconds: n_in as f64 / rate };
    Ok(Baseband::of(out, response, grid, obw, noise_psd, noise_given))
}

/// The transform the band's bins were read from: its rate, its length, and the input's
/// duration.
struct Grid {
    rate: f64,
    len: usize,
    seconds: f64,
}

impl Baseband {
    /// The baseband samples `x` of `grid`'s bins through a filter of power `response`, with the
    /// noise power that filter passes of a density `noise_psd`.
    fn of(
        x: Vec<Complex64>,
        response: Vec<f64>,
        grid: Grid,
        obw_hz: f64,
        noise_psd: f64,
        noise_given: bool,
    ) -> Baseband {
        let bin_width = grid.rate / grid.len as f64;
        Baseband {
            rate_hz: x.len() as f64 * bin_width,
            noise_power: noise_psd * response.iter().sum::<f64>() * bin_width,
            x,
            obw_hz,
            noise_psd,
            noise_given,
            response,
            seconds: grid.seconds,
        }
    }
}

/// The emission's band copied from an `n_in`-point spectrum (`bin(k)`, unshifted, the
/// emission's centre at bin `k0`, input rate `rate`) into a shorter inverse transform at about
/// `out_rate_goal`, through the channel filter (flat to [`PASS`] × OBW, a raised cosine to zero
/// at [`STOP`] × OBW), each bin divided by `gain(f)`, the response of whatever filtered the
/// input before (1 when nothing did). Returns the baseband samples and the filter's power
/// response on their bins (FFT order).
fn band_bins(
    bin: impl Fn(usize) -> Complex64,
    n_in: usize,
    rate: f64,
    out_rate_goal: f64,
    obw: f64,
    k0: usize,
    gain: impl Fn(f64) -> f64,
) -> (Vec<Complex64>, Vec<f64>) {
    // A length quick to transform (the analysis transforms it several times), at most 2 %
    // above the goal's.
    let goal = ((n_in as f64 * out_rate_goal / rate).round() as usize).clamp(1, n_in);
    let n_out = smooth_above(goal).min(n_in);
    let out_rate = n_out as f64 * rate / n_in as f64;
    let mut out = vec![Complex64::new(0.0, 0.0); n_out];
    let mut response = vec![0.0; n_out];
    for (k, (o, r)) in out.iter_mut().zip(response.iter_mut()).enumerate() {
        let f = bin_hz(k, n_out, out_rate);
        // The same frequency on the input grid (the bin widths are equal by construction).
        let kin = if k >= n_out.div_ceil(2) { n_in + k - n_out } else { k };
        let h2 = channel_response(f, obw);
        let g = gain(f);
        if kin >= n_in || h2 <= 0.0 || !above(g, 0.0) {
            continue;
        }
        *r = h2;
        *o = bin((kin + k0) % n_in) * (h2.sqrt() / (g * n_in as f64));
    }
    fft(&mut out, true);
    (out, response)
}

/// Power response of the channel filter at `f` Hz from the emission's centre.
fn channel_response(f: f64, obw: f64) -> f64 {
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
}

/// Input rate over the OBW above which a narrow emission whose noise is given is first
/// decimated ([`predecimate`]) to this many times its OBW, by a whole factor of at least
/// [`PRE_MIN_FACTOR`] (below it the saving is small).
const PRE_RATE_OVER_OBW: f64 = 16.0;
const PRE_MIN_FACTOR: usize = 4;

/// `x` shifted by `-offset_hz` (the emission to 0 Hz) and decimated by `d` through a
/// third-order CIC filter (three cascaded boxcars of `d` samples, Hogenauer, IEEE Trans. ASSP
/// 29(2), 1981), with its output rate. At 16 × OBW the CIC droops by under 0.1 dB at the edge
/// of the channel filter (undone bin by bin, [`cic_gain`]), and what it folds onto the band from
/// the images at multiples of the new rate is 78 dB down or more (sinc³ at 1 − 0.75/16). The
/// whole-band transform is then never made: its cost (and its plan's, new for each emission
/// length) was most of a census's classification.
fn predecimate(x: &[Complex32], rate: f64, offset_hz: f64, d: usize) -> (Vec<Complex64>, f64) {
    let kernel = cic_kernel(d);
    let len = kernel.len();
    let new_rate = rate / d as f64;
    if x.len() < len || d == 0 {
        return (Vec::new(), new_rate);
    }
    // As many outputs as fit, cut to a length quick to transform (2 % fewer at most).
    let n1 = smooth_below((x.len() - len) / d + 1);
    // Output j is the sum over i < 3d − 2 of mixed[jd + i]·h[i]. Read the other way round,
    // input jd + r (r < d) adds to outputs j, j − 1 and j − 2 with the taps h[r], h[d + r] and
    // h[2d + r] (zero past the kernel's end): one pass over the input, each sample mixed as it
    // is read, three products each, and nothing the size of the input written.
    let tap = |i: usize| kernel.get(i).copied().unwrap_or(0.0);
    let taps: Vec<[f64; 3]> = (0..d).map(|r| [tap(r), tap(d + r), tap(2 * d + r)]).collect();
    let used = (n1 - 1) * d + len;
    let mut y = vec![Complex64::new(0.0, 0.0); n1 + 2];
    let mut mixed = x[..used].iter().zip(phasors(-offset_hz / rate)).map(|(v, p)| {
        // Non-finite samples count as zero.
        if v.is_finite() {
            Complex64::new(v.re as f64, v.im as f64) * p
        } else {
            Complex64::new(0.0, 0.0)
        }
    });
    for j in 0..n1 + 2 {
        let mut acc = [Complex64::new(0.0, 0.0); 3];
        for (t, m) in taps.iter().zip(mixed.by_ref()) {
            acc[0] += m * t[0];
            acc[1] += m * t[1];
            acc[2] += m * t[2];
        }
        y[j] += acc[0];
        if j >= 1 {
            y[j - 1] += acc[1];
        }
        if j >= 2 {
            y[j - 2] += acc[2];
        }
    }
    y.truncate(n1);
    (y, new_rate)
}

/// Taps of three cascaded boxcars of `d` (3d − 2 of them), summing to 1.
fn cic_kernel(d: usize) -> Vec<f64> {
    let boxcar = vec![1.0; d];
    let mut h = boxcar.clone();
    for _ in 0..2 {
        let mut next = vec![0.0; h.len() + d - 1];
        for (i, a) in h.iter().enumerate() {
            for (j, b) in boxcar.iter().enumerate() {
                next[i + j] += a * b;
            }
        }
        h = next;
    }
    let scale = (d * d * d) as f64;
    h.iter().map(|v| v / scale).collect()
}

/// Amplitude response of [`cic_kernel`]`(d)` at `cycles` per input sample:
/// (sin(π f d) / (d sin(π f)))³, 1 at 0 Hz.
fn cic_gain(cycles: f64, d: usize) -> f64 {
    let s = (std::f64::consts::PI * cycles).sin();
    if s.abs() < 1e-15 {
        return 1.0;
    }
    ((std::f64::consts::PI * cycles * d as f64).sin() / (d as f64 * s)).powi(3).abs()
}

/// The largest product of powers of 2, 3, 5 and 7 at or below `n` (≥ 1): within 2 % of `n`
/// for `n` over a few thousand, and a length rustfft transforms by mixed radix (no Bluestein).
fn smooth_below(n: usize) -> usize {
    let mut best = 1;
    let mut p2 = 1usize;
    while p2 <= n {
        let mut p3 = p2;
        while p3 <= n {
            let mut p5 = p3;
            while p5 <= n {
                let mut p7 = p5;
                while p7 <= n {
                    best = best.max(p7);
                    p7 *= 7;
                }
                p5 *= 5;
            }
            p3 *= 3;
        }
        p2 *= 2;
    }
    best
}

/// The smallest product of powers of 2, 3, 5 and 7 at or above `n` (≥ 1).
pub(super) fn smooth_above(n: usize) -> usize {
    let smooth = |mut m: usize| {
        for p in [2, 3, 5, 7] {
            while m % p == 0 {
                m /= p;
            }
        }
        m == 1
    };
    (n.max(1)..).find(|&m| smooth(m)).unwrap_or(n)
}

/// `x` shifted in place by `cycles` per sample (times e^{j2π·cycles·n}).
fn mix(x: &mut [Complex64], cycles: f64) {
    if cycles != 0.0 {
        x.iter_mut().zip(phasors(cycles)).for_each(|(v, p)| *v *= p);
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
    use std::f64::consts::PI;

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

    /// `n` samples at `rate` of tones of (amplitude, frequency Hz).
    fn tones(n: usize, rate: f64, tones: &[(f64, f64)]) -> Vec<Complex32> {
        (0..n)
            .map(|i| {
                let t = i as f64 / rate;
                let v: Complex64 =
                    tones.iter().map(|&(a, f)| Complex64::from_polar(a, 2.0 * PI * f * t)).sum();
                Complex32::new(v.re as f32, v.im as f32)
            })
            .collect()
    }

    /// A tone, narrow against the input rate and with its noise given, is decimated first: it
    /// still comes out at 0 Hz with its amplitude (the CIC's droop undone) and a flat phase.
    #[test]
    fn a_predecimated_tone_keeps_its_amplitude_and_lands_on_zero_hz() {
        let (rate, n) = (1e6, 200_000);
        let f0 = -211_111.1;
        let x = tones(n, rate, &[(0.5, f0)]);
        let input = EmissionIq {
            samples: &x,
            rate_hz: rate,
            offset_hz: f0,
            obw_hz: 2e3,
            noise_psd: Some(1e-12),
        };
        let bb = channelise(&input, &Forward::default()).unwrap();
        // 1 MS/s over 16 × 2 kHz: decimated by 31 first, then to 4 × OBW.
        assert!((8e3..8.2e3).contains(&bb.rate_hz), "{}", bb.rate_hz);
        let m = bb.x.len();
        let (a, b) = (bb.x[m / 8], bb.x[7 * m / 8]);
        assert!((b / a).arg().abs() < 1f64.to_radians(), "{}", (b / a).arg());
        // The tone sits at 0 Hz, in the pass band: its amplitude 0.5 within 0.1 dB.
        assert!((20.0 * (a.norm() / 0.5).log10()).abs() < 0.1, "{}", a.norm());
    }

    /// The one-pass decimation equals the textbook form: mix every sample by its own sine and
    /// cosine, then convolve with the CIC's taps and keep every d-th output (the definition of
    /// a decimating FIR filter, common practice), to rounding.
    #[test]
    fn the_one_pass_decimation_is_the_convolution_kept_every_dth_sample() {
        let x = crate::testkit::noise(5_000, 1.0, 3);
        let (rate, offset) = (1e6, -123_456.7);
        for d in [4, 7, 31] {
            let (y, new_rate) = predecimate(&x, rate, offset, d);
            assert_eq!(new_rate, rate / d as f64);
            let h = cic_kernel(d);
            let mixed: Vec<Complex64> = x
                .iter()
                .enumerate()
                .map(|(n, v)| {
                    Complex64::new(v.re as f64, v.im as f64)
                        * Complex64::from_polar(1.0, -2.0 * PI * offset / rate * n as f64)
                })
                .collect();
            assert_eq!(y.len(), smooth_below((x.len() - h.len()) / d + 1));
            for (j, got) in y.iter().enumerate() {
                let want: Complex64 =
                    mixed[j * d..j * d + h.len()].iter().zip(&h).map(|(m, t)| m * t).sum();
                assert!((got - want).norm() < 1e-12, "d {d}, output {j}: {got} vs {want}");
            }
        }
    }

    /// White noise of known density through the decimation and the channel filter: the mean
    /// power of the baseband samples is the noise power the bookkeeping reports (the filter's
    /// noise bandwidth times the density, Parseval's theorem), within the scatter of the
    /// estimate (about 1/√(bandwidth × duration), under 2 % here).
    #[test]
    fn the_noise_power_reported_after_decimation_is_the_noise_there() {
        let (rate, n, psd) = (1e6, 1 << 18, 1e-9);
        let x = crate::testkit::noise(n, psd * rate, 21);
        for obw in [3e3, 10e3] {
            let input = EmissionIq {
                samples: &x,
                rate_hz: rate,
                offset_hz: 1e5,
                obw_hz: obw,
                noise_psd: Some(psd),
            };
            let bb = channelise(&input, &Forward::default()).unwrap();
            let m = bb.x.len();
            let got = bb.x[m / 10..9 * m / 10].iter().map(|v| v.norm_sqr()).sum::<f64>()
                / (0.8 * m as f64);
            assert!(
                (got / bb.noise_power - 1.0).abs() < 0.05,
                "{obw}: {got} vs {}",
                bb.noise_power
            );
            // About 1.35 × OBW of noise bandwidth.
            let enb = bb.noise_power / psd / obw;
            assert!((1.2..1.5).contains(&enb), "{enb}");
        }
    }

    /// A carrier 60 dB above a weak tone, placed where the first decimation folds onto the weak
    /// tone's band, stays out of it: the CIC's image attenuation there (sinc³, over 78 dB)
    /// and the channel filter leave the weak tone as it is.
    #[test]
    fn a_strong_carrier_at_an_image_does_not_fold_onto_the_band() {
        let (rate, n) = (1e6, 1 << 17);
        let obw = 2e3;
        // Decimation by 31: the new rate is 32 258 Hz; a carrier at that offset from the weak
        // tone's centre folds onto 0 Hz.
        let weak = 100e3;
        let strong = weak + rate / 31.0 + 300.0;
        let x = tones(n, rate, &[(1e-3, weak), (1.0, strong)]);
        let input = EmissionIq {
            samples: &x,
            rate_hz: rate,
            offset_hz: weak,
            obw_hz: obw,
            noise_psd: Some(1e-15),
        };
        let bb = channelise(&input, &Forward::default()).unwrap();
        let m = bb.x.len();
        let mean = bb.x[m / 8..7 * m / 8].iter().map(|v| v.norm()).sum::<f64>() / (0.75 * m as f64);
        assert!((mean / 1e-3 - 1.0).abs() < 0.01, "{mean}");
    }

    #[test]
    fn smooth_lengths_are_products_of_two_three_five_and_seven_just_below() {
        assert_eq!(smooth_below(1), 1);
        assert_eq!(smooth_below(11), 10);
        assert_eq!(smooth_below(1000), 1000);
        assert_eq!(smooth_below(239_289), 238_140);
        assert_eq!((smooth_above(11), smooth_above(1000), smooth_above(1001)), (12, 1000, 1008));
        for n in (5000..400_000).step_by(997) {
            let s = smooth_below(n);
            assert!(s <= n && s as f64 >= 0.98 * n as f64, "{n} {s}");
            let mut r = s;
            for p in [2, 3, 5, 7] {
                while r % p == 0 {
                    r /= p;
                }
            }
            assert_eq!(r, 1, "{s}");
        }
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
