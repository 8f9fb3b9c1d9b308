//! The built-in demo scene: a band worth watching when no receiver is at hand.
//!
//! ## The scene
//!
//! Wrenhollow Ridge is an invented hilltop monitoring post keeping watch over a small UHF band of
//! its own. Tuned to 433.5 MHz at 2.4 MS/s (the defaults), bandwarden hears four narrowband FM
//! voice channels on a 12.5 kHz raster, each keying up and down on its own fixed pattern (the busy
//! operations channel is on the air 60 % of the time, the ferry channel hardly ever); a telemetry
//! channel sending short 2-FSK bursts a second or more apart; a steady CW beacon; and a 200 kHz
//! wide noise-like digital link that never stops. Under it all lies white receiver noise at
//! −95 dBFS/Hz. It is what bandwarden reads when no input is given and what `bandwarden demo`
//! writes; a 4-second recording of it ships in `recordings/` with a matching channel plan.
//!
//! | channel  | offset     | width   | level     | emission                         | on the air |
//! |----------|-----------:|--------:|----------:|----------------------------------|-----------:|
//! | ops      | −362.5 kHz | 12.5 kHz| −36 dBFS  | NBFM voice, ±2.5 kHz             | 60 %  (5 s pattern) |
//! | yard     | −312.5 kHz | 12.5 kHz| −31 dBFS  | NBFM voice, ±2.5 kHz             | 25 %  (4 s) |
//! | gate     | −237.5 kHz | 12.5 kHz| −40 dBFS  | NBFM voice, ±2.5 kHz             | 40 %  (2.5 s) |
//! | ferry    | −175.0 kHz | 12.5 kHz| −45 dBFS  | NBFM voice, ±2.5 kHz             | 7.5 % (8 s) |
//! | beacon   | +75.0 kHz  | 5 kHz   | −32 dBFS  | unmodulated carrier              | always |
//! | telem    | +137.5 kHz | 12.5 kHz| −34 dBFS  | 2-FSK 2400 Bd, ±2 kHz; 40 and 80 ms bursts | 4.8 % (2.5 s) |
//! | backhaul | +325.0 kHz | 250 kHz | −30 dBFS  | Gaussian noise, 200 kHz at −3 dB | always |
//!
//! Offsets are from the tuned centre; levels are the power while keyed (for the link, its total
//! power). Keyed transmitters rise and fall smoothly over the first and last millisecond of each
//! on-interval. Every allocation lies within ±450 kHz, so the scene fits a 1 MS/s span; at a lower
//! `--rate` the channels that do not fit inside ±rate/2 are simply left out. With everything keyed
//! the total power is about −24 dBFS at 2.4 MS/s and −20 dBFS at 20 MS/s (the receiver noise
//! grows with the span), far enough below full scale that 8-bit output does not clip. The noise
//! is flat across the whole span (no band-edge roll-off is modelled).
//!
//! ## Truth as data
//!
//! The table above is [`channels()`]; keying is a pure function of time
//! ([`DemoChannel::is_keyed`], [`Schedule::keyed_time`]) where time is the sample index divided by
//! the sample rate, so the true duty cycle of any interval is known exactly and a replay with the
//! same seed gives the same samples, however they are read. The seed only changes the noise and
//! the phases, never the schedule or the levels.
//!
//! ## Speed
//!
//! The generators (see [`synth`]) avoid per-sample transcendental functions: phase accumulators
//! with table look-up for FM and FSK, exact per-chunk rotation tables for fixed tones, and a walked
//! table for Gaussian noise. `cargo run --release --example demo_speed` reports the rate; on a
//! busy shared two-core server it read 60–100 MS/s as scheduled and 36–76 MS/s with every
//! channel keyed, at 2.4 and at 20 MS/s (the spread is the other load), and
//! `bandwarden demo --realtime --rate 20M --format cu8` kept pace using half a core.

mod channels;
mod schedule;
pub mod synth;

pub use channels::{
    channel, channels, is_keyed, DemoChannel, Emission, BEACON_LEVEL_DBFS, KEY_RAMP_S,
    NOISE_DENSITY_DBFS_PER_HZ, SITE_NAME,
};
pub use schedule::Schedule;

