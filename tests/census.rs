//! `census` on a busy synthetic band whose truth is known in closed form or from the schedule
//! the test itself generated.
//!
//! Scene: 250 kS/s complex, centre 0 Hz, 4 s, complex white noise of −100 dBFS/Hz. Seven
//! emitters, each with its truth stated beside it. Targets (from the issue): every emitter found;
//! centre within 2 RBW or 5 % of its width; bandwidth within 3 RBW or 15 %; airtime within 2
//! percentage points; emission count within 10 %; power within 1 dB; at most one spurious
//! emitter.

use bandwarden::dsp::{Engine, EngineConfig, WindowKind};
use bandwarden::measure::census::{Census, CensusResult, CensusSettings};
use bandwarden::measure::occupancy::Timing;
use bandwarden::measure::Detection;
use bandwarden::testkit::{band_limited_noise, noise64, Rng};
use num_complex::{Complex32, Complex64};
use std::f64::consts::PI;

const RATE: f64 = 250e3;
const SECONDS: f64 = 4.0;
const N: usize = (RATE * SECONDS) as usize;
/// Noise density, dBFS/Hz: total noise power −100 + 10·log10(250 000) = −46.0 dBFS.
const NOISE_DBFS_HZ: f64 = -100.0;

/// A keying schedule: `count` bursts of `on` seconds every `period` seconds from `start`.
#[derive(Clone, Copy)]
struct Schedule {
    start: f64,
    on: f64,
    period: f64,
    count: usize,
}

impl Schedule {
    const ALWAYS: Schedule = Schedule { start: 0.0, on: SECONDS, period: SECONDS, count: 1 };

    fn is_on(&self, i: usize) -> bool {
        let t = i as f64 / RATE - self.start;
        t >= 0.0 && (t / self.period) < self.count as f64 && t % self.period < self.on
    }

    /// Truth of airtime: the schedule's own share of the record, percent.
    fn airtime_pct(&self) -> f64 {
        100.0 * self.on * self.count as f64 / SECONDS
    }
}

/// One emitter of the scene and its truth.
struct Truth {
    what: &'static str,
    centre_hz: f64,
    width_hz: f64,
    power_dbfs: f64,
    schedule: Schedule,
}

/// Bessel function J_n(β) by Bessel's integral, J_n(β) = (1/π)∫₀^π cos(nτ − β sin τ) dτ
/// (Abramowitz & Stegun 9.1.21), by the trapezoid rule, which is exact to rounding for this
/// smooth periodic integrand at 4000 points.
fn bessel_j(n: i32, beta: f64) -> f64 {
    let m = 4000;
    let f = |t: f64| (n as f64 * t - beta * t.sin()).cos();
    let h = PI / m as f64;
    let inner: f64 = (1..m).map(|k| f(k as f64 * h)).sum();
    (inner + 0.5 * (f(0.0) + f(PI))) * h / PI
}

/// 99 % occupied bandwidth of sinusoidal FM (ITU-R SM.328 on its line spectrum): the lines are
/// `fm` apart with powers J_n(β)²; each outside part holds 0.5 %, so the edge is the outermost
/// line `N` whose own power and everything beyond it exceed 0.5 %: OBW = 2·N·fm.
fn fm_obw(beta: f64, fm: f64) -> f64 {
    let beyond = |n: i32| (n + 1..60).map(|k| bessel_j(k, beta).powi(2)).sum::<f64>();
    let edge = (1..60).find(|&n| beyond(n) <= 0.005).expect("the series converges");
    2.0 * edge as f64 * fm
}

