//! The tuning timeline of a retuned stream: which centre frequency each stretch of samples was
//! taken at, so that the DSP can cut frames per dwell and stitch the steps into one panorama.
//!
//! It travels with the samples in [`SourceInfo::tuning`](super::SourceInfo): a SigMF recording's
//! captures at different `core:frequency` make one (the captures *are* the dwells), and a raw
//! stream with `--hop-plan FILE` makes a periodic one (the plan repeats until the input ends).
//!
//! A stream that says where it is tuned while it runs (VITA 49 context packets) cannot have its
//! timeline fixed before the run: its retunes travel with the samples instead, as [`Step`]s on
//! the blocks the reader delivers ([`SampleSource::take_retunes`]), each before the first sample
//! it applies to. What must be fixed before the first sample is the panorama's grid (every
//! consumer is sized from it): `--hop-plan` gives it (the plan's centres make the grid and its
//! dwell times the expected observation and revisit times), or without a plan a VITA 49 source
//! learns the same from the stream's first sweep, read ahead and held before the run starts
//! (`vita49::learn`); either way the stream's own retunes say when each dwell begins
//! ([`Tuning::follows_stream`]), and a stream that visits a centre not in the grid ends the
//! input with an error naming the centre.
//! Each dwell's first [`Tuning::settle_samples`] are skipped (a receiver's synthesiser and AGC
//! settle after a retune), and only [`Tuning::usable`] of each step's rate is kept (the outer
//! bins lie in the receiver's anti-alias filter roll-off).

use super::{InputIssues, InputRequest, LinkLoss, SampleSource, SourceInfo};
use crate::units::{format_hz, parse_duration, parse_hz};
use anyhow::{bail, Context, Result};
use num_complex::Complex32;
use std::sync::atomic::AtomicBool;
use std::sync::Arc;

/// Default share of each step's span that is kept: 80 %. Common practice: a receiver's
/// decimating filter is flat over about the central 80 % of its output rate and rolls off (and
/// aliases) in the outer 10 % on each side; the FFT window itself spoils only a few bins at the
/// edges (its main lobe), far less than the filter does.
pub const DEFAULT_USABLE: f64 = 0.8;

/// One retune: from `start` (index in the delivered stream) the receiver sat at `center_hz`.
#[derive(Clone, Debug, PartialEq)]
pub struct Step {
    pub start: u64,
    pub center_hz: f64,
}

/// Where the receiver was tuned over the stream.
#[derive(Clone, Debug, PartialEq)]
pub struct Tuning {
    /// Retunes in order; the first starts at sample 0.
    pub steps: Vec<Step>,
    /// For a hop plan: the plan repeats every `period` samples (`steps` is one cycle).
    pub period: Option<u64>,
    /// Samples skipped at the start of every dwell (`--settle`).
    pub settle_samples: u64,
    /// Share of each step's span kept, 0 < usable ≤ 1 (`--usable`).
    pub usable: f64,
    /// The stream itself says when it retunes (VITA 49 with `--hop-plan`): `steps` and `period`
    /// are the plan (the grid's centres, the expected dwells), and the dwells measured come from
    /// the stream's retunes ([`Tuning::following`]).
    pub follows_stream: bool,
}

/// What a source that reports its own retunes says about them (see the module doc).
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct StreamRetunes {
    /// The band each step passes, when the stream says (a VITA 49 context's bandwidth field):
    /// the usable share of the span unless `--usable` is given.
    pub bandwidth_hz: Option<f64>,
}

/// One stay at one centre.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Dwell {
    /// Counts every dwell of the stream in order (a hop plan's cycles included).
    pub visit: u64,
    /// Index of its step in [`Tuning::steps`].
    pub step: usize,
    pub center_hz: f64,
    pub start: u64,
    /// One past its last sample; `None` for the last dwell of a recording.
    pub end: Option<u64>,
}

impl Tuning {
    /// A timeline from a recording's segments (sample start, centre); `None` when every segment
    /// has the same centre (nothing to stitch).
    pub fn from_segments(segments: &[(u64, f64)]) -> Option<Tuning> {
        let first = segments.first()?.1;
        if segments.iter().all(|s| s.1 == first) {
            return None;
        }
        let steps = segments.iter().map(|&(start, center_hz)| Step { start, center_hz }).collect();
        Some(Tuning {
            steps,
            period: None,
            settle_samples: 0,
            usable: DEFAULT_USABLE,
            follows_stream: false,
        })
    }

