//! Sample-exact time: seconds and wall-clock stamps computed from sample indices, never from the
//! time a block happened to arrive, so a replay of a recording gives the same numbers.

use time::macros::format_description;
use time::{OffsetDateTime, UtcOffset};

/// Seconds and wall-clock stamps from sample indices.
#[derive(Clone, Debug, PartialEq)]
pub struct Clock {
    pub rate: f64,
    /// Time of sample 0, when known.
    pub start: Option<OffsetDateTime>,
}

impl Clock {
    pub fn seconds(&self, sample: u64) -> f64 {
        sample as f64 / self.rate
    }

    /// RFC 3339 UTC with milliseconds, if the time of the first sample is known.
    pub fn stamp(&self, sample: u64) -> Option<String> {
        let ms = (self.seconds(sample) * 1e3).round() as i64;
        let t = self.start? + time::Duration::milliseconds(ms);
        rfc3339_ms(t)
    }
}

/// `2026-05-01T08:00:00.250Z`.
pub fn rfc3339_ms(t: OffsetDateTime) -> Option<String> {
    let fmt =
        format_description!("[year]-[month]-[day]T[hour]:[minute]:[second].[subsecond digits:3]Z");
    t.to_offset(UtcOffset::UTC).format(&fmt).ok()
}

#[cfg(test)]
mod tests {
    use super::*;
    use time::format_description::well_known::Rfc3339;

    #[test]
    fn stamps_are_rfc3339_utc_with_milliseconds() {
        let t0 = OffsetDateTime::parse("2026-05-01T10:00:00+02:00", &Rfc3339).unwrap();
        let c = Clock { rate: 2.4e6, start: Some(t0) };
        assert_eq!(c.stamp(2_400_000 * 61 + 600).unwrap(), "2026-05-01T08:01:01.000Z");
        assert_eq!(c.stamp(1_200_000).unwrap(), "2026-05-01T08:00:00.500Z");
        assert_eq!(Clock { rate: 1.0, start: None }.stamp(5), None);
    }
}
