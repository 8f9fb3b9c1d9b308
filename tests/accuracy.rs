//! Accuracy of the measurements against the outside world.
//!
//! Every check names its source beside it: the scipy reference vectors written by
//! `scripts/make-reference.py` (versions in `tests/reference/VERSIONS.txt`), Harris 1978,
//! Abramowitz & Stegun table 9.1, ITU-R SM.328, Parseval's theorem, or common practice. The
//! measured errors are printed; `cargo test --test accuracy -- --nocapture` shows them.

use bandwarden::dsp::{Engine, EngineConfig, Spectrum, Window, WindowKind};
use bandwarden::measure::stats::{gamma_p, gamma_quantile_unit_mean};
use bandwarden::measure::{band_power, find_signals, noise_floor, occupied_bandwidth, Detection};
use bandwarden::testkit::{add_tone, band_limited_noise, noise64, to_f32, Rng};
use bandwarden::units::db;
use num_complex::{Complex32, Complex64};
use serde_json::Value;
use std::f64::consts::PI;
use std::path::PathBuf;

// ---------------------------------------------------------------------------------------------
// Helpers: the engine run over a whole record, reference files (signals come from the seeded
// test kit, `bandwarden::testkit`).
// ---------------------------------------------------------------------------------------------

/// A sinusoidally frequency-modulated carrier `a·exp(j(2π·fc·t + β·sin(2π·fm·t)))`.
fn fm_carrier(n: usize, rate: f64, fc: f64, fm: f64, beta: f64, level_dbfs: f64) -> Vec<Complex64> {
    let amp = 10f64.powf(level_dbfs / 20.0);
    (0..n)
        .map(|i| {
            let t = i as f64 / rate;
            Complex64::from_polar(amp, 2.0 * PI * fc * t + beta * (2.0 * PI * fm * t).sin())
        })
        .collect()
}

/// One Welch average over the whole record, as `measure` computes it.
fn average(x: &[Complex32], cfg: EngineConfig, rate: f64, center: f64) -> Spectrum {
    let mut engine = Engine::new(cfg, rate, center);
    let mut out = None;
    engine.push(0, x, &mut |s| out = Some(s.clone()));
    engine.finish(&mut |s| out = Some(s.clone()));
    out.expect("record holds at least one frame")
}

fn cfg(fft_size: usize, window: WindowKind, overlap: f64) -> EngineConfig {
    EngineConfig { fft_size, window, overlap, frames_per_output: None }
}

fn mean_power(x: &[Complex32]) -> f64 {
    x.iter().map(|v| v.norm_sqr() as f64).sum::<f64>() / x.len() as f64
}

fn reference_path(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("tests").join("reference").join(name)
}

fn reference() -> Value {
    let text = std::fs::read_to_string(reference_path("reference.json"))
        .expect("tests/reference/reference.json (run python3 scripts/make-reference.py)");
    serde_json::from_str(&text).expect("reference.json is valid JSON")
}

fn read_cf32(name: &str) -> Vec<Complex32> {
    let bytes = std::fs::read(reference_path(name)).expect("reference samples");
    bytes
        .chunks_exact(8)
        .map(|c| {
            Complex32::new(
                f32::from_le_bytes(c[0..4].try_into().unwrap()),
                f32::from_le_bytes(c[4..8].try_into().unwrap()),
            )
        })
        .collect()
}

fn read_f64(name: &str) -> Vec<f64> {
    let bytes = std::fs::read(reference_path(name)).expect("reference PSD");
    bytes.chunks_exact(8).map(|c| f64::from_le_bytes(c.try_into().unwrap())).collect()
}

fn num(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("expected a number, found {v}"))
}

fn window_of(v: &Value) -> WindowKind {
    v.as_str().expect("window name").parse().expect("a window name bandwarden accepts")
}

// ---------------------------------------------------------------------------------------------
// scipy reference vectors
// ---------------------------------------------------------------------------------------------

