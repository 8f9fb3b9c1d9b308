//! Is the input in the format it is read as? A judgement over its first samples.
//!
//! Bytes read in the wrong format do not fail to decode: every byte pattern is some number. They
//! decode into numbers no receiver makes, and the first quarter second of samples shows it. What
//! each confusion produces was measured on the demo scene written in every format and read back
//! in every other (numpy, shares of samples or of I/Q values):
//!
//! | read as | from | what it gives |
//! | --- | --- | --- |
//! | a float format | any other format | 14–77 % of samples NaN, infinite or beyond ±1e6 |
//! | an integer format | cu8 read as ci8, ci16 or ci32; ci8 read as cu8 | 99 % of I/Q values within 10 % of full scale (the offset-binary midpoint is the two's-complement rail) |
//! | cu8 | ci16 (either byte order); cf64 | 55 %, 43 % of values within 10 % of full scale (the high bytes of small integers are 0x00 and 0xff) |
//!
//! Real input shows neither: float samples from a receiver lie within about ±1, and even a
//! constant-envelope tone at full scale has only 29 % of its values within 10 % of full scale
//! (|cos θ| ≥ 0.9 for 2·arccos(0.9)/π of the time); Gaussian noise reaches 40 % only at an RMS
//! level above full scale, that is a receiver clipping nearly all the time, which the message
//! names as the other cause.
//!
//! **Byte order.** 16- and 32-bit integers in the other byte order decode into white noise spread
//! over the whole scale, which no single share above catches; their bytes give them away. A
//! receiver's numbers are small next to full scale most of the time, so the top two bits of the
//! most significant byte are copies of the sign (they differ only for values beyond half scale),
//! while the top two bits of the least significant byte are as random as the signal's low bits.
//! Swapped bytes turn that round: the byte read as the most significant is the random one, and
//! the byte read as the least significant carries the sign copies. The check asks for both
//! signs of the swap at once (top bits of the high byte differ in at least
//! [`SWAP_TOP_SPLIT`] of numbers, those of the low byte in at most [`SWAP_LOW_SPLIT`], and the
//! low byte's top bit, the true sign, is neither always set nor always clear), so a loud genuine
//! input (high byte random too, but low byte random as well) and left-justified converters (a
//! constant low byte) pass. Unsigned formats are offset binary: their top bit is the sign
//! inverted, flipped before looking. A swapped input quieter than about −48 dBFS (σ under 128
//! counts) shows neither sign and passes: its level is then nowhere near what it reads.
//!
//! Not caught, because the result looks like a signal: float bytes read as an integer format
//! (white noise spread over the whole scale, about −2 dBFS); ci16 read as ci8 (a loud I, a
//! near-silent Q); cf32 read as cf64 (values near 1e−7, a very quiet input). Their levels are far
//! off what a receiver gives; the spectrum shows it, the run goes on.
//!
//! The judgement is made once, at the start: a long unattended run is never stopped later by a
//! receiver that clips for a while.

use super::format::{Number, Screened};
use super::SampleFormat;
use num_complex::Complex32;

/// Samples judged: a quarter second of input, at least [`MIN_SAMPLES`] (a slow input takes longer
/// than a quarter second), at most [`MAX_SAMPLES`].
pub const WINDOW_S: f64 = 0.25;
pub const MIN_SAMPLES: u64 = 4096;
pub const MAX_SAMPLES: u64 = 1 << 20;

/// A float input with at least this share of samples not a number or beyond ±1e6
/// ([`super::format::BEYOND_SCALE`]) is in another format: the smallest share measured for a
/// confusion is 14 %, a receiver gives none.
pub const FLOAT_ODD_SHARE: f64 = 0.05;

/// An integer input with at least this share of I/Q values within [`RAIL_MARGIN`] of full scale
/// is in another format (or the receiver is overloaded): a confusion gives 43–99 %, a full-scale
/// tone 29 %.
pub const RAIL_SHARE: f64 = 0.40;

/// "At the rails": a value whose magnitude is at least 1 − this (full scale is 1).
pub const RAIL_MARGIN: f32 = 0.10;

/// Byte order: the share of numbers whose most significant byte has its top two bits different,
/// at or above which the bytes may be swapped. Swapped bytes give about 50 % (random bits); a
/// receiver's numbers reach half scale far less often (noise at −10 dBFS: 2 %).
pub const SWAP_TOP_SPLIT: f64 = 0.30;

/// Byte order: the share of numbers whose least significant byte has its top two bits
/// different, at or below which that byte looks like sign copies (a genuine low byte: 50 %).
pub const SWAP_LOW_SPLIT: f64 = 0.10;

