//! Sample formats: bytes on disk or on a pipe to complex samples at full scale.
//!
//! Names follow the SigMF `core:datatype` vocabulary (an open standard), so the same word works on
//! the command line and in a `.sigmf-meta` file.
//!
//! **Full scale.** A complex sample of magnitude 1.0 is 0 dBFS. Integer formats map onto [-1, 1):
//! - `cu8`: `(x − 127.5) / 127.5` (the unsigned byte's midpoint is zero; ±1 at 0 and 255);
//! - `ci8`: `x / 128`;
//! - `ci16_*`: `x / 32768` (so −32768 is exactly −1.0; we chose the power of two so a full-scale
//!   converter code maps to 1.0 with no rounding);
//! - `ci32_*`: `x / 2³¹`;
//! - `cu16_*`, `cu32_*`: like `cu8`, `(x − m) / m` with `m = (2ⁿ − 1) / 2` the midpoint.
//!
//! Real-valued datatypes (`r…`) use the same scales; their samples are `x + 0j` here, and the
//! source turns the stream into complex samples at half the rate ([`super::real`]).
//!
//! Float formats are taken as they are. Non-finite float samples (NaN, ±Inf) are counted and
//! skipped, never passed to the FFT, where one NaN would poison a whole frame.

use crate::kernels::Kernels;
use num_complex::Complex32;
use std::fmt;
use std::str::FromStr;

#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum SampleFormat {
    Cu8,
    Ci8,
    Ci16Le,
    Ci16Be,
    Ci32Le,
    Ci32Be,
    Cu16Le,
    Cu16Be,
    Cu32Le,
    Cu32Be,
    Cf32Le,
    Cf32Be,
    Cf64Le,
    Cf64Be,
    Ru8,
    Ri8,
    Ri16Le,
    Ri16Be,
    Ri32Le,
    Ri32Be,
    Ru16Le,
    Ru16Be,
    Ru32Le,
    Ru32Be,
    Rf32Le,
    Rf32Be,
    Rf64Le,
    Rf64Be,
}

/// How the numbers of a format are written: every SigMF datatype is one of these.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Number {
    Float,
    Signed,
    Unsigned,
}

/// The layout of one sample: complex (I then Q) or real, the kind and width of each number, and
/// its byte order (8-bit numbers have none).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Layout {
    pub complex: bool,
    pub number: Number,
    pub bits: u32,
    pub big_endian: bool,
}

impl SampleFormat {
    /// Every SigMF datatype (SigMF specification, `core:datatype`: complex or real, float,
    /// signed or unsigned integer, 8 to 64 bits, little or big endian).
    pub const ALL: [SampleFormat; 28] = [
        SampleFormat::Cu8,
        SampleFormat::Ci8,
        SampleFormat::Ci16Le,
        SampleFormat::Ci16Be,
        SampleFormat::Ci32Le,
        SampleFormat::Ci32Be,
        SampleFormat::Cu16Le,
        SampleFormat::Cu16Be,
        SampleFormat::Cu32Le,
        SampleFormat::Cu32Be,
        SampleFormat::Cf32Le,
        SampleFormat::Cf32Be,
        SampleFormat::Cf64Le,
        SampleFormat::Cf64Be,
        SampleFormat::Ru8,
        SampleFormat::Ri8,
        SampleFormat::Ri16Le,
        SampleFormat::Ri16Be,
        SampleFormat::Ri32Le,
        SampleFormat::Ri32Be,
        SampleFormat::Ru16Le,
        SampleFormat::Ru16Be,
        SampleFormat::Ru32Le,
        SampleFormat::Ru32Be,
        SampleFormat::Rf32Le,
        SampleFormat::Rf32Be,
        SampleFormat::Rf64Le,
        SampleFormat::Rf64Be,
    ];

