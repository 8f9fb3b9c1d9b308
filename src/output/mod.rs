//! Consumers that write what bandwarden measures: the `measure` report (table and JSON), the
//! occupancy log (JSON Lines or CSV), the progress line, pictures (`snapshot`'s waterfall,
//! `report`'s heat map) and the summary of logs; and where their output goes.

pub mod canvas;
pub mod heatmap;
pub mod held_rows;
pub mod log;
pub mod log_records;
pub mod log_summary;
pub mod marks;
pub mod occupancy_log;
pub mod on_air;
pub mod picture;
pub mod progress;
pub mod report;
pub mod rotation;
pub mod samples;
pub mod sink;
pub mod snapshot;
pub mod summary_table;
pub mod ticks;
pub mod whole;
