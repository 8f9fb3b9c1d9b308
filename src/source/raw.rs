//! Raw interleaved IQ from a file or a pipe.

use super::{sanitize, InputIssues, InputRequest, SampleFormat, SampleSource, SourceInfo};
use anyhow::{Context, Result};
use num_complex::Complex32;
use std::fs::File;
use std::io::{ErrorKind, Read, Seek, SeekFrom};

/// Anything we can read bytes from; files can also rewind.
pub trait ByteStream: Read + Send {
    fn rewind_stream(&mut self) -> std::io::Result<()> {
        Err(std::io::Error::new(ErrorKind::Unsupported, "stream cannot be rewound"))
    }
}

impl ByteStream for std::io::Stdin {}

/// A file read from `offset` onwards (SigMF data files start at 0; others may skip a header).
pub struct FileStream {
    file: File,
    offset: u64,
}

impl Read for FileStream {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        self.file.read(buf)
    }
}

impl ByteStream for FileStream {
    fn rewind_stream(&mut self) -> std::io::Result<()> {
        self.file.seek(SeekFrom::Start(self.offset)).map(|_| ())
    }
}

impl ByteStream for std::io::Cursor<Vec<u8>> {
    fn rewind_stream(&mut self) -> std::io::Result<()> {
        self.set_position(0);
        Ok(())
    }
}

pub struct RawSource {
    stream: Box<dyn ByteStream>,
    format: SampleFormat,
    info: SourceInfo,
    bytes: Vec<u8>,
    /// Bytes of an incomplete sample carried to the next read.
    carry: usize,
    issues: InputIssues,
    finished: bool,
}

impl RawSource {
    pub fn new(stream: Box<dyn ByteStream>, format: SampleFormat, info: SourceInfo) -> RawSource {
        RawSource {
            stream,
            format,
            info,
            bytes: Vec::new(),
            carry: 0,
            issues: InputIssues::default(),
            finished: false,
        }
    }
}

/// Opens a raw file; the length tells how many samples to expect.
pub fn open_file(
    path: &str,
    format: SampleFormat,
    rate: f64,
    req: &InputRequest,
) -> Result<Box<dyn SampleSource>> {
    let file = File::open(path).with_context(|| format!("cannot open '{}'", sanitize(path)))?;
    let len = file.metadata().map(|m| m.len()).unwrap_or(0);
    let info = SourceInfo {
        label: sanitize(path),
        format: Some(format),
        sample_rate_hz: rate,
        center_hz: req.center_hz.unwrap_or(0.0),
        start_time: req.start_time,
        total_samples: Some(len / format.bytes_per_sample() as u64),
        live: false,
    };
    Ok(Box::new(RawSource::new(Box::new(FileStream { file, offset: 0 }), format, info)))
}

/// Opens part of a file as a stream positioned at `offset` (used by SigMF).
pub fn file_stream(path: &str, offset: u64) -> Result<FileStream> {
    let mut file = File::open(path).with_context(|| format!("cannot open '{}'", sanitize(path)))?;
    file.seek(SeekFrom::Start(offset))?;
    Ok(FileStream { file, offset })
}

impl SampleSource for RawSource {
    fn info(&self) -> &SourceInfo {
        &self.info
    }

    fn read(&mut self, out: &mut Vec<Complex32>, max: usize) -> Result<usize> {
        if self.finished {
            return Ok(0);
        }
        let bps = self.format.bytes_per_sample();
        let want = max.max(1) * bps;
        if self.bytes.len() < want {
            self.bytes.resize(want, 0);
        }
        loop {
            let n = match self.stream.read(&mut self.bytes[self.carry..want]) {
                Ok(n) => n,
                Err(e) if e.kind() == ErrorKind::Interrupted => continue,
                Err(e) => return Err(e).with_context(|| format!("reading {}", self.info.label)),
            };
            if n == 0 {
                self.finished = true;
                self.issues.trailing_bytes = self.carry as u64;
                return Ok(0);
            }
            let have = self.carry + n;
            let whole = have / bps * bps;
            if whole == 0 {
                self.carry = have;
                continue;
            }
            let before = out.len();
            self.issues.non_finite += self.format.decode(&self.bytes[..whole], out);
            self.bytes.copy_within(whole..have, 0);
            self.carry = have - whole;
            let got = out.len() - before;
            if got > 0 {
                return Ok(got);
            }
        }
    }

    fn issues(&self) -> InputIssues {
        self.issues.clone()
    }

    fn rewind(&mut self) -> Result<()> {
        self.stream.rewind_stream().context("this input cannot be replayed")?;
        self.carry = 0;
        self.finished = false;
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Cursor;

    fn info() -> SourceInfo {
        SourceInfo {
            label: "test".into(),
            format: Some(SampleFormat::Ci16Le),
            sample_rate_hz: 1e6,
            center_hz: 0.0,
            start_time: None,
            total_samples: None,
            live: false,
        }
    }

    #[test]
    fn trailing_partial_sample_is_dropped_and_counted() {
        let bytes: Vec<u8> = (0..4 * 10 + 3).map(|i| i as u8).collect();
        let mut src = RawSource::new(Box::new(Cursor::new(bytes)), SampleFormat::Ci16Le, info());
        let mut out = Vec::new();
        while src.read(&mut out, 3).unwrap() > 0 {}
        assert_eq!(out.len(), 10);
        assert_eq!(src.issues().trailing_bytes, 3);
    }

    #[test]
    fn reads_survive_short_chunks_and_rewind() {
        let mut bytes = Vec::new();
        let samples: Vec<Complex32> =
            (0..100).map(|i| Complex32::new(i as f32 / 200.0, 0.25)).collect();
        SampleFormat::Cf32Le.encode(&samples, &mut bytes);
        let mut src = RawSource::new(Box::new(Cursor::new(bytes)), SampleFormat::Cf32Le, info());
        let mut out = Vec::new();
        while src.read(&mut out, 7).unwrap() > 0 {}
        assert_eq!(out, samples);
        src.rewind().unwrap();
        let mut again = Vec::new();
        while src.read(&mut again, 64).unwrap() > 0 {}
        assert_eq!(again, samples);
    }
}