/// Welch PSDs bin by bin against `scipy.signal.welch(x, fs, window, nperseg, noverlap,
/// return_onesided=False, scaling='density', detrend=False)`, fftshifted (scipy reference
/// vectors; versions in tests/reference/VERSIONS.txt).
///
/// Tolerance: scipy works in float64, we transform in float32. A float32 FFT's error in `X[k]`
/// is about ε·√(log₂N) times the RMS of the spectrum (ε = 6·10⁻⁸), so the error in `|X[k]|²` is
/// bounded by `2·|X[k]|·δ`: relative to the bin where the bin is strong, relative to
/// `√(P[k]·P̄)` where it is weak. We allow `10⁻⁵·P[k] + 10⁻⁵·√(P[k]·P̄)` — about ten times the
/// estimate for N = 1024 — which still catches any scaling, window, ordering or framing error
/// (those are 10⁻³ or far larger).
#[test]
fn welch_psd_matches_scipy_bin_by_bin() {
    let index = reference();
    let rate = num(&index["sample_rate_hz"]);
    let mut cases = 0;
    for sig in index["signals"].as_array().unwrap() {
        let name = sig["name"].as_str().unwrap();
        let x = read_cf32(sig["samples_file"].as_str().unwrap());
        assert_eq!(x.len() as f64, num(&index["samples"]), "{name}: sample count");
        let all = read_f64(sig["psd_file"].as_str().unwrap());
        let mut worst = 0.0f64;
        for case in sig["psd"].as_array().unwrap() {
            let window = window_of(&case["window"]);
            let n = num(&case["nperseg"]) as usize;
            let noverlap = num(&case["noverlap"]) as usize;
            let config = cfg(n, window, noverlap as f64 / n as f64);
            assert_eq!(config.hop(), n - noverlap, "{name} {window} N={n}: hop");
            let spec = average(&x, config, rate, 0.0);
            // scipy drops the incomplete last segment, as the engine does.
            assert_eq!(spec.frames as f64, num(&case["segments"]), "{name} {window} N={n}");
            let off = num(&case["offset"]) as usize;
            let expect = &all[off..off + n];
            let mean = expect.iter().sum::<f64>() / n as f64;
            for (k, (&ours, &theirs)) in spec.psd.iter().zip(expect).enumerate() {
                let allowed = 1e-5 * theirs + 1e-5 * (theirs * mean).sqrt();
                let err = (ours - theirs).abs();
                assert!(
                    err <= allowed,
                    "{name} {window} N={n}: first differing bin {k} ({:.1} Hz): ours {ours:e}, \
                     scipy {theirs:e}",
                    spec.freq_of_bin(k as f64)
                );
                worst = worst.max(err / (theirs + (theirs * mean).sqrt()));
            }
            // Same scaling convention exactly: P = |X|²/(fs·S2), mean over segments.
            let ratio = spec.psd.iter().sum::<f64>() / expect.iter().sum::<f64>();
            assert!((ratio - 1.0).abs() < 1e-6, "{name} {window} N={n}: total ratio {ratio}");
            cases += 1;
        }
        eprintln!("scipy welch, {name}: worst normalised bin error {worst:.2e}");
    }
    assert_eq!(cases, 4 * 7 * 3, "every reference case was compared");
}

/// Window coefficients and figures of merit against `scipy.signal.get_window` (periodic), with
/// S1, S2, ENBW, coherent gain, scalloping and highest side lobe computed numerically by the
/// script (scipy reference vectors). These agree with Harris 1978 table I, which
/// src/dsp/window.rs checks separately.
#[test]
fn window_figures_match_scipy() {
    let index = reference();
    let mut checked = 0;
    for r in index["windows"].as_array().unwrap() {
        let kind = window_of(&r["window"]);
        let n = num(&r["n"]) as usize;
        let w = Window::new(kind, n);
        let what = format!("{kind} N={n}");
        if let Some(coeffs) = r.get("coefficients") {
            let exact = kind.coefficients(n);
            for (i, (ours, theirs)) in exact.iter().zip(coeffs.as_array().unwrap()).enumerate() {
                assert!((ours - num(theirs)).abs() < 1e-14, "{what}: coefficient {i}: {ours}");
            }
        }
        let close = |ours: f64, key: &str, tol: f64| {
            let theirs = num(&r[key]);
            assert!(
                (ours - theirs).abs() <= tol * theirs.abs().max(1.0),
                "{what}: {key} {ours} vs {theirs}"
            );
        };
        close(w.s1, "s1", 1e-12);
        close(w.s2, "s2", 1e-12);
        close(w.enbw_bins(), "enbw_bins", 1e-12);
        close(w.coherent_gain(), "coherent_gain", 1e-12);
        // The response is computed from the f32 coefficients the FFT really uses, so it agrees with
        // scipy's float64 figure to float32 precision (~1e-7), not better.
        close(w.scalloping_loss_db(), "scalloping_db", 1e-7);
        // Both walk the same 1/64-bin grid, so they find the same side-lobe sample.
        close(w.highest_sidelobe_db(), "highest_sidelobe_db", 1e-3);
        checked += 1;
    }
    assert_eq!(checked, 8 * 4);
}

/// `bessel_i0` against `scipy.special.i0` (scipy reference vectors) over the Kaiser β range.
#[test]
fn bessel_i0_matches_scipy() {
    for r in reference()["special"]["i0"].as_array().unwrap() {
        let (x, theirs) = (num(&r["x"]), num(&r["value"]));
        let ours = bandwarden::dsp::window::bessel_i0(x);
        assert!((ours - theirs).abs() <= 1e-13 * theirs, "I0({x}): {ours} vs {theirs}");
    }
}

