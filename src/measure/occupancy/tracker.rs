//! The SM.1880 occupancy tracker: every channel of a plan followed through a sequence of rows,
//! per interval and per emission (the definitions are in the [module docs](super)).
//!
//! **Edges to one FFT hop.** A measurement sample that an emission fills only in part is not
//! counted whole: its share is the fraction of the emission's full level it reached,
//! `(P − N) / (P_full − N)`, where `P_full` is the highest power among the occupied samples
//! within two of it (at least one of them is filled when the emission lasts two samples or
//! more). Every input sample's energy reaches the rows through the frames that contain it, the
//! same total for every sample up to the window's ripple over one hop, so the shares add up to
//! the emission's true duration within about one hop, and its start and end are placed there
//! too. This is why a row is settled two rows after it arrived: the tracker reports two
//! measurement samples (about 20 ms at the default dwell) later than it sees them.
//!
//! It runs on every row, about a hundred times a second for hours, so once the first row has sized
//! its buffers a row allocates nothing: the noise tracker keeps its FCME buffers, each channel keeps
//! the last three rows of its bins and the buffer in which its emissions' spectra are summed, and
//! an emission's occupied bandwidth is measured on that buffer in place.

use super::{
    read_channel, ChannelDef, EmissionStart, EmissionSummary, Event, IntervalSummary, Timing,
    OBW_PERCENT,
};
use crate::dsp::Spectrum;
use crate::measure::band::{occupied_bandwidth_of, BinRun};
use crate::measure::noise::tracker::NoiseTracker;

/// Rows a row waits for before it is settled (and rows looked at on either side of it).
const DELAY: usize = 2;
/// Rows remembered: the one being settled and `DELAY` on either side.
const SPAN: usize = 2 * DELAY + 1;
/// Rows of bins each channel keeps: the one being settled and the `DELAY` after it.
const RING: usize = DELAY + 1;

#[derive(Clone, Debug, Default)]
struct IntervalAcc {
    rows: u64,
    occupied: f64,
    power_sum: f64,
    peak: f64,
    floor_sum: f64,
    /// Rows no emission touched, and the sum of the channel's power over them.
    quiet_rows: u64,
    quiet_power_sum: f64,
}

#[derive(Clone, Copy, Debug)]
struct OpenEmission {
    start: u64,
    /// Span of the last occupied row and its share.
    last: (u64, u64, f64),
    /// Share of the first quiet row after the last occupied one.
    tail: f64,
    rows: u64,
    power_sum: f64,
    peak: f64,
    floor_sum: f64,
    quiet_rows: u64,
}

impl OpenEmission {
    /// Where the emission ended: the shares of its last occupied row and of the quiet row after
    /// it, counted on from the start of the last occupied row (the emission fills the end of
    /// the one and the start of the other).
    fn end(&self) -> u64 {
        let (start, end, share) = self.last;
        start + ((end - start) as f64 * (share + self.tail)).round() as u64
    }
}

/// What one row said about one channel, kept until the row is settled.
#[derive(Clone, Copy, Debug, Default)]
struct Seen {
    power: f64,
    noise_power: f64,
    occupied: bool,
}

/// A row waiting to be settled: its span, interval, noise density and place in the bin rings.
#[derive(Clone, Copy, Debug)]
struct RowNote {
    start: u64,
    end: u64,
    interval: u64,
    density: f64,
    slot: usize,
}

#[derive(Clone, Debug)]
struct ChannelState {
    def: ChannelDef,
    /// False for a channel of a panorama never in view (in a hole, or beyond its span): it is
    /// never read, never occupied, and its intervals say "not measured".
    in_view: bool,
    bins: (usize, usize),
    acc: IntervalAcc,
    open: Option<OpenEmission>,
    /// The channel's reading in each remembered row (`Occupancy::rows`).
    seen: [Seen; SPAN],
    /// Share of the last settled row.
    last_share: f64,
    /// The channel's bins of the last `RING` rows, one after the other.
    ring: Vec<f64>,
    /// Sum of the open emission's PSD over the channel's bins (`bins.0 ..= bins.1`); sized on
    /// the first row and zeroed when an emission starts.
    psd_sum: Vec<f64>,
}

impl ChannelState {
    fn width(&self) -> usize {
        self.bins.1 + 1 - self.bins.0
    }
}

