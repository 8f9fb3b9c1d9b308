//! Progress on stderr. For long file runs, a bar redrawn in place (position, speed, time left),
//! shown only when stderr is a terminal, so logs of unattended runs are not filled with carriage
//! returns. For live runs, or when asked (`--progress PERIOD`), [`StatusLine`]: a whole line
//! every period. The texts are built by pure functions and tested; drawing is a thin shell.

use crate::measure::occupancy::Event;
use crate::pipeline::{Consumer, Flow, GapCause, RunEnd, RunInfo};
use crate::source::reader::Block;
use std::io::{self, IsTerminal, Write};
use std::time::{Duration, Instant};

/// Redraws at most this often.
const REDRAW: Duration = Duration::from_millis(250);
/// Width of the bar in characters.
const BAR: usize = 24;

pub struct Progress {
    total_samples: u64,
    sample_rate_hz: f64,
    started: Instant,
    last_draw: Option<Instant>,
    enabled: bool,
}

impl Progress {
    /// A display for a file of `total_samples`; inert when `total_samples` is unknown or stderr
    /// is not a terminal.
    pub fn for_file(total_samples: Option<u64>, sample_rate_hz: f64) -> Progress {
        Progress {
            total_samples: total_samples.unwrap_or(0),
            sample_rate_hz,
            started: Instant::now(),
            last_draw: None,
            enabled: total_samples.is_some_and(|t| t > 0) && std::io::stderr().is_terminal(),
        }
    }

    /// Redraws if enough time has passed since the last time.
    pub fn update(&mut self, done_samples: u64) {
        if !self.enabled || self.last_draw.is_some_and(|t| t.elapsed() < REDRAW) {
            return;
        }
        self.last_draw = Some(Instant::now());
        let text = progress_line(
            done_samples,
            self.total_samples,
            self.sample_rate_hz,
            self.started.elapsed().as_secs_f64(),
        );
        let mut err = std::io::stderr().lock();
        let _ = write!(err, "\r{text}\x1b[K");
        let _ = err.flush();
    }

    /// Removes the line, so that what follows starts on a clean line.
    pub fn clear(&mut self) {
        if self.enabled && self.last_draw.is_some() {
            let mut err = std::io::stderr().lock();
            let _ = write!(err, "\r\x1b[K");
            let _ = err.flush();
            self.last_draw = None;
        }
    }
}

/// The bar follows the blocks as they are handed to the run, and is gone before the run's last
/// words are printed.
impl Consumer for Progress {
    fn block(&mut self, block: &Block) -> io::Result<()> {
        self.update(block.start + block.samples.len() as u64);
        Ok(())
    }

    fn finish(&mut self, _end: &RunEnd, _run: &RunInfo) -> io::Result<()> {
        self.clear();
        Ok(())
    }
}

/// `[#########...............]  37%  22.5 s / 60.0 s  41.3 MS/s  ETA 0:03`
pub fn progress_line(done: u64, total: u64, sample_rate_hz: f64, elapsed_s: f64) -> String {
    let frac = if total > 0 { (done as f64 / total as f64).clamp(0.0, 1.0) } else { 0.0 };
    let filled = (frac * BAR as f64).round() as usize;
    let bar: String = "#".repeat(filled) + &".".repeat(BAR - filled);
    let rate = if elapsed_s > 0.0 { done as f64 / elapsed_s } else { 0.0 };
    let eta = if rate > 0.0 {
        format_clock(total.saturating_sub(done) as f64 / rate)
    } else {
        "-:--".to_string()
    };
    format!(
        "[{bar}] {:>3.0}%  {:.1} s / {:.1} s  {:.1} MS/s  ETA {eta}",
        frac * 100.0,
        done as f64 / sample_rate_hz,
        total as f64 / sample_rate_hz,
        rate / 1e6,
    )
}

/// `m:ss`, or `h:mm:ss` from an hour on.
fn format_clock(seconds: f64) -> String {
    let s = seconds.max(0.0).round() as u64;
    if s >= 3600 {
        format!("{}:{:02}:{:02}", s / 3600, s / 60 % 60, s % 60)
    } else {
        format!("{}:{:02}", s / 60, s % 60)
    }
}

/// Status lines every this long by default, for live input on a terminal.
pub const STATUS_DEFAULT_S: f64 = 60.0;

/// `log --progress` / `census --progress`: one whole line on stderr every period, saying how much
/// input was read, how many occupancy intervals were written and what they held, and what was
/// dropped, so a quiet channel is not mistaken for a dead run (and a stalled input shows as
/// such). Unlike the bar, these are whole lines, fit for a service's journal.
pub struct StatusLine {
    period: Option<Duration>,
    next: Instant,
    started: Instant,
    sample_rate_hz: f64,
    read: u64,
    read_at_last: u64,
    intervals: u64,
    /// Per channel: name, and (samples, occupied) since the last line.
    channels: Vec<(String, u64, f64)>,
    dropped: u64,
}

impl StatusLine {
    /// `every_s`: `Some(0)` never, `Some(p)` every `p` seconds whatever stderr is, `None` every
    /// [`STATUS_DEFAULT_S`] when the input is live and stderr a terminal. `channels`: the plan's
    /// names, in the tracker's order (none for `census`).
    pub fn new(
        every_s: Option<f64>,
        live: bool,
        channels: Vec<String>,
        sample_rate_hz: f64,
    ) -> StatusLine {
        let every = match every_s {
            Some(p) if p > 0.0 => Some(p),
            Some(_) => None,
            None => (live && std::io::stderr().is_terminal()).then_some(STATUS_DEFAULT_S),
        };
        let period = every.map(Duration::from_secs_f64);
        let now = Instant::now();
        StatusLine {
            period,
            next: now + period.unwrap_or_default(),
            started: now,
            sample_rate_hz,
            read: 0,
            read_at_last: 0,
            intervals: 0,
            channels: channels.into_iter().map(|n| (n, 0, 0.0)).collect(),
            dropped: 0,
        }
    }

