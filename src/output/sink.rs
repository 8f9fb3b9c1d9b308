//! Where a command's output goes — a file (replaced, or appended to) or standard output — and the
//! one checked path every command writes through.
//!
//! A write error names the output it happened on, and keeps its kind: a broken pipe (the reader
//! of our output went away, as in `bandwarden … | head`) still reads as one, so `app` ends
//! quietly with 0; anything else (a full disk, a closed descriptor) becomes one `bandwarden:` line
//! and exit 1. Standard output that is closed (`>&-`) is refused up front: writes to it would
//! otherwise vanish without an error.

use anyhow::{bail, Context, Result};
use std::io::{self, Read, Seek, SeekFrom, Write};
use std::os::fd::AsFd;
use std::path::PathBuf;

/// An opened output and whether it is empty (so a CSV header is still needed there).
pub struct Sink {
    pub out: Box<dyn Write>,
    pub empty: bool,
}

/// Opens `path` (`-` for standard output); a file is replaced unless `append`. `what` names the
/// output in messages ("log", "report").
pub fn open(path: &str, append: bool, what: &str) -> Result<Sink> {
    if path == "-" {
        stdout_is_open(what)?;
        let out = Named { inner: io::stdout(), name: format!("the {what} on standard output") };
        return Ok(Sink { out: Box::new(out), empty: true });
    }
    let shown = crate::messages::sanitize(path);
    let mut file = std::fs::OpenOptions::new()
        .create(true)
        .read(append)
        .write(true)
        .append(append)
        .truncate(!append)
        .open(path)
        .with_context(|| {
            format!(
                "cannot open '{shown}' for the {what}; check the directory exists and is writable"
            )
        })?;
    let len = file.metadata().map(|m| m.len()).unwrap_or(0);
    let mut out = Named { inner: file.try_clone()?, name: format!("the {what} '{shown}'") };
    if append && len > 0 && !ends_with_newline(&mut file, len) {
        // The last line was cut (a crash, a full disk): start a new one so records are not glued.
        out.write_all(b"\n").context("cannot finish the cut last line")?;
    }
    Ok(Sink { out: Box::new(out), empty: len == 0 })
}

/// Checks at start that folder `dir` (given with `flag`) exists and takes files, so what is
/// written there later (on a key press, at an event) does not fail in front of the user.
pub fn check_folder(dir: &str, flag: &str) -> Result<()> {
    let shown = crate::messages::sanitize(dir);
    match std::fs::metadata(dir) {
        Err(e) if e.kind() == io::ErrorKind::NotFound => {
            bail!("{flag} {shown}: no such folder; create it or name another")
        }
        Err(e) => bail!("{flag} {shown}: {e}"),
        Ok(m) if !m.is_dir() => bail!("{flag} {shown} is not a folder"),
        Ok(_) => {}
    }
    let probe = std::path::Path::new(dir).join(format!(".bandwarden-probe-{}", std::process::id()));
    match std::fs::File::create(&probe) {
        Ok(_) => {
            let _ = std::fs::remove_file(&probe);
            Ok(())
        }
        Err(e) => bail!("{flag} {shown}: cannot write there ({e}); name a folder you can write to"),
    }
}

/// Refuses to write over any of `inputs` (the input recording, the plan): opening the output
/// would truncate what is about to be read.
/// Refuses to write `out` (given with `flag`) when it is one of the files the run reads.
pub fn refuse_overwrite(out: &str, flag: &str, inputs: &[PathBuf]) -> Result<()> {
    use std::os::unix::fs::MetadataExt;
    if out == "-" {
        return Ok(());
    }
    let Ok(o) = std::fs::metadata(out) else { return Ok(()) };
    for input in inputs {
        if let Ok(i) = std::fs::metadata(input) {
            if (i.dev(), i.ino()) == (o.dev(), o.ino()) {
                bail!(
                    "the output '{}' is the input '{}': writing it would destroy what is to be read; give {flag} another file",
                    crate::messages::sanitize(out),
                    crate::messages::sanitize(&input.to_string_lossy())
                );
            }
        }
    }
    Ok(())
}