/// Follows every channel of a plan through a sequence of rows.
pub struct Occupancy {
    timing: Timing,
    channels: Vec<ChannelState>,
    noise: NoiseTracker,
    /// The rows around the one being settled, oldest first (index `DELAY` is settled next).
    rows: [Option<RowNote>; SPAN],
    /// Rows pushed so far (picks each row's place in the rings).
    pushed: usize,
    interval: Option<u64>,
    /// The first interval not yet reported.
    next_interval: u64,
    last_row_end: u64,
    gaps: Vec<(u64, u64)>,
    /// The bin geometry of the first row (with no bins): where emission spectra lie.
    grid: Option<BinRun<'static>>,
}

impl Occupancy {
    pub fn new(timing: Timing, channels: Vec<ChannelDef>) -> Occupancy {
        let channels = channels
            .into_iter()
            .map(|def| ChannelState {
                def,
                in_view: true,
                bins: (0, 0),
                acc: IntervalAcc::default(),
                open: None,
                seen: [Seen::default(); SPAN],
                last_share: 0.0,
                ring: Vec::new(),
                psd_sum: Vec::new(),
            })
            .collect();
        Occupancy {
            noise: NoiseTracker::new(timing.floor_alpha, timing.floor_rows),
            timing,
            channels,
            rows: [None; SPAN],
            pushed: 0,
            interval: None,
            next_interval: 0,
            last_row_end: 0,
            gaps: Vec::new(),
            grid: None,
        }
    }

    /// Marks the channels whose `in_view` is false (by plan order) as never in view: see
    /// [`IntervalSummary::in_view`].
    pub fn with_view(mut self, in_view: &[bool]) -> Occupancy {
        for (ch, &v) in self.channels.iter_mut().zip(in_view) {
            ch.in_view = v;
        }
        self
    }

    pub fn timing(&self) -> &Timing {
        &self.timing
    }

    /// The tracked noise density (FS²/Hz), 0 before the first row.
    pub fn noise_density(&self) -> f64 {
        self.noise.current()
    }

    /// Takes one measurement sample; finished intervals and emissions are appended to `out`
    /// (those of the row `DELAY` rows back, which is settled now).
    pub fn push(&mut self, row: &Spectrum, out: &mut Vec<Event>) {
        if self.grid.is_none() {
            self.learn_grid(row);
        }
        let (start, end) = self.timing.row_span(row);
        let density = self.noise.push(row);
        let slot = self.pushed % RING;
        self.pushed += 1;
        self.rows.rotate_left(1);
        self.rows[SPAN - 1] =
            Some(RowNote { start, end, interval: start / self.timing.interval, density, slot });
        for ch in self.channels.iter_mut() {
            ch.seen.rotate_left(1);
            ch.seen[SPAN - 1] = if ch.in_view {
                let r = read_channel(row, &ch.def, density);
                Seen { power: r.power, noise_power: r.noise_power, occupied: r.occupied }
            } else {
                Seen::default()
            };
            let w = ch.width();
            ch.ring[slot * w..(slot + 1) * w].copy_from_slice(&row.psd[ch.bins.0..=ch.bins.1]);
        }
        self.settle(out);
    }

    /// Notes that samples `[from, to)` were lost: the rows before it are settled, and open
    /// emissions end there, flagged partial.
    pub fn gap(&mut self, from: u64, to: u64, out: &mut Vec<Event>) {
        if to <= from {
            return;
        }
        self.drain(out);
        self.close_emissions(out);
        self.gaps.push((from, to));
    }

    /// Ends the run: the rows still waiting are settled, then the open interval (ending at
    /// `input_end`, one past the last input sample) and any open emission are reported with
    /// `partial` set.
    ///
    /// Every interval of the input gets its records, also those in which not one sample could
    /// be measured (all their input lost): `samples` 0, with the loss counted, so a table grouped
    /// by interval has no missing rows.
    pub fn finish(&mut self, input_end: u64, out: &mut Vec<Event>) {
        self.drain(out);
        self.close_emissions(out);
        let end_of_input = input_end.max(self.last_row_end);
        if end_of_input == 0 {
            return;
        }
        let last = ((end_of_input - 1) / self.timing.interval).max(self.interval.unwrap_or(0));
        self.report_before(last, out);
        let end = (last + 1).saturating_mul(self.timing.interval).min(end_of_input);
        self.close_interval(last, end, true, out);
        self.interval = None;
        self.next_interval = last.saturating_add(1);
    }

