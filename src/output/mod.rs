//! Consumers that write what bandwarden measures: the `measure` report (table and JSON), the
//! occupancy log (JSON Lines or CSV) and the progress line; and where their output goes.

pub mod census;
pub mod log;
pub mod log_records;
pub mod occupancy_log;
pub mod on_air;
pub mod progress;
pub mod report;
pub mod rotation;
pub mod samples;
pub mod sink;
pub mod whole;