use super::{SampleSource, SourceInfo};
use anyhow::Result;
use num_complex::Complex32;
use std::time::{Duration, Instant};
use synth::{
    splitmix64, CarrierTx, DataTx, GaussTable, GaussWalk, NoiseTx, SineTable, VoiceTx, CHUNK,
};
use time::OffsetDateTime;

pub const DEFAULT_RATE_HZ: f64 = 2.4e6;
pub const DEFAULT_CENTER_HZ: f64 = 433.5e6;
/// The seed used when none is given.
pub const DEFAULT_SEED: u64 = 0x5eed;

/// The generator behind one channel.
enum Transmitter {
    Voice(VoiceTx),
    Data(DataTx),
    Carrier(CarrierTx),
    Noise(NoiseTx),
}

struct Station {
    channel: DemoChannel,
    tx: Transmitter,
}

/// Generates the scene deterministically from a seed, in chunks of [`CHUNK`] samples whose
/// content does not depend on how the caller slices its reads.
pub struct Scene {
    rate: f64,
    /// Index of the first sample of the next chunk to generate.
    next_chunk: u64,
    buf: Vec<Complex32>,
    /// Samples of `buf` already handed out (`CHUNK` when it is used up).
    buf_pos: usize,
    sine: SineTable,
    gauss: GaussTable,
    noise: GaussWalk,
    noise_sigma: f32,
    stations: Vec<Station>,
    runs: Vec<(u64, u64)>,
}

impl Scene {
    /// The full scene at `sample_rate_hz`; channels that do not fit the span are left out.
    pub fn new(sample_rate_hz: f64, seed: u64) -> Scene {
        Scene::with_channels(sample_rate_hz, seed, channels())
    }

    /// A scene holding only `chans` (those that fit) over the receiver noise, for tests and
    /// experiments that need one signal at a time.
    pub fn with_channels(sample_rate_hz: f64, seed: u64, chans: Vec<DemoChannel>) -> Scene {
        let mut rng = seed;
        let stations = chans
            .into_iter()
            .filter(|c| c.fits(sample_rate_hz))
            .map(|c| {
                let tx = transmitter(&c, sample_rate_hz, splitmix64(&mut rng));
                Station { channel: c, tx }
            })
            .collect();
        let density = 10f64.powf(NOISE_DENSITY_DBFS_PER_HZ / 10.0);
        Scene {
            rate: sample_rate_hz,
            next_chunk: 0,
            buf: vec![Complex32::default(); CHUNK],
            buf_pos: CHUNK,
            sine: SineTable::new(),
            gauss: GaussTable::new(splitmix64(&mut rng)),
            noise: GaussWalk::new(splitmix64(&mut rng)),
            // Each component carries half the power: density·rate/2.
            noise_sigma: (density * sample_rate_hz / 2.0).sqrt() as f32,
            stations,
            runs: Vec::new(),
        }
    }

    pub fn sample_rate_hz(&self) -> f64 {
        self.rate
    }

    /// The channels present at this sample rate.
    pub fn channels(&self) -> impl Iterator<Item = &DemoChannel> {
        self.stations.iter().map(|s| &s.channel)
    }

    /// Overwrites `out` with the next samples of the scene.
    pub fn fill(&mut self, out: &mut [Complex32]) {
        let mut i = 0;
        while i < out.len() {
            if self.buf_pos == CHUNK {
                if out.len() - i >= CHUNK {
                    self.render(&mut out[i..i + CHUNK]);
                    i += CHUNK;
                    continue;
                }
                let mut buf = std::mem::take(&mut self.buf);
                self.render(&mut buf);
                self.buf = buf;
                self.buf_pos = 0;
            }
            let n = (CHUNK - self.buf_pos).min(out.len() - i);
            out[i..i + n].copy_from_slice(&self.buf[self.buf_pos..self.buf_pos + n]);
            self.buf_pos += n;
            i += n;
        }
    }

    /// Generates the next chunk into `out` (`CHUNK` samples).
    fn render(&mut self, out: &mut [Complex32]) {
        let n0 = self.next_chunk;
        self.next_chunk += CHUNK as u64;
        self.noise.fill(&self.gauss, self.noise_sigma, out);
        for st in self.stations.iter_mut() {
            self.runs.clear();
            st.channel.schedule.runs(self.rate, n0, n0 + CHUNK as u64, &mut self.runs);
            let tables = Tables { sine: &self.sine, gauss: &self.gauss, rate: self.rate };
            for &(a, b) in &self.runs {
                key_run(st, &tables, a, &mut out[(a - n0) as usize..(b - n0) as usize]);
            }
        }
    }
}

