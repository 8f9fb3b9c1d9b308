//! The observation time of a site (Report ITU-R SM.2256's term): which part of the period its
//! runs of `log` measured, and the gaps, each with its cause: no run (and how the run before it
//! stopped), or input dropped inside a run (`behind`, `disconnected`, `not_a_number`).
//!
//! A run spans from its start record to the last time any of its records reaches (its `stop`
//! record when it ended in order). The period is `--from`..`--to` when given, else from the
//! first run's start to the last run's end, so 28 s measured over a night reads as 28 s of
//! eight hours, not as 28 s.

use crate::output::summary::LogSummary;

/// Gaps shorter than this are rounding of the logs' millisecond stamps, not gaps.
const LEAST_GAP_S: f64 = 0.5;

/// One run of `log`, as its records tell it.
#[derive(Clone, Debug, Default)]
pub struct RunSum {
    pub site: String,
    /// Seconds since the epoch of the run's time 0, when it has a clock.
    pub origin: Option<f64>,
    /// Earliest and latest run time its records reach.
    pub t_start_s: f64,
    pub t_end_s: f64,
    /// The `reason` of its stop record; `None` when it has none (cut off, or still running).
    pub stop: Option<String>,
    pub drops: Vec<DropSpan>,
    /// Of a run over a retuned receiver, what it swept (from its start record's `panorama`),
    /// in words: its channels were in view only part of the time.
    pub sweep: Option<String>,
}

/// Input dropped inside a run (a `dropped` record).
#[derive(Clone, Debug, PartialEq)]
pub struct DropSpan {
    pub t_start_s: f64,
    pub t_end_s: f64,
    pub cause: String,
}

impl RunSum {
    /// Widens the run to a record's times.
    pub fn reach(&mut self, t_start_s: f64, t_end_s: Option<f64>) {
        self.t_start_s = self.t_start_s.min(t_start_s);
        self.t_end_s = self.t_end_s.max(t_end_s.unwrap_or(t_start_s));
    }

    pub fn length_s(&self) -> f64 {
        (self.t_end_s - self.t_start_s).max(0.0)
    }

    /// The run's span in epoch seconds.
    pub fn span(&self) -> Option<(f64, f64)> {
        self.origin.map(|o| (o + self.t_start_s, o + self.t_end_s.max(self.t_start_s)))
    }
}

/// Why a stretch was not measured.
#[derive(Clone, Debug, PartialEq)]
pub enum GapCause {
    /// No run: after a run that stopped for `reason` (`None`: a run without a stop record), or
    /// before the first run of the period (`first`).
    NoRun { after: Option<String>, first: bool },
    /// Samples dropped inside a run.
    Dropped(String),
}

/// A stretch of the period not measured.
#[derive(Clone, Debug, PartialEq)]
pub struct Gap {
    pub from: f64,
    pub to: f64,
    pub cause: GapCause,
}

/// A run as the coverage lists it.
#[derive(Clone, Debug, PartialEq)]
pub struct RunView {
    pub from: Option<f64>,
    pub to: Option<f64>,
    pub length_s: f64,
    pub stop: Option<String>,
    /// What the run swept, when it was a panorama ([`RunSum::sweep`]).
    pub sweep: Option<String>,
}

/// A site's observation time over the period.
#[derive(Clone, Debug, PartialEq)]
pub struct SiteCoverage {
    pub site: String,
    /// The period (epoch seconds), when the runs have clocks or `--from`/`--to` give it.
    pub period: Option<(f64, f64)>,
    /// Seconds the runs spanned within the period, and of those lost to dropped input.
    pub observed_s: f64,
    pub lost_s: f64,
    pub runs: Vec<RunView>,
    /// In time order.
    pub gaps: Vec<Gap>,
}

impl SiteCoverage {
    pub fn measured_s(&self) -> f64 {
        (self.observed_s - self.lost_s).max(0.0)
    }

    pub fn period_s(&self) -> Option<f64> {
        self.period.map(|(a, b)| (b - a).max(0.0))
    }

    /// Measured over the period, %.
    pub fn pct(&self) -> Option<f64> {
        let p = self.period_s()?;
        (p > 0.0).then(|| 100.0 * self.measured_s() / p)
    }
}

