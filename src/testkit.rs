//! Seeded test signals, shared by the unit tests, the integration tests and the benchmarks.
//!
//! Every statistical test needs reproducible noise, and before this module each file carried its
//! own little generator with its own quirks. One generator means one set of properties to trust:
//! splitmix64 (Steele, Lea & Flood 2014, the seeding generator of the xoshiro family) for the bits,
//! Box–Muller for Gaussian variates. It is public because integration tests and benchmarks are
//! separate crates, and hidden from the documentation because it is not part of the program.
//!
//! Levels follow the program's own convention: a unit-magnitude complex sample is 0 dBFS, and a
//! noise "power" is the mean of `|x|²` in FS².

use num_complex::{Complex32, Complex64};
use rustfft::FftPlanner;
use std::f64::consts::PI;

/// A deterministic generator: the same seed gives the same numbers on every machine.
#[derive(Clone, Debug)]
pub struct Rng(u64);

impl Rng {
    pub fn new(seed: u64) -> Rng {
        Rng(seed)
    }

    /// splitmix64: a fast, well-mixed generator that is fine to seed with small integers.
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform on the open interval (0, 1): never exactly 0, so `ln` is always finite.
    pub fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    /// An integer in `0 .. n` (slightly biased for huge `n`; fine for block lengths).
    pub fn below(&mut self, n: usize) -> usize {
        (self.next_u64() % n.max(1) as u64) as usize
    }

    /// A standard normal variate (Box–Muller, the cosine branch).
    pub fn gauss(&mut self) -> f64 {
        let (u1, u2) = (self.uniform(), self.uniform());
        (-2.0 * u1.ln()).sqrt() * (2.0 * PI * u2).cos()
    }

    /// An exponential variate of the given mean: the power of one bin of a single periodogram of
    /// complex Gaussian noise.
    pub fn exponential(&mut self, mean: f64) -> f64 {
        -mean * self.uniform().ln()
    }

    /// A circular complex Gaussian sample with `E|x|² = power`.
    pub fn complex_gauss(&mut self, power: f64) -> Complex64 {
        let sigma = (power / 2.0).sqrt();
        Complex64::new(sigma * self.gauss(), sigma * self.gauss())
    }
}

/// Complex white Gaussian noise of mean power `power` (FS²), in f64.
pub fn noise64(rng: &mut Rng, n: usize, power: f64) -> Vec<Complex64> {
    (0..n).map(|_| rng.complex_gauss(power)).collect()
}

/// Complex white Gaussian noise of mean power `power` (FS²), as the sources deliver it.
pub fn noise(n: usize, power: f64, seed: u64) -> Vec<Complex32> {
    to_f32(&noise64(&mut Rng::new(seed), n, power))
}

pub fn to_f32(x: &[Complex64]) -> Vec<Complex32> {
    x.iter().map(|v| Complex32::new(v.re as f32, v.im as f32)).collect()
}

/// Sample `i` of a sinusoid of `level_dbfs` at `freq_hz`, starting at `phase`.
fn phasor(level_dbfs: f64, freq_hz: f64, rate_hz: f64, i: u64, phase: f64) -> Complex64 {
    Complex64::from_polar(
        10f64.powf(level_dbfs / 20.0),
        2.0 * PI * freq_hz * i as f64 / rate_hz + phase,
    )
}

/// Adds a sinusoid of `level_dbfs` at `freq_hz` (relative to the centre), starting at `phase`.
pub fn add_tone(x: &mut [Complex64], rate_hz: f64, freq_hz: f64, level_dbfs: f64, phase: f64) {
    for (i, v) in x.iter_mut().enumerate() {
        *v += phasor(level_dbfs, freq_hz, rate_hz, i as u64, phase);
    }
}

/// A carrier `offset_hz` from the centre at `level_dbfs`, switched by `on(sample index)`: the
/// known truth of occupancy tests.
pub struct Keyed<'a> {
    pub offset_hz: f64,
    pub level_dbfs: f64,
    pub on: &'a dyn Fn(u64) -> bool,
}

fn always(_: u64) -> bool {
    true
}

