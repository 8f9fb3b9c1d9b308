//! VITA 49 packets (ANSI/VITA-49.0, 49.2): the header, signal data and the context fields that
//! say how to read and place the samples. Big-endian 32-bit words throughout.
//!
//! Header word (VITA-49.0 §6.1.1): packet type in bits 31–28 (0/1 signal data without/with
//! stream ID, 4/5 context and extension context), C bit 27 (a 2-word class ID follows the
//! stream ID), bit 26 T (signal data: a trailer word ends the packet), TSI bits 23–22 (integer
//! time stamp: none/UTC/GPS/other), TSF bits 21–20 (fractional: none/sample count/real-time
//! picoseconds/free-running count), packet count bits 19–16 (modulo 16, per stream), packet
//! size bits 15–0 in words including the header. Then stream ID, class ID, the integer
//! time stamp (1 word), the fractional one (2 words), the payload, the trailer.
//!
//! Context (§7.1): the payload starts with CIF0; its set bits say which fields follow, in
//! descending bit order. Field sizes in words, bit 30 down to 15 (from the standard's field
//! table, written here from memory of it): reference point 1, bandwidth 2, IF reference 2,
//! RF reference 2, RF offset 2, IF band offset 2, reference level 1, gain 1, over-range
//! count 1, sample rate 2, time stamp adjustment 2, time stamp calibration 1, temperature 1,
//! device ID 2, state/event 1, payload format 2. Bits 7, 3, 2, 1 (49.2) announce the CIF7,
//! CIF3, CIF2, CIF1 words, which follow CIF0 before any field. The fields read here all come
//! before the variable-length ones (GPS ASCII, association lists), so parsing stops after the
//! payload format.

use std::fmt;

/// Why a datagram is not a packet we can take.
#[derive(Clone, Debug, PartialEq)]
pub struct Malformed(pub String);

impl fmt::Display for Malformed {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

/// The integer time stamp's kind (TSI).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Tsi {
    None,
    Utc,
    Gps,
    Other,
}

/// The fractional time stamp's kind (TSF).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Tsf {
    None,
    SampleCount,
    RealTime,
    FreeRunning,
}

/// The header and the parts every packet has.
#[derive(Clone, Debug, PartialEq)]
pub struct Header {
    pub packet_type: u8,
    pub class_id: bool,
    pub trailer: bool,
    pub tsi: Tsi,
    pub tsf: Tsf,
    pub count: u8,
    /// Packet size in 32-bit words, header included.
    pub words: usize,
    pub stream_id: Option<u32>,
    pub integer_ts: Option<u32>,
    pub fractional_ts: Option<u64>,
}

/// A parsed packet: signal data (its payload's bytes) or context.
#[derive(Clone, Debug, PartialEq)]
pub enum Packet<'a> {
    Data {
        header: Header,
        payload: &'a [u8],
    },
    Context {
        header: Header,
        context: Context,
    },
    /// A packet type we do not use (extension data, commands): counted, not read.
    Other {
        header: Header,
    },
}

/// The context fields bandwarden applies.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Context {
    pub bandwidth_hz: Option<f64>,
    pub rf_reference_hz: Option<f64>,
    pub rf_offset_hz: Option<f64>,
    pub reference_level_dbm: Option<f64>,
    /// Stage 1 and stage 2 gain, dB.
    pub gain_db: Option<(f64, f64)>,
    pub sample_rate_hz: Option<f64>,
    pub payload_format: Option<PayloadFormat>,
}

/// The signal data payload format field (§7.1.5.18), the parts that matter for reading.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct PayloadFormat {
    /// Bits 62–61: 0 real, 1 complex Cartesian, 2 complex polar.
    pub real_complex: u8,
    /// Bits 60–56: 0 signed fixed point, 0x0E IEEE single, 0x0F IEEE double, 0x10.. unsigned.
    pub item_format: u8,
    /// Bits 43–38 plus one: bits per packed item.
    pub packing_bits: u32,
    /// Bits 37–32 plus one: bits of data in an item.
    pub item_bits: u32,
}

/// A 64-bit frequency field: two's complement Hz with the radix point at bit 20.
pub fn radix20(v: u64) -> f64 {
    v as i64 as f64 / (1u64 << 20) as f64
}

/// A 16-bit level field: two's complement dB with the radix point at bit 7.
pub fn radix7(v: u16) -> f64 {
    v as i16 as f64 / 128.0
}