/// `gamma_p` against `scipy.special.gammainc`, and the unit-mean Gamma quantile against
/// `scipy.special.gammaincinv(a, q)/a` (scipy reference vectors). Shapes cover one periodogram
/// (a = 1) up to hundreds of averages.
#[test]
fn incomplete_gamma_matches_scipy() {
    let special = &reference()["special"];
    let mut worst = 0.0f64;
    for r in special["gammainc"].as_array().unwrap() {
        let (a, x, theirs) = (num(&r["a"]), num(&r["x"]), num(&r["p"]));
        let ours = gamma_p(a, x);
        assert!((ours - theirs).abs() < 1e-12, "P({a}, {x}): {ours} vs {theirs}");
        worst = worst.max((ours - theirs).abs());
    }
    for r in special["gamma_quantile_unit_mean"].as_array().unwrap() {
        let (a, q, theirs) = (num(&r["a"]), num(&r["q"]), num(&r["value"]));
        let ours = gamma_quantile_unit_mean(q, a);
        assert!((ours - theirs).abs() <= 1e-9 * theirs, "quantile({q}, {a}): {ours} vs {theirs}");
    }
    eprintln!("gamma_p: worst absolute error {worst:.1e}");
}

// ---------------------------------------------------------------------------------------------
// Parseval
// ---------------------------------------------------------------------------------------------

/// Parseval's theorem: the integral of the PSD equals the mean power of the samples.
#[test]
fn parseval_total_power_equals_mean_square() {
    let rate = 1e6;
    let mut rng = Rng::new(11);
    let x = to_f32(&noise64(&mut rng, 1 << 16, 0.01));

    // Rectangular window, no overlap: exact (Parseval, per frame), up to float32 rounding.
    let spec = average(&x, cfg(1024, WindowKind::Rect, 0.0), rate, 0.0);
    let used = &x[spec.first_sample as usize..spec.end_sample as usize];
    let ratio = spec.total_power() / mean_power(used);
    assert!((ratio - 1.0).abs() < 1e-6, "rect: total/mean-square = {ratio}");
    eprintln!("parseval rect: relative error {:.1e}", (ratio - 1.0).abs());

    // A constant-envelope signal (FM) has |x|² constant, so every window's w²-weighted mean of
    // |x|² is exact as well (Parseval per frame: Σ|X|²/N = Σ w²|x|²).
    let fm = to_f32(&fm_carrier(1 << 15, rate, 31_000.0, 7_000.0, 3.0, -6.0));
    for kind in WindowKind::ALL {
        let spec = average(&fm, cfg(1000, kind, 0.5), rate, 0.0);
        let ratio = spec.total_power() / mean_power(&fm);
        assert!((ratio - 1.0).abs() < 1e-5, "{kind}: FM total/mean-square = {ratio}");
    }

    // Noise with a tapered window and overlap: each frame weights |x|² by w², so the two agree
    // in expectation. With 2¹⁶ samples the relative spread of the weighted mean is about 0.5 %
    // (0.02 dB); 0.1 dB is more than four standard deviations.
    let mut worst = 0.0f64;
    for kind in WindowKind::ALL {
        let spec = average(&x, cfg(1024, kind, 0.5), rate, 0.0);
        let err = db(spec.total_power() / mean_power(&x)).abs();
        assert!(err < 0.1, "{kind}: noise total power off by {err:.3} dB");
        worst = worst.max(err);
    }
    eprintln!("parseval noise, tapered windows: worst {worst:.4} dB");
}

// ---------------------------------------------------------------------------------------------
// Tone level and frequency
// ---------------------------------------------------------------------------------------------

