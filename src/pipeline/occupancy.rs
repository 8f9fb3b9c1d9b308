//! Setting up occupancy tracking for a run: what one measurement sample is (its dwell in whole
//! FFT hops), the hang and the interval in whole samples, each channel's threshold, and the plan
//! checked against the captured span. Shared by `log` and `measure --plan`.

use crate::dsp::stft::welch_dof;
use crate::dsp::{DspConfig, EngineConfig, Window};
use crate::measure::occupancy::{
    frames_per_sample, noise_false_occupancy, ChannelDef, Occupancy, Timing, DEFAULT_MAX_DWELL_S,
};
use crate::measure::panorama::view_times;
use crate::plan::Plan;
use crate::source::SourceInfo;
use anyhow::Result;

/// What the user asked of the tracking.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct OccupancyRequest {
    /// One measurement sample, seconds; `None` for the default (the most hops in 10 ms).
    pub dwell_s: Option<f64>,
    /// The run's threshold over the noise, dB (a plan channel may override it).
    pub threshold_db: f64,
    pub interval_s: f64,
    pub hang_s: f64,
}

/// Everything derived from the options and the input before the first sample is read.
#[derive(Clone, Debug)]
pub struct OccupancySetup {
    pub engine: EngineConfig,
    pub timing: Timing,
    pub channels: Vec<ChannelDef>,
    pub sample_rate_hz: f64,
    pub interval_s: f64,
    /// The hang time actually used: a whole number of measurement samples.
    pub hang_s: f64,
    pub default_threshold_db: f64,
    pub rbw_hz: f64,
    /// Degrees of freedom of one measurement sample's PSD.
    pub row_dof: f64,
    /// Per plan channel, whether the input ever has it whole in view: always for a receiver
    /// that stays put; of a panorama, false for a channel in a hole or beyond the span.
    pub in_view: Vec<bool>,
}

/// Per plan channel, whether the input has it whole in view. A receiver that stays put must
/// have every channel inside its span (a channel outside it is a mistake in the plan: an
/// error); a panorama's channel that no step sees whole is kept, and logged "not measured".
fn channels_in_view(info: &SourceInfo, fft_size: usize, plan: &Plan) -> Result<Vec<bool>> {
    let rate = info.sample_rate_hz;
    match (super::stitch::grid_of(info, fft_size)?, info.tuning.as_ref()) {
        (Some(grid), Some(t)) => Ok(plan
            .channels
            .iter()
            .map(|c| view_times(t, &grid, rate, c.low_hz(), c.high_hz()).is_some())
            .collect()),
        _ => {
            let (span_lo, span_hi) = super::stitch::span_of(info, fft_size)?;
            plan.check_span_within(span_lo, span_hi, rate / fft_size as f64)?;
            Ok(vec![true; plan.channels.len()])
        }
    }
}

impl OccupancySetup {
    /// Checks the plan against the captured span and works out dwell, hang and interval.
    pub fn new(
        info: &SourceInfo,
        dsp: &DspConfig,
        plan: &Plan,
        req: &OccupancyRequest,
    ) -> Result<OccupancySetup> {
        let rate = info.sample_rate_hz;
        let n = dsp.fft_size;
        let bin = rate / n as f64;
        let in_view = channels_in_view(info, n, plan)?;
        let hop = dsp.hop();
        let k = frames_per_sample(rate, hop, req.dwell_s).map_err(anyhow::Error::msg)?;
        let timing =
            Timing::new(rate, n, hop, k, req.interval_s, req.hang_s).map_err(anyhow::Error::msg)?;
        let window = Window::new(dsp.window, n);
        let channels = plan
            .channels
            .iter()
            .map(|c| ChannelDef {
                low_hz: c.low_hz(),
                high_hz: c.high_hz(),
                threshold_db: c.threshold_db.unwrap_or(req.threshold_db),
            })
            .collect();
        Ok(OccupancySetup {
            hang_s: timing.hang_samples as f64 * timing.stride as f64 / rate,
            engine: dsp.engine(Some(k)),
            timing,
            channels,
            sample_rate_hz: rate,
            interval_s: req.interval_s,
            default_threshold_db: req.threshold_db,
            rbw_hz: window.enbw_bins() * bin,
            row_dof: welch_dof(&window, hop, k),
            in_view,
        })
    }

    /// A tracker for these settings.
    pub fn tracker(&self) -> Occupancy {
        Occupancy::new(self.timing.clone(), self.channels.clone()).with_view(&self.in_view)
    }

    /// The same settings with one interval spanning the whole input (for `measure`).
    pub fn whole_input(mut self) -> OccupancySetup {
        self.timing.interval = u64::MAX;
        self
    }

    pub fn dwell_s(&self) -> f64 {
        self.timing.stride as f64 / self.sample_rate_hz
    }

    /// What the user should know before a long run: what one measurement sample is, and
    /// thresholds that noise alone would cross.
    pub fn notes(&self, plan: &Plan) -> Vec<String> {
        let k = self.engine.frames_per_output.unwrap_or(1);
        let mut notes = vec![format!(
            "{} channel(s); one measurement sample = {:.3} ms ({k} FFT frames of {}, hop {}); hang {:.1} ms; interval {} s",
            plan.channels.len(),
            self.dwell_s() * 1e3,
            self.engine.fft_size,
            self.engine.hop(),
            self.hang_s * 1e3,
            self.interval_s
        )];
        if self.dwell_s() > DEFAULT_MAX_DWELL_S * 1.5 {
            notes.push(format!(
                "one FFT hop is {:.1} ms, longer than the usual 10 ms sample; a smaller --fft gives finer time resolution",
                self.engine.hop() as f64 / self.sample_rate_hz * 1e3
            ));
        }
        let bin = self.sample_rate_hz / self.engine.fft_size as f64;
        let enbw = self.rbw_hz / bin;
        for (c, def) in plan.channels.iter().zip(&self.channels) {
            let p =
                noise_false_occupancy(def.threshold_db, def.width_hz(), bin, enbw, self.row_dof);
            if p > 0.01 {
                notes.push(format!(
                    "channel '{}': at {} dB, noise alone would read as occupied in about {:.1} % of samples; raise the threshold or the dwell",
                    c.name,
                    def.threshold_db,
                    p * 100.0
                ));
            }
        }
        notes
    }
}
