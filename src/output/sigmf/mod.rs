//! SigMF written out: the recording of the input (`--record`), every emission as an annotation
//! (`--annotate`), triggered captures (`--capture`), and what every file written shares
//! (global object, capture segments, our namespace, whole-file meta writes).

pub mod annotate;
pub mod capture;
pub mod capture_writer;
pub mod record;
pub mod write;