/// A −10 dBFS tone reads −10 ± 0.1 dB with the flat-top and ± 0.5 dB with Hann at any offset
/// from a bin centre (the flat-top's scalloping is under 0.02 dB, Hann's 1.42 dB — Harris 1978 —
/// so the Hann check fails unless scalloping is corrected), and its frequency is found within a
/// few hundredths of a bin (common practice for interpolated peaks).
#[test]
fn tone_level_at_any_sub_bin_offset() {
    let (rate, n) = (1e6, 1024usize);
    let bin = rate / n as f64;
    for (kind, tolerance_db) in [(WindowKind::FlatTop, 0.1), (WindowKind::Hann, 0.5)] {
        let window = Window::new(kind, n);
        let (mut worst_db, mut worst_bins, mut worst_raw) = (0.0f64, 0.0f64, 0.0f64);
        for step in 0..=20 {
            let offset = step as f64 * 0.025;
            let freq = (137.0 + offset) * bin;
            let mut rng = Rng::new(100 + step);
            let mut x = noise64(&mut rng, 8 * n, db_to_power(-90.0));
            add_tone(&mut x, rate, freq, -10.0, rng.uniform() * 2.0 * PI);
            let spec = average(&to_f32(&x), cfg(n, kind, 0.5), rate, 0.0);
            let floor = noise_floor(&spec.psd, spec.dof);
            let found = find_signals(&spec, &window, floor, 5, Detection::default());
            assert!(!found.is_empty(), "{kind}: tone at offset {offset} not found");
            let err_db = found[0].level_dbfs + 10.0;
            worst_raw = worst_raw.max((db(spec.tone_power(found[0].peak_bin)) + 10.0).abs());
            let err_bins = (found[0].freq_hz - freq) / bin;
            assert!(
                err_db.abs() <= tolerance_db,
                "{kind}: offset {offset} bin reads {:.3} dBFS",
                found[0].level_dbfs
            );
            assert!(
                err_bins.abs() < 0.02,
                "{kind}: offset {offset}: frequency off {err_bins} bins"
            );
            worst_db = worst_db.max(err_db.abs());
            worst_bins = worst_bins.max(err_bins.abs());
        }
        // The uncorrected peak bin dips by the window's scalloping loss at half a bin (Harris
        // 1978: Hann 1.42 dB, flat-top < 0.02 dB), so the offsets did sweep the whole half bin.
        let scalloping = window.scalloping_loss_db();
        assert!((worst_raw - scalloping).abs() < 0.01, "{kind}: raw dip {worst_raw} dB");
        eprintln!(
            "tone {kind}: worst level error {worst_db:.2e} dB (uncorrected {worst_raw:.3} dB), \
             frequency {worst_bins:.2e} bins"
        );
    }
}

fn db_to_power(level_db: f64) -> f64 {
    10f64.powf(level_db / 10.0)
}

// ---------------------------------------------------------------------------------------------
// Noise density and the noise floor
// ---------------------------------------------------------------------------------------------

/// White noise of variance σ² has a flat two-sided density σ²/fs (Parseval; the definition of a
/// PSD). The mean PSD and the noise-floor estimate both read it within 0.2 dB.
#[test]
fn white_noise_density_is_variance_over_rate() {
    let rate = 2.4e6;
    let variance = db_to_power(-30.0);
    let truth = variance / rate;
    for (i, kind) in WindowKind::ALL.into_iter().enumerate() {
        let mut rng = Rng::new(500 + i as u64);
        let x = to_f32(&noise64(&mut rng, 1 << 16, variance));
        let spec = average(&x, cfg(2048, kind, 0.5), rate, 0.0);
        let mean = spec.psd.iter().sum::<f64>() / spec.psd.len() as f64;
        let floor = noise_floor(&spec.psd, spec.dof);
        let (e_mean, e_floor) = (db(mean / truth), db(floor / truth));
        assert!(e_mean.abs() < 0.2, "{kind}: mean PSD off by {e_mean:.3} dB");
        assert!(e_floor.abs() < 0.2, "{kind}: noise floor off by {e_floor:.3} dB");
        eprintln!("density {kind}: mean PSD {e_mean:+.3} dB, noise floor {e_floor:+.3} dB");
    }
}

/// The noise-floor estimate is unbiased on noise alone for any averaging depth, including a
/// single periodogram (where a plain median would read 1.59 dB low: the median of an exponential
/// is ln 2 × its mean — common practice, design notes §3). Truth: σ²/fs (definition of a PSD).
#[test]
fn noise_floor_is_unbiased_on_noise_alone() {
    let (rate, n) = (1e6, 4096usize);
    let variance = db_to_power(-40.0);
    let truth = variance / rate;
    for frames in [1usize, 4, 16, 64] {
        let len = n + (frames - 1) * n / 2;
        let mut sum_db = 0.0;
        let mut worst = 0.0f64;
        let seeds = 6;
        for seed in 0..seeds {
            let mut rng = Rng::new(1000 * frames as u64 + seed);
            let x = to_f32(&noise64(&mut rng, len, variance));
            let spec = average(&x, cfg(n, WindowKind::Hann, 0.5), rate, 0.0);
            assert_eq!(spec.frames, frames as u64);
            let err = db(noise_floor(&spec.psd, spec.dof) / truth);
            assert!(err.abs() < 0.5, "{frames} frames, seed {seed}: floor off by {err:.3} dB");
            sum_db += err;
            worst = worst.max(err.abs());
        }
        let bias = sum_db / seeds as f64;
        // With 4096 bins one estimate scatters by about 0.1 dB (one frame) or less, so the mean
        // of six has a spread near 0.04 dB; a real bias of 0.2 dB would show.
        assert!(bias.abs() < 0.2, "{frames} frames: mean bias {bias:.3} dB");
        eprintln!("noise floor, {frames} frame(s): mean bias {bias:+.3} dB, worst {worst:.3} dB");
    }
}