fn ends_with_newline(file: &mut std::fs::File, len: u64) -> bool {
    let mut last = [0u8];
    file.seek(SeekFrom::Start(len - 1)).is_ok()
        && file.read_exact(&mut last).is_ok()
        && last[0] == b'\n'
}

/// Fails when standard output is closed, where the standard library would drop writes silently.
fn stdout_is_open(what: &str) -> Result<()> {
    if crate::messages::stdout_closed() || io::stdout().as_fd().try_clone_to_owned().is_err() {
        bail!("standard output is closed, so the {what} would be lost; redirect it to a file (> FILE) instead");
    }
    Ok(())
}

/// A writer whose errors say which output they happened on.
struct Named<W: Write> {
    inner: W,
    name: String,
}

impl<W: Write> Named<W> {
    fn explain(&self, e: io::Error) -> io::Error {
        if e.kind() == io::ErrorKind::BrokenPipe {
            return e;
        }
        let hint = "check the disk has room and the file is writable";
        io::Error::new(e.kind(), format!("cannot write {}: {e}; {hint}", self.name))
    }
}

impl<W: Write> Write for Named<W> {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        self.inner.write(buf).map_err(|e| self.explain(e))
    }

    fn write_all(&mut self, buf: &[u8]) -> io::Result<()> {
        self.inner.write_all(buf).map_err(|e| self.explain(e))
    }

    fn flush(&mut self) -> io::Result<()> {
        self.inner.flush().map_err(|e| self.explain(e))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn appending_after_a_cut_line_starts_a_new_one() {
        let dir = std::env::temp_dir().join(format!("bandwarden-sink-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let p = dir.join("cut.jsonl");
        std::fs::write(&p, "{\"kind\":\"start\"}\n{\"kind\":\"inter").unwrap();
        let mut s = open(p.to_str().unwrap(), true, "log").unwrap();
        assert!(!s.empty);
        s.out.write_all(b"{\"kind\":\"stop\"}\n").unwrap();
        drop(s);
        let text = std::fs::read_to_string(&p).unwrap();
        assert_eq!(text.lines().last().unwrap(), "{\"kind\":\"stop\"}");
        // A whole last line gets nothing extra.
        let mut s = open(p.to_str().unwrap(), true, "log").unwrap();
        s.out.write_all(b"x\n").unwrap();
        drop(s);
        assert!(std::fs::read_to_string(&p).unwrap().ends_with("}\nx\n"));
        assert!(refuse_overwrite(p.to_str().unwrap(), "-o", std::slice::from_ref(&p)).is_err());
        assert!(refuse_overwrite(p.to_str().unwrap(), "-o", &[dir.join("other")]).is_ok());
    }

    #[test]
    fn write_errors_name_the_output_and_keep_their_kind() {
        struct Failing(io::ErrorKind);
        impl Write for Failing {
            fn write(&mut self, _: &[u8]) -> io::Result<usize> {
                Err(io::Error::from(self.0))
            }
            fn flush(&mut self) -> io::Result<()> {
                Ok(())
            }
        }
        let mut n = Named { inner: Failing(io::ErrorKind::Other), name: "the log 'x'".into() };
        let e = n.write_all(b"a").unwrap_err();
        assert_eq!(e.kind(), io::ErrorKind::Other);
        assert!(e.to_string().contains("the log 'x'"), "{e}");
        // A reader that went away is passed on as it is: the caller ends quietly on it.
        let mut n = Named { inner: Failing(io::ErrorKind::BrokenPipe), name: "x".into() };
        assert_eq!(n.write_all(b"a").unwrap_err().kind(), io::ErrorKind::BrokenPipe);
    }
}