    /// The SigMF datatype name.
    pub fn name(self) -> &'static str {
        use SampleFormat as F;
        match self {
            F::Cu8 => "cu8",
            F::Ci8 => "ci8",
            F::Ci16Le => "ci16_le",
            F::Ci16Be => "ci16_be",
            F::Ci32Le => "ci32_le",
            F::Ci32Be => "ci32_be",
            F::Cu16Le => "cu16_le",
            F::Cu16Be => "cu16_be",
            F::Cu32Le => "cu32_le",
            F::Cu32Be => "cu32_be",
            F::Cf32Le => "cf32_le",
            F::Cf32Be => "cf32_be",
            F::Cf64Le => "cf64_le",
            F::Cf64Be => "cf64_be",
            F::Ru8 => "ru8",
            F::Ri8 => "ri8",
            F::Ri16Le => "ri16_le",
            F::Ri16Be => "ri16_be",
            F::Ri32Le => "ri32_le",
            F::Ri32Be => "ri32_be",
            F::Ru16Le => "ru16_le",
            F::Ru16Be => "ru16_be",
            F::Ru32Le => "ru32_le",
            F::Ru32Be => "ru32_be",
            F::Rf32Le => "rf32_le",
            F::Rf32Be => "rf32_be",
            F::Rf64Le => "rf64_le",
            F::Rf64Be => "rf64_be",
        }
    }

    /// The layout spelled by the name: `c`/`r`, `f`/`i`/`u`, the width, `_le`/`_be`.
    pub fn layout(self) -> Layout {
        let name = self.name().as_bytes();
        let number = match name[1] {
            b'f' => Number::Float,
            b'i' => Number::Signed,
            _ => Number::Unsigned,
        };
        let digits = name[2..].iter().take_while(|c| c.is_ascii_digit());
        let bits = digits.fold(0, |acc, c| acc * 10 + u32::from(c - b'0'));
        Layout { complex: name[0] == b'c', number, bits, big_endian: self.name().ends_with("_be") }
    }

    /// True for the real-valued `r*` datatypes.
    pub fn is_real(self) -> bool {
        !self.layout().complex
    }

    /// True for the float datatypes.
    pub fn is_float(self) -> bool {
        self.layout().number == Number::Float
    }

    /// The complex datatype with the same numbers (itself when complex): what a real input
    /// becomes once turned into complex samples.
    pub fn complex_twin(self) -> SampleFormat {
        if !self.is_real() {
            return self;
        }
        let twin = format!("c{}", &self.name()[1..]);
        twin.parse().unwrap_or(SampleFormat::Cf32Le)
    }

    /// Bytes in one sample (I and Q for a complex format, one number for a real one).
    pub fn bytes_per_sample(self) -> usize {
        let l = self.layout();
        (l.bits as usize / 8) * if l.complex { 2 } else { 1 }
    }

    /// The format implied by a common file extension, used only when `--format` is absent.
    pub fn guess_from_extension(path: &str) -> Option<SampleFormat> {
        let ext = path.rsplit_once('.')?.1.to_ascii_lowercase();
        match ext.as_str() {
            "cu8" => Some(SampleFormat::Cu8),
            "cs8" | "ci8" => Some(SampleFormat::Ci8),
            "cs16" | "ci16" => Some(SampleFormat::Ci16Le),
            "cf32" | "cfile" => Some(SampleFormat::Cf32Le),
            _ => None,
        }
    }

    /// True when this format's bytes are the memory image of `Complex32` on this machine
    /// (cf32_le on a little-endian one), so sources can read straight into the sample buffer.
    pub fn is_native(self) -> bool {
        self == SampleFormat::Cf32Le && cfg!(target_endian = "little")
    }

    /// Decodes whole samples from `bytes` (whose length must be a multiple of
    /// [`bytes_per_sample`](Self::bytes_per_sample)) into the start of `out`, which must have
    /// room for them. Non-finite samples and samples far beyond full scale are counted
    /// (see [`screen`]); integer formats cannot produce either.
    pub fn decode(self, bytes: &[u8], out: &mut [Complex32]) -> Screened {
        let bps = self.bytes_per_sample();
        debug_assert_eq!(bytes.len() % bps, 0);
        let count = bytes.len() / bps;
        let out = &mut out[..count];
        match self {
            SampleFormat::Cu8 => {
                const SCALE: f32 = 1.0 / 127.5;
                fill_from(out, bytes, bps, |c: &[u8]| {
                    Complex32::new((c[0] as f32 - 127.5) * SCALE, (c[1] as f32 - 127.5) * SCALE)
                });
                return Screened { kept: count, ..Screened::default() };
            }
            SampleFormat::Ci8 => {
                const SCALE: f32 = 1.0 / 128.0;
                fill_from(out, bytes, bps, |c: &[u8]| {
                    Complex32::new(c[0] as i8 as f32 * SCALE, c[1] as i8 as f32 * SCALE)
                });
                return Screened { kept: count, ..Screened::default() };
            }
            SampleFormat::Ci16Le | SampleFormat::Ci16Be => {
                const SCALE: f32 = 1.0 / 32768.0;
                let le = self == SampleFormat::Ci16Le;
                let get = |b: &[u8]| {
                    let v = [b[0], b[1]];
                    (if le { i16::from_le_bytes(v) } else { i16::from_be_bytes(v) }) as f32
                };
                fill_from(out, bytes, bps, |c: &[u8]| {
                    Complex32::new(get(&c[0..2]) * SCALE, get(&c[2..4]) * SCALE)
                });
                return Screened { kept: count, ..Screened::default() };
            }
            SampleFormat::Ci32Le => {
                const SCALE: f64 = 1.0 / 2147483648.0;
                let get =
                    |b: &[u8]| (i32::from_le_bytes([b[0], b[1], b[2], b[3]]) as f64 * SCALE) as f32;
                fill_from(out, bytes, bps, |c: &[u8]| Complex32::new(get(&c[0..4]), get(&c[4..8])));
                return Screened { kept: count, ..Screened::default() };
            }
            _ if self.is_native() => sample_bytes_mut(out).copy_from_slice(bytes),
            SampleFormat::Cf32Le | SampleFormat::Cf32Be => {
                let le = self == SampleFormat::Cf32Le;
                let get = |b: &[u8]| {
                    let v = [b[0], b[1], b[2], b[3]];
                    if le {
                        f32::from_le_bytes(v)
                    } else {
                        f32::from_be_bytes(v)
                    }
                };
                fill_from(out, bytes, bps, |c: &[u8]| Complex32::new(get(&c[0..4]), get(&c[4..8])));
            }
            _ => return decode_generic(self.layout(), bytes, out),
        }
        screen(out)
    }

    /// Encodes samples in this format (used by `bandwarden demo` and by tests). Values outside
    /// full scale are clipped for integer formats.
    pub fn encode(self, samples: &[Complex32], out: &mut Vec<u8>) {
        out.reserve(samples.len() * self.bytes_per_sample());
        let values = samples.iter().flat_map(|s| [s.re, s.im]);
        match self {
            // Float-to-integer `as` casts saturate, so clipping needs no branches either.
            SampleFormat::Cu8 => {
                out.extend(values.map(|v| round_i32(v * 127.5 + 127.5).clamp(0, 255) as u8))
            }
            SampleFormat::Ci8 => {
                out.extend(values.map(|v| round_i32(v * 128.0).clamp(-128, 127) as i8 as u8))
            }
            SampleFormat::Ci16Le => {
                for v in values {
                    out.extend_from_slice(
                        &(round_i32(v * 32768.0).clamp(-32768, 32767) as i16).to_le_bytes(),
                    );
                }
            }
            SampleFormat::Ci16Be => {
                for v in values {
                    out.extend_from_slice(
                        &(round_i32(v * 32768.0).clamp(-32768, 32767) as i16).to_be_bytes(),
                    );
                }
            }
            SampleFormat::Ci32Le => {
                for v in values {
                    let x = v as f64 * 2147483648.0;
                    out.extend_from_slice(&((x + 0.5f64.copysign(x)) as i32).to_le_bytes());
                }
            }
            SampleFormat::Cf32Le => values.for_each(|v| out.extend_from_slice(&v.to_le_bytes())),
            SampleFormat::Cf32Be => values.for_each(|v| out.extend_from_slice(&v.to_be_bytes())),
            _ => encode_generic(self.layout(), samples, out),
        }
    }
}