/// The scene and its truth, strongest first by no particular order.
fn scene() -> (Vec<Complex32>, Vec<Truth>) {
    let mut rng = Rng::new(11);
    let noise_power = 10f64.powf((NOISE_DBFS_HZ + 10.0 * RATE.log10()) / 10.0);
    let mut x: Vec<Complex64> = noise64(&mut rng, N, noise_power);
    let amp = |dbfs: f64| 10f64.powf(dbfs / 20.0);
    let mut truth = Vec::new();

    // Steady carriers: a tone of amplitude A is 20·log10(A) dBFS; its occupied bandwidth is
    // zero (we accept up to 3 RBW, the window's smear).
    for (f, lvl) in [(60e3, -40.0), (-75e3, -50.0)] {
        let a = amp(lvl);
        for (i, v) in x.iter_mut().enumerate() {
            *v += Complex64::from_polar(a, 2.0 * PI * f * i as f64 / RATE);
        }
        let what = "steady carrier";
        truth.push(Truth {
            what,
            centre_hz: f,
            width_hz: 0.0,
            power_dbfs: lvl,
            schedule: Schedule::ALWAYS,
        });
    }

    // Keyed FM: carrier −30 kHz, tone fm = 1 kHz, deviation 2.5 kHz (β = 2.5), −35 dBFS
    // (constant envelope). Keyed on 300 ms of every 500 ms from 0.1 s, 8 times. Width: the 99 %
    // OBW of its Bessel line spectrum (8 kHz; Carson's rule would say 7 kHz, 98 %).
    let fm = Schedule { start: 0.1, on: 0.3, period: 0.5, count: 8 };
    let (fc, f_mod, beta, a) = (-30e3, 1e3, 2.5, amp(-35.0));
    for (i, v) in x.iter_mut().enumerate().filter(|(i, _)| fm.is_on(*i)) {
        let t = i as f64 / RATE;
        *v += Complex64::from_polar(a, 2.0 * PI * fc * t + beta * (2.0 * PI * f_mod * t).sin());
    }
    let width = fm_obw(beta, f_mod);
    truth.push(Truth {
        what: "keyed FM",
        centre_hz: fc,
        width_hz: width,
        power_dbfs: -35.0,
        schedule: fm,
    });

    // FSK bursts: continuous-phase binary FSK with h = 0.5 (MSK), 2400 bit/s, ±600 Hz about
    // +20 kHz, random bits, −38 dBFS; 80 ms every 250 ms from 0.05 s, 16 bursts. Width: the 99 %
    // power bandwidth of MSK is about 1.18 times the bit rate (Pasupathy 1979, from memory).
    let fsk = Schedule { start: 0.05, on: 0.08, period: 0.25, count: 16 };
    let (fc, rb, dev, a) = (20e3, 2400.0, 600.0, amp(-38.0));
    let bits: Vec<f64> = (0..(SECONDS * rb) as usize + 2)
        .map(|_| if rng.uniform() < 0.5 { -1.0 } else { 1.0 })
        .collect();
    let mut phase = 0.0;
    for (i, v) in x.iter_mut().enumerate() {
        let bit = bits[(i as f64 / RATE * rb) as usize];
        phase += 2.0 * PI * (fc + bit * dev) / RATE;
        if fsk.is_on(i) {
            *v += Complex64::from_polar(a, phase);
        }
    }
    truth.push(Truth {
        what: "FSK bursts",
        centre_hz: fc,
        width_hz: 1.18 * rb,
        power_dbfs: -38.0,
        schedule: fsk,
    });

    // Wide bursts: flat noise over [−110, −85) kHz of power −45 dBFS, 40 ms every 400 ms from
    // 0.2 s, 10 bursts. A flat block B wide has its 99 % OBW at 0.99·B; power is its variance.
    let wide = Schedule { start: 0.2, on: 0.04, period: 0.4, count: 10 };
    let burst = band_limited_noise(&mut rng, N, RATE, -110e3, -85e3, amp(-45.0).powi(2));
    for (i, (v, b)) in x.iter_mut().zip(&burst).enumerate() {
        if wide.is_on(i) {
            *v += b;
        }
    }
    truth.push(Truth {
        what: "wide bursts",
        centre_hz: -97.5e3,
        width_hz: 0.99 * 25e3,
        power_dbfs: -45.0,
        schedule: wide,
    });

    // A noise-like wideband link: flat noise over [80, 115) kHz, −40 dBFS, always on.
    let link = band_limited_noise(&mut rng, N, RATE, 80e3, 115e3, amp(-40.0).powi(2));
    for (v, b) in x.iter_mut().zip(&link) {
        *v += b;
    }
    truth.push(Truth {
        what: "wideband link",
        centre_hz: 97.5e3,
        width_hz: 0.99 * 35e3,
        power_dbfs: -40.0,
        schedule: Schedule::ALWAYS,
    });

    // A weak keyed carrier 12 dB above the noise in a 2 kHz channel: the noise there is
    // −100 + 10·log10(2000) = −67.0 dBFS, so the carrier is −55.0 dBFS. On 150 ms of every
    // 500 ms from 0.3 s, 7 times.
    let weak = Schedule { start: 0.3, on: 0.15, period: 0.5, count: 7 };
    let level = NOISE_DBFS_HZ + 10.0 * 2000f64.log10() + 12.0;
    let a = amp(level);
    for (i, v) in x.iter_mut().enumerate().filter(|(i, _)| weak.is_on(*i)) {
        *v += Complex64::from_polar(a, 2.0 * PI * 5e3 * i as f64 / RATE);
    }
    truth.push(Truth {
        what: "weak keyed carrier",
        centre_hz: 5e3,
        width_hz: 0.0,
        power_dbfs: level,
        schedule: weak,
    });

    let x = x.iter().map(|v| Complex32::new(v.re as f32, v.im as f32)).collect();
    (x, truth)
}

