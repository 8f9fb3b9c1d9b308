//! Sample-exact time: seconds and wall-clock stamps computed from sample indices, never from the
//! time a block happened to arrive, so a replay of a recording gives the same numbers.
//!
//! A recording made of capture segments with their own start times (SigMF `captures`) is timed
//! per segment: sample `i` gets the time of the segment holding it plus its offset in that
//! segment, so a pause between segments shows in the stamps. All arithmetic on times is checked:
//! a time beyond the range of dates (year 9999) gives no stamp rather than a panic.

use crate::source::SourceInfo;
use time::macros::format_description;
use time::{OffsetDateTime, UtcOffset};

/// Seconds and wall-clock stamps from sample indices.
#[derive(Clone, Debug, PartialEq)]
pub struct Clock {
    pub rate: f64,
    /// Time of sample 0, when known.
    pub start: Option<OffsetDateTime>,
    /// First sample index and start time of each timed segment, in order of index; empty when
    /// `start` times every sample.
    pub marks: Vec<(u64, OffsetDateTime)>,
}

impl Clock {
    /// One start time for every sample.
    pub fn new(rate: f64, start: Option<OffsetDateTime>) -> Clock {
        Clock { rate, start, marks: Vec::new() }
    }

    /// The clock of a source: its segments' start times when it has them. `start` is the time of
    /// sample 0 the run settled on; if it differs from the source's own, every segment moves by
    /// the difference.
    pub fn for_source(source: &SourceInfo, start: Option<OffsetDateTime>) -> Clock {
        let mut clock = Clock::new(source.sample_rate_hz, start);
        let shift = match (start, source.start_time) {
            (Some(s), Some(own)) => s - own,
            _ => return clock,
        };
        clock.marks = source
            .segments
            .iter()
            .filter_map(|seg| Some((seg.sample_start, seg.start_time?.checked_add(shift)?)))
            .collect();
        clock
    }

    pub fn seconds(&self, sample: u64) -> f64 {
        sample as f64 / self.rate
    }

    /// Time of sample `sample`, if known and within the range of dates.
    pub fn time(&self, sample: u64) -> Option<OffsetDateTime> {
        self.time_in_segment_of(sample, sample)
    }

    /// The time of `sample` counted from the start of the segment that holds `anchor`.
    fn time_in_segment_of(&self, anchor: u64, sample: u64) -> Option<OffsetDateTime> {
        let (at, t0) = match self.marks.iter().rev().find(|(at, _)| *at <= anchor) {
            Some(&mark) => mark,
            None => (0, self.start?),
        };
        let ms = ((sample - at) as f64 / self.rate * 1e3).round();
        // Beyond ±2^63 ms no date is valid anyway; `as` saturates and checked_add refuses.
        t0.checked_add(time::Duration::milliseconds(ms as i64))
    }

    /// RFC 3339 UTC with milliseconds, if the time of the sample is known.
    pub fn stamp(&self, sample: u64) -> Option<String> {
        rfc3339_ms(self.time(sample)?)
    }

    /// The end of a span whose last sample is `end − 1`, timed from the segment that sample
    /// belongs to: at a segment boundary the end of one segment is not the start of the next
    /// (their times may be hours apart).
    pub fn end_time(&self, end: u64) -> Option<OffsetDateTime> {
        self.time_in_segment_of(end.saturating_sub(1), end)
    }

    /// [`Clock::end_time`] in RFC 3339 UTC with milliseconds.
    pub fn stamp_end(&self, end: u64) -> Option<String> {
        rfc3339_ms(self.end_time(end)?)
    }
}

