//! Consumers that write what bandwarden measures, in rooms by purpose:
//! - [`log`]: the occupancy log (JSON Lines or CSV) — schema, the consumer, rotation;
//! - [`sigmf`]: SigMF out — recording, annotations, captures;
//! - [`picture`]: waterfalls and heat maps (PNG/SVG), colour maps;
//! - [`report`]: `measure`'s report and the whole-input consumers behind it;
//! - [`summary`]: occupancy logs read back and summed for `report`;
//! - [`census`]: the census consumer and its table, JSON and plan;
//! - [`progress`], [`samples`] (IQ written to files and pipes) and [`sink`] (where output goes).

pub mod census;
pub mod change;
pub mod class_fields;
pub mod levels;
pub mod log;
pub mod picture;
pub mod progress;
pub mod report;
pub mod samples;
pub mod sigmf;
pub mod sink;
pub mod summary;