    /// Settles every row still waiting, as if nothing were known after the last one; the
    /// history starts afresh.
    fn drain(&mut self, out: &mut Vec<Event>) {
        for _ in 0..DELAY {
            self.rows.rotate_left(1);
            self.rows[SPAN - 1] = None;
            for ch in self.channels.iter_mut() {
                ch.seen.rotate_left(1);
            }
            self.settle(out);
        }
        self.rows = [None; SPAN];
    }

    /// Settles the row `DELAY` back, if there is one: its interval, each channel's share of it
    /// and the emissions it starts, extends or ends.
    fn settle(&mut self, out: &mut Vec<Event>) {
        let Some(note) = self.rows[DELAY] else { return };
        if self.interval != Some(note.interval) {
            self.report_before(note.interval, out);
            self.interval = Some(note.interval);
        }
        let known: [bool; SPAN] = std::array::from_fn(|i| self.rows[i].is_some());
        let hang = self.timing.hang_samples;
        let stride = (note.end - note.start) as f64;
        for (index, ch) in self.channels.iter_mut().enumerate() {
            let here = ch.seen[DELAY];
            let share = share(&ch.seen, &known);
            let acc = &mut ch.acc;
            acc.rows += 1;
            acc.occupied += share;
            acc.power_sum += here.power;
            acc.peak = acc.peak.max(here.power);
            acc.floor_sum += note.density;
            if !here.occupied && share == 0.0 {
                acc.quiet_rows += 1;
                acc.quiet_power_sum += here.power;
            }
            if here.occupied {
                if ch.open.is_none() {
                    ch.psd_sum.iter_mut().for_each(|s| *s = 0.0);
                    // The shares of this row and of the quiet one before it, counted back
                    // from the end of this one (the emission fills the end of the one and
                    // the start of the other).
                    let before = if known[DELAY - 1] { ch.last_share } else { 0.0 };
                    let start = note.end.saturating_sub((stride * (share + before)).round() as u64);
                    out.push(Event::Opened(EmissionStart { channel: index, start_sample: start }));
                    ch.open = Some(OpenEmission {
                        start,
                        last: (note.start, note.end, share),
                        tail: 0.0,
                        rows: 0,
                        power_sum: 0.0,
                        peak: 0.0,
                        floor_sum: 0.0,
                        quiet_rows: 0,
                    });
                }
                let e = ch.open.as_mut().expect("open");
                e.last = (note.start, note.end, share);
                e.tail = 0.0;
                e.rows += 1;
                e.power_sum += here.power;
                e.peak = e.peak.max(here.power);
                e.floor_sum += note.density;
                e.quiet_rows = 0;
                let w = ch.bins.1 + 1 - ch.bins.0;
                let bins = &ch.ring[note.slot * w..(note.slot + 1) * w];
                for (s, p) in ch.psd_sum.iter_mut().zip(bins) {
                    *s += p;
                }
            } else if let Some(e) = ch.open.as_mut() {
                e.quiet_rows += 1;
                if e.quiet_rows == 1 {
                    e.tail = share;
                }
                if e.quiet_rows >= hang {
                    let e = ch.open.take().expect("open");
                    out.push(Event::Emission(summarise(index, ch, e, self.grid, false)));
                }
            }
            ch.last_share = share;
        }
        self.last_row_end = note.end;
    }

    /// Reports every interval before `k` not reported yet: the open one with its samples, any
    /// after it (its input all lost) with none.
    fn report_before(&mut self, k: u64, out: &mut Vec<Event>) {
        while self.next_interval < k {
            let j = self.next_interval;
            let end = (j + 1).saturating_mul(self.timing.interval);
            self.close_interval(j, end, false, out);
            self.next_interval += 1;
        }
    }

    fn close_emissions(&mut self, out: &mut Vec<Event>) {
        for (index, ch) in self.channels.iter_mut().enumerate() {
            if let Some(e) = ch.open.take() {
                out.push(Event::Emission(summarise(index, ch, e, self.grid, true)));
            }
            ch.last_share = 0.0;
        }
    }