/// An input too short for the window is judged at its end if it held at least this many samples.
const MIN_AT_END: u64 = 1024;

/// Counts over the first samples of one input, then a verdict.
#[derive(Clone, Debug)]
pub struct FormatCheck {
    format: SampleFormat,
    window: u64,
    seen: u64,
    /// Float formats: samples not a number or beyond scale.
    odd: u64,
    non_finite: u64,
    /// Integer formats: I/Q values at the rails.
    railed: u64,
    /// Multi-byte integer formats: what their bytes say of the byte order.
    order: ByteOrderCounts,
    done: bool,
}

/// Counts over the numbers of a multi-byte integer format, for the byte-order check (module doc).
#[derive(Clone, Debug, Default)]
struct ByteOrderCounts {
    numbers: u64,
    /// Numbers whose most significant byte (as read) has its top two bits different.
    top_split: u64,
    /// Numbers whose least significant byte (as read) has its top two bits different.
    low_split: u64,
    /// Numbers whose least significant byte (as read) has its top bit set.
    low_top_set: u64,
}

impl ByteOrderCounts {
    /// Counts the numbers in `bytes`, whole samples of `format`.
    fn count(&mut self, format: SampleFormat, bytes: &[u8]) {
        let l = format.layout();
        let width = l.bits as usize / 8;
        if l.number == Number::Float || width < 2 {
            return;
        }
        let (hi, lo) = if l.big_endian { (0, width - 1) } else { (width - 1, 0) };
        // Offset binary: flipping the top bit makes the sign copies look as in two's complement.
        let flip = if l.number == Number::Unsigned { 0x80u8 } else { 0 };
        let split = |b: u8| u64::from(((b >> 7) ^ (b >> 6)) & 1);
        for n in bytes.chunks_exact(width) {
            let (h, l) = (n[hi] ^ flip, n[lo] ^ flip);
            self.top_split += split(h);
            self.low_split += split(l);
            self.low_top_set += u64::from(l >> 7);
        }
        self.numbers += (bytes.len() / width) as u64;
    }

    /// Why the bytes look swapped, if they do.
    fn swapped(&self) -> Option<(f64, f64)> {
        if self.numbers == 0 {
            return None;
        }
        let n = self.numbers as f64;
        let (top, low, sign) =
            (self.top_split as f64 / n, self.low_split as f64 / n, self.low_top_set as f64 / n);
        (top >= SWAP_TOP_SPLIT && low <= SWAP_LOW_SPLIT && (0.1..=0.9).contains(&sign))
            .then_some((top, low))
    }
}

impl FormatCheck {
    pub fn new(format: SampleFormat, sample_rate_hz: f64) -> FormatCheck {
        let window = (sample_rate_hz * WINDOW_S).clamp(MIN_SAMPLES as f64, MAX_SAMPLES as f64);
        FormatCheck {
            format,
            window: window as u64,
            seen: 0,
            odd: 0,
            non_finite: 0,
            railed: 0,
            order: ByteOrderCounts::default(),
            done: false,
        }
    }

    /// Looks at the bytes of whole samples before they are decoded (for the byte-order check);
    /// call it before [`look`](Self::look) with the same block.
    pub fn look_bytes(&mut self, bytes: &[u8]) {
        if self.done {
            return;
        }
        let bps = self.format.bytes_per_sample();
        let take = (bytes.len() / bps).min((self.window - self.seen) as usize);
        self.order.count(self.format, &bytes[..take * bps]);
    }

    /// Looks at decoded samples (with what screening found in them) until the window is full;
    /// returns why the input is evidently not in its format, once, when the window says so.
    pub fn look(&mut self, samples: &[Complex32], screened: &Screened) -> Option<String> {
        if self.done {
            return None;
        }
        let take = samples.len().min((self.window - self.seen) as usize);
        if is_float(self.format) {
            // The screen counted the whole block; a block that runs past the window counts by
            // its share, which only matters for the last one.
            let scale = take as f64 / samples.len().max(1) as f64;
            self.odd += ((screened.non_finite + screened.beyond_scale) as f64 * scale) as u64;
            self.non_finite += (screened.non_finite as f64 * scale) as u64;
        } else {
            let rail = 1.0 - RAIL_MARGIN;
            self.railed += samples[..take]
                .iter()
                .map(|s| (s.re.abs() >= rail) as u64 + (s.im.abs() >= rail) as u64)
                .sum::<u64>();
        }
        self.seen += take as u64;
        if self.seen < self.window {
            return None;
        }
        self.verdict()
    }

    /// At the end of an input shorter than the window: judges what there was, if enough.
    pub fn at_end(&mut self) -> Option<String> {
        if self.done || self.seen < MIN_AT_END {
            return None;
        }
        self.verdict()
    }

