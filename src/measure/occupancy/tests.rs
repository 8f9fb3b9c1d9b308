//! The tracker end to end: synthetic bands through the engine and [`Occupancy`], checked against
//! the known truth of what was keyed when. The helpers here are shared with the `log` command's
//! tests.

use super::*;
use crate::dsp::{Engine, EngineConfig, WindowKind};
use crate::testkit::{self, Rng};
use crate::units::db;
use num_complex::Complex32;

pub(crate) const FS: f64 = 200e3;
pub(crate) const CENTER: f64 = 100e6;
/// Total noise power of the synthetic band, dBFS: density −40 − 10·log10(200 k) = −93 dBFS/Hz.
pub(crate) const NOISE_DBFS: f64 = -40.0;

pub(crate) use crate::testkit::Keyed;

/// Complex white noise of total power `NOISE_DBFS` plus keyed carriers, at `FS`.
pub(crate) fn band(n: usize, carriers: &[Keyed], seed: u64) -> Vec<Complex32> {
    testkit::keyed_band(n, FS, undb(NOISE_DBFS), carriers, seed)
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
        eprintln!("emission start error {ds}, end error {de} samples (dwell {})", timing.stride);
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
    let x = band(s(3.0) as usize, &[Keyed { offset_hz: 0.0, level_dbfs: -10.0, on: &always }], 3);
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
    assert_eq!(intervals(&events, 0)[0].occupied, 0.0);
    assert_eq!(intervals(&events, 2)[0].occupied, 0.0);
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
    let (lo, hi) = (offset_hz - width_hz / 2.0, offset_hz + width_hz / 2.0);
    testkit::to_f32(&testkit::band_limited_noise(
        &mut Rng::new(seed),
        n,
        FS,
        lo,
        hi,
        undb(level_dbfs),
    ))
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
    assert_eq!(iv[0].occupied, 0.0);
}

#[test]
fn a_gap_closes_emissions_as_partial_and_is_counted() {
    let always = |_: u64| true;
    let x = band(s(2.0) as usize, &[Keyed { offset_hz: 0.0, level_dbfs: -30.0, on: &always }], 8);
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
fn predicted_false_occupancy_of_noise_matches_a_simulation() {
    // Noise only, one FFT frame per sample (dwell = one hop), a 2 kHz channel (about 5 bins)
    // and a low 3 dB threshold, so that noise does cross it. The χ² model of
    // `noise_false_occupancy` (common practice) must predict the simulated rate within ±35 %.
    let x = band(s(30.0) as usize, &[], 17);
    let mut ch = channel(-30e3, 2e3);
    ch.threshold_db = 3.0;
    let (events, _) = run(&x, 512, Some(0.00128), 60.0, 0.0, vec![ch]);
    let iv = &intervals(&events, 0)[0];
    // Samples over the threshold (each emission counts its own); occupancy itself also credits
    // the quiet samples beside them by their share.
    let over: u64 = emissions(&events, 0).iter().map(|e| e.samples).sum();
    let simulated = over as f64 / iv.samples as f64;
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

/// Fraction of `[0, n)` the schedule `on` keys on, percent: the truth of a keyed channel.
fn duty_pct(n: u64, on: &dyn Fn(u64) -> bool) -> f64 {
    100.0 * (0..n).filter(|&i| on(i)).count() as f64 / n as f64
}

#[test]
fn keyed_occupancy_is_unbiased_at_the_default_dwell() {
    // ITU-R SM.1880 occupancy against the keying schedule itself: a 50 % keyed carrier (86.5 ms
    // on in 173 ms) and a 30 % keyed one (50 ms bursts every 166.7 ms), neither aligned to the
    // hop or the dwell, 20 dB over the channel noise. A whole measurement sample counted for
    // every burst it touches reads about 34 % for the second; counted by its share, both must
    // read within 1 point, at the smallest and at the default FFT size (one hop per sample).
    let half = |i: u64| i % s(0.173) < s(0.0865);
    let thirty = |i: u64| i % 33_333 < 10_000;
    let n = s(12.0);
    let x = band(
        n as usize,
        &[
            Keyed { offset_hz: -50e3, level_dbfs: -33.0, on: &half },
            Keyed { offset_hz: 40e3, level_dbfs: -33.0, on: &thirty },
        ],
        23,
    );
    let truths = [duty_pct(n, &half), duty_pct(n, &thirty)];
    for fft in [512, 4096] {
        let chans = vec![channel(-50e3, 10e3), channel(40e3, 10e3)];
        let (events, timing) = run(&x, fft, None, 60.0, DEFAULT_HANG_S, chans);
        for (ch, truth) in truths.iter().enumerate() {
            let pct = intervals(&events, ch)[0].occupancy_pct();
            eprintln!(
                "fft {fft} (dwell {} samples): channel {ch} reads {pct:.2} %, schedule {truth:.2} %",
                timing.stride
            );
            assert!((pct - truth).abs() <= 1.0, "fft {fft} channel {ch}: {pct:.2} vs {truth:.2}");
        }
    }
}

#[test]
fn emission_edges_are_placed_to_one_hop() {
    // Bursts of 30 .. 400 ms at arbitrary offsets against the hop: start and end within one
    // hop (256 samples) of the schedule, though a measurement sample is seven hops.
    let bursts: Vec<(u64, u64)> = [(0.1111, 0.03), (0.4037, 0.1234), (0.9, 0.4), (1.6661, 0.0777)]
        .iter()
        .map(|&(t, d)| (s(t), s(t + d)))
        .collect();
    let on = |i: u64| bursts.iter().any(|&(a, b)| i >= a && i < b);
    let x = band(s(2.0) as usize, &[Keyed { offset_hz: 30e3, level_dbfs: -33.0, on: &on }], 31);
    let (events, timing) = run(&x, 512, None, 60.0, DEFAULT_HANG_S, vec![channel(30e3, 10e3)]);
    let found = emissions(&events, 0);
    assert_eq!(found.len(), bursts.len(), "{found:?}");
    let hop = 256;
    assert!(timing.stride >= 7 * hop);
    for (e, &(a, b)) in found.iter().zip(&bursts) {
        let (ds, de) = (e.start_sample as i64 - a as i64, e.end_sample as i64 - b as i64);
        eprintln!("burst {a}..{b}: start error {ds}, end error {de} samples (hop {hop})");
        assert!(ds.unsigned_abs() <= hop && de.unsigned_abs() <= hop, "{e:?} vs {a}..{b}");
    }
}