/// With a few strong carriers (51 to 60 dB above the noise in one RBW) the floor still reads
/// within 1 dB of σ²/fs (definition of a PSD): the carriers and their window skirts are excised.
#[test]
fn noise_floor_holds_with_strong_carriers() {
    let (rate, n) = (1e6, 1024usize);
    let variance = db_to_power(-60.0);
    let truth = variance / rate;
    let rbw = 1.5 * rate / n as f64; // Hann ENBW 1.5 bins (Harris 1978)
    let carrier_dbfs = db(truth * rbw) + 60.0;
    for frames in [1usize, 16] {
        let len = n + (frames - 1) * n / 2;
        let (mut sum, mut worst) = (0.0, 0.0f64);
        for seed in 0..4u64 {
            let mut rng = Rng::new(77 + 10 * seed + frames as u64);
            let mut x = noise64(&mut rng, len, variance);
            for (i, f) in [-301_234.5, -12_345.6, 88_888.8, 250_101.0].into_iter().enumerate() {
                let phase = rng.uniform() * 2.0 * PI;
                add_tone(&mut x, rate, f, carrier_dbfs - 3.0 * i as f64, phase);
            }
            let spec = average(&to_f32(&x), cfg(n, WindowKind::Hann, 0.5), rate, 0.0);
            let err = db(noise_floor(&spec.psd, spec.dof) / truth);
            assert!(err.abs() < 1.0, "{frames} frame(s), seed {seed}: floor off by {err:.3} dB");
            sum += err;
            worst = worst.max(err.abs());
        }
        eprintln!(
            "noise floor with 4 carriers at +51..+60 dB, {frames} frame(s): mean {:+.3} dB, \
             worst {worst:.3} dB",
            sum / 4.0
        );
    }
}

// ---------------------------------------------------------------------------------------------
// FM: Bessel line powers, occupied bandwidth, Carson's rule
// ---------------------------------------------------------------------------------------------

/// J_k(β) for k = 0..30 from the scipy reference vectors (`scipy.special.jv`).
fn bessel_j(beta: f64) -> Vec<f64> {
    let index = reference();
    let row = index["special"]["jv"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| (num(&r["beta"]) - beta).abs() < 1e-12)
        .unwrap_or_else(|| panic!("no jv reference for β = {beta}"))
        .clone();
    row["values"].as_array().unwrap().iter().map(num).collect()
}

#[test]
fn bessel_reference_agrees_with_abramowitz_stegun() {
    // Abramowitz & Stegun table 9.1 (J0, J1, J2 at x = 5.0; from memory, to 8 decimals): the
    // scipy.special.jv vectors the FM checks use must agree with the printed table.
    let j = bessel_j(5.0);
    for (k, table) in [(0, -0.177_596_77), (1, -0.327_579_14), (2, 0.046_565_12)] {
        assert!((j[k] - table).abs() < 1e-8, "J{k}(5) = {} vs A&S {table}", j[k]);
    }
    // Σ J_k² over all k (both signs) = 1: the lines carry all of the carrier's power
    // (A&S 9.1.76, from memory).
    for beta in [2.4, 5.0] {
        let j = bessel_j(beta);
        let total = j[0] * j[0] + 2.0 * j[1..].iter().map(|v| v * v).sum::<f64>();
        assert!((total - 1.0).abs() < 1e-12, "β = {beta}: Σ J² = {total}");
    }
}

const FM_RATE: f64 = 1e6;
const FM_CARRIER: f64 = 12_345.6;
const FM_MOD: f64 = 10_000.0;
const FM_LEVEL_DBFS: f64 = -3.0;

fn fm_spectrum(beta: f64, kind: WindowKind, n: usize) -> Spectrum {
    let mut rng = Rng::new(4242);
    let len = n * 16;
    let mut x = fm_carrier(len, FM_RATE, FM_CARRIER, FM_MOD, beta, FM_LEVEL_DBFS);
    for (v, w) in x.iter_mut().zip(noise64(&mut rng, len, db_to_power(-60.0))) {
        *v += w;
    }
    average(&to_f32(&x), cfg(n, kind, 0.5), FM_RATE, 0.0)
}

/// A sinusoidally frequency-modulated carrier is a line spectrum at fc + k·fm with powers
/// A²·J_k(β)² (Abramowitz & Stegun table 9.1; values from scipy.special.jv reference vectors).
/// Each line above −40 dB is found by `find_signals` at the right frequency and level.
#[test]
fn fm_line_powers_are_bessel_squares() {
    let n = 4096;
    let window = Window::new(WindowKind::FlatTop, n);
    for beta in [2.4, 5.0] {
        let j = bessel_j(beta);
        let spec = fm_spectrum(beta, WindowKind::FlatTop, n);
        let floor = noise_floor(&spec.psd, spec.dof);
        let found = find_signals(&spec, &window, floor, 60, Detection::default());
        let mut worst = 0.0f64;
        let mut lines = 0;
        for k in -15i32..=15 {
            // J_−k = (−1)^k·J_k (A&S 9.1.5, from memory): both sidebands carry J_k².
            let jk = j[k.unsigned_abs() as usize];
            let expect_dbfs = FM_LEVEL_DBFS + db(jk * jk);
            if expect_dbfs < FM_LEVEL_DBFS - 40.0 {
                continue;
            }
            let freq = FM_CARRIER + k as f64 * FM_MOD;
            let line = found
                .iter()
                .find(|s| (s.freq_hz - freq).abs() < spec.bin_hz())
                .unwrap_or_else(|| panic!("β={beta}: line {k} at {freq} Hz not found: {found:?}"));
            let err = line.level_dbfs - expect_dbfs;
            assert!(
                err.abs() < 0.1,
                "β={beta}: line {k} reads {:.3} dBFS, J_k² gives {expect_dbfs:.3}",
                line.level_dbfs
            );
            worst = worst.max(err.abs());
            lines += 1;
        }
        assert!(lines >= 7, "β={beta}: only {lines} lines checked");
        eprintln!("FM β={beta}: {lines} Bessel lines, worst level error {worst:.4} dB");
    }
}

