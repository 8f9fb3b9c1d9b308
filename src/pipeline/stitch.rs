//! The run's side of a panorama: cutting a retuned stream into dwells for the engine and handing
//! each dwell's spectra to the [`Panorama`] accumulator.
//!
//! The source's tuning timeline ([`Tuning`]) says which centre every sample was taken at. The
//! run gives the engine one dwell at a time: the first `settle` samples of a dwell are never
//! pushed, and at the dwell's end the engine emits what it holds and forgets the unfinished
//! frame ([`Engine::end_dwell`]), so no frame ever mixes two tunings. The spectra of a dwell go
//! to the panorama, not to the consumers; the consumers see one wide row per complete sweep.
//! A stream without a tuning never comes here: its path through the run is unchanged.
//!
//! A stream that reports its own retunes ([`Tuning::follows_stream`]) starts with one open
//! dwell at its first centre; each retune the reader brings ([`Stitch::retune`]) closes the
//! dwell before it, so the stitching is the same as for a timeline known in advance.

use crate::dsp::{Engine, EngineConfig, Geometry, Spectrum, Window};
use crate::measure::census::sweep::SweepView;
use crate::measure::panorama::{Grid, Panorama};
use crate::source::tuning::{Dwell, Step, Tuning};
use crate::source::SourceInfo;
use crate::units::format_hz;
use anyhow::Result;
use num_complex::Complex32;

/// The panorama grid of a retuned input (`None` for one that stays put); an error when its span
/// needs more bins than a grid holds, naming it and the fix.
pub fn grid_of(info: &SourceInfo, fft_size: usize) -> Result<Option<Grid>> {
    let Some(t) = info.tuning.as_ref() else { return Ok(None) };
    t.check_settle(info.sample_rate_hz)?;
    let grid = Grid::new(t, info.sample_rate_hz, fft_size)
        .map_err(|e| anyhow::anyhow!("'{}': {e}", crate::messages::sanitize(&info.label)))?;
    Ok(Some(grid))
}

/// The frequencies an analysis of `info` with `fft_size` bins covers (outer bin edges): one
/// step's span, or the panorama's.
pub fn span_of(info: &SourceInfo, fft_size: usize) -> Result<(f64, f64)> {
    if let Some(g) = grid_of(info, fft_size)? {
        return Ok(g.span_hz());
    }
    let bin = info.sample_rate_hz / fft_size as f64;
    let lo = info.center_hz - (fft_size / 2) as f64 * bin - bin / 2.0;
    Ok((lo, lo + info.sample_rate_hz))
}

/// Of a retuned input, the sweep a census runs on (`None` for a receiver that stays put); an
/// error when the census would `capture` emissions' IQ, which a sweep cannot give whole.
pub fn sweep_view(info: &SourceInfo, fft_size: usize, capture: bool) -> Result<Option<SweepView>> {
    let (Some(grid), Some(t)) = (grid_of(info, fft_size)?, info.tuning.clone()) else {
        return Ok(None);
    };
    if capture {
        anyhow::bail!(
            "'{}' was retuned (a sweep): --capture would cut each emission's samples from whatever dwell the receiver was in; to capture, read one recorded capture with --segment N (or keep the whole input with --record)",
            crate::messages::sanitize(&info.label)
        );
    }
    Ok(Some(SweepView::new(t, grid, (info.sample_rate_hz, fft_size), info.total_samples)))
}

/// A retuned input being stitched.
pub struct Stitch {
    /// The dwells: the input's tuning, or for a stream that reports its retunes, the timeline
    /// learnt so far.
    tuning: Tuning,
    panorama: Panorama,
    /// The dwell the engine is in.
    current: Option<Dwell>,
}

impl Stitch {
    /// For a run of `cfg` over `info`; `Ok(None)` when the input is not retuned.
    pub fn new(info: &SourceInfo, cfg: &EngineConfig) -> Result<Option<Stitch>> {
        let Some(grid) = grid_of(info, cfg.fft_size)? else { return Ok(None) };
        let window = Window::new(cfg.window, cfg.fft_size);
        let step = Geometry::new(&window, info.sample_rate_hz, info.center_hz);
        Ok(info.tuning.as_ref().map(|t| Stitch {
            tuning: if t.follows_stream { t.following(info.center_hz) } else { t.clone() },
            panorama: Panorama::new(grid, &step),
            current: None,
        }))
    }

