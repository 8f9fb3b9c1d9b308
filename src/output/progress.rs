//! A one-line progress display on stderr for long file runs: position, speed and time left.
//!
//! Shown only when stderr is a terminal, so logs of unattended runs are not filled with carriage
//! returns. The text is built by a pure function and tested; drawing is a thin shell around it.

use crate::pipeline::{Consumer, RunEnd, RunInfo};
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_line_shows_position_rate_and_eta() {
        // 24 MS of 96 MS at 2.4 MS/s done in 2 s: 12 MS/s, 72 MS left → 6 s.
        let line = progress_line(24_000_000, 96_000_000, 2.4e6, 2.0);
        assert_eq!(line, "[######..................]  25%  10.0 s / 40.0 s  12.0 MS/s  ETA 0:06");
        assert!(progress_line(0, 10, 1.0, 0.0).ends_with("ETA -:--"));
        assert_eq!(format_clock(3725.0), "1:02:05");
    }
}