/// Words of the context fields for CIF0 bits 30 down to 15 (module doc).
const FIELD_WORDS: [(u32, usize); 16] = [
    (30, 1),
    (29, 2),
    (28, 2),
    (27, 2),
    (26, 2),
    (25, 2),
    (24, 1),
    (23, 1),
    (22, 1),
    (21, 2),
    (20, 2),
    (19, 1),
    (18, 1),
    (17, 2),
    (16, 1),
    (15, 2),
];

fn word(bytes: &[u8], i: usize) -> u32 {
    let b = &bytes[4 * i..4 * i + 4];
    u32::from_be_bytes([b[0], b[1], b[2], b[3]])
}

fn double(bytes: &[u8], i: usize) -> u64 {
    (u64::from(word(bytes, i)) << 32) | u64::from(word(bytes, i + 1))
}

fn bad(why: impl Into<String>) -> Malformed {
    Malformed(why.into())
}

/// Parses one datagram as one packet. Never panics; anything inconsistent is [`Malformed`].
pub fn parse(bytes: &[u8]) -> Result<Packet<'_>, Malformed> {
    if bytes.len() < 4 || bytes.len() % 4 != 0 {
        return Err(bad(format!("{} bytes is not a whole number of 32-bit words", bytes.len())));
    }
    let h = word(bytes, 0);
    let words = (h & 0xffff) as usize;
    if words == 0 || words * 4 != bytes.len() {
        return Err(bad(format!(
            "the header's size is {words} words but the datagram holds {}",
            bytes.len() / 4
        )));
    }
    let packet_type = (h >> 28) as u8;
    let mut header = Header {
        packet_type,
        class_id: h & (1 << 27) != 0,
        trailer: packet_type <= 3 && h & (1 << 26) != 0,
        tsi: [Tsi::None, Tsi::Utc, Tsi::Gps, Tsi::Other][((h >> 22) & 3) as usize],
        tsf: [Tsf::None, Tsf::SampleCount, Tsf::RealTime, Tsf::FreeRunning]
            [((h >> 20) & 3) as usize],
        count: ((h >> 16) & 0xf) as u8,
        words,
        stream_id: None,
        integer_ts: None,
        fractional_ts: None,
    };
    let has_stream_id = packet_type != 0 && packet_type != 2;
    let prefix = 1
        + usize::from(has_stream_id)
        + 2 * usize::from(header.class_id)
        + usize::from(header.tsi != Tsi::None)
        + 2 * usize::from(header.tsf != Tsf::None);
    let end = words - usize::from(header.trailer);
    if prefix > end {
        return Err(bad(format!("a packet of {words} words is too short for its header fields")));
    }
    let mut at = 1;
    if has_stream_id {
        header.stream_id = Some(word(bytes, at));
        at += 1;
    }
    at += 2 * usize::from(header.class_id);
    if header.tsi != Tsi::None {
        header.integer_ts = Some(word(bytes, at));
        at += 1;
    }
    if header.tsf != Tsf::None {
        header.fractional_ts = Some(double(bytes, at));
        at += 2;
    }
    let payload = &bytes[4 * at..4 * end];
    match packet_type {
        0 | 1 => Ok(Packet::Data { header, payload }),
        4 => {
            let context = parse_context(payload)?;
            Ok(Packet::Context { header, context })
        }
        2 | 3 | 5..=7 => Ok(Packet::Other { header }),
        t => Err(bad(format!("packet type {t} is not defined by VITA 49"))),
    }
}

