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

use crate::measure::calibration::{from_stream, Calibration};
use crate::source::SourceInfo;

/// Settles the run's calibration once the source is open: the flags' one, else the stream's
/// own reference level (a VITA 49 context), and tells the user which was taken.
fn settle_calibration(given: &mut Option<Calibration>, info: &SourceInfo) -> anyhow::Result<()> {
    let (cal, note) = from_stream(given.take(), info.reference_level_dbm)?;
    *given = cal;
    if let Some(n) = note {
        crate::messages::note(&n);
    }
    Ok(())
}
