//! Raw interleaved IQ from a file or a pipe.

use super::plausible::FormatCheck;
use super::{format, sanitize, InputIssues, InputRequest, SampleFormat, SampleSource, SourceInfo};
use anyhow::{bail, Context, Result};
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
    /// Whether the bytes look like `format` at all (see [`super::plausible`]).
    check: FormatCheck,
    /// Every sample of the last read was screened and found finite.
    last_finite: bool,
}

impl RawSource {
    pub fn new(stream: Box<dyn ByteStream>, format: SampleFormat, info: SourceInfo) -> RawSource {
        RawSource {
            check: FormatCheck::new(format, info.sample_rate_hz),
            last_finite: false,
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
        segments: Vec::new(),
        reference_level_dbm: None,
        tuning: None,
    };
    Ok(Box::new(RawSource::new(Box::new(FileStream { file, offset: 0 }), format, info)))
}

/// Opens part of a file as a stream positioned at `offset` (used by SigMF).
pub fn file_stream(path: &str, offset: u64) -> Result<FileStream> {
    let mut file = File::open(path).with_context(|| format!("cannot open '{}'", sanitize(path)))?;
    file.seek(SeekFrom::Start(offset))?;
    Ok(FileStream { file, offset })
}

impl RawSource {
    /// Native samples (see [`SampleFormat::is_native`]) are read straight into `out`, with no
    /// copy besides the kernel's; others go through `bytes` and are decoded into `out`.
    fn read_into(&mut self, out: &mut [Complex32]) -> Result<usize> {
        let native = self.format.is_native();
        let bps = self.format.bytes_per_sample();
        let want = if native { bps } else { out.len() * bps };
        if self.bytes.len() < want {
            self.bytes.resize(want, 0);
        }
        let mut have = self.carry;
        if native {
            format::sample_bytes_mut(out)[..have].copy_from_slice(&self.bytes[..have]);
        }
        loop {
            let buf = if native { format::sample_bytes_mut(out) } else { &mut self.bytes[..want] };
            let n = read_some(&mut *self.stream, &mut buf[have..], &self.info.label)?;
            if n == 0 {
                if let Some(why) = self.check.at_end() {
                    self.wrong_format(&why)?;
                }
                return Ok(self.end(have));
            }
            have += n;
            let whole = have / bps;
            if whole == 0 {
                continue;
            }
            // An incomplete last sample waits at the start of `bytes` for the next call.
            let rest = whole * bps..have;
            let screened = if native {
                let bytes = format::sample_bytes_mut(out);
                self.bytes[..rest.len()].copy_from_slice(&bytes[rest.clone()]);
                format::screen(&mut out[..whole])
            } else {
                self.check.look_bytes(&self.bytes[..whole * bps]);
                let screened = self.format.decode(&self.bytes[..whole * bps], out);
                self.bytes.copy_within(rest.clone(), 0);
                screened
            };
            let kept = screened.kept;
            self.carry = rest.len();
            self.issues.non_finite += screened.non_finite;
            self.issues.beyond_scale += screened.beyond_scale;
            if let Some(why) = self.check.look(&out[..whole], &screened) {
                self.wrong_format(&why)?;
            }
            if kept > 0 {
                self.last_finite = screened.non_finite == 0;
                return Ok(kept);
            }
            // Every sample was dropped: read on after the incomplete one.
            if native {
                format::sample_bytes_mut(out).copy_within(rest, 0);
            }
            have = self.carry;
        }
    }

    /// Stops the input: bytes that are evidently in another format would fill the log with
    /// gaps and nonsense levels.
    fn wrong_format(&mut self, why: &str) -> Result<()> {
        self.finished = true;
        bail!(
            "'{}' does not look like {} (check --format): {why}",
            sanitize(&self.info.label),
            self.format
        )
    }

    /// End of input with `partial` bytes of an incomplete sample left over.
    fn end(&mut self, partial: usize) -> usize {
        self.finished = true;
        self.carry = partial;
        self.issues.trailing_bytes = partial as u64;
        0
    }
}

/// One `read` call, retried when interrupted; 0 means end of input.
fn read_some(stream: &mut dyn ByteStream, buf: &mut [u8], label: &str) -> Result<usize> {
    loop {
        match stream.read(buf) {
            Err(e) if e.kind() == ErrorKind::Interrupted => continue,
            other => return other.with_context(|| format!("reading {label}")),
        }
    }
}

impl SampleSource for RawSource {
    fn info(&self) -> &SourceInfo {
        &self.info
    }

