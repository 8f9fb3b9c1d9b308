//! bandwarden: watch, measure and log a radio band from complex IQ samples.
//!
//! The binary is a thin shell over this library. Layers, bottom to top, each importing only those
//! below it: [`messages`] and [`units`]; [`kernels`]; [`source`] (samples in); [`dsp`] (calibrated
//! spectra); [`measure`] (pure measurements); [`plan`] (channel plans); [`pipeline`] (reader,
//! drive loop, stop rules); [`output`] and [`tui`] (consumers); [`cli`] (flags to configs);
//! [`cmd`] (configs to consumers and a run); [`app`] (dispatch and exit codes).

pub mod app;
pub mod cli;
pub mod cmd;
pub mod dsp;
pub mod kernels;
pub mod measure;
pub mod messages;
pub mod output;
pub mod pipeline;
pub mod plan;
pub mod source;
#[doc(hidden)]
pub mod testkit;
pub mod tui;
pub mod units;
