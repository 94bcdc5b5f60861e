//! The framed binary log codec: round trips bit for bit, the published CRC
//! check values, and recovery from truncation, flipped bytes and garbage.

use headroom::record::codec::{
    decode_frame, encode_frame, CodecError, Decoded, Encoder, Event, Frame, FrameDecoder,
    MAX_FRAME, VERSION, VERSION_1,
};
use headroom::record::crc::{crc32c, Crc32c, CHECK};
use headroom::record::{DecisionRecord, LogHeader, LogRecord};
use headroom::units::{Db, Dbi, Dbm};
use proptest::prelude::*;

/// Frames of one log: the bytes, and where each frame starts and ends
/// (end = one past its delimiter).
struct Log {
    bytes: Vec<u8>,
    spans: Vec<(usize, usize)>,
}

fn record(i: u64) -> LogRecord {
    // Our own invented readings: a node stepping its power down a 0.5 dB grid.
    LogRecord {
        t_ms: 1_000 * i + (i % 7),
        tx_dbm: Some(14.0 - 0.5 * (i % 20) as f32),
        rssi_dbm: if i % 5 == 3 {
            None
        } else {
            Some(-97.25 + (i % 11) as f32)
        },
        noise_dbm: if i.is_multiple_of(3) {
            Some(-118.5)
        } else {
            None
        },
        rate: None,
    }
}

fn header() -> LogHeader {
    LogHeader {
        device_id: 0x00C0_FFEE,
        epoch_ms: 1_785_000_000_000,
        min_tx: Some(Dbm(-4.0)),
        max_tx: Some(Dbm(14.0)),
        tx_step: Some(Db(0.5)),
        antenna_gain: Some(Dbi(1.5)),
        required_snr: Some(Db(-12.5)),
        eirp_cap: None,
        rates: headroom::rate::RateTable::empty(),
    }
}

/// A header frame and `n` record frames.
fn log(n: u64) -> Log {
    let mut enc = Encoder::new();
    let mut buf = [0u8; MAX_FRAME];
    let mut bytes = Vec::new();
    let mut spans = Vec::new();
    let f = enc.header(&header(), &mut buf).unwrap();
    spans.push((0, f.len()));
    bytes.extend_from_slice(f);
    for i in 0..n {
        let f = enc.record(&record(i), &mut buf).unwrap();
        spans.push((bytes.len(), bytes.len() + f.len()));
        bytes.extend_from_slice(f);
    }
    Log { bytes, spans }
}

/// Every event of a byte stream fed in chunks of `chunk` bytes, then finished.
fn events(bytes: &[u8], chunk: usize) -> Vec<Event> {
    let mut dec: FrameDecoder = FrameDecoder::new();
    let mut out = Vec::new();
    for piece in bytes.chunks(chunk.max(1)) {
        let mut input = piece;
        while let Some(ev) = dec.feed(&mut input) {
            out.push(ev);
        }
    }
    while let Some(ev) = dec.finish() {
        out.push(ev);
    }
    out
}

/// (seq, offset) of each intact frame.
type Frames = Vec<(u16, u64)>;
/// Merged damaged ranges [start, end).
type Ranges = Vec<(u64, u64)>;

/// Intact frames and merged damaged ranges of an event list.
fn split(evs: &[Event]) -> (Frames, Ranges) {
    let mut frames = Vec::new();
    let mut damage: Vec<(u64, u64)> = Vec::new();
    for ev in evs {
        match *ev {
            Event::Frame { seq, offset, .. } => frames.push((seq, offset)),
            Event::Damaged { offset, len, .. } => match damage.last_mut() {
                Some(last) if last.1 == offset => last.1 = offset + len,
                _ => damage.push((offset, offset + len)),
            },
        }
    }
    (frames, damage)
}

fn bits(x: Option<f32>) -> Option<u32> {
    x.map(f32::to_bits)
}