    /// The timeline of a stream that reports its own retunes, begun at `center_hz`: one open
    /// dwell, to which [`Tuning::retune`] adds the stream's retunes as they arrive.
    pub fn following(&self, center_hz: f64) -> Tuning {
        Tuning { steps: vec![Step { start: 0, center_hz }], period: None, ..self.clone() }
    }

    /// Adds a retune of a followed stream. One that takes effect before the last known retune
    /// (a context packet stamped earlier than one already seen) replaces those after it.
    pub fn retune(&mut self, step: Step) {
        let keep = self.steps.partition_point(|s| s.start < step.start).max(1);
        if step.start == 0 {
            self.steps[0].center_hz = step.center_hz;
            self.steps.truncate(1);
            return;
        }
        self.steps.truncate(keep);
        if self.steps.last().map(|s| s.center_hz) != Some(step.center_hz) {
            self.steps.push(step);
        }
    }

    /// Forgets the dwells of a followed stream that end before sample `at`, so a long run
    /// keeps a few steps, not one per retune (their `visit` numbers then start again at 0:
    /// dwells are told apart by their `start`).
    pub fn forget_before(&mut self, at: u64) {
        let k = self.steps.partition_point(|s| s.start <= at).saturating_sub(1);
        if self.follows_stream && k > 0 {
            self.steps.drain(..k);
        }
    }

    /// The distinct centres visited, lowest first.
    pub fn centres(&self) -> Vec<f64> {
        let mut c: Vec<f64> = self.steps.iter().map(|s| s.center_hz).collect();
        c.sort_by(f64::total_cmp);
        c.dedup();
        c
    }

    /// The dwell holding sample `at`.
    pub fn dwell_at(&self, at: u64) -> Dwell {
        let (cycle, within) = match self.period {
            Some(p) => (at / p, at % p),
            None => (0, at),
        };
        let step = self.steps.partition_point(|s| s.start <= within).saturating_sub(1);
        let base = cycle * self.period.unwrap_or(0);
        let end = match (self.steps.get(step + 1), self.period) {
            (Some(next), _) => Some(base + next.start),
            (None, Some(p)) => Some(base + p),
            (None, None) => None,
        };
        Dwell {
            visit: cycle * self.steps.len() as u64 + step as u64,
            step,
            center_hz: self.steps[step].center_hz,
            start: base + self.steps[step].start,
            end,
        }
    }

    /// Checks every dwell is longer than the settling time (else nothing would be measured).
    pub fn check_settle(&self, rate_hz: f64) -> Result<()> {
        let mut starts: Vec<u64> = self.steps.iter().map(|s| s.start).collect();
        starts.extend(self.period);
        for (k, w) in starts.windows(2).enumerate() {
            if w[1] - w[0] <= self.settle_samples {
                bail!(
                    "step {} (at {}) lasts {:.6} s, no longer than the settling time {:.6} s: nothing of it would be measured; give a shorter --settle",
                    k + 1,
                    format_hz(self.steps[k].center_hz),
                    (w[1] - w[0]) as f64 / rate_hz,
                    self.settle_samples as f64 / rate_hz
                );
            }
        }
        Ok(())
    }
}

/// Reads a hop plan: one step a line, `CENTER DWELL` (`433.05M 50ms`), in the order the receiver
/// visits them; blank lines and `#` comments are skipped. The plan repeats until the input ends.
/// `name` is the file's name for messages.
pub fn parse_hop_plan(text: &str, name: &str, rate_hz: f64) -> Result<Tuning> {
    let mut steps = Vec::new();
    let mut at = 0u64;
    for (i, raw) in text.lines().enumerate() {
        let line = raw.split('#').next().unwrap_or("").trim();
        if line.is_empty() {
            continue;
        }
        let n = i + 1;
        let fields: Vec<&str> = line.split_whitespace().collect();
        let [centre, dwell] = fields[..] else {
            bail!(
                "{name} line {n}: expected two fields, a centre frequency and a dwell time (e.g. '433.05M 50ms'), found {}; fix the line",
                fields.len()
            );
        };
        let center_hz = parse_hz(centre).map_err(|e| {
            anyhow::anyhow!(
                "{name} line {n}: the centre frequency: {e}; write it in Hz, e.g. 433.05M"
            )
        })?;
        let dwell = parse_duration(dwell).map_err(|e| {
            anyhow::anyhow!("{name} line {n}: the dwell time: {e}; write it with a unit, e.g. 50ms")
        })?;
        let samples = (dwell.as_secs_f64() * rate_hz).round() as u64;
        if samples == 0 {
            bail!(
                "{name} line {n}: a dwell of {} s holds no sample at {} samples/s; give a longer dwell",
                dwell.as_secs_f64(),
                rate_hz
            );
        }
        steps.push(Step { start: at, center_hz });
        at = at.checked_add(samples).ok_or_else(|| {
            anyhow::anyhow!(
                "{name} line {n}: the plan's dwells add up beyond 2^64 samples; shorten them"
            )
        })?;
    }
    if steps.len() < 2 {
        bail!(
            "{name}: a hop plan needs at least two steps (lines 'CENTER DWELL'), found {}; add the centres the receiver visits",
            steps.len()
        );
    }
    Ok(Tuning {
        steps,
        period: Some(at),
        settle_samples: 0,
        usable: DEFAULT_USABLE,
        follows_stream: false,
    })
}

