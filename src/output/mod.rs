//! Writers for what bandwarden measures: the `measure` report (table and JSON).

pub mod report;