    fn verdict(&mut self) -> Option<String> {
        self.done = true;
        let n = self.seen as f64;
        let f = self.format;
        if is_float(f) {
            let share = self.odd as f64 / n;
            (share >= FLOAT_ODD_SHARE).then(|| {
                format!(
                    "of the first {} samples, {} are not a number or lie beyond ±1e6 while full scale is ±1 ({} NaN or infinite): the input is probably not {f}; check --format (cu8 or ci16 bytes read as {f} look like this)",
                    self.seen,
                    pct(share),
                    pct(self.non_finite as f64 / n),
                )
            })
        } else if let Some((top, low)) = self.order.swapped() {
            Some(format!(
                "of the first {} samples, {} of the numbers have the top two bits of their high byte different and only {} those of their low byte, the reverse of what a receiver gives: the input is probably not {f} but the same numbers in the other byte order; check --format (try {})",
                self.seen,
                pct(top),
                pct(low),
                other_byte_order(f),
            ))
        } else {
            let per = if f.layout().complex { 2.0 } else { 1.0 };
            let share = self.railed as f64 / (per * n);
            (share >= RAIL_SHARE).then(|| {
                format!(
                    "of the first {} samples, {} of the I/Q values lie within {:.0} % of full scale, which no receiver gives: the input is probably not {f}; check --format ({}), or, if it is, the receiver is overloaded: lower its gain",
                    self.seen,
                    pct(share),
                    RAIL_MARGIN * 100.0,
                    confusion_hint(f),
                )
            })
        }
    }
}

/// The name of `f` in the other byte order (8-bit formats have none and keep their name).
fn other_byte_order(f: SampleFormat) -> String {
    let name = f.name();
    match name.strip_suffix("_le") {
        Some(stem) => format!("{stem}_be"),
        None => name.strip_suffix("_be").map_or(name.to_string(), |stem| format!("{stem}_le")),
    }
}

fn is_float(f: SampleFormat) -> bool {
    f.is_float()
}

/// The usual mistakes that put values at the rails of `f`.
fn confusion_hint(f: SampleFormat) -> &'static str {
    match f {
        SampleFormat::Cu8 => "ci8 or ci16 bytes read as cu8 look like this",
        SampleFormat::Ci8 => "cu8 bytes read as ci8 look like this: cu8 and ci8 are often confused",
        _ => "cu8 bytes read as a wider integer format look like this",
    }
}

