//! Consumers that write what bandwarden measures: the `measure` report (table and JSON), the
//! occupancy log (JSON Lines or CSV) and the progress line; and where their output goes.

pub mod collect;
pub mod log;
pub mod log_records;
pub mod mqtt;
pub mod occupancy_log;
pub mod progress;
pub mod publish;
pub mod report;
pub mod rotation;
pub mod samples;
pub mod sink;
pub mod spool;
pub mod subscribe;
pub mod whole;