/// Runs the census as the command does: FFT 1024 Hann, overlap 0.5 (hop 512), rows of five
/// frames (10.24 ms), two rows of hang.
fn run_census(x: &[Complex32]) -> CensusResult {
    let (fft, hop, k) = (1024, 512, 5);
    let timing = Timing::new(RATE, fft, hop, k, f64::INFINITY, 0.025).unwrap();
    let settings = CensusSettings {
        detection: Detection::default(),
        timing,
        hang_rows: 2,
        max_signals: 64,
        max_emitters: 256,
    };
    let mut census = Census::new(settings);
    let cfg = EngineConfig {
        fft_size: fft,
        window: WindowKind::Hann,
        overlap: 0.5,
        frames_per_output: Some(k),
    };
    let mut engine = Engine::new(cfg, RATE, 0.0);
    engine.push(0, x, &mut |row| census.push(row));
    census.finish(x.len() as u64).expect("rows were pushed")
}

#[test]
fn a_busy_band_is_counted_to_its_truth() {
    let (x, truth) = scene();
    let r = run_census(&x);
    let rbw = r.rbw_hz;
    let mut matched = vec![false; r.emitters.len()];
    let mut failures = Vec::new();
    for t in &truth {
        let near = r
            .emitters
            .iter()
            .enumerate()
            .filter(|(_, e)| (e.center_hz - t.centre_hz).abs() < 2.0 * rbw + 0.5 * t.width_hz)
            .max_by(|a, b| a.1.power_dbfs.total_cmp(&b.1.power_dbfs));
        let Some((i, e)) = near else {
            failures.push(format!("{} at {} Hz not found", t.what, t.centre_hz));
            continue;
        };
        matched[i] = true;
        let count = t.schedule.count as f64;
        eprintln!(
            "{:<20} centre {:>9.0} (truth {:>9.0})  obw {:>7.0} ({:>7.0})  airtime {:>6.2} % ({:>6.2})  emissions {:>3} ({:>3})  power {:>7.2} ({:>7.2})  peak {:>7.2}",
            t.what, e.center_hz, t.centre_hz, e.obw_hz, t.width_hz, e.airtime_pct,
            t.schedule.airtime_pct(), e.emissions, count, e.power_dbfs, t.power_dbfs, e.peak_dbfs
        );
        let checks = [
            ("centre", (e.center_hz - t.centre_hz).abs() <= (2.0 * rbw).max(0.05 * t.width_hz)),
            ("width", (e.obw_hz - t.width_hz).abs() <= (3.0 * rbw).max(0.15 * t.width_hz)),
            ("airtime", (e.airtime_pct - t.schedule.airtime_pct()).abs() <= 2.0),
            ("emissions", (e.emissions as f64 - count).abs() <= 0.1 * count),
            ("power", (e.power_dbfs - t.power_dbfs).abs() <= 1.0),
        ];
        for (what, ok) in checks {
            if !ok {
                failures.push(format!("{}: {what} off: {e:?}", t.what));
            }
        }
    }
    let spurious: Vec<_> =
        r.emitters.iter().zip(&matched).filter(|(_, m)| !**m).map(|(e, _)| e).collect();
    for e in &spurious {
        eprintln!("spurious: {e:?}");
    }
    if spurious.len() > 1 {
        failures.push(format!("{} spurious emitters: {spurious:?}", spurious.len()));
    }
    // Noise density: as generated, −100 dBFS/Hz.
    assert!(
        (r.noise_floor_dbfs_per_hz - NOISE_DBFS_HZ).abs() < 0.5,
        "{}",
        r.noise_floor_dbfs_per_hz
    );
    assert!(failures.is_empty(), "{failures:#?}");
    // Strongest first.
    assert!(r.emitters.windows(2).all(|w| w[0].power_dbfs >= w[1].power_dbfs));
    // Every emission points at an emitter and lies inside the record.
    assert!(r
        .emissions
        .iter()
        .all(|e| e.emitter < r.emitters.len() && e.sample_start + e.sample_count <= N as u64));
}

