//! The four fields every output that names an emission's kind writes, the same everywhere:
//! `class`, `class_confidence` (0..1, to a thousandth), `class_params` (an object of the
//! parameters that apply) and `designator` (ITU RR Appendix 1). Flattened into a record.

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
            class_params: c.params.clone(),
            designator: c.designator.clone(),
        }
    }
}
