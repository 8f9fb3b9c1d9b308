//! SigMF written out: the recording of the input (`--record`), every emission as an annotation
//! (`--annotate`), triggered captures (`--capture`), and what every file written shares
//! (global object, capture segments, our namespace, whole-file meta writes); [`outputs`] builds
//! the ones a command's flags ask for and says what they came to.

pub mod annotate;
pub mod capture;
pub mod capture_writer;
pub mod outputs;
pub mod record;
pub mod write;
pub mod writer_thread;
