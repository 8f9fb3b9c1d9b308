//! One module per subcommand; each turns validated arguments into a run.

pub mod demo;
pub mod log;
pub mod measure;
pub mod watch;
