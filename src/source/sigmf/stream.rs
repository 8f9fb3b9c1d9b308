//! The bytes of a SigMF dataset that are samples: capture header bytes and trailing bytes are
//! stepped over, and of interleaved channels only the chosen one is passed on.

use crate::source::raw::ByteStream;
use std::fs::File;
use std::io::{ErrorKind, Read, Seek, SeekFrom};
use std::ops::Range;

/// Reads byte ranges of a file in order, as one stream.
pub struct SpanStream {
    file: File,
    /// Absolute byte ranges of the file.
    spans: Vec<Range<u64>>,
    /// Bytes of one sample of every channel, and the chosen channel's bytes within it; `None`
    /// when every byte is passed on (one channel).
    pick: Option<(usize, Range<usize>)>,
    span: usize,
    pos: u64,
    /// Frames read but not yet handed on (multi-channel only), and the chosen bytes from them.
    frames: Vec<u8>,
    ready: Vec<u8>,
    ready_at: usize,
}

/// Frames read at a time from a multi-channel recording.
const FRAMES_PER_READ: usize = 8192;

impl SpanStream {
    /// `spans` are absolute byte ranges of `file`; with `frame_bytes > sample_bytes` only the
    /// `sample_bytes` at `channel_offset` of every frame are passed on.
    pub fn new(
        mut file: File,
        spans: Vec<Range<u64>>,
        frame_bytes: u64,
        channel_offset: u64,
        sample_bytes: u64,
    ) -> std::io::Result<SpanStream> {
        let pick = (frame_bytes > sample_bytes).then(|| {
            let at = channel_offset as usize;
            (frame_bytes as usize, at..at + sample_bytes as usize)
        });
        let pos = spans.first().map_or(0, |s| s.start);
        file.seek(SeekFrom::Start(pos))?;
        Ok(SpanStream {
            file,
            spans,
            pick,
            span: 0,
            pos,
            frames: Vec::new(),
            ready: Vec::new(),
            ready_at: 0,
        })
    }

    /// Bytes left in the current span, moving to the next span when it is used up; 0 at the end.
    fn left(&mut self) -> std::io::Result<u64> {
        while let Some(s) = self.spans.get(self.span) {
            let whole = match &self.pick {
                // Only whole frames of a multi-channel span are read.
                Some((frame, _)) => (s.end - self.pos) / *frame as u64 * *frame as u64,
                None => s.end - self.pos,
            };
            if whole > 0 {
                return Ok(whole);
            }
            self.span += 1;
            if let Some(next) = self.spans.get(self.span) {
                self.pos = next.start;
                self.file.seek(SeekFrom::Start(self.pos))?;
            }
        }
        Ok(0)
    }
}

impl Read for SpanStream {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        if buf.is_empty() {
            return Ok(0);
        }
        let Some((frame, at)) = self.pick.clone() else {
            let left = self.left()?;
            let want = (buf.len() as u64).min(left) as usize;
            let n = self.file.read(&mut buf[..want])?;
            self.pos += n as u64;
            if n == 0 && want > 0 {
                // The file shrank since it was opened: end here.
                self.span = self.spans.len();
            }
            return Ok(n);
        };
        if self.ready_at == self.ready.len() {
            let left = self.left()?;
            let want = (FRAMES_PER_READ as u64 * frame as u64).min(left) as usize;
            self.frames.resize(want, 0);
            let mut have = 0;
            while have < want {
                match self.file.read(&mut self.frames[have..want]) {
                    Ok(0) => break,
                    Ok(n) => have += n,
                    Err(e) if e.kind() == ErrorKind::Interrupted => {}
                    Err(e) => return Err(e),
                }
            }
            if have < want {
                self.span = self.spans.len();
            }
            self.pos += have as u64;
            self.ready.clear();
            self.ready_at = 0;
            for f in self.frames[..have / frame * frame].chunks_exact(frame) {
                self.ready.extend_from_slice(&f[at.clone()]);
            }
        }
        let n = buf.len().min(self.ready.len() - self.ready_at);
        buf[..n].copy_from_slice(&self.ready[self.ready_at..self.ready_at + n]);
        self.ready_at += n;
        Ok(n)
    }
}

impl ByteStream for SpanStream {
    fn rewind_stream(&mut self) -> std::io::Result<()> {
        self.span = 0;
        self.pos = self.spans.first().map_or(0, |s| s.start);
        self.ready.clear();
        self.ready_at = 0;
        self.file.seek(SeekFrom::Start(self.pos)).map(|_| ())
    }
}