/// Decodes any layout through a reader per number: the formats without a fast path above. A
/// real sample becomes `x + 0j`; the source turns real streams into complex ones
/// ([`super::real`]).
fn decode_generic(layout: Layout, bytes: &[u8], out: &mut [Complex32]) -> Screened {
    let read = number_reader(layout);
    let w = layout.bits as usize / 8;
    if layout.complex {
        fill_from(out, bytes, 2 * w, |c: &[u8]| Complex32::new(read(&c[..w]), read(&c[w..])));
    } else {
        fill_from(out, bytes, w, |c: &[u8]| Complex32::new(read(c), 0.0));
    }
    let count = bytes.len() / (w * if layout.complex { 2 } else { 1 });
    if layout.number == Number::Float {
        screen(&mut out[..count])
    } else {
        Screened { kept: count, ..Screened::default() }
    }
}

/// The first `N` bytes of `b` (which always holds one whole number).
fn take<const N: usize>(b: &[u8]) -> [u8; N] {
    let mut a = [0u8; N];
    a.copy_from_slice(&b[..N]);
    a
}

/// Midpoint of an unsigned `bits`-bit number, which maps to zero (as cu8's 127.5, module doc).
fn unsigned_mid(bits: u32) -> f64 {
    ((1u64 << bits) - 1) as f64 / 2.0
}