/// Read-only state every transmitter may use.
struct Tables<'a> {
    sine: &'a SineTable,
    gauss: &'a GaussTable,
    rate: f64,
}

fn transmitter(c: &DemoChannel, rate: f64, seed: u64) -> Transmitter {
    match c.emission {
        Emission::Voice { deviation_hz, tones_hz, tone_weights, syllable_hz } => {
            Transmitter::Voice(VoiceTx::new(
                c.offset_hz,
                c.level_dbfs,
                deviation_hz,
                tones_hz,
                tone_weights,
                syllable_hz,
                rate,
                seed,
            ))
        }
        Emission::Data { baud, shift_hz } => {
            Transmitter::Data(DataTx::new(c.offset_hz, c.level_dbfs, baud, shift_hz, rate))
        }
        Emission::Carrier => Transmitter::Carrier(CarrierTx::new(c.offset_hz, c.level_dbfs, rate)),
        Emission::Noise { noise_width_hz } => {
            Transmitter::Noise(NoiseTx::new(c.offset_hz, c.level_dbfs, noise_width_hz, rate, seed))
        }
    }
}

/// Adds one keyed run (samples `start ..`, as many as `out` holds), shaping the key-up and
/// key-down ramps where the run meets the edges of its on-interval.
fn key_run(st: &mut Station, t: &Tables, start: u64, out: &mut [Complex32]) {
    let end = start + out.len() as u64;
    let Some((on, off)) = st.channel.schedule.interval_at(start as f64 / t.rate) else {
        add(&mut st.tx, t, start, out, |_| 1.0);
        return;
    };
    let up = ((on + KEY_RAMP_S) * t.rate).ceil().max(0.0) as u64;
    let down = ((off - KEY_RAMP_S) * t.rate).floor().max(0.0) as u64;
    let lo = up.clamp(start, end);
    let hi = down.clamp(lo, end);
    let (head, rest) = out.split_at_mut((lo - start) as usize);
    let (middle, tail) = rest.split_at_mut((hi - lo) as usize);
    let ramp =
        |first: u64| move |k: usize| key_gain((first + k as u64) as f64 / t.rate, on, off) as f32;
    add(&mut st.tx, t, start, head, ramp(start));
    add(&mut st.tx, t, lo, middle, |_| 1.0);
    add(&mut st.tx, t, hi, tail, ramp(hi));
}

/// Envelope of a keyed transmitter at `t_s` in its on-interval `[on, off)`: a smoothstep rise and
/// fall over [`KEY_RAMP_S`].
fn key_gain(t_s: f64, on: f64, off: f64) -> f64 {
    let x = ((t_s - on).min(off - t_s) / KEY_RAMP_S).clamp(0.0, 1.0);
    x * x * (3.0 - 2.0 * x)
}

fn add(
    tx: &mut Transmitter,
    t: &Tables,
    start: u64,
    out: &mut [Complex32],
    gain: impl Fn(usize) -> f32,
) {
    if out.is_empty() {
        return;
    }
    match tx {
        Transmitter::Voice(v) => v.add(t.sine, out, gain),
        Transmitter::Data(d) => d.add(t.sine, out, gain),
        Transmitter::Carrier(c) => c.add(start, out, gain),
        Transmitter::Noise(n) => n.add(t.gauss, start, out, gain),
    }
}

/// The scene as a [`SampleSource`], optionally paced at the sample rate like a receiver.
pub struct DemoSource {
    scene: Scene,
    seed: u64,
    info: SourceInfo,
    realtime: bool,
    started: Option<Instant>,
    produced: u64,
}

impl DemoSource {
    pub fn new(sample_rate_hz: f64, center_hz: f64, realtime: bool) -> DemoSource {
        DemoSource::with_seed(sample_rate_hz, center_hz, realtime, DEFAULT_SEED)
    }

    pub fn with_seed(sample_rate_hz: f64, center_hz: f64, realtime: bool, seed: u64) -> DemoSource {
        DemoSource {
            scene: Scene::new(sample_rate_hz, seed),
            seed,
            info: SourceInfo {
                label: format!("demo scene ({SITE_NAME}, invented)"),
                format: None,
                sample_rate_hz,
                center_hz,
                start_time: None,
                total_samples: None,
                live: realtime,
                segments: Vec::new(),
                reference_level_dbm: None,
                tuning: None,
            },
            realtime,
            started: None,
            produced: 0,
        }
    }

