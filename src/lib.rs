//! bandwarden: watch, measure and log a radio band from complex IQ samples.

pub mod dsp;
pub mod source;
pub mod units;
