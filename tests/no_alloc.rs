//! The per-frame path allocates nothing: a counting global allocator watches the STFT, the
//! engine and the occupancy tracker (which takes a row about a hundred times a second) once they
//! are warm.

use bandwarden::dsp::stft::Stft;
use bandwarden::dsp::{Engine, EngineConfig, Spectrum, WindowKind};
use bandwarden::measure::occupancy::{frames_per_sample, ChannelDef, Event, Occupancy, Timing};
use bandwarden::testkit::{keyed_band, Keyed};
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
    occupancy_rows_allocate_nothing();
    log_rows_allocate_nothing(1);
    log_rows_allocate_nothing(2);
    println!(
        "no_alloc: the STFT, the one- and two-thread engine, the occupancy tracker and the whole \
         log path allocate nothing per frame or row"
    );
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

/// Rows of a band in which a carrier keys on and off, so that the counted rows open and close
/// emissions (each measured for its occupied bandwidth) and close intervals.
fn occupancy_rows_allocate_nothing() {
    let (rate, center, fft) = (200e3, 100e6, 512);
    let k = frames_per_sample(rate, fft / 2, None).unwrap();
    let keyed = |i: u64| i % 40_000 < 12_000;
    let carriers = [Keyed { offset_hz: 20e3, level_dbfs: -30.0, on: &keyed }];
    let x = keyed_band(600_000, rate, 1e-4, &carriers, 1);
    let cfg = EngineConfig {
        fft_size: fft,
        window: WindowKind::Hann,
        overlap: 0.5,
        frames_per_output: Some(k),
    };
    let mut rows: Vec<Spectrum> = Vec::new();
    let mut engine = Engine::new(cfg, rate, center);
    engine.push(0, &x, &mut |r| rows.push(r.clone()));
    let channel = |offset_hz: f64| ChannelDef {
        low_hz: center + offset_hz - 5e3,
        high_hz: center + offset_hz + 5e3,
        threshold_db: 10.0,
    };
    let timing = Timing::new(rate, fft, fft / 2, k, 0.5, 0.025).unwrap();
    let mut occ = Occupancy::new(timing, vec![channel(20e3), channel(-60e3)]);
    let mut events: Vec<Event> = Vec::with_capacity(1000);
    let (warm, counted_rows) = rows.split_at(50);
    warm.iter().for_each(|r| occ.push(r, &mut events));
    let before = events.len();
    let n = counted(|| counted_rows.iter().for_each(|r| occ.push(r, &mut events)));
    let emissions = events[before..].iter().filter(|e| matches!(e, Event::Emission(_))).count();
    assert!(emissions >= 5, "the counted rows close {emissions} emissions");
    assert!(events.len() - before > emissions, "and intervals");
    assert_eq!(n, 0, "occupancy: {n} allocations over {} rows", counted_rows.len());
}

/// The whole `log` row path: blocks through the pipeline's run (engine, tracker, consumers: the
/// progress line and the occupancy log writing to a sink) on `threads` transform threads. A
/// steady carrier keeps one emission open and the interval is long, so no record is due in the
/// counted blocks: what is counted is what every row costs.
fn log_rows_allocate_nothing(threads: usize) {
    use bandwarden::dsp::DspConfig;
    use bandwarden::output::log::occupancy::OccupancyLog;
    use bandwarden::output::log::{LogFormat, LogWriter};
    use bandwarden::output::progress::Progress;
    use bandwarden::pipeline::occupancy::{OccupancyRequest, OccupancySetup};
    use bandwarden::pipeline::{Run, RunSpec};
    use bandwarden::plan::{parse_channel_flag, Plan};
    use bandwarden::source::reader::Block;
    use bandwarden::source::SourceInfo;

    let (rate, center) = (1e6, 100e6);
    let info = SourceInfo::synthetic(rate, center);
    let dsp = DspConfig { fft_size: 1024, window: WindowKind::Hann, overlap: 0.5, threads };
    let channels = ["busy=100.1M:20k", "idle=99.8M:20k"].map(|c| parse_channel_flag(c).unwrap());
    let plan = Plan::from_parts(None, &channels).unwrap();
    let req =
        OccupancyRequest { dwell_s: None, threshold_db: 10.0, interval_s: 600.0, hang_s: 0.025 };
    let setup = OccupancySetup::new(&info, &dsp, &plan, &req).unwrap();
    let writer = LogWriter::new(std::io::sink(), LogFormat::JsonLines, true).unwrap();
    let mut log = OccupancyLog::new(writer, &plan, &setup);
    let mut progress = Progress::for_file(None, rate);
    let mut spec = RunSpec::new(info, setup.engine.clone(), threads);
    spec.tracker = Some(setup.tracker());
    let mut run = Run::new(spec, vec![&mut progress, &mut log]);
    let on = |_: u64| true;
    let carrier = [Keyed { offset_hz: 100e3, level_dbfs: -30.0, on: &on }];
    let block_len = 10_000;
    let x = keyed_band(block_len * 150, rate, 1e-4, &carrier, 3);
    let blocks: Vec<Block> = x
        .chunks(block_len)
        .enumerate()
        .map(|(i, c)| Block::new((i * block_len) as u64, c.to_vec()))
        .collect();
    let (warm, rest) = blocks.split_at(100);
    warm.iter().for_each(|b| {
        run.feed(b).unwrap();
    });
    let n = counted(|| {
        rest.iter().for_each(|b| {
            run.feed(b).unwrap();
        })
    });
    assert_eq!(n, 0, "log path on {threads} thread(s): {n} allocations over {} blocks", rest.len());
}