impl Keyed<'static> {
    /// A carrier that never stops.
    pub fn steady(offset_hz: f64, level_dbfs: f64) -> Keyed<'static> {
        Keyed { offset_hz, level_dbfs, on: &always }
    }
}

/// Complex white Gaussian noise of power `noise_power` (FS²) plus keyed carriers, sampled at
/// `rate_hz`; built one sample at a time so long records cost only their f32 storage.
pub fn keyed_band(
    n: usize,
    rate_hz: f64,
    noise_power: f64,
    carriers: &[Keyed],
    seed: u64,
) -> Vec<Complex32> {
    let mut rng = Rng::new(seed);
    (0..n as u64)
        .map(|i| {
            let mut v = rng.complex_gauss(noise_power);
            for c in carriers.iter().filter(|c| (c.on)(i)) {
                v += phasor(c.level_dbfs, c.offset_hz, rate_hz, i, 0.0);
            }
            Complex32::new(v.re as f32, v.im as f32)
        })
        .collect()
}

/// White noise confined to `[lo_hz, hi_hz)` (relative to the centre) by zeroing every other bin
/// of the whole record's DFT; the result has a flat PSD of mean total power `power` in the band.
pub fn band_limited_noise(
    rng: &mut Rng,
    n: usize,
    rate_hz: f64,
    lo_hz: f64,
    hi_hz: f64,
    power: f64,
) -> Vec<Complex64> {
    let mut x = noise64(rng, n, 1.0);
    let mut planner = FftPlanner::<f64>::new();
    planner.plan_fft_forward(n).process(&mut x);
    let mut kept = 0usize;
    for (k, v) in x.iter_mut().enumerate() {
        let f = if k <= n / 2 { k as f64 } else { k as f64 - n as f64 } * rate_hz / n as f64;
        if f < lo_hz || f >= hi_hz {
            *v = Complex64::new(0.0, 0.0);
        } else {
            kept += 1;
        }
    }
    planner.plan_fft_inverse(n).process(&mut x);
    // Each kept bin has E|X|² = n, so the unnormalised inverse has mean power kept·n.
    let scale = (power * n as f64 / kept.max(1) as f64).sqrt() / n as f64;
    x.iter().map(|v| v * scale).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn splitmix64_matches_its_published_reference_output() {
        // The first outputs of splitmix64 from state 0 (Vigna's reference splitmix64.c, the
        // seeding generator of xoshiro; also the stream of Java's SplittableRandom with the
        // default gamma) — from memory.
        let mut r = Rng::new(0);
        let want = [0xE220_A839_7B1D_CDAF, 0x6E78_9E6A_A1B9_65F4, 0x06C4_5D18_8009_454F];
        for w in want {
            assert_eq!(r.next_u64(), w);
        }
    }

    #[test]
    fn noise_has_the_power_asked_for_and_a_gaussian_spread() {
        // Law of large numbers: the mean of |x|² over 200 000 samples is within a few standard
        // errors (σ/√n = 1/√200 000 ≈ 0.22 % for exponential |x|²) of the power asked for, and
        // 68.27 % of a normal variate lies within ±1σ (Abramowitz & Stegun 26.2.2 table).
        let x = noise(200_000, 0.01, 5);
        let p = x.iter().map(|v| v.norm_sqr() as f64).sum::<f64>() / x.len() as f64;
        assert!((p / 0.01 - 1.0).abs() < 0.01, "{p}");
        let mut rng = Rng::new(6);
        let inside = (0..200_000).filter(|_| rng.gauss().abs() < 1.0).count() as f64 / 2e5;
        assert!((inside - 0.6827).abs() < 0.005, "{inside}");
    }

    #[test]
    fn a_steady_carrier_has_its_level() {
        // A unit-magnitude phasor is 0 dBFS; −20 dBFS is an amplitude of 0.1.
        let x = keyed_band(1000, 1e3, 0.0, &[Keyed::steady(125.0, -20.0)], 1);
        assert!(x.iter().all(|v| (v.norm() - 0.1).abs() < 1e-6));
    }
}