    /// Sets the time of the first sample, so logs of the scene carry a chosen date.
    pub fn with_start_time(mut self, start: Option<OffsetDateTime>) -> DemoSource {
        self.info.start_time = start;
        self
    }
}

impl SampleSource for DemoSource {
    fn info(&self) -> &SourceInfo {
        &self.info
    }

    fn read(&mut self, out: &mut [Complex32]) -> Result<usize> {
        if self.realtime {
            let start = *self.started.get_or_insert_with(Instant::now);
            let due = Duration::from_secs_f64(self.produced as f64 / self.info.sample_rate_hz);
            if let Some(wait) = due.checked_sub(start.elapsed()) {
                std::thread::sleep(wait);
            }
        }
        self.scene.fill(out);
        self.produced += out.len() as u64;
        Ok(out.len())
    }

    fn rewind(&mut self) -> Result<()> {
        self.scene = Scene::new(self.info.sample_rate_hz, self.seed);
        self.started = None;
        self.produced = 0;
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::{Engine, EngineConfig, Spectrum, Window, WindowKind};
    use crate::measure::{band_power, find_signals, noise_floor, Detection};
    use crate::units::db;

    /// Feeds `seconds` of `scene` to the engine, after skipping `skip` samples; one spectrum per
    /// `frames` frames, or one in all.
    fn spectra(
        scene: &mut Scene,
        skip: u64,
        seconds: f64,
        fft: usize,
        overlap: f64,
        frames: Option<u64>,
    ) -> Vec<Spectrum> {
        let rate = scene.sample_rate_hz();
        let total = (seconds * rate).round() as u64;
        let cfg = EngineConfig {
            fft_size: fft,
            window: WindowKind::Hann,
            overlap,
            frames_per_output: frames,
        };
        let mut engine = Engine::new(cfg, rate, 0.0);
        let mut out = Vec::new();
        let mut buf = vec![Complex32::default(); 65_536];
        let mut start = skip;
        scene.fill(&mut vec![Complex32::default(); skip as usize]);
        while start < skip + total {
            let m = ((skip + total - start) as usize).min(buf.len());
            scene.fill(&mut buf[..m]);
            engine.push(start, &buf[..m], &mut |s| out.push(s.clone()));
            start += m as u64;
        }
        engine.finish(&mut |s| out.push(s.clone()));
        out
    }

    fn one_second_at_default_rate() -> Spectrum {
        let mut scene = Scene::new(DEFAULT_RATE_HZ, DEFAULT_SEED);
        spectra(&mut scene, 0, 1.0, 4096, 0.5, None).pop().unwrap()
    }

    #[test]
    fn noise_density_is_the_documented_constant() {
        // Truth: the scene's own constant (invented data). The engine's PSD is calibrated so that
        // its integral is the mean power (Parseval; Heinzel et al. 2002), and FCME finds the
        // density where no signal is.
        let spec = one_second_at_default_rate();
        let floor = db(noise_floor(&spec.psd, spec.dof));
        assert!((floor - NOISE_DENSITY_DBFS_PER_HZ).abs() < 0.3, "{floor} dBFS/Hz");
    }

    #[test]
    fn receiver_noise_power_obeys_parseval() {
        // Time-domain mean power of the noise alone must be density × rate, and the integral of
        // its PSD must equal that mean power (Parseval's theorem).
        let rate = 2.4e6;
        let mut scene = Scene::with_channels(rate, 7, Vec::new());
        let mut x = vec![Complex32::default(); 1 << 20];
        scene.fill(&mut x);
        let mean = x.iter().map(|z| z.norm_sqr() as f64).sum::<f64>() / x.len() as f64;
        let expect = NOISE_DENSITY_DBFS_PER_HZ + db(rate);
        // 2^20 samples estimate the power to about ±0.1 % (0.004 dB).
        assert!((db(mean) - expect).abs() < 0.02, "{} vs {expect}", db(mean));
        let mut scene = Scene::with_channels(rate, 7, Vec::new());
        let spec = spectra(&mut scene, 0, 0.5, 4096, 0.5, None).pop().unwrap();
        assert!((db(spec.total_power()) - expect).abs() < 0.05, "{}", db(spec.total_power()));
        // White: the bins around 0 Hz read like the rest (no notch from the noise generator).
        let mid = spec.fft_size / 2;
        let near = spec.psd[mid - 4..=mid + 4].iter().sum::<f64>() / 9.0;
        let all = spec.psd.iter().sum::<f64>() / spec.fft_size as f64;
        assert!((db(near) - db(all)).abs() < 0.3, "{} vs {}", db(near), db(all));
    }

    #[test]
    fn beacon_level_is_the_documented_constant() {
        // Truth: the scene's constant. `find_signals` corrects scalloping with the window's own
        // response (Harris 1978), so a tone reads at its power wherever it falls between bins.
        let spec = one_second_at_default_rate();
        let window = Window::new(spec.window, spec.fft_size);
        let floor = noise_floor(&spec.psd, spec.dof);
        let beacon = channel("beacon").unwrap();
        let found = find_signals(&spec, &window, floor, 20, Detection::default());
        let sig = found
            .iter()
            .find(|s| (s.freq_hz - beacon.offset_hz).abs() < 1e3)
            .unwrap_or_else(|| panic!("no beacon in {found:?}"));
        assert!((sig.level_dbfs - BEACON_LEVEL_DBFS).abs() < 0.3, "{}", sig.level_dbfs);
    }

    #[test]
    fn link_power_is_the_documented_level() {
        // Truth: the scene's level. Channel power is the integral of the PSD over the allocation
        // (Parseval), less the receiver noise in it; a 6th-order Butterworth keeps all but
        // about 0.7 % of its power inside 1.25 × its 3 dB width (common practice).
        let spec = one_second_at_default_rate();
        let floor = noise_floor(&spec.psd, spec.dof);
        let link = channel("backhaul").unwrap();
        let (lo, hi) = (link.offset_hz - link.width_hz / 2.0, link.offset_hz + link.width_hz / 2.0);
        let power = band_power(&spec, lo, hi) - floor * link.width_hz;
        assert!((db(power) - link.level_dbfs).abs() < 0.3, "{}", db(power));
    }

    #[test]
    fn voice_duty_cycles_and_levels_follow_the_schedule() {
        // Occupancy as ITU-R SM.1880 defines it: the share of measurement samples (here 10 ms
        // spectra) in which the channel power exceeds a threshold relative to the noise (6 dB).
        // Truth: the scene's schedule, integrated exactly over the same interval.
        // The blocks start 3.7 ms into the scene so that key edges fall inside blocks.
        let rate = 1e6;
        let (skip, seconds) = (3_700, 20.0);
        let mut scene = Scene::new(rate, 11);
        let blocks = spectra(&mut scene, skip, seconds, 1000, 0.0, Some(10));
        assert_eq!(blocks.len(), 2000);
        for ch in channels().into_iter().filter(|c| matches!(c.emission, Emission::Voice { .. })) {
            let (lo, hi) = (ch.offset_hz - ch.width_hz / 2.0, ch.offset_hz + ch.width_hz / 2.0);
            let (mut on, mut partial, mut wrong) = (0usize, 0usize, 0usize);
            let (mut keyed_power, mut keyed_blocks) = (0.0, 0usize);
            for b in &blocks {
                let (t0, t1) = (b.first_sample as f64 / rate, b.end_sample as f64 / rate);
                // Whole blocks on or off, to the rounding of the exact integral.
                let truth = (ch.schedule.keyed_time(t0, t1) / (t1 - t0) * 1e9).round() / 1e9;
                let noise = noise_floor(&b.psd, b.dof) * ch.width_hz;
                let p = band_power(b, lo, hi);
                let measured = p > 4.0 * noise;
                on += measured as usize;
                if truth > 0.0 && truth < 1.0 {
                    partial += 1;
                } else if measured != (truth == 1.0) {
                    wrong += 1;
                }
                if truth == 1.0 {
                    keyed_power += p - noise;
                    keyed_blocks += 1;
                }
            }
            let n = blocks.len() as f64;
            let measured = on as f64 / n;
            let t0 = skip as f64 / rate;
            let truth = ch.schedule.keyed_time(t0, t0 + seconds) / seconds;
            assert_eq!(wrong, 0, "{}: {wrong} blocks disagree with the schedule", ch.name);
            assert!(
                (measured - truth).abs() <= partial as f64 / n + 1e-9,
                "{}: measured {measured}, schedule {truth}, {partial} edge blocks",
                ch.name
            );
            let level = db(keyed_power / keyed_blocks as f64);
            eprintln!(
                "{}: duty measured {measured:.4}, schedule {truth:.4}; level {level:.2} dBFS",
                ch.name
            );
            assert!((level - ch.level_dbfs).abs() < 0.5, "{}: {level} dBFS", ch.name);
        }
    }

    #[test]
    fn same_seed_same_samples_however_read() {
        let mut a = Scene::new(DEFAULT_RATE_HZ, 42);
        let mut whole = vec![Complex32::default(); 100_000];
        a.fill(&mut whole);
        let mut b = Scene::new(DEFAULT_RATE_HZ, 42);
        let mut pieces = vec![Complex32::default(); 100_000];
        let mut i = 0;
        for len in [1usize, 777, 2048, 5000, 3].iter().cycle() {
            if i == pieces.len() {
                break;
            }
            let end = (i + len).min(pieces.len());
            b.fill(&mut pieces[i..end]);
            i = end;
        }
        assert!(whole == pieces, "slicing the reads changed the samples");
        let mut c = Scene::new(DEFAULT_RATE_HZ, 43);
        let mut other = vec![Complex32::default(); 100_000];
        c.fill(&mut other);
        assert!(whole != other, "a different seed gave the same noise");
    }

    #[test]
    fn stays_well_inside_full_scale() {
        // Full scale as defined in `format`: |I|, |Q| ≤ 1. With every transmitter keyed at once
        // (the worst moment) cu8 must not clip (no code 0 or 255) and the total power must stay
        // below −10 dBFS; the documented figures are −24 and −20 dBFS (sum of the table's levels
        // and the noise density times the rate).
        for (rate, documented) in [(DEFAULT_RATE_HZ, -24.0), (20e6, -20.0)] {
            let busy = channels()
                .into_iter()
                .map(|mut c| {
                    c.schedule = Schedule::Always;
                    c
                })
                .collect();
            let mut scene = Scene::with_channels(rate, 5, busy);
            let mut x = vec![Complex32::default(); (0.2 * rate) as usize];
            scene.fill(&mut x);
            let peak = x.iter().map(|z| z.re.abs().max(z.im.abs())).fold(0.0, f32::max);
            let power = x.iter().map(|z| z.norm_sqr() as f64).sum::<f64>() / x.len() as f64;
            assert!(peak < 0.9, "{rate}: peak {peak}");
            assert!(db(power) < -10.0 && (db(power) - documented).abs() < 0.3, "{}", db(power));
            let mut bytes = Vec::new();
            crate::source::SampleFormat::Cu8.encode(&x, &mut bytes);
            assert!(!bytes.iter().any(|&b| b == 0 || b == 255), "{rate}: cu8 clipped");
        }
    }

    #[test]
    fn extreme_rates_give_finite_samples() {
        for rate in [1.0, 48e3, 1e9] {
            let mut scene = Scene::new(rate, 3);
            let mut x = vec![Complex32::default(); 3 * CHUNK + 5];
            scene.fill(&mut x);
            assert!(x.iter().all(|z| z.re.is_finite() && z.im.is_finite()), "{rate}");
        }
        // The link's filter stays calibrated far above the rates it is used at.
        let link = channel("backhaul").unwrap();
        let mut scene = Scene::with_channels(200e6, 3, vec![link.clone()]);
        let mut x = vec![Complex32::default(); 1 << 22];
        scene.fill(&mut x);
        let mean = x[1 << 20..].iter().map(|z| z.norm_sqr() as f64).sum::<f64>() / (3 << 20) as f64;
        let noise = 10f64.powf(NOISE_DENSITY_DBFS_PER_HZ / 10.0) * 200e6;
        let link_power = mean - noise;
        assert!((db(link_power) - link.level_dbfs).abs() < 0.5, "{}", db(link_power));
    }

    #[test]
    fn channels_outside_the_span_are_left_out() {
        let scene = Scene::new(300e3, 1);
        let names: Vec<_> = scene.channels().map(|c| c.name).collect();
        assert_eq!(names, ["beacon", "telem"]);
        // ... and nothing of the others leaks in: the noise alone sets the power.
        let mut scene = Scene::new(300e3, 1);
        let spec = spectra(&mut scene, 0, 2.0, 1024, 0.5, None).pop().unwrap();
        let beacon = band_power(&spec, 72.5e3, 77.5e3);
        let total = spec.total_power();
        let noise = 10f64.powf(NOISE_DENSITY_DBFS_PER_HZ / 10.0) * 300e3;
        let telem = channel("telem").unwrap();
        let telem_power =
            10f64.powf(telem.level_dbfs / 10.0) * telem.schedule.keyed_time(0.0, 2.0) / 2.0;
        let expect = noise + 10f64.powf(BEACON_LEVEL_DBFS / 10.0) + telem_power;
        assert!((db(total) - db(expect)).abs() < 0.2, "{} vs {}", db(total), db(expect));
        assert!(beacon > 0.5 * 10f64.powf(BEACON_LEVEL_DBFS / 10.0));
    }

    /// A file of the repository, for the checks of the committed recording and plan.
    fn repo_file(name: &str) -> std::path::PathBuf {
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join(name)
    }

    #[test]
    fn plan_matches_the_scene() {
        // Truth: the channel table. The plan is written by hand, so check every entry.
        let text = std::fs::read_to_string(repo_file("recordings/wrenhollow-plan.toml")).unwrap();
        let plan: toml::Value = toml::from_str(&text).unwrap();
        let entries = plan["channel"].as_array().unwrap();
        let hz = |v: &toml::Value| match v {
            toml::Value::String(s) => crate::units::parse_hz(s).unwrap(),
            v => v.as_float().or(v.as_integer().map(|i| i as f64)).unwrap(),
        };
        let all = channels();
        assert_eq!(entries.len(), all.len());
        for (e, c) in entries.iter().zip(&all) {
            assert_eq!(e["name"].as_str(), Some(c.name));
            assert!((hz(&e["center"]) - c.center_hz(DEFAULT_CENTER_HZ)).abs() < 1e-3, "{}", c.name);
            assert!((hz(&e["width"]) - c.width_hz).abs() < 1e-3, "{}", c.name);
        }
    }

    #[test]
    fn recording_matches_the_scene() {
        // The committed recording must be what `scripts/make-recordings` makes from this scene:
        // regenerate it and compare, allowing one quantisation step on a few samples for
        // last-bit differences of the platform's maths library.
        let meta_text =
            std::fs::read_to_string(repo_file("recordings/wrenhollow-demo.sigmf-meta")).unwrap();
        let meta = crate::source::sigmf::parse_meta(&meta_text, "recording").unwrap();
        assert_eq!(meta.datatype, crate::source::SampleFormat::Cu8);
        assert_eq!(meta.sample_rate_hz, Some(1e6));
        assert_eq!(meta.center_hz, Some(DEFAULT_CENTER_HZ));
        assert!(meta.datetime.is_some(), "the recording needs core:datetime");
        let data = std::fs::read(repo_file("recordings/wrenhollow-demo.sigmf-data")).unwrap();
        assert_eq!(data.len(), 8_000_000, "1 MS/s × 4 s of cu8");
        let mut src = DemoSource::new(1e6, DEFAULT_CENTER_HZ, false);
        let mut samples = vec![Complex32::default(); 4_000_000];
        src.read(&mut samples).unwrap();
        let mut fresh = Vec::new();
        crate::source::SampleFormat::Cu8.encode(&samples, &mut fresh);
        let differ: Vec<i32> = fresh
            .iter()
            .zip(&data)
            .map(|(&a, &b)| a as i32 - b as i32)
            .filter(|d| *d != 0)
            .collect();
        assert!(
            differ.len() <= 800 && differ.iter().all(|d| d.abs() <= 1),
            "{} bytes differ; rerun scripts/make-recordings after changing the scene",
            differ.len()
        );
    }

    #[test]
    fn source_reads_and_rewinds() {
        let mut src = DemoSource::new(1e6, DEFAULT_CENTER_HZ, false);
        let mut first = vec![Complex32::default(); 5000];
        assert_eq!(src.read(&mut first).unwrap(), 5000);
        src.rewind().unwrap();
        let mut again = vec![Complex32::default(); 5000];
        src.read(&mut again).unwrap();
        assert!(first == again);
        assert!(src.info().label.contains(SITE_NAME));
    }
}
