//! Measurements: pure functions over a [`Spectrum`](crate::dsp::Spectrum), shared by `measure`,
//! `log`, `watch` and pictures, and tested without threads or I/O.

pub mod band;
pub mod noise;
pub mod occupancy;
pub mod signals;
pub mod stats;

pub use band::{band_power, occupied_bandwidth, xdb_bandwidth, Edges};
pub use noise::noise_floor;
pub use signals::{find_signals, Detection, Signal};
