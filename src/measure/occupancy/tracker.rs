//! The SM.1880 occupancy tracker: every channel of a plan followed through a sequence of rows,
//! per interval and per emission (the definitions are in the [module docs](super)).
//!
//! It runs on every row, about a hundred times a second for hours, so once the first row has sized
//! its buffers a row allocates nothing: the noise tracker keeps its FCME buffers, each channel keeps
//! the buffer in which its emissions' spectra are summed, and an emission's occupied bandwidth is
//! measured on that buffer in place.

use super::{
    read_channel, ChannelDef, EmissionStart, EmissionSummary, Event, IntervalSummary, Timing,
    OBW_PERCENT,
};
use crate::dsp::Spectrum;
use crate::measure::band::{occupied_bandwidth_of, BinRun};
use crate::measure::noise::tracker::NoiseTracker;

#[derive(Clone, Debug, Default)]
struct IntervalAcc {
    rows: u64,
    occupied: u64,
    power_sum: f64,
    peak: f64,
    floor_sum: f64,
}

#[derive(Clone, Copy, Debug)]
struct OpenEmission {
    start: u64,
    end: u64,
    rows: u64,
    power_sum: f64,
    peak: f64,
    floor_sum: f64,
    quiet_rows: u64,
}

#[derive(Clone, Debug)]
struct ChannelState {
    def: ChannelDef,
    bins: (usize, usize),
    acc: IntervalAcc,
    open: Option<OpenEmission>,
    /// Sum of the open emission's PSD over the channel's bins (`bins.0 ..= bins.1`); sized on
    /// the first row and zeroed when an emission starts.
    psd_sum: Vec<f64>,
}

/// Follows every channel of a plan through a sequence of rows.
pub struct Occupancy {
    timing: Timing,
    channels: Vec<ChannelState>,
    noise: NoiseTracker,
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
                bins: (0, 0),
                acc: IntervalAcc::default(),
                open: None,
                psd_sum: Vec::new(),
            })
            .collect();
        Occupancy {
            noise: NoiseTracker::new(timing.floor_alpha, timing.floor_rows),
            timing,
            channels,
            interval: None,
            next_interval: 0,
            last_row_end: 0,
            gaps: Vec::new(),
            grid: None,
        }
    }

    pub fn timing(&self) -> &Timing {
        &self.timing
    }

    /// The tracked noise density (FS²/Hz), 0 before the first row.
    pub fn noise_density(&self) -> f64 {
        self.noise.current()
    }

    /// Takes one measurement sample; finished intervals and emissions are appended to `out`.
    pub fn push(&mut self, row: &Spectrum, out: &mut Vec<Event>) {
        if self.grid.is_none() {
            self.learn_grid(row);
        }
        let (row_start, row_end) = self.timing.row_span(row);
        let k = row_start / self.timing.interval;
        if self.interval != Some(k) {
            self.report_before(k, out);
            self.interval = Some(k);
        }
        let density = self.noise.push(row);
        let hang = self.timing.hang_samples;
        for (index, ch) in self.channels.iter_mut().enumerate() {
            let r = read_channel(row, &ch.def, density);
            let acc = &mut ch.acc;
            acc.rows += 1;
            acc.occupied += r.occupied as u64;
            acc.power_sum += r.power;
            acc.peak = acc.peak.max(r.power);
            acc.floor_sum += density;
            if r.occupied {
                if ch.open.is_none() {
                    ch.psd_sum.iter_mut().for_each(|s| *s = 0.0);
                    out.push(Event::Opened(EmissionStart {
                        channel: index,
                        start_sample: row_start,
                    }));
                }
                let e = ch.open.get_or_insert(OpenEmission {
                    start: row_start,
                    end: row_end,
                    rows: 0,
                    power_sum: 0.0,
                    peak: 0.0,
                    floor_sum: 0.0,
                    quiet_rows: 0,
                });
                e.end = row_end;
                e.rows += 1;
                e.power_sum += r.power;
                e.peak = e.peak.max(r.power);
                e.floor_sum += density;
                e.quiet_rows = 0;
                let (b0, b1) = ch.bins;
                for (s, p) in ch.psd_sum.iter_mut().zip(&row.psd[b0..=b1]) {
                    *s += p;
                }
            } else if let Some(e) = ch.open.as_mut() {
                e.quiet_rows += 1;
                if e.quiet_rows >= hang {
                    let e = ch.open.take().expect("open");
                    out.push(Event::Emission(summarise(index, ch, e, self.grid, false)));
                }
            }
        }
        self.last_row_end = row_end;
    }

    /// Notes that samples `[from, to)` were lost: open emissions end here, flagged partial.
    pub fn gap(&mut self, from: u64, to: u64, out: &mut Vec<Event>) {
        if to <= from {
            return;
        }
        self.close_emissions(out);
        self.gaps.push((from, to));
    }

    /// Ends the run: the open interval (ending at `input_end`, one past the last input sample)
    /// and any open emission are reported with `partial` set.
    ///
    /// Every interval of the input gets its records, also those in which not one sample could
    /// be measured (all their input lost): `samples` 0, with the loss counted, so a table grouped
    /// by interval has no missing rows.
    pub fn finish(&mut self, input_end: u64, out: &mut Vec<Event>) {
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
                dropped_samples: dropped,
                partial,
            }));
        }
    }

    fn learn_grid(&mut self, row: &Spectrum) {
        let n = row.fft_size as isize;
        for ch in &mut self.channels {
            let first = (row.bin_of_freq(ch.def.low_hz) - 0.5).floor().clamp(0.0, (n - 1) as f64);
            let last = (row.bin_of_freq(ch.def.high_hz) + 0.5).ceil().clamp(first, (n - 1) as f64);
            ch.bins = (first as usize, last as usize);
            ch.psd_sum = vec![0.0; ch.bins.1 + 1 - ch.bins.0];
        }
        self.grid = Some(BinRun::part(row, 0, &[]));
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
    EmissionSummary {
        channel: index,
        start_sample: e.start,
        end_sample: e.end,
        samples: e.rows,
        mean_power: e.power_sum / n,
        peak_power: e.peak,
        obw_hz: obw.map(|edges| edges.width_hz()),
        obw,
        noise_power: floor * ch.def.width_hz(),
        partial,
    }
}