fn same_bits(a: &LogRecord, b: &LogRecord) -> bool {
    a.t_ms == b.t_ms
        && bits(a.tx_dbm) == bits(b.tx_dbm)
        && bits(a.rssi_dbm) == bits(b.rssi_dbm)
        && bits(a.noise_dbm) == bits(b.noise_dbm)
}

#[test]
fn crc32c_catalogue_check_value() {
    // CRC catalogue (reveng), CRC-32/ISCSI: check = 0xe3069283.
    assert_eq!(CHECK, 0xE306_9283);
    assert_eq!(crc32c(b"123456789"), 0xE306_9283);
}

#[test]
fn crc32c_rfc3720_vectors() {
    // RFC 3720 (iSCSI), appendix B.4, CRC examples (also reproduced by a
    // bitwise Python implementation while writing this test).
    assert_eq!(crc32c(&[0u8; 32]), 0x8A91_36AA);
    assert_eq!(crc32c(&[0xFFu8; 32]), 0x62A8_AB43);
    let up: Vec<u8> = (0u8..32).collect();
    assert_eq!(crc32c(&up), 0x46DD_794E);
    let down: Vec<u8> = (0u8..32).rev().collect();
    assert_eq!(crc32c(&down), 0x113F_DB5C);
    let mut c = Crc32c::new();
    for b in &up {
        c.update(std::slice::from_ref(b));
    }
    assert_eq!(c.value(), 0x46DD_794E);
}

#[test]
fn every_kind_round_trips() {
    let mut buf = [0u8; MAX_FRAME];
    let frames = [
        Frame::Header {
            header: header(),
            version: VERSION,
        },
        Frame::Header {
            header: LogHeader::default(),
            version: VERSION,
        },
        Frame::Record(LogRecord::default()),
        Frame::Record(record(12)),
        Frame::Decision(DecisionRecord {
            t_ms: u64::MAX,
            tx_dbm: -3.5,
            outcome: 255,
            reason: 0,
            rate: None,
        }),
    ];
    for (i, f) in frames.iter().enumerate() {
        let seq = (i as u16).wrapping_mul(40_000);
        let wire = encode_frame(seq, f, &mut buf).unwrap().to_vec();
        assert_eq!(wire.last(), Some(&0));
        assert_eq!(
            wire.iter().filter(|&&b| b == 0).count(),
            1,
            "only the delimiter is 0x00"
        );
        assert!(wire.len() <= MAX_FRAME);
        let body = wire[..wire.len() - 1].to_vec();
        assert_eq!(decode_frame(&body), Ok(Decoded { seq, frame: *f }));
    }
}

#[test]
fn a_full_record_frame_is_compact() {
    // Kind 1 + seq 2 + varint t (3 bytes for 1e6 ms) + 3 x (tag + f32) + CRC 4
    // = 25, plus one COBS overhead byte and the delimiter.
    let mut buf = [0u8; MAX_FRAME];
    let r = LogRecord {
        t_ms: 1_000_000,
        tx_dbm: Some(1.0),
        rssi_dbm: Some(-1.0),
        noise_dbm: Some(2.0),
        rate: None,
    };
    let n = encode_frame(7, &Frame::Record(r), &mut buf).unwrap().len();
    assert_eq!(n, 27);
}

#[test]
fn a_buffer_too_small_is_an_error_at_every_size() {
    let mut big = [0u8; MAX_FRAME];
    let need = encode_frame(3, &Frame::Record(record(3)), &mut big)
        .unwrap()
        .len();
    for size in 0..need {
        let mut buf = vec![0u8; size];
        assert_eq!(
            encode_frame(3, &Frame::Record(record(3)), &mut buf),
            Err(CodecError::BufferTooSmall),
            "size {size}"
        );
    }
    assert_eq!(
        encode_frame(0, &Frame::Other { kind: 9 }, &mut big),
        Err(CodecError::UnknownKind(9))
    );
}

