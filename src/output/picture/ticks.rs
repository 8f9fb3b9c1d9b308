//! Where the ticks of a picture's axes go and how they read: frequencies in a unit chosen for the
//! span, times of day in UTC when the start time is known (else seconds), levels in dB.
//!
//! Ticks fall on round values (1, 2 or 5 × a power of ten of the unit; for times of day whole
//! seconds, minutes or hours of the clock), about as many as the axis has room for.

use time::{OffsetDateTime, UtcOffset};

/// A frequency unit for an axis.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FreqUnit {
    pub name: &'static str,
    pub hz: f64,
}

/// The unit in which the frequencies of a span read best (that of its highest edge).
pub fn freq_unit(high_hz: f64) -> FreqUnit {
    let a = high_hz.abs();
    let (name, hz) = if a >= 1e9 {
        ("GHz", 1e9)
    } else if a >= 1e6 {
        ("MHz", 1e6)
    } else if a >= 1e3 {
        ("kHz", 1e3)
    } else {
        ("Hz", 1.0)
    };
    FreqUnit { name, hz }
}

/// The round step (1, 2 or 5 × 10ⁿ) giving at most `most` steps over `span`.
pub fn round_step(span: f64, most: usize) -> f64 {
    let raw = span.abs() / most.max(1) as f64;
    if !(raw > 0.0 && raw.is_finite()) {
        return 1.0;
    }
    let p = 10f64.powf(raw.log10().floor());
    [1.0, 2.0, 5.0, 10.0].iter().map(|m| m * p).find(|s| *s >= raw).unwrap_or(10.0 * p)
}

/// Multiples of `step` within `low..=high`.
pub fn ticks_within(low: f64, high: f64, step: f64) -> Vec<f64> {
    let first = (low / step).ceil() as i64;
    let last = (high / step).floor() as i64;
    (first..=last).map(|k| k as f64 * step).collect()
}

/// Decimals needed to tell ticks `step` apart.
pub fn decimals(step: f64) -> usize {
    let mut d = 0;
    while d < 9
        && ((step * 10f64.powi(d as i32)).round() - step * 10f64.powi(d as i32)).abs() > 1e-6
    {
        d += 1;
    }
    d
}

/// Frequency ticks over `low_hz..high_hz` in `unit`, at most `most`: the values (Hz) and their
/// labels.
pub fn freq_ticks(low_hz: f64, high_hz: f64, unit: FreqUnit, most: usize) -> Vec<(f64, String)> {
    let step = round_step((high_hz - low_hz) / unit.hz, most);
    let d = decimals(step);
    ticks_within(low_hz / unit.hz, high_hz / unit.hz, step)
        .into_iter()
        .map(|v| (v * unit.hz, format!("{v:.d$}")))
        .collect()
}

/// Steps for clock times, seconds: round for a reader of a clock.
const CLOCK_STEPS: [f64; 20] = [
    0.001, 0.002, 0.005, 0.01, 0.02, 0.05, 0.1, 0.2, 0.5, 1.0, 2.0, 5.0, 10.0, 15.0, 30.0, 60.0,
    120.0, 300.0, 600.0, 900.0,
];
const CLOCK_STEPS_LONG: [f64; 6] = [1800.0, 3600.0, 7200.0, 10800.0, 21600.0, 43200.0];

/// Time ticks over `0..duration_s` from the first sample: at most `most`, labelled with the UTC
/// time of day when `start` is known (placed on round times of the clock), else in seconds.
/// Returns the positions (seconds from the start) and labels.
pub fn time_ticks(
    start: Option<OffsetDateTime>,
    duration_s: f64,
    most: usize,
) -> Vec<(f64, String)> {
    let Some(start) = start.and_then(|t| t.checked_to_offset(UtcOffset::UTC)) else {
        let step = round_step(duration_s, most);
        let d = decimals(step);
        return ticks_within(0.0, duration_s, step)
            .into_iter()
            .map(|v| (v, format!("{v:.d$}")))
            .collect();
    };
    let raw = duration_s / most.max(1) as f64;
    let step = CLOCK_STEPS
        .iter()
        .chain(CLOCK_STEPS_LONG.iter())
        .copied()
        .find(|s| *s >= raw)
        .unwrap_or(86400.0 * (raw / 86400.0).ceil());
    // Seconds of the start within its UTC day, with its fraction, so ticks fall on the clock.
    let day_s = start.time().hour() as f64 * 3600.0
        + start.time().minute() as f64 * 60.0
        + start.time().second() as f64
        + start.time().nanosecond() as f64 * 1e-9;
    let d = if step < 1.0 { decimals(step) } else { 0 };
    ticks_within(day_s, day_s + duration_s, step)
        .into_iter()
        .map(|v| (v - day_s, clock_label(v, d, step >= 60.0)))
        .collect()
}

/// `06:30:15`, `06:30:15.5` or `06:30` for seconds into a UTC day (past midnight it wraps).
fn clock_label(day_s: f64, decimals: usize, minutes_only: bool) -> String {
    let scale = 10f64.powi(decimals as i32);
    let total = (day_s * scale).round() / scale;
    let whole = total.floor();
    let frac = total - whole;
    let s = whole as i64;
    let (h, m, sec) = ((s / 3600) % 24, (s / 60) % 60, s % 60);
    if minutes_only {
        format!("{h:02}:{m:02}")
    } else if decimals == 0 {
        format!("{h:02}:{m:02}:{sec:02}")
    } else {
        let f = format!("{frac:.decimals$}");
        format!("{h:02}:{m:02}:{sec:02}{}", f.trim_start_matches('0'))
    }
}

/// `2031-04-17 06:30:00 UTC` (to the millisecond when it has a fraction).
pub fn utc_text(t: OffsetDateTime) -> String {
    let Some(u) = t.checked_to_offset(UtcOffset::UTC) else { return String::from("?") };
    let ms = u.millisecond();
    let frac = if ms == 0 { String::new() } else { format!(".{ms:03}") };
    format!("{} {:02}:{:02}:{:02}{frac} UTC", u.date(), u.hour(), u.minute(), u.second())
}

#[cfg(test)]
mod tests {
    use super::*;
    use time::format_description::well_known::Rfc3339;

    #[test]
    fn frequency_ticks_are_round_and_in_the_unit_of_the_span() {
        let u = freq_unit(434e6);
        assert_eq!(u.name, "MHz");
        let t = freq_ticks(433.0e6, 434.0e6, u, 10);
        assert_eq!(t.first().unwrap().1, "433.0");
        assert_eq!(t[1].1, "433.1");
        assert_eq!(t.len(), 11);
        assert!((t[3].0 - 433.3e6).abs() < 1e-3);
    }

    #[test]
    fn clock_ticks_fall_on_round_times() {
        let t0 = OffsetDateTime::parse("2031-04-17T06:29:58.500Z", &Rfc3339).unwrap();
        let t = time_ticks(Some(t0), 10.0, 6);
        assert_eq!(t[0].1, "06:30:00");
        assert!((t[0].0 - 1.5).abs() < 1e-9);
        assert_eq!(t[1].1, "06:30:02");
        let long = time_ticks(Some(t0), 3600.0, 6);
        assert_eq!((long[0].1.as_str(), long[1].1.as_str()), ("06:30", "06:40"));
        let plain = time_ticks(None, 4.0, 8);
        assert_eq!(plain[1], (0.5, "0.5".to_string()));
    }
}
