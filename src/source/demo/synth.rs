//! The cheap signal generators behind the demo scene.
//!
//! The scene must run at 20 MS/s and more on one core, so nothing here calls a transcendental
//! function per sample:
//! - **FM and FSK** use 32-bit phase accumulators (the phase wraps exactly, so frequency never
//!   drifts) looked up in a 4096-point sine table. Rounding the phase to 12 bits (an error of at
//!   most π/4096 rad) leaves spurs around −72 dBc (about 6 dB per bit, common practice), far
//!   below the scene's noise in any practical resolution bandwidth.
//! - **Fixed-frequency oscillators** (the beacon, the link's mixer) multiply a rotation table for
//!   one chunk, computed once, by the exact start phase of each chunk, taken from a 64-bit phase
//!   accumulator. No rotation error builds up, so no renormalisation is needed.
//! - **Gaussian noise** is read from a table of 4096 Box–Muller values, normalised to mean 0 and
//!   variance 1, walked from a random start with a random odd stride that change every 256
//!   reads. An odd stride never repeats an entry within a walk, and the random starts make every
//!   entry equally likely, so the noise is white with exactly the table's power on average. (Walks
//!   over the whole table would be worse: each would sum to exactly zero, cutting a notch around
//!   0 Hz as wide as the walk is short.) The tests check the density and the flatness with the
//!   spectrum engine.

use num_complex::{Complex32, Complex64};
use std::f64::consts::TAU;

const SINE_BITS: u32 = 12;
const SINE_LEN: usize = 1 << SINE_BITS;
const SINE_MASK: usize = SINE_LEN - 1;

/// Samples per chunk the scene is generated in; rotation tables have this length.
pub const CHUNK: usize = 2048;

/// Entries in the Gaussian table.
const GAUSS_LEN: usize = 4096;
const GAUSS_MASK: u32 = (GAUSS_LEN - 1) as u32;
/// Reads between restarts of a walk (even: values are read in pairs).
const WALK_READS: usize = 256;

/// 2^32 and 2^64 as floats, for phase-accumulator increments.
const TWO_32: f64 = 4294967296.0;
const TWO_64: f64 = 18446744073709551616.0;