/// `2026-05-01T08:00:00.250Z`; `None` if the time cannot be shown in UTC (its UTC date would
/// fall outside years 0000..=9999).
pub fn rfc3339_ms(t: OffsetDateTime) -> Option<String> {
    let fmt =
        format_description!("[year]-[month]-[day]T[hour]:[minute]:[second].[subsecond digits:3]Z");
    let utc = t.checked_to_offset(UtcOffset::UTC)?;
    // RFC 3339 has four-digit years only.
    (0..=9999).contains(&utc.year()).then(|| utc.format(&fmt).ok())?
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::source::Segment;
    use time::format_description::well_known::Rfc3339;

    #[test]
    fn stamps_are_rfc3339_utc_with_milliseconds() {
        let t0 = OffsetDateTime::parse("2026-05-01T10:00:00+02:00", &Rfc3339).unwrap();
        let c = Clock::new(2.4e6, Some(t0));
        assert_eq!(c.stamp(2_400_000 * 61 + 600).unwrap(), "2026-05-01T08:01:01.000Z");
        assert_eq!(c.stamp(1_200_000).unwrap(), "2026-05-01T08:00:00.500Z");
        assert_eq!(Clock::new(1.0, None).stamp(5), None);
    }

    fn info(rate: f64, segments: Vec<Segment>) -> SourceInfo {
        SourceInfo {
            label: "t".into(),
            format: None,
            sample_rate_hz: rate,
            center_hz: 0.0,
            start_time: segments[0].start_time,
            total_samples: None,
            live: false,
            segments,
            reference_level_dbm: None,
            tuning: None,
        }
    }

    #[test]
    fn each_segment_times_its_own_samples() {
        let t = |s: &str| OffsetDateTime::parse(s, &Rfc3339).unwrap();
        let seg =
            |at, s: &str| Segment { sample_start: at, center_hz: 0.0, start_time: Some(t(s)) };
        let src =
            info(1000.0, vec![seg(0, "2026-05-01T08:00:00Z"), seg(1000, "2026-05-01T09:00:00Z")]);
        let c = Clock::for_source(&src, src.start_time);
        assert_eq!(c.stamp(500).unwrap(), "2026-05-01T08:00:00.500Z");
        assert_eq!(c.stamp(1000).unwrap(), "2026-05-01T09:00:00.000Z");
        assert_eq!(c.stamp(1250).unwrap(), "2026-05-01T09:00:00.250Z");
        // Another start for sample 0 moves every segment alike.
        let c = Clock::for_source(&src, Some(t("2026-05-01T08:00:10Z")));
        assert_eq!(c.stamp(1250).unwrap(), "2026-05-01T09:00:10.250Z");
        // Without segments the one start times all.
        let plain = info(1000.0, vec![seg(0, "2026-05-01T08:00:00Z")]);
        assert_eq!(
            Clock::for_source(&plain, plain.start_time).stamp(1250).unwrap(),
            "2026-05-01T08:00:01.250Z"
        );
    }

    /// RFC 3339 allows offsets up to ±23:59 and years to 9999: a stamp whose UTC time leaves
    /// that range is absent, never a panic.
    #[test]
    fn times_beyond_year_9999_give_no_stamp() {
        let t = |s: &str| OffsetDateTime::parse(s, &Rfc3339).unwrap();
        let last = Clock::new(1.0, Some(t("9999-12-31T23:59:58Z")));
        assert_eq!(last.stamp(1).unwrap(), "9999-12-31T23:59:59.000Z");
        assert_eq!(last.stamp(2), None);
        assert_eq!(last.stamp(u64::MAX), None);
        assert_eq!(Clock::new(1.0, Some(t("9999-12-31T23:59:59-23:59"))).stamp(0), None);
        assert_eq!(Clock::new(1.0, Some(t("0000-01-01T00:00:00+23:59"))).stamp(0), None);
        assert_eq!(Clock::new(1e-300, Some(t("2026-01-01T00:00:00Z"))).stamp(7), None);
        let far = info(
            1.0,
            vec![Segment {
                sample_start: 0,
                center_hz: 0.0,
                start_time: Some(t("9999-12-31T23:59:59+23:59")),
            }],
        );
        assert_eq!(
            Clock::for_source(&far, Some(t("2026-01-01T00:00:00Z"))).stamp(0).unwrap(),
            "2026-01-01T00:00:00.000Z"
        );
    }

    #[test]
    fn a_span_ends_in_the_segment_of_its_last_sample() {
        // Two segments of 1 000 samples at 1 kS/s, the second recorded an hour later (SigMF
        // captures with their own core:datetime).
        let t0 = OffsetDateTime::parse("2026-05-01T08:00:00Z", &Rfc3339).unwrap();
        let t1 = OffsetDateTime::parse("2026-05-01T09:00:00Z", &Rfc3339).unwrap();
        let c = Clock { rate: 1e3, start: Some(t0), marks: vec![(0, t0), (1000, t1)] };
        assert_eq!(c.stamp_end(1000).unwrap(), "2026-05-01T08:00:01.000Z");
        assert_eq!(c.stamp(1000).unwrap(), "2026-05-01T09:00:00.000Z");
        assert_eq!(c.stamp_end(1500).unwrap(), "2026-05-01T09:00:00.500Z");
        assert_eq!(c.stamp_end(0).unwrap(), "2026-05-01T08:00:00.000Z");
    }
}
