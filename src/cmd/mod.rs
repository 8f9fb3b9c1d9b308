//! One module per subcommand; each turns a validated config into consumers and runs the
//! pipeline. No engine loop lives here.

pub mod demo;
pub mod log;
pub mod measure;
<<<<<<< HEAD
pub mod report;
pub mod snapshot;
=======
pub mod sigmf_out;
>>>>>>> main
pub mod watch;
