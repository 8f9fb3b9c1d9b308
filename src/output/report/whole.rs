//! `measure`'s consumer: the whole input averaged into one spectrum, and each plan channel's
//! occupancy (ITU-R SM.1880) over the whole input.

use crate::dsp::average::SpectrumSum;
use crate::dsp::Spectrum;
use crate::measure::occupancy::Event;
use crate::pipeline::{Consumer, Flow, RunInfo};
use crate::source::reader::Block;
use std::io;

/// Collects the average and the per-channel occupancy of a run.
#[derive(Default)]
pub struct WholeInput {
    /// The first row, kept as it is: with no rows to combine (no plan) it is the average.
    first: Option<Spectrum>,
    sum: SpectrumSum,
    rows: u64,
    /// Samples handed to the run.
    pub samples: u64,
    /// Per plan channel: (occupancy %, measurement samples); the occupancy `None` for a
    /// panorama's channel never in view.
    pub occupancy: Vec<(Option<f64>, u64)>,
}

impl WholeInput {
    pub fn new(channels: usize) -> WholeInput {
        WholeInput { occupancy: vec![(Some(0.0), 0); channels], ..WholeInput::default() }
    }

    /// The average over every frame, with the degrees of freedom of frames `hop` apart.
    pub fn average(&self, hop: usize) -> Option<Spectrum> {
        if self.rows == 1 {
            return self.first.clone();
        }
        self.sum.average(hop)
    }

    fn add(&mut self, row: &Spectrum) {
        if self.first.is_none() {
            self.first = Some(row.clone());
        }
        self.rows += 1;
        self.sum.add(row);
    }
}

impl Consumer for WholeInput {
    fn block(&mut self, block: &Block) -> io::Result<()> {
        self.samples += block.samples.len() as u64;
        Ok(())
    }

    fn row(&mut self, row: &Spectrum) -> io::Result<Flow> {
        self.add(row);
        Ok(Flow::Continue)
    }

    /// The short row at the end still holds frames of the input.
    fn partial_row(&mut self, row: &Spectrum) -> io::Result<()> {
        self.add(row);
        Ok(())
    }

    fn event(&mut self, event: &Event, _run: &RunInfo) -> io::Result<()> {
        if let Event::Interval(i) = event {
            self.occupancy[i.channel] = (i.in_view.then(|| i.occupancy_pct()), i.samples);
        }
        Ok(())
    }
}