#[test]
fn a_newer_major_version_is_refused() {
    // Patch the header's major version (kind 0, seq, then magic and major)
    // and re-seal it with a correct CRC, as a newer writer would.
    let mut buf = [0u8; MAX_FRAME];
    let wire = encode_frame(
        0,
        &Frame::Header {
            header: header(),
            version: VERSION,
        },
        &mut buf,
    )
    .unwrap()
    .to_vec();
    let mut payload = cobs_decode_for_test(&wire[..wire.len() - 1]);
    assert_eq!(&payload[3..7], b"hrlg");
    payload[7] = 3;
    let n = payload.len();
    let crc = crc32c(&payload[..n - 4]);
    payload[n - 4..].copy_from_slice(&crc.to_le_bytes());
    let again = cobs_encode_for_test(&payload);
    assert_eq!(
        decode_frame(&again),
        Err(CodecError::UnknownVersion {
            major: 3,
            minor: VERSION.minor
        })
    );
    // A newer minor version with an appended field still decodes.
    let mut payload = cobs_decode_for_test(&wire[..wire.len() - 1]);
    payload[8] = VERSION.minor + 1;
    payload.truncate(payload.len() - 4);
    // A later minor writes the 1.2 rate table even when empty (00), then
    // its own field.
    payload.push(0x00);
    payload.push(0x2A);
    let crc = crc32c(&payload);
    payload.extend_from_slice(&crc.to_le_bytes());
    let again = cobs_encode_for_test(&payload);
    match decode_frame(&again) {
        Ok(Decoded {
            frame: Frame::Header { header: h, version },
            ..
        }) => {
            assert_eq!(h, header());
            assert_eq!(version.minor, VERSION.minor + 1);
        }
        other => panic!("{other:?}"),
    }
}

/// A header payload written byte by byte from `docs/log-format.md`: kind 0,
/// seq 0, magic, `1.minor`, device id 42, epoch 1500 ms (`dc 0b`), min tx
/// 2 dBm, max tx 14 dBm, no step, antenna gain 2.15 dBi; then `tail` (the
/// 1.1 fields, or nothing for 1.0), sealed with its CRC and COBS.
fn hand_made_header(minor: u8, tail: &[u8]) -> Vec<u8> {
    let mut p = vec![0u8, 0, 0];
    p.extend_from_slice(b"hrlg");
    p.extend_from_slice(&[1, minor, 42, 0xdc, 0x0b]);
    for v in [Some(2.0f32), Some(14.0), None, Some(2.15)] {
        match v {
            Some(x) => {
                p.push(1);
                p.extend_from_slice(&x.to_le_bytes());
            }
            None => p.push(0),
        }
    }
    p.extend_from_slice(tail);
    let crc = crc32c(&p);
    p.extend_from_slice(&crc.to_le_bytes());
    cobs_encode_for_test(&p)
}

#[test]
fn a_1_0_header_has_no_required_snr_nor_cap_and_a_1_1_header_has_both() {
    let base = LogHeader {
        device_id: 42,
        epoch_ms: 1500,
        min_tx: Some(Dbm(2.0)),
        max_tx: Some(Dbm(14.0)),
        tx_step: None,
        antenna_gain: Some(Dbi(2.15)),
        required_snr: None,
        eirp_cap: None,
        rates: headroom::rate::RateTable::empty(),
    };
    // 1.0: the header ends after the antenna gain.
    assert_eq!(
        decode_frame(&hand_made_header(0, &[])),
        Ok(Decoded {
            seq: 0,
            frame: Frame::Header {
                header: base,
                version: headroom::record::codec::Version { major: 1, minor: 0 },
            }
        })
    );
    // 1.1: required SNR -15 dB, EIRP cap 16.15 dBm appended.
    let mut tail = vec![1u8];
    tail.extend_from_slice(&(-15.0f32).to_le_bytes());
    tail.push(1);
    tail.extend_from_slice(&16.15f32.to_le_bytes());
    let want = LogHeader {
        required_snr: Some(Db(-15.0)),
        eirp_cap: Some(Dbm(16.15)),
        ..base
    };
    assert_eq!(
        decode_frame(&hand_made_header(1, &tail)),
        Ok(Decoded {
            seq: 0,
            frame: Frame::Header {
                header: want,
                version: headroom::record::codec::Version { major: 1, minor: 1 },
            }
        })
    );
    // And the encoder writes exactly those bytes for that header.
    let mut buf = [0u8; MAX_FRAME];
    let wire = encode_frame(
        0,
        &Frame::Header {
            header: want,
            version: VERSION_1,
        },
        &mut buf,
    )
    .unwrap();
    // (Format 1.2 writes a header without rates as the 1.1 bytes, minor 2.)
    assert_eq!(&wire[..wire.len() - 1], &hand_made_header(2, &tail)[..]);
}

