//! Time for `report`: the zone the table and the heat map speak in (`--tz`), the window of the
//! report (`--from`, `--to`), and the order of the hours of the day.
//!
//! A zone is UTC (the default), a fixed offset (`+01:00`, `-0530`, `+2`), or a named zone of the
//! IANA time-zone database (`Europe/Berlin`, `America/New_York`) with its daylight-saving rules,
//! from the database compiled into bandwarden (the `jiff` crate's bundled copy). The logs are in
//! UTC; each instant is turned into the local time of its own offset, so an hour cell is a local
//! clock hour. On the night clocks go back, the repeated local hour is one cell holding both;
//! on the night they go forward, the skipped hour has no cell. A local `--from`/`--to` that falls
//! in a skipped hour is read after the change, one that falls in a repeated hour as its first
//! occurrence (RFC 5545 §3.3.5 reads local times the same way; cited from memory).

use anyhow::{bail, Result};
use jiff::tz::TimeZone;
use time::format_description::well_known::Rfc3339;
use time::{Date, Month, OffsetDateTime, PrimitiveDateTime, Time, UtcOffset};

/// The zone of a report: a fixed offset from UTC, or a named zone whose offset follows its rules.
#[derive(Clone, Debug)]
pub struct Zone {
    /// Seconds east of UTC (fixed zones; 0 for a named one).
    pub offset_s: i32,
    /// A named zone: its name as given and its rules.
    named: Option<(String, TimeZone)>,
}

impl PartialEq for Zone {
    fn eq(&self, other: &Zone) -> bool {
        self.offset_s == other.offset_s
            && self.named.as_ref().map(|n| &n.0) == other.named.as_ref().map(|n| &n.0)
    }
}

impl Default for Zone {
    fn default() -> Zone {
        Zone::UTC
    }
}

impl Zone {
    pub const UTC: Zone = Zone { offset_s: 0, named: None };

    /// `UTC`, `+01:00`, or the zone's name (`Europe/Berlin`).
    pub fn label(&self) -> String {
        if let Some((name, _)) = &self.named {
            return name.clone();
        }
        if self.offset_s == 0 {
            return "UTC".to_string();
        }
        let sign = if self.offset_s < 0 { '-' } else { '+' };
        let a = self.offset_s.unsigned_abs();
        format!("{sign}{:02}:{:02}", a / 3600, a / 60 % 60)
    }

    /// Seconds east of UTC at the instant `epoch_s`.
    pub fn offset_at(&self, epoch_s: f64) -> i32 {
        let Some((_, tz)) = &self.named else {
            return self.offset_s;
        };
        match jiff::Timestamp::from_second(epoch_s.floor() as i64) {
            Ok(t) => tz.to_offset(t).seconds(),
            Err(_) => 0,
        }
    }

    fn offset(&self, epoch_s: f64) -> UtcOffset {
        UtcOffset::from_whole_seconds(self.offset_at(epoch_s)).unwrap_or(UtcOffset::UTC)
    }

    /// Local hours since 1970-01-01T00:00 of this zone: the key of an hour cell.
    pub fn hour_of(&self, epoch_s: f64) -> i64 {
        ((epoch_s + self.offset_at(epoch_s) as f64) / 3600.0).floor() as i64
    }

    /// `2026-12-03 22:00:00` in this zone (the zone is named once, in the heading).
    pub fn format(&self, epoch_s: f64) -> String {
        let Ok(t) = OffsetDateTime::from_unix_timestamp(epoch_s.floor() as i64) else {
            return format!("{epoch_s:.0} s");
        };
        let shown =
            time::macros::format_description!("[year]-[month]-[day] [hour]:[minute]:[second]");
        t.to_offset(self.offset(epoch_s))
            .format(shown)
            .unwrap_or_else(|_| format!("{epoch_s:.0} s"))
    }

    /// RFC 3339 with this zone's offset at that instant, for the JSON output.
    pub fn rfc3339(&self, epoch_s: f64) -> Option<String> {
        let ns = (epoch_s * 1e3).round() as i128 * 1_000_000;
        let t = OffsetDateTime::from_unix_timestamp_nanos(ns).ok()?.to_offset(self.offset(epoch_s));
        t.format(&Rfc3339).ok()
    }

    /// Seconds since the epoch of the local time `local` in this zone.
    fn instant_of(&self, local: PrimitiveDateTime) -> Option<f64> {
        let Some((_, tz)) = &self.named else {
            return Some(local.assume_offset(self.offset(0.0)).unix_timestamp() as f64);
        };
        let civil = jiff::civil::DateTime::new(
            local.year() as i16,
            local.month() as i8,
            local.day() as i8,
            local.hour() as i8,
            local.minute() as i8,
            local.second() as i8,
            0,
        )
        .ok()?;
        // "compatible": a skipped local time is read after the change, a repeated one as its
        // first occurrence (module doc).
        let zoned = civil.to_zoned(tz.clone()).ok()?;
        Some(zoned.timestamp().as_second() as f64)
    }
}

