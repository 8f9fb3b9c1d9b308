//! Bad and odd input never panics, and comes back `unknown` with a note.

use super::*;
use crate::testkit::{noise, Rng};

fn run(
    samples: &[Complex32],
    rate: f64,
    offset: f64,
    obw: f64,
    psd: Option<f64>,
) -> Classification {
    classify(&EmissionIq { samples, rate_hz: rate, offset_hz: offset, obw_hz: obw, noise_psd: psd })
}

#[test]
fn empty_tiny_zero_and_nan_input_is_unknown_with_a_note() {
    let one = [Complex32::new(0.5, 0.5)];
    let zeros = vec![Complex32::new(0.0, 0.0); 5000];
    let nans = vec![Complex32::new(f32::NAN, f32::INFINITY); 5000];
    for (what, c) in [
        ("empty", run(&[], 1e5, 0.0, 1e4, None)),
        ("one sample", run(&one, 1e5, 0.0, 1e4, None)),
        ("zeros", run(&zeros, 1e5, 0.0, 1e4, Some(1e-9))),
        ("NaN samples", run(&nans, 1e5, 0.0, 1e4, None)),
        ("zero rate", run(&zeros, 0.0, 0.0, 1e4, None)),
        ("NaN rate", run(&zeros, f64::NAN, 0.0, 1e4, None)),
    ] {
        assert_eq!(c.class, Class::Unknown, "{what}");
        assert!(c.note.as_deref().is_some_and(|n| !n.is_empty()), "{what}: {c:?}");
        assert_eq!(c.confidence, 0.0, "{what}");
    }
}

#[test]
fn short_evidence_says_what_it_needs() {
    let x = noise(40, 0.01, 3);
    let c = run(&x, 1e5, 0.0, 2e4, Some(1e-9));
    assert_eq!(c.class, Class::Unknown);
    let note = c.note.unwrap();
    assert!(note.contains("needs") && note.contains("had"), "{note}");
}

/// Random lengths, rates, offsets, bandwidths and noise levels, including absurd ones: never a
/// panic, a confidence in 0..1 and a designator always.
#[test]
fn random_input_never_panics() {
    let mut rng = Rng::new(0xc1a5);
    let pick = |rng: &mut Rng, v: &[f64]| v[rng.below(v.len())];
    for _ in 0..60 {
        let len = pick(&mut rng, &[0.0, 1.0, 2.0, 7.0, 100.0, 1000.0, 5000.0]) as usize;
        let mut x = noise(len, pick(&mut rng, &[0.0, 1e-12, 1.0, 1e6]), rng.next_u64());
        if len > 3 && rng.below(3) == 0 {
            x[len / 2] = Complex32::new(f32::NAN, 0.0);
        }
        let rate = pick(&mut rng, &[-1.0, 0.0, 1.0, 1e3, 1e5, 2e7, f64::NAN, f64::INFINITY]);
        let offset = pick(&mut rng, &[0.0, 1e3, -4e4, 1e9, f64::NAN]);
        let obw = pick(&mut rng, &[0.0, -1.0, 1e-3, 50.0, 1e4, 1e8, f64::NAN]);
        let psd =
            [None, Some(0.0), Some(1e-9), Some(f64::NAN), Some(-1.0), Some(1e3)][rng.below(6)];
        let c = run(&x, rate, offset, obw, psd);
        assert!((0.0..=1.0).contains(&c.confidence), "{c:?}");
        assert!(!c.designator.is_empty());
    }
}

#[test]
fn class_names_round_trip() {
    for c in Class::ALL {
        let json = serde_json::to_string(&c).unwrap();
        assert_eq!(json, format!("\"{}\"", c.as_str()));
        assert_eq!(serde_json::from_str::<Class>(&json).unwrap(), c);
    }
    let p = ClassParams { tones: Some(2), ..ClassParams::default() };
    assert_eq!(serde_json::to_string(&p).unwrap(), "{\"tones\":2}");
}

/// Unfiltered PSK at 20 dB SNR: constant envelope, abrupt phase steps of 2π/M (its definition).
fn unfiltered_psk(m: u32, n: usize, sps: usize, seed: u64) -> Vec<Complex32> {
    let mut rng = Rng::new(seed);
    let mut x = noise(n, 0.01, seed + 1);
    let mut phase = 0.0;
    for (i, v) in x.iter_mut().enumerate() {
        if i % sps == 0 {
            phase = 2.0 * std::f64::consts::PI * rng.below(m as usize) as f64 / m as f64;
        }
        *v += Complex32::from_polar(1.0, phase as f32);
    }
    x
}

#[test]
fn unfiltered_psk_is_psk_of_its_order_and_fm_stays_fm() {
    for (m, seed) in [(2, 11), (4, 12), (8, 13)] {
        // 5 kBd at 100 kS/s; the 99 % band of rectangular PSK is about 20 symbol rates wide.
        let x = unfiltered_psk(m, 20_000, 20, seed);
        let c = run(&x, 100e3, 0.0, 90e3, None);
        assert_eq!((c.class, c.params.psk_order), (Class::Psk, Some(m)), "{m}-PSK: {c:?}");
        let rate = c.params.symbol_rate_hz.unwrap_or(0.0);
        assert!((rate - 5e3).abs() < 50.0, "{m}-PSK symbol rate {rate} Hz, sent 5000");
    }
    // Tone FM, β 2.5 (1 kHz tone, 2.5 kHz deviation): not a PSK.
    let mut x = noise(20_000, 0.01, 5);
    for (i, v) in x.iter_mut().enumerate() {
        let t = i as f64 / 100e3;
        let phi = 2.5 * (2.0 * std::f64::consts::PI * 1e3 * t).sin();
        *v += Complex32::from_polar(1.0, phi as f32);
    }
    let c = run(&x, 100e3, 0.0, 8e3, None);
    assert_eq!(c.class, Class::Fm, "{c:?}");
}
