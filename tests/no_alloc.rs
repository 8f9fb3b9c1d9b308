//! The per-frame path allocates nothing: a counting global allocator watches the STFT and the
//! engine once they are warm.

use bandwarden::dsp::stft::Stft;
use bandwarden::dsp::{Engine, EngineConfig, WindowKind};
use num_complex::Complex32;
use std::alloc::{GlobalAlloc, Layout, System};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};

struct Counting;

static ALLOCATIONS: AtomicUsize = AtomicUsize::new(0);
static COUNTING: AtomicBool = AtomicBool::new(false);

unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        if COUNTING.load(Ordering::Relaxed) {
            ALLOCATIONS.fetch_add(1, Ordering::Relaxed);
        }
        System.alloc(layout)
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        System.dealloc(ptr, layout)
    }
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new: usize) -> *mut u8 {
        if COUNTING.load(Ordering::Relaxed) {
            ALLOCATIONS.fetch_add(1, Ordering::Relaxed);
        }
        System.realloc(ptr, layout, new)
    }
}

#[global_allocator]
static GLOBAL: Counting = Counting;

fn counted(f: impl FnOnce()) -> usize {
    ALLOCATIONS.store(0, Ordering::SeqCst);
    COUNTING.store(true, Ordering::SeqCst);
    f();
    COUNTING.store(false, Ordering::SeqCst);
    ALLOCATIONS.load(Ordering::SeqCst)
}

/// Feeds 4 blocks to warm the engine up, then counts the allocations of the next 50.
fn warm_then_count(engine: &mut Engine, block: &[Complex32], start: &mut u64) -> usize {
    let mut feed = |engine: &mut Engine| {
        engine.push(*start, block, &mut |_| {});
        *start += block.len() as u64;
    };
    (0..4).for_each(|_| feed(engine));
    counted(|| (0..50).for_each(|_| feed(engine)))
}

fn signal(n: usize) -> Vec<Complex32> {
    (0..n).map(|i| Complex32::from_polar(0.5, i as f32 * 0.1)).collect()
}

/// Runs without the test harness (see Cargo.toml), so the only threads are this one and the
/// engine's helpers: any allocation counted is ours.
fn main() {
    frames_allocate_nothing();
    println!("no_alloc: the STFT and the one- and two-thread engine allocate nothing per frame");
}

fn frames_allocate_nothing() {
    for kind in [WindowKind::Hann, WindowKind::Kaiser(9.0)] {
        let mut stft = Stft::new(4096, kind);
        let frame = signal(4096);
        let mut acc = vec![0.0; 4096];
        stft.accumulate_power(&frame, &mut acc);
        let n = counted(|| {
            for _ in 0..100 {
                stft.accumulate_power(&frame, &mut acc);
            }
        });
        assert_eq!(n, 0, "{kind}: {n} allocations in 100 frames");
    }

    // The engine on one thread with no output due: frames are taken from the blocks, and the tail
    // that carries frames across blocks keeps its capacity.
    let cfg = EngineConfig {
        fft_size: 1024,
        window: WindowKind::Hann,
        overlap: 0.5,
        frames_per_output: None,
    };
    let mut engine = Engine::new(cfg, 1e6, 0.0);
    let block = signal(16384);
    let mut start = 0;
    let n = warm_then_count(&mut engine, &block, &mut start);
    assert_eq!(n, 0, "engine: {n} allocations over 50 blocks (~1600 frames)");

    // On two threads: group sums live in slots sized once, and helpers are handed each batch by
    // address through a mailbox, so batches allocate nothing either.
    engine.set_threads(2);
    let n = warm_then_count(&mut engine, &block, &mut start);
    assert_eq!(n, 0, "two-thread engine: {n} allocations over 50 blocks");
}