/// `--tz`: `UTC`, `Z`, a fixed offset `±HH[:MM]` / `±HHMM`, or a named zone (`Europe/Berlin`).
pub fn parse_zone(text: &str) -> Result<Zone> {
    let t = text.trim();
    if t.eq_ignore_ascii_case("utc") || t.eq_ignore_ascii_case("z") || t == "+00:00" {
        return Ok(Zone::UTC);
    }
    let bad = || {
        anyhow::anyhow!(
            "--tz '{}' is not a zone: give UTC, a fixed offset such as +01:00 or -05:30, or a zone name of the IANA database such as Europe/Berlin or America/New_York",
            crate::messages::sanitize(text)
        )
    };
    let (sign, rest) = match t.chars().next() {
        Some('+') => (1, &t[1..]),
        Some('-') => (-1, &t[1..]),
        Some(c) if c.is_ascii_alphabetic() => {
            let tz = jiff::tz::db().get(t).map_err(|_| bad())?;
            return Ok(Zone { offset_s: 0, named: Some((t.to_string(), tz)) });
        }
        _ => return Err(bad()),
    };
    let digits: String = rest.chars().filter(|c| *c != ':').collect();
    if !digits.chars().all(|c| c.is_ascii_digit()) || rest.matches(':').count() > 1 {
        return Err(bad());
    }
    let (h, m) = match digits.len() {
        1 | 2 => (digits.parse::<i32>().map_err(|_| bad())?, 0),
        4 => (
            digits[..2].parse::<i32>().map_err(|_| bad())?,
            digits[2..].parse::<i32>().map_err(|_| bad())?,
        ),
        _ => return Err(bad()),
    };
    if h > 14 || m > 59 || (h == 14 && m > 0) {
        bail!("--tz '{}': offsets run from -14:00 to +14:00", crate::messages::sanitize(text));
    }
    Ok(Zone { offset_s: sign * (h * 3600 + m * 60), named: None })
}

/// `--from`/`--to`: RFC 3339 (its own offset), or a local time in `zone`: `2026-12-03`,
/// `2026-12-03T22:00`, `2026-12-03 22:00:30`. Returns seconds since the epoch.
pub fn parse_instant(text: &str, zone: &Zone, flag: &str) -> Result<f64> {
    let t = text.trim();
    if let Ok(v) = OffsetDateTime::parse(t, &Rfc3339) {
        return Ok(v.unix_timestamp_nanos() as f64 / 1e9);
    }
    let bad = || {
        anyhow::anyhow!(
            "{flag} '{}' is not a time: give 2026-12-03, 2026-12-03T22:00 (in --tz) or RFC 3339 such as 2026-12-03T22:00:00Z",
            crate::messages::sanitize(text)
        )
    };
    let (date, clock) = match t.split_once(['T', ' ']) {
        Some((d, c)) => (d, Some(c)),
        None => (t, None),
    };
    let num = |s: &str| s.parse::<u32>().map_err(|_| bad());
    let d: Vec<&str> = date.split('-').collect();
    if d.len() != 3 || d[0].len() != 4 {
        return Err(bad());
    }
    let month = Month::try_from(num(d[1])? as u8).map_err(|_| bad())?;
    let date =
        Date::from_calendar_date(num(d[0])? as i32, month, num(d[2])? as u8).map_err(|_| bad())?;
    let clock = match clock {
        None => Time::MIDNIGHT,
        Some(c) => {
            let p: Vec<&str> = c.split(':').collect();
            if !(2..=3).contains(&p.len()) {
                return Err(bad());
            }
            let s = if p.len() == 3 { num(p[2])? } else { 0 };
            Time::from_hms(num(p[0])? as u8, num(p[1])? as u8, s as u8).map_err(|_| bad())?
        }
    };
    zone.instant_of(PrimitiveDateTime::new(date, clock)).ok_or_else(bad)
}

/// Seconds since the epoch of an RFC 3339 time in a log.
pub fn epoch_of(stamp: &str) -> Option<f64> {
    let t = OffsetDateTime::parse(stamp, &Rfc3339).ok()?;
    Some(t.unix_timestamp_nanos() as f64 / 1e9)
}

