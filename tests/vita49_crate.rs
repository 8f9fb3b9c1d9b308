//! An independent check of the VITA 49 packet reader (src/source/vita49/packet.rs): packets
//! written by the `vita49` crate (crates.io, an implementation of ANSI/VITA-49.2-2017 by other
//! authors) are parsed by bandwarden, and every field must come back as the crate wrote it.

use bandwarden::source::vita49::packet::{parse, Packet, Tsf, Tsi};
use vita49::prelude::*;

#[test]
fn a_context_packet_written_by_the_vita49_crate_reads_the_same() {
    let mut packet = Vrt::new_context_packet();
    packet.set_stream_id(Some(0x5157));
    packet.set_integer_timestamp(Some(1_800_000_000), vita49::Tsi::Utc).unwrap();
    let context = packet.payload_mut().context_mut().unwrap();
    context.set_bandwidth_hz(Some(2e6));
    context.set_rf_ref_freq_hz(Some(433.92e6));
    context.set_reference_level_db(Some(-20.5));
    context.set_gain(Some(vita49::Gain::new(10.0, 3.5)));
    context.set_sample_rate_sps(Some(2.4e6));
    packet.update_packet_size();
    let bytes = packet.to_bytes().unwrap();

    let Ok(Packet::Context { header, context }) = parse(&bytes) else {
        panic!("not read as a context packet: {:?}", parse(&bytes))
    };
    assert_eq!(header.stream_id, Some(0x5157));
    assert_eq!(header.tsi, Tsi::Utc);
    assert_eq!(header.integer_ts, Some(1_800_000_000));
    assert_eq!(header.words * 4, bytes.len());
    assert_eq!(context.bandwidth_hz, Some(2e6));
    assert_eq!(context.rf_reference_hz, Some(433.92e6));
    assert_eq!(context.sample_rate_hz, Some(2.4e6));
    assert_eq!(context.reference_level_dbm, Some(-20.5));
    // The crate's Gain::new takes stage 1 then stage 2; stage 1 is the low 16 bits.
    assert_eq!(context.gain_db, Some((10.0, 3.5)));
}

#[test]
fn a_signal_data_packet_written_by_the_vita49_crate_reads_the_same() {
    let payload: Vec<u8> = (0u8..16).collect();
    let mut packet = Vrt::new_signal_data_packet();
    packet.set_stream_id(Some(0xabcd));
    packet.set_integer_timestamp(Some(1_800_000_123), vita49::Tsi::Utc).unwrap();
    packet.set_fractional_timestamp(Some(4096), vita49::Tsf::SampleCount).unwrap();
    packet.header_mut().set_packet_count(5);
    packet.set_signal_payload(&payload[..]).unwrap();
    packet.update_packet_size();
    let bytes = packet.to_bytes().unwrap();

    let Ok(Packet::Data { header, payload: got }) = parse(&bytes) else {
        panic!("not read as a data packet: {:?}", parse(&bytes))
    };
    assert_eq!(header.stream_id, Some(0xabcd));
    assert_eq!(header.count, 5);
    assert_eq!((header.tsi, header.tsf), (Tsi::Utc, Tsf::SampleCount));
    assert_eq!(header.integer_ts, Some(1_800_000_123));
    assert_eq!(header.fractional_ts, Some(4096));
    assert_eq!(got, &payload[..]);
}
