//! The speed ceiling for `measure`: read a cf32_le file, window, FFT with rustfft and accumulate
//! |X|², on one thread, with nothing else. `scripts/bench-throughput` compares bandwarden with it.
//!
//! It streams the file through one reused buffer (as bandwarden does) so that the comparison is
//! about the DSP, not about how a 128 MB file is loaded.
//!
//! Usage: fft_ceiling FILE FFT_SIZE OVERLAP

use num_complex::Complex32;
use rustfft::FftPlanner;
use std::io::Read;
use std::time::Instant;

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if args.len() != 4 {
        eprintln!("usage: fft_ceiling FILE FFT_SIZE OVERLAP");
        std::process::exit(2);
    }
    let n: usize = args[2].parse().expect("FFT size");
    let overlap: f64 = args[3].parse().expect("overlap");
    let hop = ((n as f64 * (1.0 - overlap)).round() as usize).max(1);
    let started = Instant::now();
    let mut file = std::fs::File::open(&args[1]).expect("open");
    let window: Vec<f32> = (0..n)
        .map(|i| (0.5 - 0.5 * (2.0 * std::f64::consts::PI * i as f64 / n as f64).cos()) as f32)
        .collect();
    let fft = FftPlanner::new().plan_fft_forward(n);
    let mut scratch = vec![Complex32::default(); fft.get_inplace_scratch_len()];
    let mut buf = vec![Complex32::default(); n];
    let mut acc = vec![0.0f64; n];
    let mut bytes = vec![0u8; 1 << 20];
    let mut pending: Vec<Complex32> = Vec::with_capacity(n + (1 << 17));
    let (mut frames, mut samples) = (0u64, 0u64);
    loop {
        let got = file.read(&mut bytes).expect("read");
        if got == 0 {
            break;
        }
        assert_eq!(got % 8, 0, "reads of a regular file come in whole samples here");
        samples += got as u64 / 8;
        pending.extend(bytes[..got].chunks_exact(8).map(|c| {
            Complex32::new(
                f32::from_le_bytes([c[0], c[1], c[2], c[3]]),
                f32::from_le_bytes([c[4], c[5], c[6], c[7]]),
            )
        }));
        let mut pos = 0;
        while pos + n <= pending.len() {
            for ((b, s), w) in buf.iter_mut().zip(&pending[pos..pos + n]).zip(&window) {
                *b = s * *w;
            }
            fft.process_with_scratch(&mut buf, &mut scratch);
            for (a, x) in acc.iter_mut().zip(&buf) {
                *a += x.norm_sqr() as f64;
            }
            frames += 1;
            pos += hop;
        }
        pending.drain(..pos.min(pending.len()));
    }
    let secs = started.elapsed().as_secs_f64();
    // A checksum so the work cannot be optimised away, and the rate.
    let total: f64 = acc.iter().sum();
    println!(
        "frames {frames} checksum {total:.6e} seconds {secs:.4} msps {:.2}",
        samples as f64 / secs / 1e6
    );
}