/// The hours of the day in the order to show them: starting after the longest run of hours
/// with nothing measured (going round midnight), so a night logged from 22:00 to 06:00 reads
/// 22, 23, 00 … 06 in order instead of being split across the two ends. With every hour
/// measured (or none), 00 to 23.
pub fn hour_order(measured: &[bool; 24]) -> Vec<i64> {
    let mut best: Option<(usize, usize)> = None; // (first empty hour, length)
    if measured.iter().any(|m| *m) && !measured.iter().all(|m| *m) {
        for start in 0..24 {
            if measured[start] || !measured[(start + 23) % 24] {
                continue; // a run of empty hours starts after a measured one
            }
            let len = (0..24).take_while(|k| !measured[(start + k) % 24]).count();
            if best.map_or(true, |(_, l)| len > l) {
                best = Some((start, len));
            }
        }
    }
    let first = best.map_or(0, |(s, len)| (s + len) % 24);
    (0..24).map(|k| ((first + k) % 24) as i64).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn zones_parse_as_fixed_offsets() {
        assert_eq!(parse_zone("UTC").unwrap(), Zone::UTC);
        assert_eq!(parse_zone("+01:00").unwrap().offset_s, 3600);
        assert_eq!(parse_zone("-0530").unwrap().offset_s, -(5 * 3600 + 1800));
        assert_eq!(parse_zone("+2").unwrap().offset_s, 7200);
        assert_eq!(parse_zone("-05:30").unwrap().label(), "-05:30");
        for bad in ["Mars/Olympus", "Europe/Nowhere", "+25:00", "1", "+1:2:3", ""] {
            assert!(parse_zone(bad).is_err(), "{bad}");
        }
    }

    /// 2026-12-03T00:00:00Z is 1 796 256 000 s after the epoch (20 790 days × 86 400 s; the
    /// day count from the proleptic Gregorian calendar, common practice).
    #[test]
    fn instants_in_a_zone() {
        let plus1 = parse_zone("+01:00").unwrap();
        let midnight = 20_790.0 * 86_400.0;
        assert_eq!(parse_instant("2026-12-03", &Zone::UTC, "--from").unwrap(), midnight);
        assert_eq!(parse_instant("2026-12-03T01:00", &plus1, "--from").unwrap(), midnight);
        assert_eq!(
            parse_instant("2026-12-03 01:00:30", &plus1, "--from").unwrap(),
            midnight + 30.0
        );
        assert_eq!(
            parse_instant("2026-12-03T00:00:00+01:00", &Zone::UTC, "--to").unwrap(),
            midnight - 3600.0
        );
        assert!(parse_instant("03/12/2026", &Zone::UTC, "--from").is_err());
        assert_eq!(plus1.format(midnight), "2026-12-03 01:00:00");
        assert_eq!(plus1.hour_of(midnight).rem_euclid(24), 1);
    }

    #[test]
    fn a_night_reads_in_order() {
        let mut m = [false; 24];
        for h in [22, 23, 0, 1, 2, 5, 6] {
            m[h] = true;
        }
        let order = hour_order(&m);
        assert_eq!(&order[..9], &[22, 23, 0, 1, 2, 3, 4, 5, 6]);
        assert_eq!(hour_order(&[true; 24])[0], 0);
        assert_eq!(hour_order(&[false; 24])[0], 0);
    }

    /// Named zones follow their daylight-saving rules. Facts: in the European Union summer time
    /// runs from 01:00 UTC on the last Sunday of March to 01:00 UTC on the last Sunday of
    /// October (Directive 2000/84/EC, Art. 2 and 3); in 2026 those Sundays are 29 March and
    /// 25 October. Berlin is UTC+1 in winter and UTC+2 in summer. New York is UTC−5 in winter
    /// and UTC−4 from 02:00 local on the second Sunday of March (8 March 2026; US Energy Policy
    /// Act of 2005, §110).
    #[test]
    fn named_zones_follow_their_rules() {
        let berlin = parse_zone("Europe/Berlin").unwrap();
        assert_eq!(berlin.label(), "Europe/Berlin");
        let day = |d: f64| d * 86_400.0;
        // 2026-03-29T00:00Z is day 20 541 after the epoch; 2026-10-25T00:00Z is day 20 751.
        let spring = day(20_541.0) + 3600.0; // 01:00 UTC, the change
        let autumn = day(20_751.0) + 3600.0;
        assert_eq!(berlin.offset_at(spring - 1.0), 3600);
        assert_eq!(berlin.offset_at(spring), 7200);
        assert_eq!(berlin.offset_at(autumn - 1.0), 7200);
        assert_eq!(berlin.offset_at(autumn), 3600);
        let midnight = day(20_790.0); // 2026-12-03T00:00Z
        assert_eq!(berlin.format(midnight), "2026-12-03 01:00:00");
        assert_eq!(berlin.rfc3339(midnight + 1800.0).unwrap(), "2026-12-03T01:30:00+01:00");
        assert_eq!(berlin.format(day(20_636.0) + 12.0 * 3600.0), "2026-07-02 14:00:00");
        assert_eq!(berlin.hour_of(midnight).rem_euclid(24), 1);
        // Local times read back: a winter evening, a summer noon.
        assert_eq!(parse_instant("2026-12-03T01:00", &berlin, "--from").unwrap(), midnight);
        assert_eq!(
            parse_instant("2026-07-02 14:00", &berlin, "--from").unwrap(),
            day(20_636.0) + 12.0 * 3600.0
        );
        let new_york = parse_zone("America/New_York").unwrap();
        let us_spring = day(20_520.0) + 7.0 * 3600.0; // 2026-03-08T07:00Z = 02:00 EST
        assert_eq!(new_york.offset_at(us_spring - 1.0), -5 * 3600);
        assert_eq!(new_york.offset_at(us_spring), -4 * 3600);
        // 02:30 on that day does not exist in New York; it is read after the change (03:30 EDT).
        assert_eq!(
            parse_instant("2026-03-08T02:30", &new_york, "--from").unwrap(),
            us_spring + 1800.0
        );
    }
}