/// What a stop reason means to the operator.
pub fn stop_words(reason: Option<&str>) -> &'static str {
    match reason {
        Some("end_of_input") => "the input ended (capture program stopped or pipe closed)",
        Some("limit") => "planned end (--seconds reached)",
        Some("interrupted") => "stopped by the operator (SIGINT, Ctrl-C)",
        Some("terminated") => {
            "stopped by a signal (SIGTERM or SIGHUP: service stop, session closed)"
        }
        Some("input_error") => "the input failed (input_error)",
        Some(_) => "stopped (a reason this version does not know)",
        None => "no stop record (cut off: power cut or killed; or still running)",
    }
}

/// The coverage of `site`.
pub fn site_coverage(summary: &LogSummary, site: &str) -> SiteCoverage {
    let s = &summary.settings;
    let runs: Vec<&RunSum> = summary.runs.values().filter(|r| r.site == site).collect();
    let clip = |(a, b): (f64, f64)| {
        let a = s.from.map_or(a, |f| a.max(f));
        let b = s.to.map_or(b, |t| b.min(t));
        (b > a).then_some((a, b))
    };
    let mut views: Vec<RunView> = Vec::new();
    // Spans with clocks, clipped, and the stop reason of each.
    let mut spans: Vec<(f64, f64, Option<String>)> = Vec::new();
    let mut observed_s = 0.0;
    let mut lost_s = 0.0;
    let mut gaps = Vec::new();
    for r in &runs {
        match r.span() {
            Some(span) => {
                let Some((a, b)) = clip(span) else { continue };
                spans.push((a, b, r.stop.clone()));
                views.push(RunView {
                    from: Some(a),
                    to: Some(b),
                    length_s: b - a,
                    stop: r.stop.clone(),
                    sweep: r.sweep.clone(),
                });
                let o = r.origin.unwrap_or(0.0);
                for d in &r.drops {
                    if let Some((da, db)) = clip((o + d.t_start_s, o + d.t_end_s)) {
                        lost_s += db - da;
                        gaps.push(Gap {
                            from: da,
                            to: db,
                            cause: GapCause::Dropped(d.cause.clone()),
                        });
                    }
                }
            }
            None if s.from.is_none() && s.to.is_none() => {
                observed_s += r.length_s();
                lost_s += r.drops.iter().map(|d| (d.t_end_s - d.t_start_s).max(0.0)).sum::<f64>();
                views.push(RunView {
                    from: None,
                    to: None,
                    length_s: r.length_s(),
                    stop: r.stop.clone(),
                    sweep: r.sweep.clone(),
                });
            }
            None => {}
        }
    }
    spans.sort_by(|a, b| a.0.total_cmp(&b.0));
    views.sort_by(|a, b| a.from.unwrap_or(f64::MIN).total_cmp(&b.from.unwrap_or(f64::MIN)));
    let period = match (s.from, s.to) {
        (Some(f), Some(t)) => Some((f, t)),
        _ => {
            let first = spans.iter().map(|x| x.0).reduce(f64::min);
            let last = spans.iter().map(|x| x.1).reduce(f64::max);
            first.zip(last).map(|(a, b)| (s.from.unwrap_or(a), s.to.unwrap_or(b)))
        }
    };
    if let Some((start, end)) = period {
        // Walk the runs in order: a hole between the end reached so far and the next run's start
        // is a gap, caused by how the run that reached that end stopped.
        let mut reached = start;
        let mut after: Option<Option<String>> = None;
        for (a, b, stop) in spans.iter().chain([(end, end, None)].iter()) {
            if *a - reached > LEAST_GAP_S {
                let cause =
                    GapCause::NoRun { after: after.clone().flatten(), first: after.is_none() };
                gaps.push(Gap { from: reached, to: *a, cause });
            }
            if *b > reached {
                observed_s += b - a.max(reached);
                reached = *b;
                after = Some(stop.clone());
            }
        }
    }
    gaps.sort_by(|a, b| a.from.total_cmp(&b.from));
    SiteCoverage { site: site.to_string(), period, observed_s, lost_s, runs: views, gaps }
}
