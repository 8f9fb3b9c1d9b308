//! Parsing and printing of the quantities users type and read: frequencies, rates and durations.
//!
//! Users think in `433.92M` and `12.5k`, scripts in `1e6`; both must work everywhere a number of
//! hertz or samples per second is accepted, and the error must say what was wrong.

use crate::messages::sanitize;
use std::time::Duration;

/// Highest frequency accepted anywhere, in hertz: the top of the radio spectrum (ITU Radio
/// Regulations No. 1.5: radio waves are below 3 000 GHz). Beyond it a number is a typo.
pub const MAX_HZ: f64 = 3e12;
/// Lowest sample rate accepted: one sample per second. Below it times in samples overflow
/// (a `u64` count of samples of 1e-17 S/s is longer than any `Duration`).
pub const MIN_RATE_HZ: f64 = 1.0;
/// Highest sample rate accepted: 100 GS/s, above the fastest digitisers that stream IQ, and low
/// enough that [`MAX_SECONDS`] of samples still fit in a `u64` (1e8 s × 1e11 S/s = 1e19 < 2^64).
pub const MAX_RATE_HZ: f64 = 1e11;
/// Sample rates below this get a note: `--rate 2.4` is more likely meant as `2.4M`.
pub const LOW_RATE_HZ: f64 = 1e3;
/// Longest duration accepted for any option (`--seconds`, `--interval`, `--hang`, `--dwell`):
/// 1e8 s, about three years; it keeps every duration × rate inside a `u64` of samples.
pub const MAX_SECONDS: f64 = 1e8;

/// Parses a frequency or rate in hertz: `2.4M`, `433.92M`, `12.5k`, `1e6`, `1G`, `-200k`.
///
/// Suffixes are SI multipliers (`k`/`K` = 1e3, `M` = 1e6, `G` = 1e9), optionally followed by `Hz`
/// or `S/s`. A lower-case `m` is refused because it would be ambiguous (milli or mega).
pub fn parse_hz(text: &str) -> Result<f64, String> {
    let shown = sanitize(text);
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
            "'{shown}' is not a frequency: expected a number such as 2.4M, 12.5k or 1e6"
        ));
    }
    let (num, mult) = match t.chars().last() {
        Some('k') | Some('K') => (&t[..t.len() - 1], 1e3),
        Some('M') => (&t[..t.len() - 1], 1e6),
        Some('G') => (&t[..t.len() - 1], 1e9),
        Some('m') => {
            return Err(format!(
                "'{shown}': lower-case 'm' is ambiguous; write M for mega (e.g. 2.4M)"
            ))
        }
        _ => (t, 1.0),
    };
    let value: f64 = num.trim().parse().map_err(|_| {
        format!("'{shown}' is not a frequency: expected a number such as 2.4M, 12.5k or 1e6")
    })?;
    let hz = value * mult;
    if !hz.is_finite() {
        return Err(format!("'{shown}' is not a finite frequency"));
    }
    if hz.abs() > MAX_HZ {
        return Err(format!(
            "'{shown}' is beyond ±{} (the top of the radio spectrum); check the number and its suffix",
            format_hz(MAX_HZ)
        ));
    }
    Ok(hz)
}

/// Parses a rate that must be strictly positive (sample rates, widths).
pub fn parse_positive_hz(text: &str) -> Result<f64, String> {
    let shown = sanitize(text);
    let hz = parse_hz(text)?;
    if hz <= 0.0 {
        return Err(format!("'{shown}' must be greater than zero"));
    }
    Ok(hz)
}

/// Checks a sample rate, from a flag or a file: finite and within
/// [`MIN_RATE_HZ`] ..= [`MAX_RATE_HZ`]. The message says what was wrong; the caller adds where.
pub fn check_rate(hz: f64) -> Result<(), String> {
    if hz < 0.0 {
        return Err(format!("a sample rate must be positive, and {} is negative", format_hz(hz)));
    }
    if !(MIN_RATE_HZ..=MAX_RATE_HZ).contains(&hz) {
        return Err(format!(
            "a sample rate of {} is out of range; it must be {} ..= {}",
            format_hz(hz),
            format_hz(MIN_RATE_HZ),
            format_hz(MAX_RATE_HZ)
        ));
    }
    Ok(())
}