/// ITU-R SM.328 99 % OBW applied to the ideal line spectrum: the upper limit sits on line n, the
/// outermost line for which the lines from n outwards hold at least 0.5 % of the power; the
/// lower limit mirrors it (|J_−k| = |J_k|, A&S 9.1.5, from memory). Also returns the share of
/// line n's own power that lies beyond the limit.
fn bessel_obw_line(j: &[f64]) -> (usize, f64) {
    let mut beyond = 0.0;
    for n in (1..j.len()).rev() {
        let line = j[n] * j[n];
        if beyond + line >= 0.005 {
            return (n, (0.005 - beyond) / line);
        }
        beyond += line;
    }
    (0, 0.5)
}

/// Offset in bins, from a line's centre, beyond which the share `q` of the line's measured
/// power lies: a quantile of the window's power response |W(δ)|², integrated numerically over
/// ±`half` bins. A line seen through the window has exactly this shape.
fn line_tail_bins(window: &Window, q: f64, half: f64) -> f64 {
    let step = 1.0 / 64.0;
    let count = (2.0 * half / step) as usize;
    let power: Vec<f64> =
        (0..=count).map(|i| window.response(half - i as f64 * step).powi(2)).collect();
    let total: f64 = power.iter().sum();
    let mut acc = 0.0;
    for (i, p) in power.iter().enumerate() {
        if acc + p >= q * total {
            return half - (i as f64 - 0.5 + (q * total - acc) / p) * step;
        }
        acc += p;
    }
    -half
}

/// The 99 % occupied bandwidth (ITU-R SM.328) of the FM carrier equals the width computed from
/// the Bessel line powers (A&S table 9.1 / scipy.special.jv): each limit within one RBW of the
/// line it falls on. A measured line is smeared over the window's main lobe, so the limit moves
/// inside that lobe: the less of the limit line lies beyond the limit, the further out it goes
/// (up to the main lobe's half-width, 1.3 RBW for Hann and 2 RBW for Blackman-Harris), so one
/// RBW holds for these β but is not a law. The sharper check predicts the limit from the
/// window's response and must agree within half a bin (the PSD is integrated as one rectangle
/// per bin).
#[test]
fn fm_occupied_bandwidth_matches_bessel_lines() {
    let n = 4096;
    for kind in [WindowKind::Hann, WindowKind::BlackmanHarris] {
        // The response in bins hardly depends on N (Dirichlet kernels differ by O((δ/N)²));
        // a 512-point window keeps the integration quick.
        let window = Window::new(kind, 512);
        for beta in [2.4, 5.0] {
            let j = bessel_j(beta);
            let (line, q) = bessel_obw_line(&j);
            let spec = fm_spectrum(beta, kind, n);
            let (lo, hi) = spec.span_hz();
            let obw = occupied_bandwidth(&spec, lo, hi, 99.0).unwrap();
            let reach = line as f64 * FM_MOD;
            let (e_lo, e_hi) = (
                (obw.low_hz - (FM_CARRIER - reach)) / spec.rbw_hz,
                (obw.high_hz - (FM_CARRIER + reach)) / spec.rbw_hz,
            );
            assert!(
                e_lo.abs() <= 1.0 && e_hi.abs() <= 1.0,
                "{kind} β={beta}: OBW {:.1} .. {:.1} Hz, Bessel lines ±{line} around {FM_CARRIER}",
                obw.low_hz,
                obw.high_hz
            );
            let smear = line_tail_bins(&window, q, 0.5 * FM_MOD / spec.bin_hz()) * spec.bin_hz();
            let (p_lo, p_hi) = (
                (obw.low_hz - (FM_CARRIER - reach - smear)) / spec.bin_hz(),
                (obw.high_hz - (FM_CARRIER + reach + smear)) / spec.bin_hz(),
            );
            assert!(
                p_lo.abs() <= 0.5 && p_hi.abs() <= 0.5,
                "{kind} β={beta}: limits {p_lo:+.2} / {p_hi:+.2} bins from the smeared lines"
            );
            eprintln!(
                "FM OBW {kind} β={beta}: ±{line} lines; limits {e_lo:+.2} / {e_hi:+.2} RBW from \
                 the bare lines, {p_lo:+.2} / {p_hi:+.2} bins from the smeared lines"
            );
        }
    }
}

