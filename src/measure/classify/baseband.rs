//! Channelising one emission: shift it to 0 Hz, low-pass it to its band and decimate it to a few
//! times its occupied bandwidth, all in one FFT (the bins of the band are copied into a shorter
//! inverse transform, so the decimation factor need not be whole). Also the noise: the in-band
//! noise power of the result, from the caller's noise PSD or estimated from the bins outside
//! the emission.

use super::spectrum::{bin_hz, fft, fft_f32, quantile};
use super::EmissionIq;
use num_complex::{Complex32, Complex64};

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

/// Why the input could not be channelised.
pub(super) fn channelise(input: &EmissionIq) -> Result<Baseband, String> {
    let rate = input.rate_hz;
    if !(rate.is_finite() && rate > 0.0) {
        return Err(format!("sample rate {rate} Hz is not a positive number"));
    }
    if input.samples.is_empty() {
        return Err("no samples".into());
    }
    let offset = if input.offset_hz.is_finite() { input.offset_hz } else { 0.0 };
    let mut n_in = input.samples.len().min(MAX_INPUT_SAMPLES);
    let floor = MIN_BINS * rate / n_in as f64;
    let obw = if input.obw_hz.is_finite() && input.obw_hz > 0.0 {
        input.obw_hz.clamp(floor.min(rate), rate)
    } else {
        floor.min(rate)
    };
    let out_rate_goal = (RATE_OVER_OBW * obw).min(rate);
    let max_in = (MAX_BASEBAND_SAMPLES as f64 * rate / out_rate_goal).floor() as usize;
    n_in = n_in.min(max_in.max(1));
    let n_out = ((n_in as f64 * out_rate_goal / rate).round() as usize).clamp(1, n_in);
    let out_rate = n_out as f64 * rate / n_in as f64;

    // The long transform in single precision, as the input is: its rounding (about 1e-7 of the
    // strongest bin, 140 dB down) stays far below any noise floor the classifier works at.
    let mut spec = shifted(&input.samples[..n_in], -offset / rate);
    fft_f32(&mut spec, false);

    let noise_given = input.noise_psd.is_some_and(|p| p.is_finite() && p >= 0.0);
    let noise_psd = match input.noise_psd {
        Some(p) if noise_given => p,
        _ => estimate_noise_psd(&spec, rate, obw, offset).unwrap_or(0.0),
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
        let v = spec[kin];
        *o = Complex64::new(v.re as f64, v.im as f64) * h2.sqrt() / n_in as f64;
    }
    fft(&mut out, true);
    let bin_width = rate / n_in as f64;
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

/// `x` shifted by `cycles` per sample (e^{j2π·cycles·n}), the product taken in f64; non-finite
/// samples are zero.
fn shifted(x: &[Complex32], cycles: f64) -> Vec<Complex32> {
    let step = 2.0 * std::f64::consts::PI * cycles;
    let rot = Complex64::from_polar(1.0, step);
    let mut phasor = Complex64::new(1.0, 0.0);
    x.iter()
        .enumerate()
        .map(|(n, s)| {
            if n % PHASOR_RESYNC == 0 {
                phasor = Complex64::from_polar(1.0, step * n as f64);
            }
            let v = Complex64::new(s.re as f64, s.im as f64);
            let v = if v.re.is_finite() && v.im.is_finite() { v } else { Complex64::new(0.0, 0.0) };
            let out = v * phasor;
            phasor *= rot;
            Complex32::new(out.re as f32, out.im as f32)
        })
        .collect()
}

/// Noise PSD from the bins of the input spectrum (already shifted) well outside the emission,
/// away from the band edges (where a receiver's anti-alias filter falls): the median of an
/// exponential variable is ln 2 times its mean (design notes §3), and the median ignores other
/// emitters that take less than half of those bins. None when fewer than 64 bins qualify.
fn estimate_noise_psd(spec: &[Complex32], rate: f64, obw: f64, offset: f64) -> Option<f64> {
    let n = spec.len();
    let p: Vec<f64> = (0..n)
        .filter(|&k| {
            let f = bin_hz(k, n, rate);
            f.abs() > STOP * obw * 1.2 && (f + offset).abs() < 0.45 * rate
        })
        .map(|k| spec[k].norm_sqr() as f64 / (n as f64 * rate))
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
        let x: Vec<Complex32> =
            (0..100_000).map(|i| Complex32::new(1.0, (i % 7) as f32 * 0.1)).collect();
        let cycles = 0.123_456_789;
        let got = shifted(&x, cycles);
        let worst = x
            .iter()
            .zip(&got)
            .enumerate()
            .map(|(n, (v, g))| {
                let v = Complex64::new(v.re as f64, v.im as f64);
                let want =
                    v * Complex64::from_polar(1.0, 2.0 * std::f64::consts::PI * cycles * n as f64);
                (want - Complex64::new(g.re as f64, g.im as f64)).norm()
            })
            .fold(0.0, f64::max);
        // Within the f32 rounding of the result: half an ulp of each part, 6e-8 for parts under 2.
        assert!(worst < 1e-7, "{worst}");
    }
}