/// A note for a rate that is allowed but probably a slip (`2.4` for `2.4M`).
pub fn low_rate_note(hz: f64) -> Option<String> {
    (hz < LOW_RATE_HZ).then(|| {
        format!(
            "a sample rate of {} is unusually low; did you mean {}M or {}k? (suffixes: k, M, G)",
            format_hz(hz),
            format_num(hz),
            format_num(hz)
        )
    })
}

/// Parses a sample rate (`--rate`): a frequency checked by [`check_rate`].
pub fn parse_rate(text: &str) -> Result<f64, String> {
    let hz = parse_hz(text)?;
    check_rate(hz)?;
    Ok(hz)
}

/// The number of samples in `seconds` at `rate_hz`, rounded, or why it does not fit a `u64`.
pub fn samples_in(seconds: f64, rate_hz: f64) -> Result<u64, String> {
    let n = (seconds * rate_hz).round();
    // 2^64 is exactly representable; every f64 below it converts without loss of range.
    if !(0.0..18_446_744_073_709_551_616.0).contains(&n) {
        return Err(format!(
            "{} s at {} is {} samples, more than can be counted; use a shorter time",
            format_num(seconds),
            format_hz(rate_hz),
            format_num(n)
        ));
    }
    Ok(n as u64)
}

/// Parses a duration: `10ms`, `2s`, `1.5s`, `15m`, `1h`, `250us`. A bare number is seconds.
pub fn parse_duration(text: &str) -> Result<Duration, String> {
    let shown = sanitize(text);
    let t = text.trim();
    // The unit is the trailing run of letters, so `1e-3s` and `2.5e3` keep their exponent.
    let split = t
        .char_indices()
        .rev()
        .take_while(|(_, c)| c.is_alphabetic())
        .last()
        .map_or(t.len(), |(i, _)| i);
    let (num, unit) = t.split_at(split);
    let value: f64 = num
        .trim()
        .parse()
        .map_err(|_| format!("'{shown}' is not a duration: expected e.g. 10ms, 2s, 15m or 1h"))?;
    let scale = match unit.trim() {
        "" | "s" | "sec" => 1.0,
        "ms" => 1e-3,
        "us" | "µs" => 1e-6,
        "m" | "min" => 60.0,
        "h" => 3600.0,
        "d" => 86_400.0,
        other => {
            return Err(format!(
                "'{shown}': unknown time unit '{other}'; use us, ms, s, m (minutes), h or d"
            ))
        }
    };
    let secs = value * scale;
    if !secs.is_finite() || secs < 0.0 {
        return Err(format!("'{shown}' must be a non-negative duration"));
    }
    if secs > MAX_SECONDS {
        return Err(format!(
            "'{shown}' is longer than the longest duration accepted, {} s (about three years)",
            format_num(MAX_SECONDS)
        ));
    }
    Ok(Duration::from_secs_f64(secs))
}

/// Formats a number from input for a message: plainly when it is of ordinary size, in
/// engineering form (`1.0e300`) when plain digits would run on, so no message prints 300 digits.
pub fn format_num(x: f64) -> String {
    if is_extreme(x) {
        format!("{x:.1e}")
    } else {
        format!("{x}")
    }
}

/// Too large or too small for plain digits (non-finite values print as themselves).
fn is_extreme(x: f64) -> bool {
    let a = x.abs();
    a.is_finite() && (a >= 1e15 || (a > 0.0 && a < 1e-3))
}

/// Formats a frequency in hertz with a unit chosen for reading: `433.920000 MHz`, `12.500 kHz`;
/// values far outside any radio use print in engineering form (`1.0e300 Hz`).
pub fn format_hz(hz: f64) -> String {
    let a = hz.abs();
    if is_extreme(hz) || !hz.is_finite() {
        format!("{} Hz", format_num(hz))
    } else if a >= 1e12 {
        format!("{:.6} THz", hz / 1e12)
    } else if a >= 1e9 {
        format!("{:.6} GHz", hz / 1e9)
    } else if a >= 1e6 {
        format!("{:.6} MHz", hz / 1e6)
    } else if a >= 1e3 {
        format!("{:.3} kHz", hz / 1e3)
    } else {
        format!("{hz:.1} Hz")
    }
}