/// Carson's rule: about 98 % of an FM signal's power lies within 2(Δf + fm) (common practice).
/// The measured fraction also matches the Bessel line sum over the same band (A&S table 9.1 /
/// scipy.special.jv), counting a line that sits exactly on the band edge as half inside.
#[test]
fn carson_bandwidth_holds_about_98_percent() {
    let n = 4096;
    for beta in [2.4, 5.0] {
        let j = bessel_j(beta);
        let spec = fm_spectrum(beta, WindowKind::BlackmanHarris, n);
        let half = (beta + 1.0) * FM_MOD; // Δf = β·fm
        let (lo, hi) = spec.span_hz();
        let fraction =
            band_power(&spec, FM_CARRIER - half, FM_CARRIER + half) / band_power(&spec, lo, hi);
        let edge = half / FM_MOD;
        let mut expect = j[0] * j[0];
        for (k, jk) in j.iter().enumerate().skip(1) {
            let weight = if (k as f64 - edge).abs() < 1e-9 {
                0.5
            } else if (k as f64) < edge {
                1.0
            } else {
                0.0
            };
            expect += 2.0 * weight * jk * jk;
        }
        assert!(
            (fraction - expect).abs() < 0.002,
            "β={beta}: Carson band holds {fraction:.4}, Bessel lines {expect:.4}"
        );
        assert!(fraction > 0.97, "β={beta}: Carson band holds only {fraction:.4}");
        eprintln!(
            "Carson β={beta}: measured {:.2} %, Bessel {:.2} %",
            100.0 * fraction,
            100.0 * expect
        );
    }
}

// ---------------------------------------------------------------------------------------------
// Occupied bandwidth of a flat band; rectangular pulse
// ---------------------------------------------------------------------------------------------

/// A band-limited flat spectrum of width W has a 99 % OBW of 0.99·W (ITU-R SM.328 applied to a
/// uniform density: each outer 0.5 % of the power is 0.5 % of the width), within 2 bins.
#[test]
fn flat_band_occupied_bandwidth_is_99_percent_of_width() {
    let (rate, n) = (1e6, 4096usize);
    let len = 1 << 18;
    let (centre, width) = (100_000.0, 400_000.0);
    for (seed, kind) in [(1u64, WindowKind::Hann), (2, WindowKind::BlackmanHarris)] {
        let mut rng = Rng::new(seed);
        let x = band_limited_noise(
            &mut rng,
            len,
            rate,
            centre - width / 2.0,
            centre + width / 2.0,
            0.1,
        );
        let spec = average(&to_f32(&x), cfg(n, kind, 0.5), rate, 0.0);
        let (lo, hi) = spec.span_hz();
        let obw = occupied_bandwidth(&spec, lo, hi, 99.0).unwrap();
        let err_bins = (obw.width_hz() - 0.99 * width) / spec.bin_hz();
        let err_centre = (0.5 * (obw.low_hz + obw.high_hz) - centre) / spec.bin_hz();
        assert!(err_bins.abs() <= 2.0, "{kind}: OBW {} Hz vs {} Hz", obw.width_hz(), 0.99 * width);
        assert!(err_centre.abs() <= 2.0, "{kind}: OBW centred {err_centre} bins off");
        eprintln!(
            "flat band OBW {kind}: width off by {err_bins:+.3} bins, centre {err_centre:+.3}"
        );
    }
}

/// A rectangular pulse of T samples has a sinc spectrum with nulls at k/T (common practice) and
/// a first side lobe 13.26 dB below the main lobe (Harris 1978, rectangle window: −13 dB).
#[test]
fn rectangular_pulse_has_nulls_at_multiples_of_one_over_t() {
    let (rate, n, t) = (1e6, 1024usize, 64usize);
    let mut x = vec![Complex32::new(0.0, 0.0); n];
    for v in x.iter_mut().take(t) {
        *v = Complex32::new(0.5, 0.0);
    }
    let spec = average(&x, cfg(n, WindowKind::Rect, 0.0), rate, 0.0);
    let peak = spec.psd[n / 2];
    let null_step = n / t; // 1/T = fs/T Hz = N/T bins
    for k in 1..t {
        let f = k as f64 * rate / t as f64;
        let i = spec.bin_of_freq(if f >= rate / 2.0 { f - rate } else { f }).round() as usize;
        assert!(spec.psd[i] < 1e-10 * peak, "no null at {k}/T: {:e}", spec.psd[i] / peak);
    }
    // First side-lobe peak near 1.43/T: highest bin between the first two nulls.
    let side = (n / 2 + null_step..n / 2 + 2 * null_step).map(|i| spec.psd[i]).fold(0.0, f64::max);
    let sidelobe_db = db(side / peak);
    assert!((sidelobe_db + 13.26).abs() < 0.1, "first side lobe {sidelobe_db:.2} dB");
}

