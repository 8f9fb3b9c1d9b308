//! The built-in demo scene. (Interim version: a beacon in noise. The full invented scene
//! replaces this file.)

use super::{SampleSource, SourceInfo};
use anyhow::Result;
use num_complex::Complex32;
use std::time::{Duration, Instant};

pub const DEFAULT_RATE_HZ: f64 = 2.4e6;
pub const DEFAULT_CENTER_HZ: f64 = 433.5e6;

/// Generates the scene sample by sample, deterministically from a seed.
pub struct Scene {
    rate: f64,
    n: u64,
    rng: u64,
}

impl Scene {
    pub fn new(sample_rate_hz: f64, seed: u64) -> Scene {
        Scene { rate: sample_rate_hz, n: 0, rng: seed | 1 }
    }

    fn gauss(&mut self) -> f32 {
        self.rng ^= self.rng << 13;
        self.rng ^= self.rng >> 7;
        self.rng ^= self.rng << 17;
        let u1 = ((self.rng >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
        self.rng ^= self.rng << 13;
        self.rng ^= self.rng >> 7;
        self.rng ^= self.rng << 17;
        let u2 = (self.rng >> 11) as f64 / (1u64 << 53) as f64;
        ((-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()) as f32
    }

    pub fn fill(&mut self, out: &mut [Complex32]) {
        let sigma = (1e-6f32 / 2.0).sqrt() * (self.rate as f32).sqrt() / 1000.0;
        for s in out.iter_mut() {
            let t = self.n as f64 / self.rate;
            let ph = 2.0 * std::f64::consts::PI * 250e3 * t;
            *s = Complex32::new(
                0.1 * ph.cos() as f32 + sigma * self.gauss(),
                0.1 * ph.sin() as f32 + sigma * self.gauss(),
            );
            self.n += 1;
        }
    }
}

pub struct DemoSource {
    scene: Scene,
    info: SourceInfo,
    realtime: bool,
    started: Option<Instant>,
    produced: u64,
}

impl DemoSource {
    pub fn new(sample_rate_hz: f64, center_hz: f64, realtime: bool) -> DemoSource {
        DemoSource {
            scene: Scene::new(sample_rate_hz, 0x5eed),
            info: SourceInfo {
                label: "demo scene".into(),
                format: None,
                sample_rate_hz,
                center_hz,
                start_time: None,
                total_samples: None,
                live: realtime,
            },
            realtime,
            started: None,
            produced: 0,
        }
    }
}

impl SampleSource for DemoSource {
    fn info(&self) -> &SourceInfo {
        &self.info
    }

    fn read(&mut self, out: &mut Vec<Complex32>, max: usize) -> Result<usize> {
        if self.realtime {
            let start = *self.started.get_or_insert_with(Instant::now);
            let due = Duration::from_secs_f64(self.produced as f64 / self.info.sample_rate_hz);
            if let Some(wait) = due.checked_sub(start.elapsed()) {
                std::thread::sleep(wait);
            }
        }
        let before = out.len();
        out.resize(before + max, Complex32::default());
        self.scene.fill(&mut out[before..]);
        self.produced += max as u64;
        Ok(max)
    }
}