/// As [`format_hz`], with no digit finer than `resolution_hz` can tell: the last digit shown
/// steps by the largest power of ten not above it (a span edge of 4096 bins of 244 Hz prints
/// `432.9999 MHz`, not `432.999878 MHz`; with 1 Hz or finer, as [`format_hz`]).
pub fn format_hz_within(hz: f64, resolution_hz: f64) -> String {
    let a = hz.abs();
    if is_extreme(hz)
        || !hz.is_finite()
        || resolution_hz.is_nan()
        || resolution_hz <= 1.0
        || a < 1e3
    {
        return format_hz(hz);
    }
    let step_digits = resolution_hz.log10().floor() as i32;
    let (scale, unit_digits, unit) = if a >= 1e12 {
        (1e12, 12, "THz")
    } else if a >= 1e9 {
        (1e9, 9, "GHz")
    } else if a >= 1e6 {
        (1e6, 6, "MHz")
    } else {
        (1e3, 3, "kHz")
    };
    let decimals = (unit_digits - step_digits).clamp(0, 6) as usize;
    format!("{:.*} {unit}", decimals, hz / scale)
}

/// Formats a frequency compactly for axis labels and tables, with `digits` decimals in the chosen
/// unit.
pub fn format_hz_short(hz: f64, digits: usize) -> String {
    let a = hz.abs();
    if is_extreme(hz) || !hz.is_finite() {
        format_num(hz)
    } else if a >= 1e9 {
        format!("{:.*}G", digits, hz / 1e9)
    } else if a >= 1e6 {
        format!("{:.*}M", digits, hz / 1e6)
    } else if a >= 1e3 {
        format!("{:.*}k", digits, hz / 1e3)
    } else {
        format!("{:.*}", digits, hz)
    }
}

/// A frequency without trailing zeros: `433.5 MHz`, `150 kHz`; as exact as [`format_hz`].
pub fn format_hz_compact(hz: f64) -> String {
    let full = format_hz(hz);
    let Some((num, unit)) = full.split_once(' ') else { return full };
    format!("{} {unit}", trim_zeros(num))
}

/// A sample rate for people, without trailing zeros: `2.4 MS/s`, `1 MS/s`, `48 kS/s`.
pub fn format_rate(hz: f64) -> String {
    let (v, unit) = if hz >= 1e6 {
        (format!("{:.3}", hz / 1e6), "MS/s")
    } else if hz >= 1e3 {
        (format!("{:.1}", hz / 1e3), "kS/s")
    } else {
        (format!("{hz:.0}"), "S/s")
    };
    format!("{} {unit}", trim_zeros(&v))
}

/// `12.500` → `12.5`, `1.000` → `1`; digits without a point stay as they are.
fn trim_zeros(num: &str) -> &str {
    if num.contains('.') {
        num.trim_end_matches('0').trim_end_matches('.')
    } else {
        num
    }
}

/// A row rate for people: `20 rows/s`, `1 row/s`, `0.5 rows/s`.
pub fn format_rows_per_s(r: f64) -> String {
    if (r - 1.0).abs() < 0.05 {
        "1 row/s".to_string()
    } else if r < 1.0 {
        format!("{r:.1} rows/s")
    } else {
        format!("{r:.0} rows/s")
    }
}

/// Seconds as a short clock: `mm:ss` below an hour, `HhMM` above (five columns up to 10 h).
pub fn format_clock(t_s: f64) -> String {
    let s = t_s.max(0.0).floor() as u64;
    if s < 3600 {
        format!("{:02}:{:02}", s / 60, s % 60)
    } else {
        format!("{}h{:02}", s / 3600, (s % 3600) / 60)
    }
}

/// `x` rounded to `decimals` places, for output that reads like the measurement's precision
/// (never `-0`).
pub fn round_dp(x: f64, decimals: i32) -> f64 {
    let k = 10f64.powi(decimals);
    let r = (x * k).round() / k;
    if r == 0.0 {
        0.0
    } else {
        r
    }
}