    /// A retune the stream reported (the first sample at `step.start` was taken at
    /// `step.center_hz`); an error when the panorama's grid has no place for that centre.
    pub fn retune(&mut self, step: &Step) -> Result<(), String> {
        if self.panorama.grid().place_of_centre(step.center_hz).is_none() {
            let listed: Vec<String> =
                self.panorama.grid().centres().iter().map(|&c| format_hz(c)).collect();
            return Err(format!(
                "the stream retuned to {} at sample {}, which is not one of the panorama's centres ({}, from the hop plan or the stream's first sweep); list every centre it visits in --hop-plan FILE",
                format_hz(step.center_hz),
                step.start,
                listed.join(", ")
            ));
        }
        if let Some(d) = self.current {
            self.tuning.forget_before(d.start);
        }
        self.tuning.retune(step.clone());
        Ok(())
    }

    /// The grid place of a dwell's centre (every centre of the tuning has one: the grid is laid
    /// out from them, and [`Stitch::retune`] refuses others).
    fn place(&self, d: &Dwell) -> usize {
        self.panorama.grid().place_of_centre(d.center_hz).unwrap_or(0)
    }

    pub fn panorama(&self) -> &Panorama {
        &self.panorama
    }

    /// Pushes `samples` (the first at index `start`) dwell by dwell, settling time left out;
    /// `row` is called with every complete sweep (and `true`: complete).
    pub fn push(
        &mut self,
        engine: &mut Engine,
        start: u64,
        samples: &[Complex32],
        row: &mut dyn FnMut(&Spectrum, bool),
    ) {
        let mut at = 0usize;
        while at < samples.len() {
            let dwell = self.tuning.dwell_at(start + at as u64);
            if self.current.map(|d| d.start) != Some(dwell.start) {
                self.end_dwell(engine, row);
                self.current = Some(dwell);
            }
            let end =
                dwell.end.map_or(samples.len(), |e| ((e - start) as usize).min(samples.len()));
            let settled = (dwell.start + self.tuning.settle_samples).saturating_sub(start);
            let from = (settled.min(end as u64) as usize).max(at);
            if from < end {
                let place = self.place(&dwell);
                let panorama = &mut self.panorama;
                engine.push(start + from as u64, &samples[from..end], &mut |s| {
                    panorama.add_at(place, s)
                });
            }
            at = end;
        }
    }

    /// Ends the dwell the engine is in: its spectra into the panorama, and the sweep's row to
    /// `row` when this dwell completed it.
    pub fn end_dwell(&mut self, engine: &mut Engine, row: &mut dyn FnMut(&Spectrum, bool)) {
        let Some(d) = self.current.take() else { return };
        let place = self.place(&d);
        let panorama = &mut self.panorama;
        engine.end_dwell(&mut |s| panorama.add_at(place, s));
        if panorama.dwell_done_at(place) {
            row(panorama.take(), true);
        }
    }

    /// Samples were lost inside the current dwell: what the engine holds goes into the
    /// panorama and the unfinished frame is dropped; the dwell goes on after the gap.
    pub fn gap(&mut self, engine: &mut Engine) {
        let Some(d) = self.current else { return };
        let place = self.place(&d);
        let panorama = &mut self.panorama;
        engine.end_dwell(&mut |s| panorama.add_at(place, s));
    }

    /// At the end of input: the last dwell, then an unfinished sweep as a partial row (its
    /// bins not revisited keep their last values) unless some bin was never seen at all.
    pub fn finish(&mut self, engine: &mut Engine, row: &mut dyn FnMut(&Spectrum, bool)) {
        self.end_dwell(engine, row);
        if self.panorama.pending() && !self.panorama.has_unseen() {
            row(self.panorama.take(), false);
        }
    }
}
