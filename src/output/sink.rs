//! Where a command's output goes: a file (replaced, or appended to) or standard output.

use anyhow::{Context, Result};
use std::io::Write;

/// An opened output and whether it is empty (so a CSV header is still needed there).
pub struct Sink {
    pub out: Box<dyn Write>,
    pub empty: bool,
}

/// Opens `path` (`-` for standard output); a file is replaced unless `append`.
pub fn open(path: &str, append: bool, what: &str) -> Result<Sink> {
    if path == "-" {
        return Ok(Sink { out: Box::new(std::io::stdout()), empty: true });
    }
    let file = std::fs::OpenOptions::new()
        .create(true)
        .write(true)
        .append(append)
        .truncate(!append)
        .open(path)
        .with_context(|| {
            format!(
                "cannot open '{}' for the {what}; check the directory exists and is writable",
                crate::messages::sanitize(path)
            )
        })?;
    let empty = file.metadata().map(|m| m.len() == 0).unwrap_or(true);
    Ok(Sink { out: Box::new(file), empty })
}