#[test]
fn the_documented_empty_headers_decode_and_the_1_2_one_is_what_the_encoder_writes() {
    // docs/log-format.md, "Worked example" (CRC-32C computed with a
    // bit-by-bit implementation of the Castagnoli polynomial, outside the
    // project).
    let v11: [u8; 23] = [
        0x01, 0x01, 0x01, 0x07, 0x68, 0x72, 0x6c, 0x67, 0x01, 0x01, 0x01, 0x01, 0x01, 0x01, 0x01,
        0x01, 0x01, 0x05, 0xd2, 0xf8, 0x07, 0xf0, 0x00,
    ];
    let v12: [u8; 23] = [
        0x01, 0x01, 0x01, 0x07, 0x68, 0x72, 0x6c, 0x67, 0x01, 0x02, 0x01, 0x01, 0x01, 0x01, 0x01,
        0x01, 0x01, 0x05, 0xfb, 0xf4, 0xa8, 0xe9, 0x00,
    ];
    let v10: [u8; 21] = [
        0x01, 0x01, 0x01, 0x06, 0x68, 0x72, 0x6c, 0x67, 0x01, 0x01, 0x01, 0x01, 0x01, 0x01, 0x01,
        0x05, 0x4a, 0x52, 0x3e, 0xc6, 0x00,
    ];
    let mut buf = [0u8; MAX_FRAME];
    let wire = Encoder::new()
        .header(&LogHeader::default(), &mut buf)
        .unwrap();
    assert_eq!(wire, &v12[..]);
    for (bytes, minor) in [(&v12[..], 2u8), (&v11[..], 1), (&v10[..], 0)] {
        match decode_frame(&bytes[..bytes.len() - 1]) {
            Ok(Decoded {
                seq: 0,
                frame: Frame::Header { header, version },
            }) => {
                assert_eq!(header, LogHeader::default());
                assert_eq!((version.major, version.minor), (1, minor));
            }
            other => panic!("{other:?}"),
        }
    }
}

/// Plain COBS, written from the scheme's description for these tests.
fn cobs_encode_for_test(raw: &[u8]) -> Vec<u8> {
    let mut out = Vec::new();
    for block in raw.split(|&b| b == 0) {
        // Blocks here are short (< 254), so one code byte each.
        assert!(block.len() < 254);
        out.push(block.len() as u8 + 1);
        out.extend_from_slice(block);
    }
    out
}

fn cobs_decode_for_test(enc: &[u8]) -> Vec<u8> {
    let mut out = Vec::new();
    let mut i = 0;
    while i < enc.len() {
        let code = enc[i] as usize;
        out.extend_from_slice(&enc[i + 1..i + code]);
        i += code;
        if code != 0xFF && i < enc.len() {
            out.push(0);
        }
    }
    out
}

