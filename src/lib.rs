//! bandwarden: watch, measure and log a radio band from complex IQ samples.
//!
//! The binary is a thin shell over this library. Each layer imports only from its own layer and
//! those below it (`tests/layers.rs` reads this list and checks every non-test line of code).
//!
//! Layers, lowest first:
//! 1. `messages`, `units`, `testkit`: notes to the user, numbers with units, the seeded test kit
//! 2. `kernels`: the per-sample loops around the FFT, baseline and AVX2
//! 3. `source`: samples in (files, SigMF, WAV, stdin, TCP, the demo scene), the reader thread
//! 4. `dsp`: windows, the STFT engine, calibrated spectra
//! 5. `plan`: channel plans
//! 6. `measure`: pure measurements (noise, signals, band, occupancy, census)
//! 7. `pipeline`: the one run (blocks to rows to events), its outbox, stop rules, command set-up
//! 8. `output`: consumers that write (log, SigMF, pictures, reports, summaries)
//! 9. `store`: the database of a network's records (SQLite, PostgreSQL), written and summed
//! 10. `net`: the monitoring network (MQTT, spool, publish, collect)
//! 11. `tui`: the live monitor's screen
//! 12. `cli`: command-line flags to validated configs
//! 13. `cmd`: configs to consumers and a run, one file per command
//! 14. `app`: dispatch and exit codes
//!
//! DEVELOPERS.md has a map of which folder to open for what.

pub mod app;
pub mod cli;
pub mod cmd;
pub mod dsp;
pub mod kernels;
pub mod measure;
pub mod messages;
pub mod net;
pub mod output;
pub mod pipeline;
pub mod plan;
pub mod source;
pub mod store;
#[doc(hidden)]
pub mod testkit;
pub mod tui;
pub mod units;