#[test]
fn the_plan_written_from_a_census_is_one_log_takes() {
    let (x, _) = scene();
    let r = run_census(&x);
    let text = bandwarden::output::census::to_plan(&r, "the test scene");
    let plan = bandwarden::plan::Plan::parse(&text, "census.toml").unwrap();
    plan.validate().unwrap();
    assert_eq!(plan.channels.len(), r.emitters.len());
    for (c, e) in plan.channels.iter().zip(&r.emitters) {
        assert_eq!(c.name, e.name);
        // On the raster when within 5 % of the width, else on whole hertz.
        assert!((c.center_hz - e.center_hz).abs() <= 0.5 + 0.05 * c.width_hz, "{c:?} {e:?}");
        // Rounded up to the raster, never narrower than the emission itself.
        assert!(c.width_hz >= e.obw_hz, "{c:?} {e:?}");
    }
}

const BIN: &str = env!("CARGO_BIN_EXE_bandwarden");

/// The command on the demo recording: one JSON object with every field the issue names, a plan
/// `log --plan` runs with, and no overwriting the input.
#[test]
fn the_command_prints_one_json_object_and_a_plan_log_accepts() {
    use std::process::Command;
    let dir = std::env::temp_dir().join(format!("bw-census-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let plan = dir.join("plan.toml");
    let meta = concat!(env!("CARGO_MANIFEST_DIR"), "/recordings/wrenhollow-demo.sigmf-meta");
    let out = Command::new(BIN)
        .args(["census", meta, "--seconds", "1", "--json", "--plan-out"])
        .arg(&plan)
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let text = String::from_utf8(out.stdout).unwrap();
    assert_eq!(text.lines().count(), 1);
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    for key in [
        "sample_rate_hz",
        "center_hz",
        "fft_size",
        "rbw_hz",
        "duration_s",
        "noise_floor_dbfs_per_hz",
    ] {
        assert!(v[key].is_number(), "{key} in {v}");
    }
    let emitters = v["emitters"].as_array().unwrap();
    assert!(emitters.len() >= 5, "{v}");
    for e in emitters {
        for key in [
            "center_hz",
            "obw_hz",
            "first_s",
            "last_s",
            "emissions",
            "airtime_pct",
            "peak_dbfs",
            "power_dbfs",
        ] {
            assert!(e[key].is_number(), "{key} in {e}");
        }
        assert!(e["name"].is_string());
    }
    let log = Command::new(BIN)
        .args(["log", meta, "--seconds", "0.5", "--plan"])
        .arg(&plan)
        .output()
        .unwrap();
    assert!(log.status.success(), "{}", String::from_utf8_lossy(&log.stderr));
    // The plan must not overwrite what is being read.
    let data = concat!(env!("CARGO_MANIFEST_DIR"), "/recordings/wrenhollow-demo.sigmf-data");
    let before = std::fs::metadata(data).unwrap().len();
    let refused = Command::new(BIN).args(["census", meta, "--plan-out", data]).output().unwrap();
    assert!(!refused.status.success());
    assert!(String::from_utf8_lossy(&refused.stderr).contains("is the input"));
    assert_eq!(std::fs::metadata(data).unwrap().len(), before);
    let _ = std::fs::remove_dir_all(&dir);
}
