//! Parsing and printing of the quantities users type and read: frequencies, rates and durations.
//!
//! Users think in `433.92M` and `12.5k`, scripts in `1e6`; both must work everywhere a number of
//! hertz or samples per second is accepted, and the error must say what was wrong.

use std::time::Duration;

/// Parses a frequency or rate in hertz: `2.4M`, `433.92M`, `12.5k`, `1e6`, `1G`, `-200k`.
///
/// Suffixes are SI multipliers (`k`/`K` = 1e3, `M` = 1e6, `G` = 1e9), optionally followed by `Hz`
/// or `S/s`. A lower-case `m` is refused because it would be ambiguous (milli or mega).
pub fn parse_hz(text: &str) -> Result<f64, String> {
    let t = text.trim();
    let t = t
        .strip_suffix("Hz")
        .or_else(|| t.strip_suffix("hz"))
        .or_else(|| t.strip_suffix("S/s"))
        .or_else(|| t.strip_suffix("sps"))
        .unwrap_or(t)
        .trim_end();
    if t.is_empty() {
        return Err(format!(
            "'{text}' is not a frequency: expected a number such as 2.4M, 12.5k or 1e6"
        ));
    }
    let (num, mult) = match t.chars().last() {
        Some('k') | Some('K') => (&t[..t.len() - 1], 1e3),
        Some('M') => (&t[..t.len() - 1], 1e6),
        Some('G') => (&t[..t.len() - 1], 1e9),
        Some('m') => {
            return Err(format!(
                "'{text}': lower-case 'm' is ambiguous; write M for mega (e.g. 2.4M)"
            ))
        }
        _ => (t, 1.0),
    };
    let value: f64 = num.trim().parse().map_err(|_| {
        format!("'{text}' is not a frequency: expected a number such as 2.4M, 12.5k or 1e6")
    })?;
    let hz = value * mult;
    if !hz.is_finite() {
        return Err(format!("'{text}' is not a finite frequency"));
    }
    Ok(hz)
}

/// Parses a rate that must be strictly positive (sample rates, widths).
pub fn parse_positive_hz(text: &str) -> Result<f64, String> {
    let hz = parse_hz(text)?;
    if hz <= 0.0 {
        return Err(format!("'{text}' must be greater than zero"));
    }
    Ok(hz)
}

/// Parses a duration: `10ms`, `2s`, `1.5s`, `15m`, `1h`, `250us`. A bare number is seconds.
pub fn parse_duration(text: &str) -> Result<Duration, String> {
    let t = text.trim();
    let split = t.find(|c: char| c.is_ascii_alphabetic()).unwrap_or(t.len());
    let (num, unit) = t.split_at(split);
    let value: f64 = num
        .trim()
        .parse()
        .map_err(|_| format!("'{text}' is not a duration: expected e.g. 10ms, 2s, 15m or 1h"))?;
    let scale = match unit.trim() {
        "" | "s" | "sec" => 1.0,
        "ms" => 1e-3,
        "us" | "µs" => 1e-6,
        "m" | "min" => 60.0,
        "h" => 3600.0,
        other => {
            return Err(format!(
                "'{text}': unknown time unit '{other}'; use us, ms, s, m (minutes) or h"
            ))
        }
    };
    let secs = value * scale;
    if !secs.is_finite() || secs < 0.0 {
        return Err(format!("'{text}' must be a non-negative duration"));
    }
    Ok(Duration::from_secs_f64(secs))
}

/// Formats a frequency in hertz with a unit chosen for reading: `433.920000 MHz`, `12.500 kHz`.
pub fn format_hz(hz: f64) -> String {
    let a = hz.abs();
    if a >= 1e9 {
        format!("{:.6} GHz", hz / 1e9)
    } else if a >= 1e6 {
        format!("{:.6} MHz", hz / 1e6)
    } else if a >= 1e3 {
        format!("{:.3} kHz", hz / 1e3)
    } else {
        format!("{hz:.1} Hz")
    }
}

/// Formats a frequency compactly for axis labels and tables, with `digits` decimals in the chosen
/// unit.
pub fn format_hz_short(hz: f64, digits: usize) -> String {
    let a = hz.abs();
    if a >= 1e9 {
        format!("{:.*}G", digits, hz / 1e9)
    } else if a >= 1e6 {
        format!("{:.*}M", digits, hz / 1e6)
    } else if a >= 1e3 {
        format!("{:.*}k", digits, hz / 1e3)
    } else {
        format!("{:.*}", digits, hz)
    }
}

/// Ten times the base-10 logarithm, with a floor so that zero power prints as a very low level
/// rather than `-inf` (which is not valid JSON).
pub fn db(power: f64) -> f64 {
    10.0 * power.max(1e-30).log10()
}

/// The inverse of [`db`].
pub fn undb(level_db: f64) -> f64 {
    10f64.powf(level_db / 10.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn frequencies_with_suffixes() {
        assert_eq!(parse_hz("2.4M").unwrap(), 2.4e6);
        assert_eq!(parse_hz("433.92M").unwrap(), 433.92e6);
        assert_eq!(parse_hz("12.5k").unwrap(), 12.5e3);
        assert_eq!(parse_hz("1e6").unwrap(), 1e6);
        assert_eq!(parse_hz("1G").unwrap(), 1e9);
        assert_eq!(parse_hz("-200k").unwrap(), -200e3);
        assert_eq!(parse_hz("100 kHz").unwrap(), 100e3);
        assert_eq!(parse_hz(" 48000 ").unwrap(), 48000.0);
    }

    #[test]
    fn bad_frequencies_say_why() {
        assert!(parse_hz("").unwrap_err().contains("not a frequency"));
        assert!(parse_hz("fast").unwrap_err().contains("not a frequency"));
        assert!(parse_hz("2.4m").unwrap_err().contains("ambiguous"));
        assert!(parse_positive_hz("0").unwrap_err().contains("greater than zero"));
        assert!(parse_hz("inf").is_err());
    }

    #[test]
    fn durations() {
        assert_eq!(parse_duration("10ms").unwrap(), Duration::from_millis(10));
        assert_eq!(parse_duration("2s").unwrap(), Duration::from_secs(2));
        assert_eq!(parse_duration("15m").unwrap(), Duration::from_secs(900));
        assert_eq!(parse_duration("1h").unwrap(), Duration::from_secs(3600));
        assert_eq!(parse_duration("1.5").unwrap(), Duration::from_millis(1500));
        assert!(parse_duration("3 fortnights").unwrap_err().contains("unknown time unit"));
        assert!(parse_duration("-1s").is_err());
    }

    #[test]
    fn readable_frequencies() {
        assert_eq!(format_hz(433.92e6), "433.920000 MHz");
        assert_eq!(format_hz(12_500.0), "12.500 kHz");
        assert_eq!(format_hz_short(145.5e6, 2), "145.50M");
    }

    #[test]
    fn decibels_round_trip() {
        assert!((db(0.1) + 10.0).abs() < 1e-12);
        assert!((undb(-3.0) - 0.501187).abs() < 1e-6);
        assert!(db(0.0).is_finite());
    }
}