#[test]
fn an_unknown_kind_with_a_good_crc_is_skipped_not_damage() {
    let mut payload = vec![7u8, 5, 0, 1, 2, 3];
    let crc = crc32c(&payload);
    payload.extend_from_slice(&crc.to_le_bytes());
    let mut wire = cobs_encode_for_test(&payload);
    wire.push(0);
    let evs = events(&wire, 3);
    assert_eq!(
        evs,
        vec![Event::Frame {
            offset: 0,
            seq: 5,
            frame: Frame::Other { kind: 7 }
        }]
    );
}

#[test]
fn clean_log_decodes_in_any_chunking() {
    let l = log(50);
    for chunk in [1, 2, 7, 64, 100_000] {
        let evs = events(&l.bytes, chunk);
        assert_eq!(evs.len(), 51, "chunk {chunk}");
        for (i, ev) in evs.iter().enumerate() {
            match ev {
                Event::Frame { offset, seq, frame } => {
                    assert_eq!(*offset as usize, l.spans[i].0);
                    assert_eq!(*seq as usize, i);
                    match frame {
                        Frame::Header { header: h, version } => {
                            assert_eq!(i, 0);
                            assert_eq!(*h, header());
                            assert_eq!(*version, VERSION_1);
                        }
                        Frame::Record(r) => assert_eq!(*r, record(i as u64 - 1)),
                        other => panic!("{other:?}"),
                    }
                }
                other => panic!("{other:?}"),
            }
        }
    }
}

#[test]
fn truncation_at_every_byte() {
    let l = log(6);
    for cut in 0..=l.bytes.len() {
        let evs = events(&l.bytes[..cut], 5);
        let (frames, damage) = split(&evs);
        let whole: Vec<usize> = (0..l.spans.len())
            .filter(|&k| l.spans[k].1 <= cut)
            .collect();
        assert_eq!(frames.len(), whole.len(), "cut {cut}");
        for (k, (seq, off)) in whole.iter().zip(&frames) {
            assert_eq!((*seq as usize, *off as usize), (*k, l.spans[*k].0));
        }
        let start = whole.last().map_or(0, |&k| l.spans[k].1);
        if start == cut {
            assert!(damage.is_empty(), "cut {cut}");
        } else {
            assert_eq!(damage, vec![(start as u64, cut as u64)], "cut {cut}");
            assert!(matches!(
                evs.last(),
                Some(Event::Damaged {
                    error: CodecError::Truncated,
                    ..
                })
            ));
        }
    }
}

#[test]
fn a_flipped_byte_loses_only_its_frame() {
    let l = log(30);
    let k = 17;
    let (s, e) = l.spans[k];
    for at in s..e {
        for mask in [0x01u8, 0x80, 0xFF] {
            let mut bytes = l.bytes.clone();
            bytes[at] ^= mask;
            let (frames, damage) = split(&events(&bytes, 4096));
            let seqs: Vec<usize> = frames.iter().map(|f| f.0 as usize).collect();
            let want: Vec<usize> = (0..l.spans.len()).filter(|&i| i != k).collect();
            assert_eq!(seqs, want, "byte {at} ^ {mask:#x}");
            // Also when the delimiter became data: frame k merges with k+1,
            // which is found again behind it.
            assert_eq!(damage, vec![(s as u64, e as u64)], "byte {at} ^ {mask:#x}");
        }
    }
}

#[test]
fn a_garbage_block_in_the_middle() {
    let l = log(100);
    let (s, _) = l.spans[40];
    let (_, e) = l.spans[49];
    // Deterministic garbage (an LCG), zeros included, over frames 40..=49.
    let mut bytes = l.bytes.clone();
    let mut x: u32 = 12345;
    for b in &mut bytes[s..e] {
        x = x.wrapping_mul(1_103_515_245).wrapping_add(12_345);
        *b = (x >> 16) as u8;
    }
    bytes[s + 30] = 0;
    bytes[s + 100] = 0;
    bytes[s + 101] = 0;
    bytes[e - 1] = 0x5A; // and the last delimiter is gone too
    let (frames, damage) = split(&events(&bytes, 1000));
    let seqs: Vec<usize> = frames.iter().map(|f| f.0 as usize).collect();
    let want: Vec<usize> = (0..l.spans.len())
        .filter(|i| !(40..=49).contains(i))
        .collect();
    assert_eq!(seqs, want);
    assert_eq!(damage, vec![(s as u64, e as u64)]);
    // Frame 50 is found right where it starts.
    assert_eq!(frames[40], (50, e as u64));
}

