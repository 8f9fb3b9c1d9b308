//! Consumers that write what bandwarden measures: the `measure` report (table and JSON), the
//! occupancy log (JSON Lines or CSV), the progress line, pictures (`snapshot`'s waterfall,
//! `report`'s heat map) and the summary of logs; SigMF written out (the recording of the input,
//! annotations, triggered captures); and where their output goes.

pub mod annotate;
pub mod canvas;
pub mod capture;
pub mod capture_writer;
pub mod census;
pub mod collect;
pub mod heatmap;
pub mod held_rows;
pub mod log;
pub mod log_records;
pub mod log_summary;
pub mod marks;
pub mod mqtt;
pub mod occupancy_log;
pub mod on_air;
pub mod picture;
pub mod progress;
pub mod publish;
pub mod record;
pub mod report;
pub mod rotation;
pub mod samples;
pub mod sigmf_write;
pub mod sink;
pub mod snapshot;
pub mod spool;
pub mod subscribe;
pub mod summary_table;
pub mod ticks;
pub mod whole;