/// Applies the request's `--hop-plan`, `--settle` and `--usable` to an opened source; refuses
/// them where they cannot apply.
pub fn apply(src: Box<dyn SampleSource>, req: &InputRequest) -> Result<Box<dyn SampleSource>> {
    if req.hop_plan.is_none() && req.settle_s.is_none() && req.usable.is_none() {
        return Ok(src);
    }
    let mut info = src.info().clone();
    if let Some(path) = req.hop_plan.as_deref() {
        if info.tuning.is_some() {
            bail!(
                "'{}' says where it was tuned itself (captures at different core:frequency); drop --hop-plan, or read one capture with --segment N",
                super::sanitize(&info.label)
            );
        }
        let shown = super::sanitize(path);
        let text = std::fs::read_to_string(path)
            .with_context(|| format!("cannot read the hop plan '{shown}'"))?;
        let mut plan = parse_hop_plan(&text, &shown, info.sample_rate_hz)?;
        if let Some(stream) = src.retunes() {
            follow_stream(&mut plan, &stream, &info, &shown)?;
        }
        info.tuning = Some(plan);
    }
    let Some(t) = info.tuning.as_mut() else {
        bail!(
            "--settle and --usable apply to a retuned input only (a SigMF recording whose captures change core:frequency, or --hop-plan FILE); '{}' stays at one centre",
            super::sanitize(&info.label)
        );
    };
    if let Some(s) = req.settle_s {
        t.settle_samples = (s * info.sample_rate_hz).round() as u64;
    }
    if let Some(u) = req.usable {
        t.usable = u;
    }
    if t.follows_stream {
        // Only a retune the stream reports ends a dwell: the plan's dwell times are the
        // expected ones, not checked against the settling time here.
        return Ok(Box::new(Retuned { inner: src, info }));
    }
    t.check_settle(info.sample_rate_hz)?;
    Ok(Box::new(Retuned { inner: src, info }))
}

/// Makes `plan` the grid of a stream that reports its own retunes (module doc): its first
/// centre must be one of the plan's, and the stream's bandwidth, when it gives one, is the
/// usable share of each step.
fn follow_stream(
    plan: &mut Tuning,
    stream: &StreamRetunes,
    info: &SourceInfo,
    shown: &str,
) -> Result<()> {
    plan.follows_stream = true;
    if !plan.centres().iter().any(|&c| same_centre(c, info.center_hz)) {
        bail!(
            "'{}' starts at {}, which the hop plan '{shown}' does not list; add it (the plan's centres make the panorama)",
            super::sanitize(&info.label),
            format_hz(info.center_hz)
        );
    }
    keep_stream_band(plan, stream, info.sample_rate_hz);
    Ok(())
}

/// The stream's bandwidth, when it gives one, as the usable share of each step of `plan`.
pub(super) fn keep_stream_band(plan: &mut Tuning, stream: &StreamRetunes, rate_hz: f64) {
    if let Some(b) = stream.bandwidth_hz.filter(|b| *b > 0.0) {
        plan.usable = (b / rate_hz).min(1.0);
    }
}

/// True when two centre frequencies are one tuning: within 0.5 Hz (a VITA 49 context's radix-20
/// field resolves about 1 µHz, so this is a guard against arithmetic noise only).
pub fn same_centre(a: f64, b: f64) -> bool {
    (a - b).abs() <= 0.5
}

/// A source whose description carries a tuning given on the command line.
struct Retuned {
    inner: Box<dyn SampleSource>,
    info: SourceInfo,
}

impl SampleSource for Retuned {
    fn info(&self) -> &SourceInfo {
        &self.info
    }

