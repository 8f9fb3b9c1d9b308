//! Change detection for unattended logging (`log --alarms`): a baseline of each channel's usual
//! occupancy and noise floor by hour of week ([`baseline`]), residuals of each interval against
//! it standardised, and a published sequential test on them ([`chart`]), turned into alarms that
//! are raised and cleared ([`alarm`]). Pure: no I/O, no clock of its own.

pub mod alarm;
pub mod baseline;
pub mod chart;

pub use chart::{Chart, Direction, Method, Verdict, DEFAULT_CUSUM, DEFAULT_EWMA};
