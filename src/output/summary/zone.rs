//! Time for `report`: the zone the table and the heat map speak in (`--tz`), the window of the
//! report (`--from`, `--to`), and the order of the hours of the day.
//!
//! Only fixed offsets are supported (`UTC`, `Z`, `+01:00`, `-0530`, `+2`): the logs are in UTC
//! and a fixed offset turns them into a local time exactly. A named zone with daylight-saving
//! rules would need the zone database; an operator across a change of offset runs the report
//! twice or stays in UTC (the default).

use anyhow::{bail, Result};
use time::format_description::well_known::Rfc3339;
use time::{Date, Month, OffsetDateTime, PrimitiveDateTime, Time, UtcOffset};

/// A fixed offset from UTC, and how to name it.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Zone {
    /// Seconds east of UTC.
    pub offset_s: i32,
}

impl Default for Zone {
    fn default() -> Zone {
        Zone::UTC
    }
}

impl Zone {
    pub const UTC: Zone = Zone { offset_s: 0 };

    /// `UTC` or `+01:00`.
    pub fn label(&self) -> String {
        if self.offset_s == 0 {
            return "UTC".to_string();
        }
        let sign = if self.offset_s < 0 { '-' } else { '+' };
        let a = self.offset_s.unsigned_abs();
        format!("{sign}{:02}:{:02}", a / 3600, a / 60 % 60)
    }

    fn offset(&self) -> UtcOffset {
        UtcOffset::from_whole_seconds(self.offset_s).unwrap_or(UtcOffset::UTC)
    }

    /// Local hours since 1970-01-01T00:00 of this zone: the key of an hour cell.
    pub fn hour_of(&self, epoch_s: f64) -> i64 {
        ((epoch_s + self.offset_s as f64) / 3600.0).floor() as i64
    }

    /// `2026-12-03 22:00:00` in this zone (the zone is named once, in the heading).
    pub fn format(&self, epoch_s: f64) -> String {
        let Ok(t) = OffsetDateTime::from_unix_timestamp(epoch_s.floor() as i64) else {
            return format!("{epoch_s:.0} s");
        };
        let shown =
            time::macros::format_description!("[year]-[month]-[day] [hour]:[minute]:[second]");
        t.to_offset(self.offset()).format(shown).unwrap_or_else(|_| format!("{epoch_s:.0} s"))
    }

    /// RFC 3339 with this zone's offset, for the JSON output.
    pub fn rfc3339(&self, epoch_s: f64) -> Option<String> {
        let ns = (epoch_s * 1e3).round() as i128 * 1_000_000;
        let t = OffsetDateTime::from_unix_timestamp_nanos(ns).ok()?.to_offset(self.offset());
        t.format(&Rfc3339).ok()
    }
}

/// `--tz`: `UTC`, `Z`, or a fixed offset `±HH[:MM]` / `±HHMM`.
pub fn parse_zone(text: &str) -> Result<Zone> {
    let t = text.trim();
    if t.eq_ignore_ascii_case("utc") || t.eq_ignore_ascii_case("z") || t == "+00:00" {
        return Ok(Zone::UTC);
    }
    let bad = || {
        anyhow::anyhow!(
            "--tz '{}' is not a zone this version reads: give UTC or a fixed offset such as +01:00 or -05:30 (named zones with daylight saving are not supported)",
            crate::messages::sanitize(text)
        )
    };
    let (sign, rest) = match t.chars().next() {
        Some('+') => (1, &t[1..]),
        Some('-') => (-1, &t[1..]),
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
    Ok(Zone { offset_s: sign * (h * 3600 + m * 60) })
}

/// `--from`/`--to`: RFC 3339 (its own offset), or a local time in `zone`: `2026-12-03`,
/// `2026-12-03T22:00`, `2026-12-03 22:00:30`. Returns seconds since the epoch.
pub fn parse_instant(text: &str, zone: Zone, flag: &str) -> Result<f64> {
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
    let local = PrimitiveDateTime::new(date, clock).assume_offset(zone.offset());
    Ok(local.unix_timestamp() as f64)
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
        for bad in ["Europe/Berlin", "+25:00", "1", "+1:2:3", ""] {
            assert!(parse_zone(bad).is_err(), "{bad}");
        }
    }

    /// 2026-12-03T00:00:00Z is 1 796 256 000 s after the epoch (20 790 days × 86 400 s; the
    /// day count from the proleptic Gregorian calendar, common practice).
    #[test]
    fn instants_in_a_zone() {
        let plus1 = parse_zone("+01:00").unwrap();
        let midnight = 20_790.0 * 86_400.0;
        assert_eq!(parse_instant("2026-12-03", Zone::UTC, "--from").unwrap(), midnight);
        assert_eq!(parse_instant("2026-12-03T01:00", plus1, "--from").unwrap(), midnight);
        assert_eq!(parse_instant("2026-12-03 01:00:30", plus1, "--from").unwrap(), midnight + 30.0);
        assert_eq!(
            parse_instant("2026-12-03T00:00:00+01:00", Zone::UTC, "--to").unwrap(),
            midnight - 3600.0
        );
        assert!(parse_instant("03/12/2026", Zone::UTC, "--from").is_err());
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
}