    /// Whether lines are printed (the file bar then stays off, so the two do not mix).
    pub fn enabled(&self) -> bool {
        self.period.is_some()
    }

    fn line(&mut self) -> String {
        let busiest = self
            .channels
            .iter()
            .filter(|c| c.1 > 0)
            .map(|c| (c.0.as_str(), 100.0 * c.2 / c.1 as f64))
            .max_by(|a, b| a.1.total_cmp(&b.1));
        let text = status_line(&Status {
            clock: time::OffsetDateTime::now_utc(),
            running_s: self.started.elapsed().as_secs_f64(),
            input_s: self.read as f64 / self.sample_rate_hz,
            new_input: self.read > self.read_at_last,
            intervals: self.intervals,
            busiest,
            channels: self.channels.len(),
            dropped_s: self.dropped as f64 / self.sample_rate_hz,
        });
        self.read_at_last = self.read;
        for c in &mut self.channels {
            (c.1, c.2) = (0, 0.0);
        }
        text
    }
}

impl Consumer for StatusLine {
    fn block(&mut self, block: &Block) -> io::Result<()> {
        self.read = self.read.max(block.start + block.samples.len() as u64);
        Ok(())
    }

    fn event(&mut self, event: &Event, _run: &RunInfo) -> io::Result<()> {
        if let Event::Interval(s) = event {
            self.intervals += 1;
            if let Some(c) = self.channels.get_mut(s.channel) {
                c.1 += s.samples;
                c.2 += s.occupied;
            }
        }
        Ok(())
    }

    fn gap(&mut self, from: u64, to: u64, _cause: GapCause, _run: &RunInfo) -> io::Result<()> {
        self.dropped += to.saturating_sub(from);
        Ok(())
    }

    /// Asked at least every 100 ms, also while no input arrives: a stalled input still gets
    /// its line.
    fn poll(&mut self) -> Flow {
        if let Some(p) = self.period {
            if Instant::now() >= self.next {
                self.next += p;
                crate::messages::note(&self.line());
            }
        }
        Flow::Continue
    }
}

/// What one status line says.
pub struct Status<'a> {
    pub clock: time::OffsetDateTime,
    pub running_s: f64,
    pub input_s: f64,
    /// Whether input arrived since the last line.
    pub new_input: bool,
    pub intervals: u64,
    /// The channel with the highest occupancy in the intervals since the last line.
    pub busiest: Option<(&'a str, f64)>,
    pub channels: usize,
    pub dropped_s: f64,
}

/// `12:00:00Z running 10 min 0 s: 600.0 s of input, 70 intervals (busiest since the last
/// line: ops 64.8 % of 7 channels), dropped 0.0 s`.
pub fn status_line(s: &Status) -> String {
    let clock = format!("{:02}:{:02}:{:02}Z", s.clock.hour(), s.clock.minute(), s.clock.second());
    let input = if s.new_input {
        format!("{:.1} s of input", s.input_s)
    } else {
        format!("{:.1} s of input, none new since the last line", s.input_s)
    };
    let occupancy = match (s.channels, s.busiest) {
        (0, _) => String::new(),
        (n, Some((name, pct))) => {
            format!(
                ", {} intervals (busiest since the last line: {name} {pct:.1} % of {n} channels)",
                s.intervals
            )
        }
        (_, None) => format!(", {} intervals (none completed since the last line)", s.intervals),
    };
    format!(
        "{clock} running {}: {input}{occupancy}, dropped {:.1} s",
        format_clock(s.running_s),
        s.dropped_s
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_status_line_says_input_intervals_occupancy_and_drops() {
        let clock = time::macros::datetime!(2026-12-03 22:10:00 UTC);
        let mut s = Status {
            clock,
            running_s: 600.0,
            input_s: 600.0,
            new_input: true,
            intervals: 70,
            busiest: Some(("ops", 64.81)),
            channels: 7,
            dropped_s: 0.0,
        };
        assert_eq!(
            status_line(&s),
            "22:10:00Z running 10:00: 600.0 s of input, 70 intervals (busiest since the last line: ops 64.8 % of 7 channels), dropped 0.0 s"
        );
        (s.new_input, s.busiest, s.channels) = (false, None, 0);
        assert_eq!(
            status_line(&s),
            "22:10:00Z running 10:00: 600.0 s of input, none new since the last line, dropped 0.0 s"
        );
    }

    #[test]
    fn the_line_shows_position_rate_and_eta() {
        // 24 MS of 96 MS at 2.4 MS/s done in 2 s: 12 MS/s, 72 MS left → 6 s.
        let line = progress_line(24_000_000, 96_000_000, 2.4e6, 2.0);
        assert_eq!(line, "[######..................]  25%  10.0 s / 40.0 s  12.0 MS/s  ETA 0:06");
        assert!(progress_line(0, 10, 1.0, 0.0).ends_with("ETA -:--"));
        assert_eq!(format_clock(3725.0), "1:02:05");
    }
}