/// Reads one number of `layout` at full scale (module doc).
fn number_reader(l: Layout) -> fn(&[u8]) -> f32 {
    match (l.number, l.bits, l.big_endian) {
        (Number::Float, 32, false) => |b| f32::from_le_bytes(take(b)),
        (Number::Float, 32, true) => |b| f32::from_be_bytes(take(b)),
        (Number::Float, _, false) => |b| f64::from_le_bytes(take(b)) as f32,
        (Number::Float, _, true) => |b| f64::from_be_bytes(take(b)) as f32,
        (Number::Signed, 8, _) => |b| b[0] as i8 as f32 / 128.0,
        (Number::Signed, 16, false) => |b| i16::from_le_bytes(take(b)) as f32 / 32768.0,
        (Number::Signed, 16, true) => |b| i16::from_be_bytes(take(b)) as f32 / 32768.0,
        (Number::Signed, _, false) => {
            |b| (i32::from_le_bytes(take(b)) as f64 / 2147483648.0) as f32
        }
        (Number::Signed, _, true) => |b| (i32::from_be_bytes(take(b)) as f64 / 2147483648.0) as f32,
        (Number::Unsigned, 8, _) => |b| ((b[0] as f64 - 127.5) / 127.5) as f32,
        (Number::Unsigned, 16, false) => |b| {
            let m = unsigned_mid(16);
            ((u16::from_le_bytes(take(b)) as f64 - m) / m) as f32
        },
        (Number::Unsigned, 16, true) => |b| {
            let m = unsigned_mid(16);
            ((u16::from_be_bytes(take(b)) as f64 - m) / m) as f32
        },
        (Number::Unsigned, _, false) => |b| {
            let m = unsigned_mid(32);
            ((u32::from_le_bytes(take(b)) as f64 - m) / m) as f32
        },
        (Number::Unsigned, _, true) => |b| {
            let m = unsigned_mid(32);
            ((u32::from_be_bytes(take(b)) as f64 - m) / m) as f32
        },
    }
}

/// Encodes through a writer per number; a real format keeps the real part.
fn encode_generic(layout: Layout, samples: &[Complex32], out: &mut Vec<u8>) {
    let per = if layout.complex { 2 } else { 1 };
    for s in samples {
        for &v in [s.re, s.im][..per].iter() {
            write_number(layout, v, out);
        }
    }
}

