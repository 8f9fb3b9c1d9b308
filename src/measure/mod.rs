//! Measurements: pure functions over a [`Spectrum`](crate::dsp::Spectrum), shared by `measure`,
//! `log` and `watch`, and tested without threads or I/O.

pub mod band;
pub mod calibration;
pub mod census;
pub mod change;
pub mod classify;
pub mod noise;
pub mod occupancy;
pub mod panorama;
pub mod signals;
pub mod stats;
pub mod vote;

pub use band::{
    band_power, occupied_bandwidth, occupied_bandwidth_of, xdb_bandwidth, BinRun, Edges,
};
pub use noise::{noise_floor, spectrum_floor, NoiseFloor};
pub use signals::{find_signals, Detection, Signal};