/// One step of splitmix64: a fast, well-mixed generator that is fine to seed with small integers.
pub fn splitmix64(state: &mut u64) -> u64 {
    *state = state.wrapping_add(0x9e37_79b9_7f4a_7c15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^ (z >> 31)
}

/// A full-cycle sine table indexed by the top bits of a 32-bit phase.
pub struct SineTable(Box<[f32; SINE_LEN]>);

impl Default for SineTable {
    fn default() -> Self {
        SineTable::new()
    }
}

impl SineTable {
    pub fn new() -> SineTable {
        let mut t = Box::new([0f32; SINE_LEN]);
        for (i, v) in t.iter_mut().enumerate() {
            *v = (TAU * i as f64 / SINE_LEN as f64).sin() as f32;
        }
        SineTable(t)
    }

    fn index(phase: u32) -> usize {
        // Round rather than truncate, so the phase error has zero mean.
        (phase.wrapping_add(1 << (31 - SINE_BITS)) >> (32 - SINE_BITS)) as usize
    }

    #[inline]
    pub fn sin(&self, phase: u32) -> f32 {
        self.0[Self::index(phase) & SINE_MASK]
    }

    /// `e^{jφ}` for a phase `φ = 2π·phase/2^32`.
    #[inline]
    pub fn phasor(&self, phase: u32) -> Complex32 {
        let i = Self::index(phase);
        Complex32::new(self.0[(i + SINE_LEN / 4) & SINE_MASK], self.0[i & SINE_MASK])
    }
}

/// Phase increment per sample of a 32-bit accumulator for `freq_hz` (negative wraps).
pub fn increment_u32(freq_hz: f64, rate_hz: f64) -> u32 {
    ((freq_hz / rate_hz).rem_euclid(1.0) * TWO_32).round() as u64 as u32
}

/// Gaussian values with mean exactly 0 and variance exactly 1 (to f32 rounding).
pub struct GaussTable(Box<[f32; GAUSS_LEN]>);

impl GaussTable {
    pub fn new(seed: u64) -> GaussTable {
        let mut rng = seed ^ 0x6761_7573_7300_0000;
        let mut v: Vec<f64> = Vec::with_capacity(GAUSS_LEN);
        while v.len() < GAUSS_LEN {
            // Box–Muller: two independent N(0, 1) from two uniforms on (0, 1].
            let u1 = ((splitmix64(&mut rng) >> 11) as f64 + 1.0) / (1u64 << 53) as f64;
            let u2 = (splitmix64(&mut rng) >> 11) as f64 / (1u64 << 53) as f64;
            let r = (-2.0 * u1.ln()).sqrt();
            v.push(r * (TAU * u2).cos());
            v.push(r * (TAU * u2).sin());
        }
        let mean = v.iter().sum::<f64>() / GAUSS_LEN as f64;
        let var = v.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / GAUSS_LEN as f64;
        let scale = 1.0 / var.sqrt();
        let mut t = Box::new([0f32; GAUSS_LEN]);
        for (o, x) in t.iter_mut().zip(&v) {
            *o = ((x - mean) * scale) as f32;
        }
        GaussTable(t)
    }
}

/// A walk through the Gaussian table; see the module docs for why this is good enough noise.
pub struct GaussWalk {
    rng: u64,
    pos: u32,
    stride: u32,
    left: usize,
}

impl GaussWalk {
    pub fn new(seed: u64) -> GaussWalk {
        GaussWalk { rng: seed, pos: 0, stride: 1, left: 0 }
    }

    fn restart(&mut self) {
        let r = splitmix64(&mut self.rng);
        self.pos = r as u32 & GAUSS_MASK;
        self.stride = ((r >> 32) as u32 | 1) & GAUSS_MASK;
        self.left = WALK_READS;
    }

    /// Two independent N(0, 1) values as a complex number (variance 2).
    #[inline]
    pub fn pair(&mut self, t: &GaussTable) -> Complex32 {
        if self.left == 0 {
            self.restart();
        }
        self.left -= 2;
        let a = t.0[(self.pos & GAUSS_MASK) as usize];
        let b = t.0[(self.pos.wrapping_add(self.stride) & GAUSS_MASK) as usize];
        self.pos = self.pos.wrapping_add(self.stride.wrapping_mul(2));
        Complex32::new(a, b)
    }

    /// Overwrites `out` with complex Gaussian noise of standard deviation `sigma` per component:
    /// the same values as calling [`pair`](Self::pair) for each sample, a walk at a time.
    pub fn fill(&mut self, t: &GaussTable, sigma: f32, out: &mut [Complex32]) {
        let mut k = 0;
        while k < out.len() {
            if self.left == 0 {
                self.restart();
            }
            let n = (self.left / 2).min(out.len() - k);
            let (mut pos, stride) = (self.pos, self.stride);
            let step = stride.wrapping_mul(2);
            for o in out[k..k + n].iter_mut() {
                let a = t.0[(pos & GAUSS_MASK) as usize];
                let b = t.0[(pos.wrapping_add(stride) & GAUSS_MASK) as usize];
                *o = Complex32::new(a * sigma, b * sigma);
                pos = pos.wrapping_add(step);
            }
            self.pos = pos;
            self.left -= 2 * n;
            k += n;
        }
    }
}

/// An oscillator at a fixed frequency whose phase at any sample index is exact.
pub struct FixedOsc {
    inc: u64,
    rot: Vec<Complex32>,
}

impl FixedOsc {
    pub fn new(freq_hz: f64, rate_hz: f64) -> FixedOsc {
        let frac = (freq_hz / rate_hz).rem_euclid(1.0);
        // Clamp below 2^64 so the cast cannot saturate to a wrong value.
        let inc = (frac * TWO_64).min(TWO_64 - 4096.0) as u64;
        let rot = (0..CHUNK as u64).map(|k| cis(inc.wrapping_mul(k))).map(to_c32).collect();
        FixedOsc { inc, rot }
    }

    /// `e^{jφ(n0)}`, the phase at sample `n0`, exactly (64-bit integer phase).
    pub fn start(&self, n0: u64) -> Complex64 {
        cis(self.inc.wrapping_mul(n0))
    }

    /// Rotation of the `k`-th sample of a chunk relative to its start (`k < CHUNK`).
    #[inline]
    pub fn rot(&self) -> &[Complex32] {
        &self.rot
    }
}

fn cis(phase: u64) -> Complex64 {
    Complex64::from_polar(1.0, TAU * (phase as f64 / TWO_64))
}

fn to_c32(z: Complex64) -> Complex32 {
    Complex32::new(z.re as f32, z.im as f32)
}

/// A pair of complex-conjugate poles, `y[n] = g·x[n] − a1·y[n−1] − a2·y[n−2]`, applied to
/// complex samples with real coefficients (the I and Q filters are the same). All poles and no
/// zeros: the feedback path is one multiply and one subtract long, which is what limits the speed
/// of a recursive filter, and for white noise input the zeros a bilinear design puts at the
/// Nyquist frequency change nothing visible when the cut-off is far below it. Arithmetic is in
/// f64 (no slower here than f32) so poles very close to 1, at high sample rates, stay put.
#[derive(Clone, Copy, Debug)]
struct PolePair {
    g: f64,
    a1: f64,
    a2: f64,
    y1: Complex64,
    y2: Complex64,
}

impl PolePair {
    /// The poles of a low-pass section at `fc_hz` with quality `q`, placed by the bilinear
    /// transform with the cut-off pre-warped (R. Bristow-Johnson's "Audio EQ Cookbook", common
    /// practice); `g = 1 + a1 + a2` makes the gain 1 at DC, computed without cancellation.
    fn lowpass(fc_hz: f64, q: f64, rate_hz: f64) -> PolePair {
        let w0 = TAU * fc_hz / rate_hz;
        let alpha = w0.sin() / (2.0 * q);
        let a0 = 1.0 + alpha;
        PolePair {
            g: 4.0 * (w0 / 2.0).sin().powi(2) / a0,
            a1: -2.0 * w0.cos() / a0,
            a2: (1.0 - alpha) / a0,
            y1: Complex64::default(),
            y2: Complex64::default(),
        }
    }

    #[inline]
    fn step(&mut self, x: Complex64) -> Complex64 {
        // Only the last multiply and subtract wait for the previous output.
        let y = (x * self.g - self.y2 * self.a2) - self.y1 * self.a1;
        self.y2 = self.y1;
        self.y1 = y;
        y
    }
}

/// A 6th-order Butterworth-pole low-pass: three pole pairs with the Butterworth quality factors
/// `Q_k = 1 / (2·sin((2k − 1)π/12))` (common practice).
#[derive(Clone)]
pub struct Butterworth6 {
    sections: [PolePair; 3],
}

impl Butterworth6 {
    pub fn new(fc_hz: f64, rate_hz: f64) -> Butterworth6 {
        let q = |k: f64| 1.0 / (2.0 * ((2.0 * k - 1.0) * std::f64::consts::PI / 12.0).sin());
        Butterworth6 { sections: [1.0, 2.0, 3.0].map(|k| PolePair::lowpass(fc_hz, q(k), rate_hz)) }
    }

    #[inline]
    fn step64(&mut self, x: Complex64) -> Complex64 {
        let y = self.sections[0].step(x);
        let y = self.sections[1].step(y);
        self.sections[2].step(y)
    }

    #[inline]
    pub fn step(&mut self, x: Complex32) -> Complex32 {
        to_c32(self.step64(Complex64::new(x.re as f64, x.im as f64)))
    }

    /// `Σ |h[n]|²`, the ratio of output to input power for white input, from the impulse
    /// response of a fresh copy of the filter, summed until its tail no longer matters.
    pub fn power_gain(&self) -> f64 {
        let mut f = self.clone();
        f.sections.iter_mut().for_each(|s| (s.y1, s.y2) = Default::default());
        let (mut sum, mut tail) = (0.0, 0.0);
        for n in 0..(1usize << 26) {
            let y = f.step64(Complex64::new(if n == 0 { 1.0 } else { 0.0 }, 0.0)).norm_sqr();
            sum += y;
            tail += y;
            if n % 1024 == 1023 {
                if n > 4096 && tail < 1e-15 * sum {
                    break;
                }
                tail = 0.0;
            }
        }
        sum
    }
}

/// Audio for a voice channel: three tones, weighted, times a slow syllable swell; updated every
/// `hold` samples (at 200 kHz or faster, so the stepped frequency is smooth at audio rates).
pub struct VoiceTx {
    amp: f32,
    nco: u32,
    base_inc: u32,
    /// Increment per unit of modulation: `deviation/rate · 2^32`.
    dev_inc: f32,
    tones: [(u32, u32, f32); 3],
    syllable: (u32, u32),
    hold: usize,
    hold_left: usize,
    inc: u32,
}

impl VoiceTx {
    #[allow(clippy::too_many_arguments)]
    pub fn new(
        offset_hz: f64,
        level_dbfs: f64,
        deviation_hz: f64,
        tones_hz: [f64; 3],
        weights: [f64; 3],
        syllable_hz: f64,
        rate_hz: f64,
        seed: u64,
    ) -> VoiceTx {
        let hold = (rate_hz / 200e3).floor().max(1.0) as usize;
        let hold_rate = rate_hz / hold as f64;
        let total: f64 = weights.iter().sum();
        let mut rng = seed;
        let mut tone = |i: usize| {
            let start = splitmix64(&mut rng) as u32;
            (start, increment_u32(tones_hz[i], hold_rate), (weights[i] / total) as f32)
        };
        let tones = [tone(0), tone(1), tone(2)];
        let base_inc = increment_u32(offset_hz, rate_hz);
        VoiceTx {
            amp: amplitude(level_dbfs),
            nco: splitmix64(&mut rng) as u32,
            base_inc,
            dev_inc: (deviation_hz / rate_hz * TWO_32) as f32,
            tones,
            syllable: (splitmix64(&mut rng) as u32, increment_u32(syllable_hz, hold_rate)),
            hold,
            hold_left: 0,
            inc: base_inc,
        }
    }

    /// Advances the audio by one hold period and sets the carrier increment from it.
    fn next_audio(&mut self, sine: &SineTable) {
        let mut m = 0.0;
        for t in self.tones.iter_mut() {
            m += t.2 * sine.sin(t.0);
            t.0 = t.0.wrapping_add(t.1);
        }
        let swell = 0.55 + 0.45 * sine.sin(self.syllable.0);
        self.syllable.0 = self.syllable.0.wrapping_add(self.syllable.1);
        self.inc = self.base_inc.wrapping_add((self.dev_inc * m * swell) as i32 as u32);
    }

    /// Adds the signal to `out`, the `k`-th sample scaled by `gain(k)`.
    pub fn add(&mut self, sine: &SineTable, out: &mut [Complex32], gain: impl Fn(usize) -> f32) {
        let mut k = 0;
        while k < out.len() {
            if self.hold_left == 0 {
                self.next_audio(sine);
                self.hold_left = self.hold;
            }
            let n = self.hold_left.min(out.len() - k);
            for (j, o) in out[k..k + n].iter_mut().enumerate() {
                self.nco = self.nco.wrapping_add(self.inc);
                *o += sine.phasor(self.nco) * (self.amp * gain(k + j));
            }
            self.hold_left -= n;
            k += n;
        }
    }
}

/// Continuous-phase 2-FSK with bits from a 15-bit maximal-length shift register.
pub struct DataTx {
    amp: f32,
    nco: u32,
    inc: [u32; 2],
    symbol_phase: u32,
    symbol_inc: u32,
    lfsr: u16,
}

impl DataTx {
    pub fn new(offset_hz: f64, level_dbfs: f64, baud: f64, shift_hz: f64, rate_hz: f64) -> DataTx {
        DataTx {
            amp: amplitude(level_dbfs),
            nco: 0,
            inc: [
                increment_u32(offset_hz - shift_hz, rate_hz),
                increment_u32(offset_hz + shift_hz, rate_hz),
            ],
            symbol_phase: 0,
            symbol_inc: increment_u32(baud, rate_hz),
            lfsr: 0x4a5b,
        }
    }

    pub fn add(&mut self, sine: &SineTable, out: &mut [Complex32], gain: impl Fn(usize) -> f32) {
        for (k, o) in out.iter_mut().enumerate() {
            let (p, wrapped) = self.symbol_phase.overflowing_add(self.symbol_inc);
            self.symbol_phase = p;
            if wrapped {
                // x^15 + x^14 + 1, a maximal-length polynomial (common practice).
                let bit = ((self.lfsr >> 14) ^ (self.lfsr >> 13)) & 1;
                self.lfsr = ((self.lfsr << 1) | bit) & 0x7fff;
            }
            self.nco = self.nco.wrapping_add(self.inc[(self.lfsr & 1) as usize]);
            *o += sine.phasor(self.nco) * (self.amp * gain(k));
        }
    }
}

/// An unmodulated carrier.
pub struct CarrierTx {
    amp: f64,
    osc: FixedOsc,
}

impl CarrierTx {
    pub fn new(offset_hz: f64, level_dbfs: f64, rate_hz: f64) -> CarrierTx {
        CarrierTx { amp: 10f64.powf(level_dbfs / 20.0), osc: FixedOsc::new(offset_hz, rate_hz) }
    }

    /// Adds the carrier to `out`, whose first sample has index `n0` (`out.len() <= CHUNK`).
    pub fn add(&self, n0: u64, out: &mut [Complex32], gain: impl Fn(usize) -> f32) {
        let a = to_c32(self.osc.start(n0) * self.amp);
        for (k, (o, r)) in out.iter_mut().zip(self.osc.rot()).enumerate() {
            *o += a * r * gain(k);
        }
    }
}

/// Band-limited Gaussian noise shifted to its channel: a wideband digital link.
pub struct NoiseTx {
    walk: GaussWalk,
    /// Unfiltered noise for one chunk.
    input: Vec<Complex32>,
    filter: Butterworth6,
    scale: f64,
    osc: FixedOsc,
}

impl NoiseTx {
    pub fn new(
        offset_hz: f64,
        level_dbfs: f64,
        noise_width_hz: f64,
        rate_hz: f64,
        seed: u64,
    ) -> NoiseTx {
        let filter = Butterworth6::new(noise_width_hz / 2.0, rate_hz);
        // Input power is 2 (unit variance per component); scale the output to the level.
        let scale = (10f64.powf(level_dbfs / 10.0) / (2.0 * filter.power_gain())).sqrt();
        NoiseTx {
            walk: GaussWalk::new(seed),
            input: vec![Complex32::default(); CHUNK],
            filter,
            scale,
            osc: FixedOsc::new(offset_hz, rate_hz),
        }
    }

    pub fn add(
        &mut self,
        gauss: &GaussTable,
        n0: u64,
        out: &mut [Complex32],
        gain: impl Fn(usize) -> f32,
    ) {
        let a = to_c32(self.osc.start(n0) * self.scale);
        let input = &mut self.input[..out.len()];
        self.walk.fill(gauss, 1.0, input);
        for (k, ((o, r), x)) in out.iter_mut().zip(self.osc.rot()).zip(input.iter()).enumerate() {
            *o += self.filter.step(*x) * (a * r) * gain(k);
        }
    }
}

/// Amplitude of a constant-envelope signal of the given power.
fn amplitude(level_dbfs: f64) -> f32 {
    10f64.powf(level_dbfs / 20.0) as f32
}

#[cfg(test)]
mod tests {
    use super::*;

    fn to_c64(z: Complex32) -> Complex64 {
        Complex64::new(z.re as f64, z.im as f64)
    }

    #[test]
    fn gauss_table_is_standard_normal() {
        let t = GaussTable::new(3);
        let n = GAUSS_LEN as f64;
        let mean = t.0.iter().map(|&x| x as f64).sum::<f64>() / n;
        let var = t.0.iter().map(|&x| (x as f64).powi(2)).sum::<f64>() / n;
        let kurt = t.0.iter().map(|&x| (x as f64).powi(4)).sum::<f64>() / n;
        assert!(mean.abs() < 1e-6 && (var - 1.0).abs() < 1e-5, "{mean} {var}");
        // Fourth moment of N(0, 1) is 3 (common practice); 4096 draws give about ±0.2.
        assert!((kurt - 3.0).abs() < 0.4, "{kurt}");
    }

    #[test]
    fn a_walk_never_repeats_an_entry_and_averages_unit_power() {
        let t = GaussTable::new(1);
        let mut w = GaussWalk::new(9);
        let mut power = 0.0;
        let pairs = 1 << 20;
        for i in 0..pairs {
            let z = w.pair(&t);
            power += z.norm_sqr() as f64;
            if i % (WALK_READS / 2) == 0 {
                // Check one whole walk: its entries are distinct.
                let mut seen: Vec<usize> = (0..WALK_READS)
                    .map(|k| {
                        ((w.pos.wrapping_add(w.stride.wrapping_mul(k as u32))) & GAUSS_MASK)
                            as usize
                    })
                    .collect();
                seen.sort_unstable();
                seen.dedup();
                assert_eq!(seen.len(), WALK_READS);
            }
        }
        // Mean of |z|² is 2 (unit variance per component); 2^20 pairs give about ±0.1 %.
        let mean = power / pairs as f64;
        assert!((mean / 2.0 - 1.0).abs() < 0.005, "{mean}");
    }

    #[test]
    fn fill_is_pair_by_pair() {
        let t = GaussTable::new(2);
        let (mut a, mut b) = (GaussWalk::new(4), GaussWalk::new(4));
        let mut filled = vec![Complex32::default(); 1000];
        a.fill(&t, 0.5, &mut filled[..333]);
        a.fill(&t, 0.5, &mut filled[333..]);
        let paired: Vec<Complex32> = (0..1000).map(|_| b.pair(&t) * 0.5).collect();
        assert_eq!(filled, paired);
    }

    #[test]
    fn fixed_oscillator_phase_is_exact_at_any_index() {
        let osc = FixedOsc::new(75e3, 2.4e6);
        // 75 kHz at 2.4 MS/s turns by exactly 1/32 of a cycle per sample.
        for n0 in [0u64, 1, 12_345_678_901] {
            let z = osc.start(n0) * to_c64(osc.rot()[17]);
            let expect = Complex64::from_polar(1.0, TAU * ((n0 + 17) % 32) as f64 / 32.0);
            assert!((z - expect).norm() < 1e-6, "{n0}: {z} vs {expect}");
        }
    }

    #[test]
    fn sine_table_phasor() {
        let s = SineTable::new();
        for deg in [0.0f64, 30.0, 90.0, 200.0, 359.0] {
            let p = s.phasor((deg / 360.0 * TWO_32) as u64 as u32);
            let e = Complex64::from_polar(1.0, deg.to_radians());
            // 12-bit phase: error at most π/4096 rad.
            assert!(((p.re as f64 - e.re).powi(2) + (p.im as f64 - e.im).powi(2)).sqrt() < 8e-4);
        }
    }

    #[test]
    fn butterworth_response_and_noise_bandwidth() {
        // A 6th-order Butterworth is 3 dB down at its cut-off; its noise bandwidth is
        // fc·(π/2n)/sin(π/2n) per side (common practice), 1.0115·fc for n = 6. Neither the
        // bilinear transform nor leaving out its zeros changes that visibly when fc ≪ rate.
        let (fc, rate) = (100e3, 20e6);
        let f = Butterworth6::new(fc, rate);
        let g = f.power_gain();
        let per_side = (std::f64::consts::PI / 12.0) / (std::f64::consts::PI / 12.0).sin();
        let expect = 2.0 * fc * per_side / rate;
        assert!((g / expect - 1.0).abs() < 0.01, "{g} vs {expect}");
        // Magnitude at fc from a steady complex tone.
        let mut f = Butterworth6::new(fc, rate);
        let osc = FixedOsc::new(fc, rate);
        let mut power = 0.0;
        for chunk in 0..20u64 {
            let z0 = osc.start(chunk * CHUNK as u64);
            for r in osc.rot() {
                let y = f.step(to_c32(z0 * to_c64(*r)));
                if chunk >= 10 {
                    power += y.norm_sqr() as f64;
                }
            }
        }
        let db = 10.0 * (power / (10 * CHUNK) as f64).log10();
        assert!((db + 3.0103).abs() < 0.05, "{db}");
    }
}
