//! One module per subcommand; each turns a validated config into consumers and runs the
//! pipeline. No engine loop lives here.

pub mod calibrate;
pub mod census;
pub mod collect;
pub mod demo;
pub mod import;
pub mod log;
pub mod measure;
pub mod report;
pub mod snapshot;
pub mod watch;
