//! Consumers that write what bandwarden measures: the `measure` report (table and JSON), the
//! occupancy log (JSON Lines or CSV) and the progress line; SigMF written out (the recording of
//! the input, annotations, triggered captures); and where their output goes.

pub mod annotate;
pub mod capture;
pub mod capture_writer;
pub mod census;
pub mod log;
pub mod log_records;
pub mod occupancy_log;
pub mod on_air;
pub mod progress;
pub mod record;
pub mod report;
pub mod rotation;
pub mod samples;
pub mod sigmf_write;
pub mod sink;
pub mod whole;