/// `x` rounded to `digits` significant figures (`2_398_123.0` to 3 is `2_400_000.0`); zero and
/// non-finite values are returned as they are.
pub fn round_significant(x: f64, digits: i32) -> f64 {
    if x == 0.0 || !x.is_finite() {
        return x;
    }
    // Whole powers of ten are exact, their reciprocals are not: divide by one when rounding to
    // tens or more, so 2.4e6 stays 2.4e6.
    let decimals = digits - 1 - x.abs().log10().floor() as i32;
    if decimals >= 0 {
        let scale = 10f64.powi(decimals);
        (x * scale).round() / scale
    } else {
        let step = 10f64.powi(-decimals);
        (x / step).round() * step
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
    fn significant_figures() {
        // Arithmetic (common practice): 3 significant figures of 2 398 123 are 2.40e6.
        assert_eq!(round_significant(2_398_123.0, 3), 2.4e6);
        assert_eq!(round_significant(999_600.0, 3), 1e6);
        assert_eq!(round_significant(0.012_345, 2), 0.012);
        assert_eq!(round_significant(-433_999_878.0, 6), -434_000_000.0);
        assert_eq!(round_significant(0.0, 3), 0.0);
    }

    #[test]
    fn no_digit_finer_than_the_resolution() {
        // 1 MS/s in 4096 bins (244.14 Hz each): the first bin's lower edge lies half a bin below
        // centre − rate/2 (arithmetic).
        let bin = 1e6 / 4096.0;
        let edge = 433.5e6 - 0.5e6 - bin / 2.0;
        assert_eq!(format_hz(edge), "432.999878 MHz");
        assert_eq!(format_hz_within(edge, bin), "432.9999 MHz");
        assert_eq!(format_hz_within(edge + 1e6, bin), "433.9999 MHz");
        assert_eq!(format_hz_within(433.92e6, 12_500.0), "433.92 MHz");
        assert_eq!(format_hz_within(145e3, 30.0), "145.00 kHz");
        assert_eq!(format_hz_within(433.92e6, 0.5), format_hz(433.92e6));
    }

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
        assert_eq!(parse_duration("7d").unwrap(), Duration::from_secs(7 * 86_400));
        assert_eq!(parse_duration("1.5").unwrap(), Duration::from_millis(1500));
        assert!(parse_duration("3 fortnights").unwrap_err().contains("unknown time unit"));
        assert!(parse_duration("-1s").is_err());
    }

    #[test]
    fn limits_hold() {
        // ITU Radio Regulations No. 1.5: radio waves lie below 3 000 GHz.
        assert_eq!(parse_hz("3000G").unwrap(), 3e12);
        assert!(parse_hz("3001G").unwrap_err().contains("beyond"));
        assert!(parse_rate("0.5").unwrap_err().contains("out of range"));
        assert!(parse_rate("101G").unwrap_err().contains("out of range"));
        assert_eq!(parse_rate("1").unwrap(), 1.0);
        assert!(low_rate_note(2.4).unwrap().contains("2.4M"));
        assert!(low_rate_note(1e3).is_none());
        assert_eq!(parse_duration("1e-3s").unwrap(), Duration::from_millis(1));
        assert_eq!(parse_duration("2.5e3").unwrap(), Duration::from_millis(2_500_000));
        assert!(parse_duration("20000000000000000000").unwrap_err().contains("longest"));
        assert!(parse_duration("1e16h").unwrap_err().contains("longest"));
        assert_eq!(samples_in(MAX_SECONDS, MAX_RATE_HZ), Ok(10_000_000_000_000_000_000));
        assert!(samples_in(1e300, 1.0).is_err());
        assert!(samples_in(f64::NAN, 1.0).is_err());
        assert!(samples_in(-1.0, 1.0).is_err());
    }

    #[test]
    fn huge_numbers_print_in_engineering_form() {
        assert_eq!(format_hz(1e300), "1.0e300 Hz");
        assert_eq!(format_hz(1e-17), "1.0e-17 Hz");
        assert_eq!(format_hz(3e12), "3.000000 THz");
        assert_eq!(format_num(1e300), "1.0e300");
        assert_eq!(format_num(0.5), "0.5");
        assert_eq!(format_hz_short(-1e300, 1), "-1.0e300");
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

    #[test]
    fn compact_formats_for_the_screen() {
        assert_eq!(format_rate(2.4e6), "2.4 MS/s");
        assert_eq!(format_rate(1e6), "1 MS/s");
        assert_eq!(format_rate(48e3), "48 kS/s");
        assert_eq!(format_rate(2.048e6), "2.048 MS/s");
        assert_eq!(format_rows_per_s(1.0), "1 row/s");
        assert_eq!(format_rows_per_s(20.0), "20 rows/s");
        assert_eq!(format_rows_per_s(0.5), "0.5 rows/s");
        assert_eq!(format_hz_compact(433.5e6), "433.5 MHz");
        assert_eq!(format_hz_compact(150e3), "150 kHz");
        assert_eq!(format_hz_compact(433.920001e6), "433.920001 MHz");
        assert_eq!(format_clock(65.9), "01:05");
        assert_eq!(format_clock(3725.0), "1h02");
    }
}
