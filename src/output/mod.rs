//! Writers for what bandwarden measures: the `measure` report (table and JSON).

pub mod log;
pub mod log_records;
pub mod progress;
pub mod report;