/// Writes one number of `layout`; integers are rounded half away from zero and clipped.
fn write_number(l: Layout, v: f32, out: &mut Vec<u8>) {
    let v = v as f64;
    let be = l.big_endian;
    let round = |x: f64| x + 0.5f64.copysign(x);
    match (l.number, l.bits) {
        (Number::Float, 32) => {
            let x = v as f32;
            out.extend_from_slice(&if be { x.to_be_bytes() } else { x.to_le_bytes() })
        }
        (Number::Float, _) => {
            out.extend_from_slice(&if be { v.to_be_bytes() } else { v.to_le_bytes() })
        }
        (Number::Signed, 8) => out.push(round(v * 128.0).clamp(-128.0, 127.0) as i8 as u8),
        (Number::Signed, 16) => {
            let x = round(v * 32768.0).clamp(-32768.0, 32767.0) as i16;
            out.extend_from_slice(&if be { x.to_be_bytes() } else { x.to_le_bytes() })
        }
        (Number::Signed, _) => {
            let x = round(v * 2147483648.0).clamp(i32::MIN as f64, i32::MAX as f64) as i32;
            out.extend_from_slice(&if be { x.to_be_bytes() } else { x.to_le_bytes() })
        }
        (Number::Unsigned, bits) => {
            let m = unsigned_mid(bits);
            let x = (v * m + m + 0.5).floor().clamp(0.0, 2.0 * m) as u64;
            match bits {
                8 => out.push(x as u8),
                16 => {
                    let x = x as u16;
                    out.extend_from_slice(&if be { x.to_be_bytes() } else { x.to_le_bytes() })
                }
                _ => {
                    let x = x as u32;
                    out.extend_from_slice(&if be { x.to_be_bytes() } else { x.to_le_bytes() })
                }
            }
        }
    }
}

/// Rounds half away from zero without a library call (`f32::round` is one on baseline x86-64),
/// saturating at the `i32` range.
fn round_i32(x: f32) -> i32 {
    (x + 0.5f32.copysign(x)) as i32
}

/// Decodes each `bps`-byte chunk of `bytes` into `out` with `f`; generic, so `f` is inlined and
/// the loop vectorises.
fn fill_from<F: Fn(&[u8]) -> Complex32>(out: &mut [Complex32], bytes: &[u8], bps: usize, f: F) {
    for (o, c) in out.iter_mut().zip(bytes.chunks_exact(bps)) {
        *o = f(c);
    }
}

/// The bytes of a sample buffer, for reading a native-format stream straight into it.
pub fn sample_bytes_mut(samples: &mut [Complex32]) -> &mut [u8] {
    // SAFETY: `Complex32` is `repr(C)` {re: f32, im: f32} with no padding, so the buffer is
    // `8 · len` initialised bytes, and every byte pattern is a valid `f32`.
    unsafe { std::slice::from_raw_parts_mut(samples.as_mut_ptr().cast::<u8>(), samples.len() * 8) }
}

/// Float samples are expected within about ±1 (full scale). A component this large is not a
/// strong signal but a sign that the bytes are in another format than they were read as (cu8
/// read as cf32_le gives values near 1e38, whose squares overflow the spectrum).
pub const BEYOND_SCALE: f32 = 1e6;

/// What screening a block of float samples found.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Screened {
    /// Samples in the block (all are kept, in place).
    pub kept: usize,
    /// Samples with a NaN or infinite component. They stay where they are, so that the time
    /// line (sample indices) stays exact; the pipeline's run treats them as a gap.
    pub non_finite: u64,
    /// Finite samples with a component of magnitude [`BEYOND_SCALE`] or more.
    pub beyond_scale: u64,
}

/// Counts the samples of `samples` that are not numbers and those beyond scale; changes nothing.
pub fn screen(samples: &mut [Complex32]) -> Screened {
    let mut out = Screened { kept: samples.len(), ..Screened::default() };
    if !Kernels::detect().any_outside(samples, BEYOND_SCALE) {
        return out;
    }
    for s in samples.iter() {
        if !(s.re.is_finite() && s.im.is_finite()) {
            out.non_finite += 1;
        } else if s.re.abs().max(s.im.abs()) >= BEYOND_SCALE {
            out.beyond_scale += 1;
        }
    }
    out
}

