//! Emission designators (ITU Radio Regulations, Appendix 1).
//!
//! The necessary bandwidth is written with three significant figures and a letter in place of the
//! decimal point: H (Hz) from 0.001 to 999 Hz, K (kHz) from 1.00 to 999 kHz, M (MHz) from 1.00
//! to 999 MHz, G (GHz) from 1.00 to 999 GHz; the first character is never zero except before
//! H. Rounding to three figures can carry into the next unit (999.6 Hz is 1.00 kHz, "1K00").
//! Defined outputs for what has no bandwidth: zero, negative or non-finite → "H000"; from
//! 999.5 GHz up → "999G" (the largest code).
//!
//! The first symbol (nature of modulation of the main carrier) follows from the class:
//!
//! | class | symbol | why |
//! |---|---|---|
//! | cw | N0N | unmodulated carrier: N, and the class itself says there is no modulating signal (0) and no information (N) |
//! | am | A | double-sideband amplitude modulation (a carrier with both sidebands is what the class detects) |
//! | fm, fsk | F | frequency modulation (frequency-shift keying is frequency modulation) |
//! | psk | G | phase modulation |
//! | qam | D | amplitude and angle modulation together |
//! | ofdm | D | each subcarrier carries QAM or PSK, so the composite carrier varies in amplitude and angle together; W (combinations of amplitude, angle and pulse) fits less closely, as no pulse modulation is involved |
//! | pulsed | P0N | a train of pulses whose envelope is on/off only (the class does not look inside the pulses): P, with no modulating signal and no information |
//! | noise, unknown | X | cases not otherwise covered |
//!
//! Otherwise the second symbol (nature of the modulating signal: analog, one or more channels of
//! quantised information, …) and the third (kind of information: telephony, data, …) are not
//! determined by the class and are left off.

use super::Class;

/// The bandwidth part of a designator for `hz`.
pub fn bandwidth_code(hz: f64) -> String {
    // The bandwidth as the outputs print it (to 0.1 Hz from 1 Hz up), so the code always
    // agrees with the `obw_hz` beside it: 7924.96 Hz is printed 7925.0 and coded 7K93.
    let hz = if hz >= 1.0 { (hz * 10.0).round() / 10.0 } else { hz };
    if !(hz.is_finite() && hz > 0.0) || hz < 0.0005 {
        return "H000".into();
    }
    if hz < 1.0 {
        let milli = (hz * 1000.0).round() as u32;
        return if milli >= 1000 { "1H00".into() } else { format!("H{milli:03}") };
    }
    let mut exp = hz.log10().floor() as i32;
    let mut digits = (hz / 10f64.powi(exp - 2)).round() as u32;
    if digits >= 1000 {
        digits /= 10;
        exp += 1;
    }
    if digits < 100 {
        // log10 rounding just below a power of ten.
        digits *= 10;
        exp -= 1;
    }
    let letters = ['H', 'K', 'M', 'G'];
    let unit = (exp / 3) as usize;
    if unit >= letters.len() {
        return "999G".into();
    }
    let whole = (exp % 3 + 1) as usize;
    let s = digits.to_string();
    format!("{}{}{}", &s[..whole], letters[unit], &s[whole..])
}

/// The first symbol(s) the class implies (see the module table).
pub fn class_symbols(class: Class) -> &'static str {
    match class {
        Class::Cw => "N0N",
        Class::Am => "A",
        Class::Fm | Class::Fsk => "F",
        Class::Psk => "G",
        Class::Qam | Class::Ofdm => "D",
        Class::Pulsed => "P0N",
        Class::Noise | Class::Unknown => "X",
    }
}

/// Bandwidth code of `obw_hz` followed by the symbols the class implies.
pub fn designator(obw_hz: f64, class: Class) -> String {
    format!("{}{}", bandwidth_code(obw_hz), class_symbols(class))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The worked examples of ITU Radio Regulations Appendix 1 (§1, necessary bandwidth).
    #[test]
    fn appendix_1_examples() {
        for (hz, code) in [
            (400.0, "400H"),
            (2.4e3, "2K40"),
            (6e3, "6K00"),
            (12.5e3, "12K5"),
            (180.4e3, "180K"),
            (1.25e6, "1M25"),
            (2e6, "2M00"),
            (10e6, "10M0"),
        ] {
            assert_eq!(bandwidth_code(hz), code, "{hz} Hz");
        }
        // Further Appendix 1 examples, from memory: 0.002 Hz, 0.1 Hz, 25.3 Hz, 180.5 kHz,
        // 202 MHz, 5.65 GHz.
        for (hz, code) in [
            (0.002, "H002"),
            (0.1, "H100"),
            (25.3, "25H3"),
            (180.5e3, "181K"),
            (202e6, "202M"),
            (5.65e9, "5G65"),
        ] {
            assert_eq!(bandwidth_code(hz), code, "{hz} Hz");
        }
    }

    /// Rounding to three figures carries into the next unit; what has no bandwidth gets the
    /// documented codes.
    #[test]
    fn edges_and_bad_values() {
        assert_eq!(bandwidth_code(999.6), "1K00");
        assert_eq!(bandwidth_code(999.4), "999H");
        assert_eq!(bandwidth_code(1.0), "1H00");
        assert_eq!(bandwidth_code(0.9996), "1H00");
        assert_eq!(bandwidth_code(999.96e3), "1M00");
        assert_eq!(bandwidth_code(0.0), "H000");
        assert_eq!(bandwidth_code(-5.0), "H000");
        assert_eq!(bandwidth_code(f64::NAN), "H000");
        assert_eq!(bandwidth_code(f64::INFINITY), "H000");
        assert_eq!(bandwidth_code(2e12), "999G");
    }

    #[test]
    fn designators_by_class() {
        assert_eq!(designator(16e3, Class::Fm), "16K0F");
        assert_eq!(designator(2.4e3, Class::Am), "2K40A");
        assert_eq!(designator(12.5e3, Class::Psk), "12K5G");
        assert_eq!(designator(100.0, Class::Cw), "100HN0N");
        assert_eq!(designator(1.25e6, Class::Ofdm), "1M25D");
        assert_eq!(designator(5e3, Class::Unknown), "5K00X");
    }
}