/// Reads the context fields (module doc) from a context packet's payload.
fn parse_context(p: &[u8]) -> Result<Context, Malformed> {
    let have = p.len() / 4;
    if have == 0 {
        return Err(bad("a context packet without CIF0"));
    }
    let cif0 = word(p, 0);
    let extra_cifs = [1u32, 2, 3, 7].iter().filter(|b| cif0 & (1 << **b) != 0).count();
    let mut at = 1 + extra_cifs;
    let mut ctx = Context::default();
    for (bit, size) in FIELD_WORDS {
        if cif0 & (1 << bit) == 0 {
            continue;
        }
        if at + size > have {
            return Err(bad(format!("context field of CIF0 bit {bit} runs past the packet")));
        }
        match bit {
            29 => ctx.bandwidth_hz = Some(radix20(double(p, at))),
            27 => ctx.rf_reference_hz = Some(radix20(double(p, at))),
            26 => ctx.rf_offset_hz = Some(radix20(double(p, at))),
            24 => ctx.reference_level_dbm = Some(radix7(word(p, at) as u16)),
            23 => {
                let g = word(p, at);
                ctx.gain_db = Some((radix7(g as u16), radix7((g >> 16) as u16)));
            }
            21 => ctx.sample_rate_hz = Some(radix20(double(p, at))),
            15 => {
                let f = double(p, at);
                ctx.payload_format = Some(PayloadFormat {
                    real_complex: ((f >> 61) & 3) as u8,
                    item_format: ((f >> 56) & 0x1f) as u8,
                    packing_bits: ((f >> 38) & 0x3f) as u32 + 1,
                    item_bits: ((f >> 32) & 0x3f) as u32 + 1,
                });
            }
            _ => {}
        }
        at += size;
    }
    Ok(ctx)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn words(w: &[u32]) -> Vec<u8> {
        w.iter().flat_map(|x| x.to_be_bytes()).collect()
    }

    #[test]
    fn a_data_packet_with_stream_id_time_stamps_and_trailer() {
        // Type 1, T set, TSI UTC, TSF sample count, count 5, 8 words: header, stream ID,
        // integer, 2 fractional, 2 payload words, trailer (VITA-49.0 §6.1 layout).
        let h = (1 << 28) | (1 << 26) | (1 << 22) | (1 << 20) | (5 << 16) | 8;
        let b = words(&[h, 0xabcd, 1_700_000_000, 0, 4096, 0x1234_5678, 0x9abc_def0, 0]);
        let Ok(Packet::Data { header, payload }) = parse(&b) else { panic!("not data") };
        assert_eq!(header.stream_id, Some(0xabcd));
        assert_eq!(header.count, 5);
        assert_eq!((header.tsi, header.tsf), (Tsi::Utc, Tsf::SampleCount));
        assert_eq!(header.integer_ts, Some(1_700_000_000));
        assert_eq!(header.fractional_ts, Some(4096));
        assert_eq!(payload, &words(&[0x1234_5678, 0x9abc_def0])[..]);
    }

    #[test]
    fn context_fields_read_with_their_radix_points() {
        // CIF0 bits 29 (bandwidth), 27 (RF reference), 24 (reference level), 23 (gain),
        // 21 (sample rate). Radix points: frequencies at bit 20, levels at bit 7 (§7.1.5).
        let cif0 = (1 << 29) | (1 << 27) | (1 << 24) | (1 << 23) | (1 << 21);
        let hz = |f: f64| (f * (1u64 << 20) as f64) as i64 as u64;
        let bw = hz(2e6);
        let rf = hz(433.92e6);
        let rate = hz(2.4e6);
        let level = (-10.5f64 * 128.0) as i16 as u16 as u32; // −10.5 dBm
        let gain = ((12.25f64 * 128.0) as i16 as u16 as u32) << 16 | (3.0f64 * 128.0) as u32;
        let mut w = vec![4 << 28, 7, cif0];
        w.extend([(bw >> 32) as u32, bw as u32, (rf >> 32) as u32, rf as u32, level, gain]);
        w.extend([(rate >> 32) as u32, rate as u32]);
        w[0] |= w.len() as u32;
        let Ok(Packet::Context { header, context }) = parse(&words(&w)) else { panic!() };
        assert_eq!(header.stream_id, Some(7));
        assert_eq!(context.bandwidth_hz, Some(2e6));
        assert_eq!(context.rf_reference_hz, Some(433.92e6));
        assert_eq!(context.sample_rate_hz, Some(2.4e6));
        assert_eq!(context.reference_level_dbm, Some(-10.5));
        assert_eq!(context.gain_db, Some((3.0, 12.25)));
    }

    #[test]
    fn malformed_datagrams_are_refused_not_read() {
        assert!(parse(&[1, 2, 3]).is_err());
        // Size field says 9 words, the datagram holds 2.
        assert!(parse(&words(&[(1 << 28) | 9, 0])).is_err());
        // Header fields longer than the packet.
        assert!(parse(&words(&[(1 << 28) | (3 << 20) | 2, 0])).is_err());
        // A context field running past the end.
        assert!(parse(&words(&[(4 << 28) | 3, 0, 1 << 29])).is_err());
        assert!(parse(&words(&[(8 << 28) | 1])).is_err(), "type 8 is not defined");
    }
}
