//! `bandwarden import`: store occupancy logs in a database ([`crate::store::write::import`]),
//! each record once, so `report --db` sums them with what `collect --db` stored.

use crate::cli::ImportConfig;
use crate::messages::{note, notes, sanitize};
use crate::store::write::{import, Batch, Writer};
use anyhow::{Context, Result};
use std::io::BufReader;
use std::process::ExitCode;
use std::time::{Duration, Instant};

pub fn run(cfg: ImportConfig) -> Result<ExitCode> {
    let db = crate::store::open(&cfg.db)?;
    // Large transactions: an import has no broker waiting for acknowledgements.
    let mut w = Writer::new(db, Batch { records: 20_000, age: Duration::from_secs(2) });
    let began = Instant::now();
    let (mut stored, mut duplicates, mut without_id) = (0, 0, 0);
    for path in &cfg.logs {
        let shown = sanitize(path);
        let got = if path == "-" {
            import(&mut w, "stdin", std::io::stdin().lock())
        } else {
            let file = std::fs::File::open(path)
                .with_context(|| format!("cannot open the log '{shown}'; check the path"))?;
            import(&mut w, path, BufReader::new(file))
        }
        .with_context(|| format!("cannot import the log '{shown}'"))?;
        notes(&got.notes);
        stored += got.stored;
        duplicates += got.duplicates;
        without_id += got.without_id;
    }
    let s = began.elapsed().as_secs_f64();
    note(&format!(
        "stored {stored} records in {} ({:.0} records/s); {duplicates} were there already",
        cfg.db.shown(),
        stored as f64 / s.max(1e-9)
    ));
    if without_id > 0 {
        note(&format!(
            "{without_id} lines were not records with a run and seq (written before records had ids?); not stored"
        ));
    }
    Ok(ExitCode::SUCCESS)
}
