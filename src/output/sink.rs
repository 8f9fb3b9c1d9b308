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
        let out = Named { inner: std::io::stdout(), name: format!("standard output ({what})") };
        return Ok(Sink { out: Box::new(out), empty: true });
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
    let name = format!("'{}' ({what})", crate::messages::sanitize(path));
    Ok(Sink { out: Box::new(Named { inner: file, name }), empty })
}

/// A writer whose errors say where the output was going and what to check, instead of a bare
/// OS message; the error kind is kept, so a broken pipe is still recognised as one.
struct Named<W> {
    inner: W,
    name: String,
}

impl<W> Named<W> {
    fn explain(&self, e: std::io::Error) -> std::io::Error {
        if e.kind() == std::io::ErrorKind::BrokenPipe {
            return e;
        }
        let text = format!(
            "cannot write to {}: {e}; check the disk has room and the file is writable",
            self.name
        );
        std::io::Error::new(e.kind(), text)
    }
}

impl<W: Write> Write for Named<W> {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        self.inner.write(buf).map_err(|e| self.explain(e))
    }

    fn flush(&mut self) -> std::io::Result<()> {
        self.inner.flush().map_err(|e| self.explain(e))
    }
}
