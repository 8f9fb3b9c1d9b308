//! Criterion benchmarks: sample conversion for each format, the STFT with each window, and each
//! measurement. Run with `cargo bench`; compare runs with criterion's own reports.

use bandwarden::dsp::stft::Stft;
use bandwarden::dsp::{Engine, EngineConfig, Spectrum, Window, WindowKind};
use bandwarden::kernels::Kernels;
use bandwarden::measure::{
    band_power, find_signals, noise_floor, occupied_bandwidth, xdb_bandwidth, Detection,
};
use bandwarden::source::SampleFormat;
use bandwarden::testkit::{keyed_band, Keyed};
use bandwarden::units::undb;
use criterion::{black_box, criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use num_complex::Complex32;

/// A −10 dBFS tone 80 kHz above the centre (at 2.4 MS/s) over −45 dBFS of white noise.
fn test_signal(n: usize) -> Vec<Complex32> {
    keyed_band(n, 2.4e6, undb(-45.0), &[Keyed::steady(80e3, -10.0)], 1)
}

fn conversion(c: &mut Criterion) {
    let samples = test_signal(65536);
    let mut g = c.benchmark_group("decode");
    g.throughput(Throughput::Elements(samples.len() as u64));
    for fmt in SampleFormat::ALL {
        let mut bytes = Vec::new();
        fmt.encode(&samples, &mut bytes);
        let mut out = vec![Complex32::default(); samples.len()];
        g.bench_function(BenchmarkId::from_parameter(fmt.name()), |b| {
            b.iter(|| black_box(fmt.decode(black_box(&bytes), &mut out)))
        });
    }
    g.finish();
}

fn stft(c: &mut Criterion) {
    let n = 4096;
    let frame = test_signal(n);
    let mut g = c.benchmark_group("stft_4096");
    g.throughput(Throughput::Elements(n as u64));
    for kind in WindowKind::ALL {
        let mut stft = Stft::new(n, kind);
        let mut acc = vec![0.0; n];
        g.bench_function(BenchmarkId::from_parameter(kind.to_string()), |b| {
            b.iter(|| stft.accumulate_power(black_box(&frame), &mut acc))
        });
    }
    g.finish();
}

/// The loops around the FFT, baseline build against the copy picked for this CPU.
fn kernels(c: &mut Criterion) {
    let n = 4096;
    let x = test_signal(n);
    let w = Window::new(WindowKind::Hann, n).coeffs;
    let mut g = c.benchmark_group("kernels_4096");
    g.throughput(Throughput::Elements(n as u64));
    for (name, k) in [("baseline", Kernels::baseline()), ("detected", Kernels::detect())] {
        let mut buf = vec![Complex32::default(); n];
        let mut power = vec![0.0f32; n];
        g.bench_function(BenchmarkId::new("window", name), |b| {
            b.iter(|| k.window(&mut buf, black_box(&x), &w))
        });
        g.bench_function(BenchmarkId::new("add_power", name), |b| {
            b.iter(|| k.add_power(&mut power, black_box(&x)))
        });
        g.bench_function(BenchmarkId::new("any_outside", name), |b| {
            b.iter(|| k.any_outside(black_box(&x), 1e6))
        });
    }
    g.finish();
    history_copy(c);
}

/// A stream's samples copied block by block into a ring of 4 s at 1 MS/s (the classifier's
/// history), by `copy_from_slice` and by the copy that bypasses the cache.
fn history_copy(c: &mut Criterion) {
    let (block, ring_len) = (65_536, 4_000_000);
    let x = test_signal(block);
    let mut ring = vec![Complex32::default(); ring_len];
    let mut g = c.benchmark_group("kernels_history_copy");
    g.throughput(Throughput::Elements(block as u64));
    let mut at = 0;
    g.bench_function("copy_from_slice", |b| {
        b.iter(|| {
            let n = block.min(ring_len - at);
            ring[at..at + n].copy_from_slice(black_box(&x[..n]));
            at = (at + n) % ring_len;
        })
    });
    let mut ring: Vec<std::mem::MaybeUninit<Complex32>> =
        ring.into_iter().map(std::mem::MaybeUninit::new).collect();
    g.bench_function("streaming", |b| {
        b.iter(|| {
            let n = block.min(ring_len - at);
            bandwarden::kernels::copy_streaming(&mut ring[at..at + n], black_box(&x[..n]));
            at = (at + n) % ring_len;
        })
    });
    g.finish();
}

fn averaged_spectrum() -> Spectrum {
    let cfg = EngineConfig {
        fft_size: 4096,
        window: WindowKind::Hann,
        overlap: 0.5,
        frames_per_output: None,
    };
    let mut e = Engine::new(cfg, 2.4e6, 433.5e6);
    let mut out = None;
    e.push(0, &test_signal(1 << 18), &mut |s| out = Some(s.clone()));
    e.finish(&mut |s| out = Some(s.clone()));
    out.expect("one spectrum")
}

fn measurements(c: &mut Criterion) {
    let spec = averaged_spectrum();
    let window = Window::new(spec.window, spec.fft_size);
    let floor = noise_floor(&spec.psd, spec.dof);
    let (lo, hi) = (433.4e6, 433.6e6);
    let mut g = c.benchmark_group("measure_4096");
    g.bench_function("noise_floor", |b| b.iter(|| noise_floor(black_box(&spec.psd), spec.dof)));
    g.bench_function("find_signals", |b| {
        b.iter(|| find_signals(black_box(&spec), &window, floor, 10, Detection::default()))
    });
    g.bench_function("band_power", |b| b.iter(|| band_power(black_box(&spec), lo, hi)));
    g.bench_function("occupied_bandwidth", |b| {
        b.iter(|| occupied_bandwidth(black_box(&spec), lo, hi, 99.0))
    });
    g.bench_function("xdb_bandwidth", |b| b.iter(|| xdb_bandwidth(black_box(&spec), lo, hi, 26.0)));
    g.finish();
}

criterion_group!(benches, conversion, stft, kernels, measurements);
criterion_main!(benches);
