//! bandwarden: watch, measure and log a radio band from complex IQ samples.
//!
//! The binary is a thin shell over this library: [`app`] dispatches commands in [`cmd`]; samples
//! come from [`source`] on a reader thread, become calibrated spectra in [`dsp`], are measured by
//! the pure functions in [`measure`] and written by [`output`] or shown live by [`tui`].

pub mod app;
pub mod cli;
pub mod cmd;
pub mod dsp;
pub mod kernels;
pub mod measure;
pub mod output;
pub mod pipeline;
pub mod plan;
pub mod source;
#[doc(hidden)]
pub mod testkit;
pub mod tui;
pub mod units;