// ---------------------------------------------------------------------------------------------
// `bandwarden measure` end to end
// ---------------------------------------------------------------------------------------------

/// Writes a cf32 file with known content, runs `bandwarden measure --json` on it and checks the
/// report against the truth: noise density σ²/fs (definition of a PSD), the tone's frequency and
/// level, and a band's channel power and 99 % OBW (ITU-R SM.328, computed for the known flat
/// block plus white noise).
#[test]
fn measure_command_reports_the_truth() {
    let (rate, centre_hz) = (1e6, 100e6);
    let len = 1 << 18;
    let noise_density = db_to_power(-110.0); // FS²/Hz
    let (tone_hz, tone_dbfs) = (123_456.0, -20.0);
    let (block_centre, block_width, block_power) = (-200_000.0, 100_000.0, db_to_power(-30.0));
    let band_width = 150_000.0;

    let mut rng = Rng::new(9);
    let mut x = noise64(&mut rng, len, noise_density * rate);
    add_tone(&mut x, rate, tone_hz, tone_dbfs, 0.3);
    let block = band_limited_noise(
        &mut rng,
        len,
        rate,
        block_centre - block_width / 2.0,
        block_centre + block_width / 2.0,
        block_power,
    );
    for (v, b) in x.iter_mut().zip(&block) {
        *v += b;
    }
    let block_power_actual = block.iter().map(|v| v.norm_sqr()).sum::<f64>() / len as f64;
    let samples = to_f32(&x);
    let path = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("accuracy-measure.cf32");
    let mut bytes = Vec::with_capacity(len * 8);
    for v in &samples {
        bytes.extend_from_slice(&v.re.to_le_bytes());
        bytes.extend_from_slice(&v.im.to_le_bytes());
    }
    std::fs::write(&path, bytes).unwrap();

    let band_arg = format!("{}:{}", centre_hz + block_centre, band_width);
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_bandwarden"))
        .args(["measure", path.to_str().unwrap(), "--format", "cf32_le", "--rate", "1M"])
        .args(["--center", "100M", "--json", "--band", &band_arg])
        .output()
        .expect("run bandwarden");
    let _ = std::fs::remove_file(&path);
    assert!(out.status.success(), "measure failed: {}", String::from_utf8_lossy(&out.stderr));
    let report: Value = serde_json::from_slice(&out.stdout).expect("measure --json prints JSON");

    // Noise density: σ²/fs (the block covers 10 % of the span; FCME excises it).
    let floor = num(&report["noise_floor_dbfs_per_hz"]);
    assert!((floor - db(noise_density)).abs() < 0.5, "noise floor {floor:.3} dBFS/Hz vs -110");

    // Strongest peak: the tone, at its frequency (absolute) and level.
    let peak = &report["peaks"][0];
    let (f, lvl) = (num(&peak["freq_hz"]), num(&peak["level_dbfs"]));
    let bin = rate / num(&report["fft_size"]);
    assert!((f - (centre_hz + tone_hz)).abs() < 0.05 * bin, "peak at {f} Hz");
    assert!((lvl - tone_dbfs).abs() < 0.5, "peak level {lvl:.3} dBFS"); // Hann, corrected

    // Band: the block plus the white noise inside the band (channel power = ∫PSD).
    let band = &report["bands"][0];
    let power_truth = block_power_actual + noise_density * band_width;
    let power = num(&band["power_dbfs"]);
    assert!(
        (power - db(power_truth)).abs() < 0.1,
        "band power {power:.3} vs {:.3}",
        db(power_truth)
    );

    // OBW (SM.328): each outer part holds 0.5 % of the band's power. Outside the block there is
    // only white noise; inside it the density is block + white.
    let shoulder = noise_density * (band_width - block_width) / 2.0;
    let inside_density = block_power_actual / block_width + noise_density;
    let obw_truth = block_width - 2.0 * (0.005 * power_truth - shoulder) / inside_density;
    let obw = num(&band["obw_hz"]);
    assert!((obw - obw_truth).abs() < 2.0 * bin, "band OBW {obw:.1} Hz vs {obw_truth:.1} Hz");
    eprintln!(
        "measure: floor {:+.3} dB, peak {:+.4} bins / {:+.3} dB, band power {:+.3} dB, \
         OBW {:+.2} bins",
        floor - db(noise_density),
        (f - centre_hz - tone_hz) / bin,
        lvl - tone_dbfs,
        power - db(power_truth),
        (obw - obw_truth) / bin
    );
}
