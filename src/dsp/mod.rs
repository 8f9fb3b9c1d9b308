//! The DSP engine: windows, STFT, PSD averaging and calibration.

pub mod average;
pub mod engine;
pub mod spectrum;
pub mod stft;
pub mod window;
pub mod worker;

pub use engine::{DspConfig, Engine, EngineConfig};
pub use spectrum::{Geometry, Spectrum};
pub use window::{Window, WindowKind};