#[test]
fn inserted_garbage_without_zeros_loses_no_frame() {
    let l = log(20);
    let (s, _) = l.spans[8];
    let mut bytes = l.bytes[..s].to_vec();
    bytes.extend_from_slice(&[0x11; 300]);
    bytes.extend_from_slice(&l.bytes[s..]);
    let (frames, damage) = split(&events(&bytes, 77));
    assert_eq!(frames.len(), l.spans.len());
    assert_eq!(damage, vec![(s as u64, s as u64 + 300)]);
    assert_eq!(frames[8], (8, s as u64 + 300));
}

fn any_f32() -> impl Strategy<Value = Option<f32>> {
    prop_oneof![
        Just(None),
        any::<u32>().prop_map(|b| Some(f32::from_bits(b))),
        Just(Some(f32::NAN)),
        Just(Some(f32::INFINITY)),
        Just(Some(f32::NEG_INFINITY)),
        Just(Some(-0.0)),
        (-150.0f32..30.0).prop_map(Some),
    ]
}

fn any_record() -> impl Strategy<Value = LogRecord> {
    (any::<u64>(), any_f32(), any_f32(), any_f32()).prop_map(
        |(t_ms, tx_dbm, rssi_dbm, noise_dbm)| LogRecord {
            t_ms,
            tx_dbm,
            rssi_dbm,
            noise_dbm,
            rate: None,
        },
    )
}

