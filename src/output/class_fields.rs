//! The four fields every output that names an emission's kind writes, the same everywhere:
//! `class`, `class_confidence` (0..1, to a thousandth), `class_params` (an object of the
//! parameters that apply) and `designator` (ITU RR Appendix 1). Flattened into a record.
//! Parameters are written rounded (frequencies to 0.01 Hz, depth to 1e-4, times to 1 ns): far
//! finer than the classifier resolves them, without the float noise of a raw estimate.

use crate::measure::classify::{ClassParams, Classification};
use serde::Serialize;

#[derive(Serialize, Debug, Clone, PartialEq)]
pub struct ClassFields {
    pub class: String,
    pub class_confidence: f64,
    pub class_params: ClassParams,
    pub designator: String,
}

impl ClassFields {
    pub fn of(c: &Classification) -> ClassFields {
        let confidence = (c.confidence * 1000.0).round() / 1000.0;
        ClassFields {
            class: c.class.as_str().to_string(),
            class_confidence: if confidence.is_finite() { confidence } else { 0.0 },
            class_params: rounded(&c.params),
            designator: c.designator.clone(),
        }
    }
}

/// `p` rounded as the module doc says (also for the census's voted parameters).
pub fn rounded(p: &ClassParams) -> ClassParams {
    let r = |v: Option<f64>, dp: i32| v.map(|x| crate::units::round_dp(x, dp));
    ClassParams {
        symbol_rate_hz: r(p.symbol_rate_hz, 2),
        shift_hz: r(p.shift_hz, 2),
        deviation_hz: r(p.deviation_hz, 2),
        mod_depth: r(p.mod_depth, 4),
        subcarrier_spacing_hz: r(p.subcarrier_spacing_hz, 2),
        pulse_width_s: r(p.pulse_width_s, 9),
        pri_s: r(p.pri_s, 9),
        ..p.clone()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::measure::classify::Class;

    #[test]
    fn parameters_are_written_rounded() {
        let c = Classification {
            class: Class::Fm,
            confidence: 0.81234,
            params: ClassParams {
                deviation_hz: Some(2308.7837143988054),
                mod_depth: Some(0.4005020833333333),
                pri_s: Some(0.0012345678912),
                ..Default::default()
            },
            designator: "11K0F3E".into(),
            note: None,
        };
        let f = ClassFields::of(&c);
        assert_eq!(f.class_confidence, 0.812);
        assert_eq!(f.class_params.deviation_hz, Some(2308.78));
        assert_eq!(f.class_params.mod_depth, Some(0.4005));
        assert_eq!(f.class_params.pri_s, Some(0.001234568));
        assert_eq!(f.class_params.tones, None);
    }
}
