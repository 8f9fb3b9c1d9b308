//! How fast the demo scene is generated on one core, in millions of samples per second.
//!
//! `cargo run --release --example demo_speed` times the scene at 2.4 MS/s and at 20 MS/s: as it
//! runs (10 s of signal, so keying cycles mix quiet and busy moments) and with every channel
//! keyed at once (the worst moment, which a paced `bandwarden demo --realtime` must keep up
//! with). Rates come from the CPU time of this thread (Linux; elsewhere wall time), and each
//! figure is the best of five runs, so other work on a shared machine counts as little as it can.
//! Add `--parts` for the cost of the receiver noise and of each channel on its own.

use bandwarden::source::demo::{channels, DemoChannel, Scene, Schedule};
use num_complex::Complex32;
use std::time::Instant;

/// Seconds this thread has run on a CPU (Linux), else wall time since `wall`.
fn cpu_seconds(wall: Instant) -> f64 {
    std::fs::read_to_string("/proc/thread-self/schedstat")
        .ok()
        .and_then(|s| s.split_whitespace().next()?.parse::<f64>().ok())
        .map_or_else(|| wall.elapsed().as_secs_f64(), |ns| ns * 1e-9)
}

/// Best rate, in millions of samples per CPU second, of five runs of `seconds` of a scene.
fn rate_of(make: impl Fn() -> Scene, seconds: f64) -> f64 {
    (0..5).map(|_| one_run(make(), seconds)).fold(0.0, f64::max)
}

fn one_run(mut scene: Scene, seconds: f64) -> f64 {
    let rate = scene.sample_rate_hz();
    let block = (rate / 100.0) as usize;
    let mut buf = vec![Complex32::default(); block];
    let blocks = (seconds * 100.0) as usize;
    let wall = Instant::now();
    let began = cpu_seconds(wall);
    let mut check = 0.0f32;
    for _ in 0..blocks {
        scene.fill(&mut buf);
        check += buf[block / 2].re;
    }
    let spent = cpu_seconds(wall) - began;
    std::hint::black_box(check);
    (blocks * block) as f64 / spent / 1e6
}

fn always_keyed(mut c: DemoChannel) -> DemoChannel {
    c.schedule = Schedule::Always;
    c
}

fn main() {
    let parts = std::env::args().any(|a| a == "--parts");
    for rate in [2.4e6, 20e6] {
        let whole = rate_of(|| Scene::new(rate, 1), 10.0);
        println!("scene at {:>4.1} MS/s: {whole:6.1} MS/s as scheduled", rate / 1e6);
        let busy =
            || Scene::with_channels(rate, 1, channels().into_iter().map(always_keyed).collect());
        println!("                      {:6.1} MS/s with every channel keyed", rate_of(busy, 1.0));
        if !parts {
            continue;
        }
        let noise = rate_of(|| Scene::with_channels(rate, 1, Vec::new()), 1.0);
        println!("  receiver noise alone {noise:6.1} MS/s");
        for c in channels() {
            let name = c.name;
            let r = rate_of(|| Scene::with_channels(rate, 1, vec![always_keyed(c.clone())]), 1.0);
            // Extra nanoseconds per sample this channel costs over the noise alone.
            println!(
                "  + {name:<9} keyed    {r:6.1} MS/s  (+{:.1} ns/sample)",
                1e3 / r - 1e3 / noise
            );
        }
    }
}