impl fmt::Display for SampleFormat {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for SampleFormat {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let lower = s.trim().to_ascii_lowercase();
        // A multi-byte name without its byte order (`cf32`, `ci16`, as file extensions are
        // written) means little-endian, the order of the machines that record most captures.
        let le = format!("{lower}_le");
        let named = |f: &SampleFormat| f.name() == lower || f.name() == le;
        SampleFormat::ALL.into_iter().find(named).ok_or_else(|| {
            let names: Vec<_> = SampleFormat::ALL.iter().map(|f| f.name()).collect();
            format!("unknown sample format '{s}'; choose one of: {}", names.join(", "))
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Decodes `bytes` into a fresh buffer, returning only the kept samples.
    fn decoded(fmt: SampleFormat, bytes: &[u8]) -> Vec<Complex32> {
        let mut out = vec![Complex32::default(); bytes.len() / fmt.bytes_per_sample()];
        let kept = fmt.decode(bytes, &mut out).kept;
        out.truncate(kept);
        out
    }

    #[test]
    fn full_scale_mapping_is_as_documented() {
        let half = Complex32::new(-1.0, 0.5);
        assert_eq!(decoded(SampleFormat::Cu8, &[0, 255])[0], Complex32::new(-1.0, 1.0));
        assert_eq!(decoded(SampleFormat::Ci8, &[0x80, 0x40])[0], half);
        assert_eq!(decoded(SampleFormat::Ci16Le, &[0x00, 0x80, 0x00, 0x40])[0], half);
        assert_eq!(decoded(SampleFormat::Ci16Be, &[0x80, 0x00, 0x40, 0x00])[0], half);
        let mut b = (i32::MIN).to_le_bytes().to_vec();
        b.extend_from_slice(&(1i32 << 30).to_le_bytes());
        assert_eq!(decoded(SampleFormat::Ci32Le, &b)[0], half);
    }

    #[test]
    fn every_format_round_trips() {
        let samples: Vec<Complex32> = (0..64)
            .map(|i| Complex32::new((i as f32 / 40.0).sin() * 0.7, (i as f32 / 13.0).cos() * -0.6))
            .collect();
        for fmt in SampleFormat::ALL {
            let mut bytes = Vec::new();
            fmt.encode(&samples, &mut bytes);
            assert_eq!(bytes.len(), samples.len() * fmt.bytes_per_sample(), "{fmt}");
            let back = decoded(fmt, &bytes);
            assert_eq!(back.len(), samples.len(), "{fmt}");
            // One quantisation step of the format: 8 bits 1/128, 16 bits 1/32768.
            let tol = match fmt.layout().bits {
                8 => 1.0 / 127.0,
                16 => 1.0 / 32000.0,
                _ => 1e-6,
            };
            for (a, b) in samples.iter().zip(&back) {
                // A real format keeps the real part only.
                let a = if fmt.is_real() { Complex32::new(a.re, 0.0) } else { *a };
                assert!((a - b).norm() < tol, "{fmt}: {a} vs {b}");
            }
        }
    }

    #[test]
    fn a_name_without_byte_order_is_little_endian() {
        assert_eq!("cf32".parse::<SampleFormat>(), Ok(SampleFormat::Cf32Le));
        assert_eq!("CI16".parse::<SampleFormat>(), Ok(SampleFormat::Ci16Le));
        assert_eq!("cu8".parse::<SampleFormat>(), Ok(SampleFormat::Cu8));
        assert!("cf33".parse::<SampleFormat>().unwrap_err().contains("cf32_le"));
    }

    #[test]
    fn layouts_follow_the_sigmf_names() {
        // SigMF specification, core:datatype: "c"/"r", then "f"/"i"/"u", the width in bits,
        // and "_le"/"_be" for more than 8 bits.
        assert_eq!(SampleFormat::ALL.len(), 28);
        let l = SampleFormat::Cu16Be.layout();
        assert_eq!(
            l,
            Layout { complex: true, number: Number::Unsigned, bits: 16, big_endian: true }
        );
        let l = SampleFormat::Rf64Le.layout();
        assert_eq!(
            l,
            Layout { complex: false, number: Number::Float, bits: 64, big_endian: false }
        );
        assert_eq!(SampleFormat::Ri16Be.bytes_per_sample(), 2);
        assert_eq!(SampleFormat::Cf64Be.bytes_per_sample(), 16);
        assert_eq!(SampleFormat::Ri16Be.complex_twin(), SampleFormat::Ci16Be);
        // Big endian: the most significant byte first.
        assert_eq!(
            decoded(SampleFormat::Ci32Be, &[0x40, 0, 0, 0, 0xC0, 0, 0, 0])[0],
            Complex32::new(0.5, -0.5)
        );
        // Unsigned: the midpoint (2ⁿ − 1)/2 is zero, 0 and 2ⁿ − 1 are ∓1.
        assert_eq!(
            decoded(SampleFormat::Cu16Le, &[0, 0, 0xff, 0xff])[0],
            Complex32::new(-1.0, 1.0)
        );
        assert_eq!(decoded(SampleFormat::Ru8, &[255])[0], Complex32::new(1.0, 0.0));
    }

    #[test]
    fn non_finite_floats_stay_in_place_and_are_counted() {
        let x = [
            Complex32::new(0.5, 0.5),
            Complex32::new(f32::NAN, 0.0),
            Complex32::new(0.0, f32::INFINITY),
            Complex32::new(-0.25, 0.125),
        ];
        for fmt in [SampleFormat::Cf32Le, SampleFormat::Cf32Be, SampleFormat::Cf64Le] {
            let mut bytes = Vec::new();
            fmt.encode(&x, &mut bytes);
            let got = decoded(fmt, &bytes);
            // Bit for bit: NaN is not equal to itself (IEEE 754), so compare the encodings.
            let bits = |v: &[Complex32]| {
                v.iter().map(|c| (c.re.to_bits(), c.im.to_bits())).collect::<Vec<_>>()
            };
            assert_eq!(bits(&got), bits(&x), "{fmt}");
            let mut out = vec![Complex32::default(); 4];
            assert_eq!(fmt.decode(&bytes, &mut out).non_finite, 2, "{fmt}");
        }
    }

    #[test]
    fn floats_far_beyond_full_scale_are_kept_but_counted() {
        // cu8 bytes read as cf32_le: 0x7f7f7f7f is about 3.4e38 and 0x3e800000 is 0.25 (IEEE 754
        // binary32 encoding; the standard's layout, values worked out by hand).
        let bytes = [0x7f, 0x7f, 0x7f, 0x7f, 0, 0, 0, 0, 0, 0, 0x80, 0x3e, 0, 0, 0, 0];
        let mut out = vec![Complex32::default(); 2];
        let got = SampleFormat::Cf32Le.decode(&bytes, &mut out);
        assert_eq!(got, Screened { kept: 2, non_finite: 0, beyond_scale: 1 });
        assert_eq!(out[1], Complex32::new(0.25, 0.0));
        let mut loud = [Complex32::new(0.0, -2e6), Complex32::new(f32::NAN, 5e6)];
        assert_eq!(screen(&mut loud), Screened { kept: 2, non_finite: 1, beyond_scale: 1 });
    }

    #[test]
    fn names_and_extensions() {
        for f in SampleFormat::ALL {
            assert_eq!(f.name().parse::<SampleFormat>().unwrap(), f);
        }
        assert!("s16".parse::<SampleFormat>().unwrap_err().contains("cu8, ci8"));
        assert_eq!(SampleFormat::guess_from_extension("x.cu8"), Some(SampleFormat::Cu8));
        assert_eq!(SampleFormat::guess_from_extension("dir.v2/x.cs16"), Some(SampleFormat::Ci16Le));
        assert_eq!(SampleFormat::guess_from_extension("x.bin"), None);
    }
}
