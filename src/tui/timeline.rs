//! How the monitor tells time: UTC time of day when the start of the input is known (SigMF
//! `core:datetime`, `--start`, or the wall clock when a live input started), seconds of input
//! otherwise; the `u` key switches between the two.
//!
//! Times come from sample indices through the run's [`Clock`], never from when a row happened to
//! arrive, so a replayed recording shows the times it was made at. A looping file is timed
//! within the loop.

use super::history::Row;
use crate::pipeline::clock::Clock;
use crate::units::format_clock as relative_clock;
use time::{OffsetDateTime, UtcOffset};

/// What time labels show.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum TimeMode {
    /// UTC time of day (falls back to relative when the start is unknown).
    Utc,
    /// Time since the first sample of the input.
    Relative,
}

/// The input's clock and how labels read it.
#[derive(Clone, Debug, PartialEq)]
pub struct TimeBase {
    pub clock: Clock,
    /// Samples in one pass of a looping file.
    pub wrap: Option<u64>,
    pub mode: TimeMode,
}

impl TimeBase {
    pub fn new(clock: Clock, wrap: Option<u64>) -> TimeBase {
        TimeBase { clock, wrap, mode: TimeMode::Utc }
    }

    /// A base with no start time: relative labels only.
    pub fn relative(rate: f64) -> TimeBase {
        TimeBase::new(Clock::new(rate, None), None)
    }

    /// Whether labels are UTC now (the mode asks for it and the start is known).
    pub fn is_utc(&self) -> bool {
        self.mode == TimeMode::Utc && (self.clock.start.is_some() || !self.clock.marks.is_empty())
    }

    fn within_loop(&self, sample: u64) -> u64 {
        match self.wrap {
            Some(w) if w > 0 => sample % w,
            _ => sample,
        }
    }

    /// UTC time at the end of a span ending before sample `end`, if known.
    pub fn utc_at(&self, end: u64) -> Option<OffsetDateTime> {
        let t = self.clock.end_time(self.within_loop(end))?;
        t.checked_to_offset(UtcOffset::UTC)
    }

    /// The time a row's label counts in: seconds of the UTC day or seconds of input.
    pub fn label_seconds(&self, row: &Row) -> f64 {
        if self.is_utc() {
            if let Some(t) = self.utc_at(row.end_sample) {
                return seconds_of_day(t);
            }
        }
        match self.wrap {
            Some(w) if w > 0 => row.time_s % (w as f64 / self.clock.rate),
            _ => row.time_s,
        }
    }

    /// A gutter label (five columns) for a time in [`TimeBase::label_seconds`] units at a slot
    /// of `every` seconds: UTC labels read `HH:MM` on the minute and `  :SS` between (the hour
    /// and minute are on the label above); relative labels read `mm:ss`.
    pub fn gutter_label(&self, t_s: f64, every: f64) -> String {
        if !self.is_utc() {
            return relative_clock(t_s);
        }
        let s = t_s.max(0.0).round() as u64 % 86_400;
        if s % 60 == 0 || every >= 60.0 {
            format!("{:02}:{:02}", s / 3600, (s % 3600) / 60)
        } else {
            format!("  :{:02}", s % 60)
        }
    }

    /// The time of a row for the source line: `06:31:02 UTC` or `01:05` of input.
    pub fn long_label(&self, end: u64) -> String {
        if self.is_utc() {
            if let Some(t) = self.utc_at(end) {
                return format!("{:02}:{:02}:{:02} UTC", t.hour(), t.minute(), t.second());
            }
        }
        relative_clock(self.clock.seconds(self.within_loop(end)))
    }
}

/// Seconds since midnight, with the fraction.
pub fn seconds_of_day(t: OffsetDateTime) -> f64 {
    t.hour() as f64 * 3600.0
        + t.minute() as f64 * 60.0
        + t.second() as f64
        + t.nanosecond() as f64 * 1e-9
}

#[cfg(test)]
mod tests {
    use super::*;
    use time::format_description::well_known::Rfc3339;

    fn base(start: &str) -> TimeBase {
        let t = OffsetDateTime::parse(start, &Rfc3339).unwrap();
        TimeBase::new(Clock::new(1e6, Some(t)), None)
    }

    #[test]
    fn utc_labels_follow_the_start_time() {
        let b = base("2031-04-17T06:30:00Z");
        assert!(b.is_utc());
        // 65.5 s of input at 1 MS/s.
        assert_eq!(b.long_label(65_500_000), "06:31:05 UTC");
        let mut row = Row::new(
            crate::tui::view::BinGrid { first_hz: 0.0, bin_hz: 1.0, len: 1 },
            &[0.0],
            65.5,
        );
        row.end_sample = 65_500_000;
        assert!((b.label_seconds(&row) - (6.0 * 3600.0 + 31.0 * 60.0 + 5.5)).abs() < 1e-3);
        assert_eq!(b.gutter_label(6.0 * 3600.0 + 31.0 * 60.0, 5.0), "06:31");
        assert_eq!(b.gutter_label(6.0 * 3600.0 + 31.0 * 60.0 + 15.0, 5.0), "  :15");
        // A start in another offset is shown in UTC.
        let b = base("2031-04-17T08:30:00+02:00");
        assert_eq!(b.long_label(0), "06:30:00 UTC");
    }

    #[test]
    fn relative_when_unknown_or_asked() {
        let b = TimeBase::relative(1e6);
        assert!(!b.is_utc());
        assert_eq!(b.long_label(65_500_000), "01:05");
        let mut b = base("2031-04-17T06:30:00Z");
        b.mode = TimeMode::Relative;
        assert_eq!(b.long_label(65_500_000), "01:05");
        assert_eq!(b.gutter_label(65.0, 5.0), "01:05");
    }

    #[test]
    fn a_loop_restarts_the_clock() {
        let mut b = base("2031-04-17T06:30:00Z");
        b.wrap = Some(4_000_000);
        assert_eq!(b.long_label(5_000_000), "06:30:01 UTC");
    }
}