proptest! {
    #[test]
    fn records_round_trip_bit_for_bit(recs in proptest::collection::vec(any_record(), 1..40), chunk in 1usize..64) {
        let mut enc = Encoder::new();
        let mut buf = [0u8; MAX_FRAME];
        let mut bytes = Vec::new();
        for r in &recs {
            let f = enc.record(r, &mut buf).unwrap();
            // Each frame alone, decoded in place.
            let one = f[..f.len() - 1].to_vec();
            match decode_frame(&one) {
                Ok(Decoded { frame: Frame::Record(got), .. }) => prop_assert!(same_bits(r, &got)),
                other => prop_assert!(false, "{other:?}"),
            }
            bytes.extend_from_slice(f);
        }
        let evs = events(&bytes, chunk);
        prop_assert_eq!(evs.len(), recs.len());
        for (i, (ev, r)) in evs.iter().zip(&recs).enumerate() {
            match ev {
                Event::Frame { seq, frame: Frame::Record(got), .. } => {
                    prop_assert_eq!(*seq as usize, i);
                    prop_assert!(same_bits(r, got), "{:?} != {:?}", r, got);
                }
                other => prop_assert!(false, "{other:?}"),
            }
        }
    }

    #[test]
    fn decisions_round_trip(t in any::<u64>(), tx in any::<u32>(), o in any::<u8>(), why in any::<u8>(), seq in any::<u16>()) {
        let d = DecisionRecord { t_ms: t, tx_dbm: f32::from_bits(tx), outcome: o, reason: why, rate: None };
        let mut buf = [0u8; MAX_FRAME];
        let f = encode_frame(seq, &Frame::Decision(d), &mut buf).unwrap().to_vec();
        let one = f[..f.len() - 1].to_vec();
        match decode_frame(&one) {
            Ok(Decoded { seq: s, frame: Frame::Decision(got) }) => {
                prop_assert_eq!(s, seq);
                prop_assert_eq!((got.t_ms, got.tx_dbm.to_bits(), got.outcome, got.reason), (t, tx, o, why));
            }
            other => prop_assert!(false, "{other:?}"),
        }
    }

    #[test]
    fn arbitrary_bytes_never_panic_and_are_accounted(bytes in proptest::collection::vec(any::<u8>(), 0..2000), chunk in 1usize..300) {
        let evs = events(&bytes, chunk);
        // Events are in stream order, within the input, and never overlap.
        let mut at = 0u64;
        for ev in &evs {
            let (off, len) = match *ev {
                Event::Frame { offset, .. } => (offset, 1),
                Event::Damaged { offset, len, .. } => (offset, len),
            };
            prop_assert!(off >= at);
            prop_assert!(off + len <= bytes.len() as u64);
            at = off + len;
        }
        let copy = bytes.clone();
        let _ = decode_frame(&copy);
    }

    #[test]
    fn random_damage_keeps_every_untouched_frame(n_flips in 1usize..6, seed in any::<u64>()) {
        let l = log(40);
        let mut bytes = l.bytes.clone();
        let mut x = seed | 1;
        let mut touched = Vec::new();
        for _ in 0..n_flips {
            x ^= x << 13; x ^= x >> 7; x ^= x << 17;
            let at = (x % bytes.len() as u64) as usize;
            bytes[at] = (x >> 32) as u8;
            touched.push(at);
        }
        let (frames, _) = split(&events(&bytes, 333));
        let seqs: Vec<usize> = frames.iter().map(|f| f.0 as usize).collect();
        for (k, &(s, e)) in l.spans.iter().enumerate() {
            let hit = touched.iter().any(|&t| t >= s && t < e && bytes[t] != l.bytes[t]);
            // An untouched frame is found, even when damage ran into it.
            if !hit {
                prop_assert!(seqs.contains(&k), "frame {} lost", k);
            }
            if hit {
                prop_assert!(!seqs.contains(&k) || bytes[s..e] == l.bytes[s..e]);
            }
        }
    }
}