    fn read(&mut self, out: &mut [Complex32]) -> Result<usize> {
        self.inner.read(out)
    }

    fn issues(&self) -> InputIssues {
        self.inner.issues()
    }

    fn rewind(&mut self) -> Result<()> {
        self.inner.rewind()
    }

    fn take_lost(&mut self) -> u64 {
        self.inner.take_lost()
    }

    fn lost_cause(&self) -> LinkLoss {
        self.inner.lost_cause()
    }

    fn watch_stop(&mut self, stop: Arc<AtomicBool>) {
        self.inner.watch_stop(stop)
    }

    fn retunes(&self) -> Option<StreamRetunes> {
        self.inner.retunes()
    }

    fn take_retunes(&mut self) -> Vec<Step> {
        self.inner.take_retunes()
    }

    fn replaying(&self) -> bool {
        self.inner.replaying()
    }
}

/// Parses `--usable`: a fraction in (0, 1].
pub fn parse_usable(text: &str) -> Result<f64, String> {
    match text.trim().parse::<f64>() {
        Ok(f) if f > 0.0 && f <= 1.0 => Ok(f),
        _ => Err(format!(
            "'{}' is not a share of the span: give a number above 0 and at most 1 (e.g. 0.8 keeps the central 80 %)",
            crate::messages::sanitize(text)
        )),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_hop_plan_repeats_and_finds_its_dwells() {
        let t = parse_hop_plan("# Wrenhollow Ridge\n433.0M 1ms\n\n435M 2ms # second\n", "p", 1e6)
            .unwrap();
        assert_eq!(t.period, Some(3000));
        let d = t.dwell_at(3500);
        assert_eq!((d.visit, d.step, d.center_hz, d.start, d.end), (2, 0, 433e6, 3000, Some(4000)));
        let d = t.dwell_at(2999);
        assert_eq!((d.visit, d.step, d.start, d.end), (1, 1, 1000, Some(3000)));
    }

    #[test]
    fn bad_hop_plans_say_line_what_and_fix() {
        let e = parse_hop_plan("433M 1ms\n434M\n", "plan.txt", 1e6).unwrap_err().to_string();
        assert!(e.contains("plan.txt line 2") && e.contains("two fields"), "{e}");
        let e = parse_hop_plan("433M 1ms\nfoo 1ms\n", "p", 1e6).unwrap_err().to_string();
        assert!(e.contains("line 2") && e.contains("centre frequency"), "{e}");
        let e = parse_hop_plan("433M 1ms\n434M 1parsec\n", "p", 1e6).unwrap_err().to_string();
        assert!(e.contains("line 2") && e.contains("dwell time"), "{e}");
        let e = parse_hop_plan("433M 1ms\n", "p", 1e6).unwrap_err().to_string();
        assert!(e.contains("at least two steps"), "{e}");
        let e = parse_hop_plan("433M 0.1us\n434M 1ms\n", "p", 1e6).unwrap_err().to_string();
        assert!(e.contains("line 1") && e.contains("no sample"), "{e}");
    }

    #[test]
    fn a_followed_stream_learns_its_dwells_as_it_retunes() {
        let plan = parse_hop_plan("433M 1ms\n434M 1ms\n", "p", 1e6).unwrap();
        let mut t = Tuning { follows_stream: true, ..plan }.following(433e6);
        assert_eq!(t.dwell_at(5_000).end, None, "one open dwell until the stream retunes");
        t.retune(Step { start: 700, center_hz: 434e6 });
        t.retune(Step { start: 1900, center_hz: 433e6 });
        let d = t.dwell_at(1000);
        assert_eq!((d.center_hz, d.start, d.end), (434e6, 700, Some(1900)));
        // A retune stamped before one already known replaces it.
        t.retune(Step { start: 1500, center_hz: 433e6 });
        assert_eq!(t.dwell_at(1600).start, 1500);
        t.forget_before(1600);
        assert_eq!(t.steps, vec![Step { start: 1500, center_hz: 433e6 }]);
        assert_eq!(t.dwell_at(9_000).start, 1500);
    }

    #[test]
    fn recordings_at_one_centre_need_no_stitching() {
        assert!(Tuning::from_segments(&[(0, 1e6), (10, 1e6)]).is_none());
        let t = Tuning::from_segments(&[(0, 1e6), (10, 2e6)]).unwrap();
        assert_eq!(t.dwell_at(5).end, Some(10));
        assert_eq!(t.dwell_at(50).end, None);
        assert_eq!(t.centres(), vec![1e6, 2e6]);
    }
}
