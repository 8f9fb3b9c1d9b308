// TEMPORARY: replaced by the classify branch at merge
//! Modulation family of one emission, and its ITU emission designator.
//!
//! This version holds the agreed public surface with a classifier that answers `unknown` for
//! every input; the designator codes are complete.

use num_complex::Complex32;
use serde::{Deserialize, Serialize};

/// One emission's raw samples, as taken from the input (not yet shifted to baseband).
pub struct EmissionIq<'a> {
    pub samples: &'a [Complex32],
    /// Sample rate of `samples`, Hz.
    pub rate_hz: f64,
    /// Centre of the emission relative to the centre of `samples`' band, Hz (−rate/2..rate/2).
    pub offset_hz: f64,
    /// Its measured 99 % occupied bandwidth, Hz.
    pub obw_hz: f64,
    /// Noise power spectral density, |x|² per Hz, when the caller knows it.
    pub noise_psd: Option<f64>,
}

/// Modulation families (trade terms).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Class {
    Cw,
    Am,
    Fm,
    Fsk,
    Psk,
    Qam,
    Ofdm,
    Pulsed,
    Noise,
    Unknown,
}

impl Class {
    pub fn as_str(self) -> &'static str {
        match self {
            Class::Cw => "cw",
            Class::Am => "am",
            Class::Fm => "fm",
            Class::Fsk => "fsk",
            Class::Psk => "psk",
            Class::Qam => "qam",
            Class::Ofdm => "ofdm",
            Class::Pulsed => "pulsed",
            Class::Noise => "noise",
            Class::Unknown => "unknown",
        }
    }

    /// First symbol of the designator (ITU RR Appendix 1: nature of modulation of the main
    /// carrier).
    fn first_symbol(self) -> char {
        match self {
            Class::Cw => 'N',
            Class::Am => 'A',
            Class::Fm | Class::Fsk => 'F',
            Class::Psk => 'G',
            Class::Qam | Class::Ofdm => 'D',
            Class::Pulsed => 'P',
            Class::Noise | Class::Unknown => 'X',
        }
    }
}

/// Parameters that apply to the class; the others are None.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct ClassParams {
    #[serde(skip_serializing_if = "Option::is_none")]
    pub symbol_rate_hz: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub tones: Option<u32>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub shift_hz: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub psk_order: Option<u32>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub deviation_hz: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub mod_depth: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub subcarrier_spacing_hz: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub pulse_width_s: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub pri_s: Option<f64>,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Classification {
    pub class: Class,
    /// 0..1
    pub confidence: f64,
    pub params: ClassParams,
    /// ITU RR Appendix 1 designator.
    pub designator: String,
    /// When class is Unknown for lack of evidence: what it needed, in words.
    pub note: Option<String>,
}

/// Classify one emission (this version: always `unknown`).
pub fn classify(input: &EmissionIq) -> Classification {
    Classification {
        class: Class::Unknown,
        confidence: 0.0,
        params: ClassParams::default(),
        designator: designator(input.obw_hz, Class::Unknown),
        note: Some("classifier not built".into()),
    }
}

/// The necessary-bandwidth code of ITU RR Appendix 1 for `hz`: three significant figures with
/// H, K, M or G in place of the decimal point ("400H", "2K40", "12K5", "180K", "1M25", "10M0");
/// below 1 Hz, "H" and thousandths of a hertz ("H100" for 0.1 Hz).
pub fn bandwidth_code(hz: f64) -> String {
    if !hz.is_finite() || hz <= 0.0 {
        return "H000".into();
    }
    if hz < 0.9995 {
        return format!("H{:03}", ((hz * 1000.0).round() as u32).max(1));
    }
    let mut e = hz.log10().floor() as i32;
    let mut m = (hz / 10f64.powi(e - 2)).round() as u64;
    if m >= 1000 {
        m /= 10;
        e += 1;
    }
    if e >= 12 {
        return "999G".into();
    }
    let unit_e = 3 * e.div_euclid(3);
    let letter = ['H', 'K', 'M', 'G'][(unit_e / 3) as usize];
    let digits = m.to_string();
    let before = (e - unit_e + 1) as usize;
    format!("{}{letter}{}", &digits[..before], &digits[before..])
}

/// [`bandwidth_code`] followed by the first symbol the class implies.
pub fn designator(obw_hz: f64, class: Class) -> String {
    format!("{}{}", bandwidth_code(obw_hz), class.first_symbol())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bandwidth_codes_follow_the_appendix_examples() {
        // ITU Radio Regulations, Appendix 1, §1 (worked examples of the necessary bandwidth).
        for (hz, code) in [
            (400.0, "400H"),
            (2.4e3, "2K40"),
            (6e3, "6K00"),
            (12.5e3, "12K5"),
            (180.4e3, "180K"),
            (1.25e6, "1M25"),
            (2e6, "2M00"),
            (10e6, "10M0"),
            (0.1, "H100"),
            (25.3, "25H3"),
        ] {
            assert_eq!(bandwidth_code(hz), code, "{hz} Hz");
        }
        // Rounding to three figures may carry into the next unit.
        assert_eq!(bandwidth_code(999.7), "1K00");
        assert_eq!(designator(16e3, Class::Fm), "16K0F");
        assert_eq!(designator(2.4e3, Class::Unknown), "2K40X");
    }
}