    fn read(&mut self, out: &mut [Complex32]) -> Result<usize> {
        self.last_finite = false;
        if self.finished || out.is_empty() {
            return Ok(0);
        }
        self.read_into(out)
    }

    fn last_read_finite(&self) -> bool {
        self.last_finite
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
            segments: Vec::new(),
            reference_level_dbm: None,
            tuning: None,
        }
    }

    /// Reads to the end in calls of at most `max` samples.
    fn read_all(src: &mut RawSource, max: usize) -> Vec<Complex32> {
        let mut all = Vec::new();
        let mut buf = vec![Complex32::default(); max];
        loop {
            let n = src.read(&mut buf).unwrap();
            if n == 0 {
                return all;
            }
            all.extend_from_slice(&buf[..n]);
        }
    }

    #[test]
    fn trailing_partial_sample_is_dropped_and_counted() {
        let bytes: Vec<u8> = (0..4 * 10 + 3).map(|i| i as u8).collect();
        let mut src = RawSource::new(Box::new(Cursor::new(bytes)), SampleFormat::Ci16Le, info());
        let out = read_all(&mut src, 3);
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
        assert_eq!(read_all(&mut src, 7), samples);
        src.rewind().unwrap();
        assert_eq!(read_all(&mut src, 64), samples);
    }

    /// A stream that hands out at most `step` bytes per read, as pipes may.
    struct Trickle {
        data: Vec<u8>,
        at: usize,
        step: usize,
    }

    impl Read for Trickle {
        fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
            let n = buf.len().min(self.step).min(self.data.len() - self.at);
            buf[..n].copy_from_slice(&self.data[self.at..self.at + n]);
            self.at += n;
            Ok(n)
        }
    }

    impl ByteStream for Trickle {}

    #[test]
    fn ragged_reads_keep_every_sample_in_order() {
        let mut x: Vec<Complex32> =
            (0..300).map(|i| Complex32::new((i as f32 * 0.37).sin(), i as f32 / 400.0)).collect();
        for i in [0, 1, 2, 77, 150, 151, 299] {
            x[i] = Complex32::new(f32::NAN, if i % 2 == 0 { 0.0 } else { f32::INFINITY });
        }
        // Every sample, NaN and infinity included, in place (compared by bits: NaN is not equal
        // to itself, IEEE 754): time must stay exact.
        let bits = |v: &[Complex32]| -> Vec<(u32, u32)> {
            v.iter().map(|c| (c.re.to_bits(), c.im.to_bits())).collect()
        };
        let finite = bits(&x);
        for fmt in [SampleFormat::Cf32Le, SampleFormat::Cf32Be, SampleFormat::Cf64Le] {
            for step in [1, 3, 13, 1000] {
                for max in [1, 5, 64] {
                    let mut bytes = Vec::new();
                    fmt.encode(&x, &mut bytes);
                    bytes.extend_from_slice(&[1, 2, 3]); // an incomplete last sample
                    let stream = Box::new(Trickle { data: bytes, at: 0, step });
                    let mut src = RawSource::new(stream, fmt, info());
                    let got = read_all(&mut src, max);
                    let case = format!("{fmt} step {step} max {max}");
                    assert_eq!(bits(&got), finite, "{case}");
                    assert_eq!(src.issues().non_finite, 7, "{case}");
                    assert_eq!(src.issues().trailing_bytes, 3, "{case}");
                }
            }
        }
    }
    #[test]
    fn a_read_says_whether_its_samples_are_all_finite() {
        // The run skips its own look for non-numbers only when the source vouches for every
        // sample of the block: a read holding a NaN or an infinity must not.
        for fmt in
            [SampleFormat::Cf32Le, SampleFormat::Cf32Be, SampleFormat::Cf64Le, SampleFormat::Ci16Le]
        {
            let mut x = vec![Complex32::new(0.25, -0.5); 8];
            if fmt != SampleFormat::Ci16Le {
                x[5] = Complex32::new(0.0, f32::INFINITY);
            }
            let mut bytes = Vec::new();
            fmt.encode(&x, &mut bytes);
            let mut src = RawSource::new(Box::new(Cursor::new(bytes)), fmt, info());
            let mut buf = vec![Complex32::default(); 4];
            let mut seen = Vec::new();
            while src.read(&mut buf).unwrap() > 0 {
                seen.push(src.last_read_finite());
            }
            let want =
                if fmt == SampleFormat::Ci16Le { vec![true, true] } else { vec![true, false] };
            assert_eq!(seen, want, "{fmt}");
            assert!(!src.last_read_finite(), "{fmt}: the end of input holds no samples");
        }
    }
}