/// The format 2 worked example of `docs/log-format.md`: four records in one
/// block frame (seq 1, after the header). The bytes below were computed
/// outside the project by this Python 3 script, from the format's
/// description (bitwise CRC-32C, COBS by splitting at zeros):
///
/// ```text
/// import struct
/// def crc32c(d):
///     c = 0xFFFFFFFF
///     for b in d:
///         c ^= b
///         for _ in range(8): c = (c >> 1) ^ (0x82F63B78 if c & 1 else 0)
///     return c ^ 0xFFFFFFFF
/// def leb(v):
///     out = []
///     while True:
///         b = v & 0x7F; v >>= 7
///         if v: out.append(b | 0x80)
///         else: out.append(b); return out
/// def zz(v): return (v << 1) if v >= 0 else ((-v) << 1) - 1
/// recs = [(60000, 14.0, -101.5, -117.0), (120000, 14.0, -99.25, -117.0),
///         (180000, 14.0, None, -117.0), (240000, 14.0, -100.1, -117.0)]
/// body = leb(recs[0][0]); t, dt, last = recs[0][0], 0, [0, 0, 0]
/// for (tm, *vals) in recs:
///     flags, rest = 0, []
///     if tm - t != dt: flags |= 0x40; dt = tm - t; rest += leb(zz(dt))
///     t = tm
///     for i, v in enumerate(vals):
///         if v is None: code = 0
///         elif v * 4 == int(v * 4):
///             k = int(v * 4)
///             if k == last[i]: code = 1
///             else: code = 2; rest += leb(zz(k - last[i])); last[i] = k
///         else: code = 3; rest += list(struct.pack('<f', v))
///         flags |= code << (2 * i)
///     body += [flags] + rest
/// p = [3, 1, 0] + body
/// p += list(struct.pack('<I', crc32c(bytes(p))))
/// wire = []
/// for blk in bytes(p).split(b"\0"): wire += [len(blk) + 1] + list(blk)
/// print(' '.join('%02x' % b for b in wire + [0]))
/// ```
#[test]
fn the_documented_format_2_block_is_what_the_encoder_writes() {
    use headroom::record::codec::{BlockEncoder, KIND_BLOCK};
    let wire: [u8; 29] = [
        0x03, 0x03, 0x01, 0x19, 0xe0, 0xd4, 0x03, 0x2a, 0x70, 0xab, 0x06, 0xa7, 0x07, 0x59, 0xc0,
        0xa9, 0x07, 0x12, 0x11, 0x1d, 0x33, 0x33, 0xc8, 0xc2, 0x95, 0xfc, 0xd7, 0xe4, 0x00,
    ];
    let recs = [
        (60_000u64, Some(-101.5f32)),
        (120_000, Some(-99.25)),
        (180_000, None),
        (240_000, Some(-100.1)),
    ]
    .map(|(t_ms, rssi_dbm)| LogRecord {
        t_ms,
        tx_dbm: Some(14.0),
        rssi_dbm,
        noise_dbm: Some(-117.0),
        rate: None,
    });
    let mut enc = BlockEncoder::with_records_per_frame(4);
    let mut buf = [0u8; MAX_FRAME];
    enc.header(&LogHeader::default(), &mut buf).unwrap();
    for (i, r) in recs.iter().enumerate() {
        let out = enc.record(r, &mut buf).unwrap();
        if i < 3 {
            assert!(out.is_empty());
        } else {
            assert_eq!(out, &wire[..]);
        }
    }
    // The decoders read it back: the block alone, and record by record.
    let d = decode_frame(&wire[..wire.len() - 1]).unwrap();
    assert_eq!(d.seq, 1);
    match d.frame {
        Frame::Block(b) => {
            assert_eq!(b.body()[0], 0xe0);
            assert_eq!(b.records().collect::<Vec<_>>(), recs.to_vec());
        }
        other => panic!("{other:?}"),
    }
    let got: Vec<LogRecord> = events(&wire, 5)
        .into_iter()
        .map(|ev| match ev {
            Event::Frame {
                frame: Frame::Record(r),
                seq: 1,
                offset: 0,
            } => r,
            other => panic!("{other:?}"),
        })
        .collect();
    assert_eq!(got, recs.to_vec());
    assert_eq!(KIND_BLOCK, 3);
}

/// Format 2 keeps every value bit for bit, as format 1 does.
#[test]
fn format_2_round_trips_what_format_1_does() {
    use headroom::record::codec::BlockEncoder;
    let mut enc = BlockEncoder::new();
    let mut buf = [0u8; MAX_FRAME];
    let mut bytes = enc.header(&header(), &mut buf).unwrap().to_vec();
    let mut want = Vec::new();
    for i in 0..1000u64 {
        let mut r = record(i);
        if i % 97 == 5 {
            r.rssi_dbm = Some(f32::from_bits(0x7FC0_1234));
            r.tx_dbm = Some(-0.0);
            r.rate = Some((i % 4) as u8);
        }
        want.push(r);
        bytes.extend_from_slice(enc.record(&r, &mut buf).unwrap());
    }
    bytes.extend_from_slice(enc.flush(&mut buf).unwrap());
    let bits = |r: &LogRecord| {
        (
            r.t_ms,
            [r.tx_dbm, r.rssi_dbm, r.noise_dbm].map(|v| v.map(f32::to_bits)),
            r.rate,
        )
    };
    let got: Vec<_> = events(&bytes, 4096)
        .into_iter()
        .filter_map(|ev| match ev {
            Event::Frame {
                frame: Frame::Record(r),
                ..
            } => Some(bits(&r)),
            _ => None,
        })
        .collect();
    assert_eq!(got, want.iter().map(bits).collect::<Vec<_>>());
}