    fn close_interval(&mut self, k: u64, end: u64, partial: bool, out: &mut Vec<Event>) {
        let start = k.saturating_mul(self.timing.interval);
        let dropped: u64 =
            self.gaps.iter().map(|&(a, b)| b.min(end).saturating_sub(a.max(start))).sum();
        self.gaps.retain(|&(_, b)| b > end);
        for (index, ch) in self.channels.iter_mut().enumerate() {
            let acc = std::mem::take(&mut ch.acc);
            let n = acc.rows.max(1) as f64;
            out.push(Event::Interval(IntervalSummary {
                channel: index,
                start_sample: start,
                end_sample: end,
                samples: acc.rows,
                occupied: acc.occupied,
                mean_power: acc.power_sum / n,
                peak_power: acc.peak,
                noise_density: acc.floor_sum / n,
                quiet_samples: acc.quiet_rows,
                quiet_power: acc.quiet_power_sum / acc.quiet_rows.max(1) as f64,
                dropped_samples: dropped,
                partial,
                in_view: ch.in_view,
            }));
        }
    }

    fn learn_grid(&mut self, row: &Spectrum) {
        let n = row.fft_size as isize;
        for ch in &mut self.channels {
            let first = (row.bin_of_freq(ch.def.low_hz) - 0.5).floor().clamp(0.0, (n - 1) as f64);
            let last = (row.bin_of_freq(ch.def.high_hz) + 0.5).ceil().clamp(first, (n - 1) as f64);
            ch.bins = (first as usize, last as usize);
            ch.psd_sum = vec![0.0; ch.width()];
            ch.ring = vec![0.0; RING * ch.width()];
        }
        self.grid = Some(BinRun::part(row, 0, &[]));
    }
}

/// The share of the middle row (`seen[DELAY]`) an emission filled: 1 inside an emission, 0 far
/// from one, and at an edge the fraction of the full level it reached (module docs). A row not
/// known (before the first, after the last, across a gap) is taken to be like the middle one.
fn share(seen: &[Seen; SPAN], known: &[bool; SPAN]) -> f64 {
    let occupied = |i: usize| if known[i] { seen[i].occupied } else { seen[DELAY].occupied };
    let here = seen[DELAY];
    let (before, after) = (occupied(DELAY - 1), occupied(DELAY + 1));
    if here.occupied && before && after {
        return 1.0;
    }
    if !here.occupied && !before && !after {
        return 0.0;
    }
    let full = (0..SPAN)
        .filter(|&i| known[i] && seen[i].occupied)
        .map(|i| seen[i].power)
        .fold(f64::NEG_INFINITY, f64::max);
    let excess = full - here.noise_power;
    if excess > 0.0 {
        ((here.power - here.noise_power) / excess).clamp(0.0, 1.0)
    } else {
        f64::from(u8::from(here.occupied))
    }
}

/// The emission's summary. Its averaged spectrum, with the noise floor taken off each bin, is
/// written over the channel's PSD sum (the sum is not needed again) and measured there.
fn summarise(
    index: usize,
    ch: &mut ChannelState,
    e: OpenEmission,
    grid: Option<BinRun<'static>>,
    partial: bool,
) -> EmissionSummary {
    let n = e.rows.max(1) as f64;
    let floor = e.floor_sum / n;
    let obw = grid.and_then(|grid| {
        for s in ch.psd_sum.iter_mut() {
            *s = (*s / n - floor).max(0.0);
        }
        let run = BinRun { psd: &ch.psd_sum, first: grid.first + ch.bins.0 as i64, ..grid };
        occupied_bandwidth_of(run, ch.def.low_hz, ch.def.high_hz, OBW_PERCENT)
    });
    // A partial emission went on past what was seen: it ends with its last occupied row.
    let end = if partial { e.last.1.max(e.end()) } else { e.end() };
    EmissionSummary {
        channel: index,
        start_sample: e.start,
        end_sample: end.max(e.start),
        samples: e.rows,
        mean_power: e.power_sum / n,
        peak_power: e.peak,
        obw_hz: obw.map(|edges| edges.width_hz()),
        obw,
        noise_power: floor * ch.def.width_hz(),
        partial,
        class: None,
    }
}