fn pct(share: f64) -> String {
    format!("{:.1} %", share * 100.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Decodes `samples` written in `written` as if they were `read`, in blocks as a source
    /// reads, and judges them.
    fn judge(written: SampleFormat, read: SampleFormat, samples: &[Complex32]) -> Option<String> {
        let mut bytes = Vec::new();
        written.encode(samples, &mut bytes);
        let bps = read.bytes_per_sample();
        let mut check = FormatCheck::new(read, 1e6);
        let mut out = vec![Complex32::default(); 10_000];
        for chunk in bytes.chunks(10_000 * bps) {
            let whole = chunk.len() / bps;
            check.look_bytes(&chunk[..whole * bps]);
            let screened = read.decode(&chunk[..whole * bps], &mut out);
            if let Some(why) = check.look(&out[..whole], &screened) {
                return Some(why);
            }
        }
        check.at_end()
    }

    /// Complex Gaussian noise at `dbfs` (total power), from the test kit.
    fn noise(dbfs: f64, n: usize, seed: u64) -> Vec<Complex32> {
        crate::testkit::noise(n, 10f64.powf(dbfs / 10.0), seed)
    }

    #[test]
    fn every_format_read_as_itself_passes() {
        for f in SampleFormat::ALL {
            let x = noise(-20.0, 300_000, 7);
            assert_eq!(judge(f, f, &x), None, "{f}");
        }
    }

    #[test]
    fn a_full_scale_tone_and_a_clipping_receiver_pass() {
        // A constant-envelope tone of magnitude 1 (0 dBFS) spends 29 % of its time within 10 %
        // of full scale on each of I and Q (arcsine distribution, worked out in the module doc).
        let tone: Vec<Complex32> =
            (0..300_000).map(|i| Complex32::from_polar(1.0, i as f32 * 0.0123)).collect();
        // Noise at −6 dBFS: its I and Q (σ = 0.35) reach the rails now and then and are clipped.
        let loud = noise(-6.0, 300_000, 11);
        for f in [SampleFormat::Cu8, SampleFormat::Ci8, SampleFormat::Ci16Le] {
            assert_eq!(judge(f, f, &tone), None, "{f} tone");
            assert_eq!(judge(f, f, &loud), None, "{f} loud noise");
        }
    }

    #[test]
    fn the_measured_confusions_are_caught() {
        // The confusions of the module doc's table, on noise at a receiver's usual level.
        use SampleFormat::*;
        let x = noise(-30.0, 400_000, 3);
        let caught = [
            (Cu8, Cf32Le),
            (Cu8, Cf32Be),
            (Cu8, Cf64Le),
            (Ci8, Cf32Le),
            (Ci16Le, Cf32Le),
            (Ci16Le, Cf32Be),
            (Cf32Le, Cf32Be),
            (Cf32Be, Cf32Le),
            (Cf64Le, Cf32Le),
            (Cu8, Ci8),
            (Ci8, Cu8),
            (Cu8, Ci16Le),
            (Cu8, Ci16Be),
            (Cu8, Ci32Le),
            (Ci16Le, Cu8),
            (Ci16Be, Cu8),
        ];
        for (written, read) in caught {
            let why = judge(written, read, &x)
                .unwrap_or_else(|| panic!("{written} read as {read} passed the check"));
            assert!(why.contains(&format!("probably not {read}")), "{why}");
            assert!(why.contains("--format"), "{why}");
        }
    }

    #[test]
    fn integers_in_the_other_byte_order_are_caught_at_a_receivers_levels() {
        // Every multi-byte integer format written in one byte order and read in the other, on
        // noise from −45 dBFS (σ about 180 counts of 16 bits) to −10 dBFS, and on a tone at
        // −6 dBFS: the bytes are swapped in each case (module doc: why the bytes tell).
        use SampleFormat::*;
        let pairs = [
            (Ci16Le, Ci16Be),
            (Ci32Le, Ci32Be),
            (Cu16Le, Cu16Be),
            (Cu32Le, Cu32Be),
            (Ri16Le, Ri16Be),
            (Ru16Le, Ru16Be),
        ];
        let tone: Vec<Complex32> =
            (0..300_000).map(|i| Complex32::from_polar(0.5, i as f32 * 0.0123)).collect();
        for (a, b) in pairs {
            for (written, read) in [(a, b), (b, a)] {
                for (what, x) in [
                    ("noise −45 dBFS", noise(-45.0, 300_000, 5)),
                    ("noise −10 dBFS", noise(-10.0, 300_000, 6)),
                    ("tone −6 dBFS", tone.clone()),
                ] {
                    let why = judge(written, read, &x)
                        .unwrap_or_else(|| panic!("{written} read as {read} passed ({what})"));
                    assert!(why.contains("other byte order"), "{why}");
                    assert!(why.contains(&format!("try {written}")), "{why}");
                }
            }
        }
    }

    #[test]
    fn genuine_integers_pass_the_byte_order_check() {
        // Loud and quiet inputs in their own byte order; a full-scale tone; and a 12-bit
        // converter left-justified in 16 bits (low four bits always zero), common practice for
        // 12-bit receivers, whose low byte is part constant.
        use SampleFormat::*;
        let tone: Vec<Complex32> =
            (0..300_000).map(|i| Complex32::from_polar(1.0, i as f32 * 0.0123)).collect();
        let twelve_bit: Vec<Complex32> = noise(-20.0, 300_000, 9)
            .iter()
            .map(|s| {
                let q = |v: f32| (v * 2048.0).round().clamp(-2048.0, 2047.0) / 2048.0;
                Complex32::new(q(s.re), q(s.im))
            })
            .collect();
        for f in [Ci16Le, Ci16Be, Ci32Le, Ci32Be, Cu16Le, Cu16Be, Cu32Le, Cu32Be] {
            for (what, x) in [
                ("noise −60 dBFS", noise(-60.0, 300_000, 1)),
                ("noise −3 dBFS", noise(-3.0, 300_000, 2)),
                ("tone 0 dBFS", tone.clone()),
                ("12-bit left-justified", twelve_bit.clone()),
            ] {
                assert_eq!(judge(f, f, &x), None, "{f} {what}");
            }
        }
    }

    #[test]
    fn the_verdict_is_given_once_and_short_inputs_are_judged_at_their_end() {
        let mut check = FormatCheck::new(SampleFormat::Ci8, 1e6);
        let rails = vec![Complex32::new(-1.0, 0.99); 2000];
        let s = Screened { kept: 2000, ..Screened::default() };
        assert_eq!(check.look(&rails, &s), None, "the window is not full yet");
        assert!(check.at_end().is_some());
        assert_eq!(check.at_end(), None);
        let mut tiny = FormatCheck::new(SampleFormat::Ci8, 1e6);
        let _ = tiny.look(&rails[..100], &s);
        assert_eq!(tiny.at_end(), None, "100 samples are too few to judge");
    }
}
