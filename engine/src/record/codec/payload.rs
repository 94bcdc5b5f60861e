//! Layer 3: the payload of a frame: kind, sequence number, body, CRC-32C
//! (layer 2, [`crate::record::crc`]), and the bodies of each kind.
//!
//! Bodies are postcard. Headers and decisions are read by postcard; record
//! bodies, the hot path, by [`record_body`], which reads the same grammar
//! and is generated from the same field list as the encoder's
//! [`WireRecord`] (see [`record_fields!`]).

use serde::{Deserialize, Serialize};

use super::compact;
use super::{CodecError, Decoded, Frame, Version, KIND_BLOCK, KIND_DECISION, KIND_HEADER};
use super::{KIND_RECORD, MAGIC, MAX_PAYLOAD, MIN_PAYLOAD, VERSION, VERSION_1};
use crate::rate::{Rate, RateTable, MAX_RATES, RATE_NAME_LEN};
use crate::record::crc::{crc32c, Crc32c};
use crate::record::{DecisionRecord, LogHeader, LogRecord};
use crate::units::{Db, Dbi, Dbm};

#[derive(Serialize, Deserialize)]
struct WireHeader {
    magic: [u8; 4],
    major: u8,
    minor: u8,
    #[serde(serialize_with = "leb128::serialize")]
    device_id: u64,
    #[serde(serialize_with = "leb128::serialize")]
    epoch_ms: u64,
    min_tx_dbm: Option<f32>,
    max_tx_dbm: Option<f32>,
    tx_step_db: Option<f32>,
    antenna_gain_dbi: Option<f32>,
}

/// Header fields appended by format 1.1 after those of 1.0 (a 1.0 header
/// ends before them; they are then absent).
#[derive(Serialize, Deserialize)]
struct WireHeaderV11 {
    required_snr_db: Option<f32>,
    eirp_cap_dbm: Option<f32>,
}

/// One rate of the header's rate table (format 1.2).
#[derive(Serialize, Deserialize)]
struct WireRate {
    name: heapless::String<RATE_NAME_LEN>,
    required_snr_db: f32,
    airtime_us: u32,
    noise_bandwidth_hz: Option<f32>,
}

/// Header fields appended by format 1.2 after those of 1.1: the radio's
/// rate table (empty when the log does not say).
#[derive(Serialize, Deserialize)]
struct WireHeaderV12 {
    rates: heapless::Vec<WireRate, MAX_RATES>,
}

/// The one list of a record's fields, in wire order: each field, its wire
/// type and the reader of that type. It generates the encoder's
/// [`WireRecord`] (postcard), its conversion from a [`LogRecord`], and the
/// hand-written body reader [`record_body`]. Both conversions build the
/// whole [`LogRecord`] without `..`, so a field added to [`LogRecord`] and
/// not here does not compile, and a field added here is read and written
/// alike (`record_body_reads_what_postcard_reads` checks the reader against
/// postcard's).
macro_rules! record_fields {
    ($($(#[$attr:meta])* $field:ident: $ty:ty => $take:ident,)*) => {
        #[derive(Serialize, Deserialize)]
        pub(super) struct WireRecord {
            $($(#[$attr])* pub(super) $field: $ty,)*
        }

        impl From<&LogRecord> for WireRecord {
            fn from(r: &LogRecord) -> Self {
                WireRecord { $($field: r.$field,)* }
            }
        }

        impl From<WireRecord> for LogRecord {
            fn from(w: WireRecord) -> Self {
                LogRecord { $($field: w.$field,)* }
            }
        }

        /// A record body, read the way postcard reads a [`WireRecord`]
        /// (same values, same inputs refused; bytes after the fields
        /// ignored), without going through serde: postcard's generic path
        /// cost about 130 of the 410 instructions of a record frame's
        /// decoding (callgrind, x86-64), this one about 60 with the one-word
        /// varint of [`take_varint_u64`] (about 115 with a byte loop for it).
        pub(super) fn record_body(body: &[u8]) -> Option<LogRecord> {
            let rest = body;
            $(let ($field, rest) = $take(rest)?;)*
            let _ = rest;
            Some(LogRecord { $($field,)* })
        }
    };
}

record_fields! {
    #[serde(serialize_with = "leb128::serialize")]
    t_ms: u64 => take_varint_u64,
    tx_dbm: Option<f32> => take_option_f32,
    rssi_dbm: Option<f32> => take_option_f32,
    noise_dbm: Option<f32> => take_option_f32,
    // Since format 1.2; a 1.0/1.1 record ends before it (read as `None`).
    rate: Option<u8> => take_trailing_option_u8,
}

#[derive(Serialize, Deserialize)]
struct WireDecision {
    #[serde(serialize_with = "leb128::serialize")]
    t_ms: u64,
    tx_dbm: f32,
    outcome: u8,
    reason: u8,
}

/// The `u64` fields written as LEB128 varint bytes, exactly as postcard
/// writes a `u64` (so the wire format is postcard's), but through a fixed
/// array and a byte tuple: postcard's own `u64` varint writer indexes its
/// scratch array in a way the optimiser cannot prove in bounds, which left
/// a panic path in the encoder. Headers and decisions are read by postcard,
/// record bodies by [`record_body`], which reads the same grammar.
pub(super) mod leb128 {
    use serde::ser::{SerializeTuple, Serializer};

    /// Most bytes of a `u64` varint: ceil(64 / 7).
    pub(in crate::record::codec) const MAX_LEN: usize = 10;

    /// The varint bytes of `v` and how many of them are used.
    pub(in crate::record::codec) fn encode(v: u64) -> ([u8; MAX_LEN], usize) {
        let mut out = [0u8; MAX_LEN];
        let mut rest = v;
        let mut used = 0usize;
        for slot in out.iter_mut() {
            // Low 7 bits; the cast keeps them (rest & 0x7F < 128).
            let low = (rest & 0x7F) as u8;
            rest >>= 7;
            used += 1;
            if rest == 0 {
                *slot = low;
                break;
            }
            *slot = low | 0x80;
        }
        (out, used)
    }

    pub(super) fn serialize<S: Serializer>(v: &u64, s: S) -> Result<S::Ok, S::Error> {
        let (bytes, used) = encode(*v);
        // postcard writes a tuple as its elements, without a length.
        let mut t = s.serialize_tuple(used)?;
        for b in bytes.iter().take(used) {
            t.serialize_element(b)?;
        }
        t.end()
    }
}

/// Write the 1.2 rate table into `out` as postcard writes a
/// [`WireHeaderV12`] (`header_rates_write_what_postcard_writes` checks it),
/// byte by byte: postcard's own varint writers for the lengths and the
/// airtime leave a panic path in the device's encoder. Returns the length.
fn write_rates(rates: &RateTable, out: &mut [u8]) -> Result<usize, CodecError> {
    let mut at = 0usize;
    let mut put = |bytes: &[u8]| -> Result<(), CodecError> {
        let end = at
            .checked_add(bytes.len())
            .ok_or(CodecError::BufferTooSmall)?;
        out.get_mut(at..end)
            .ok_or(CodecError::BufferTooSmall)?
            .copy_from_slice(bytes);
        at = end;
        Ok(())
    };
    let varint = |v: u64| leb128::encode(v);
    let (n, used) = varint(rates.len() as u64);
    put(n.get(..used).unwrap_or(&[]))?;
    for r in rates.as_slice() {
        let name = r.name.as_str().as_bytes();
        let (n, used) = varint(name.len() as u64);
        put(n.get(..used).unwrap_or(&[]))?;
        put(name)?;
        put(&r.required_snr.0.to_le_bytes())?;
        let (n, used) = varint(u64::from(r.airtime_us));
        put(n.get(..used).unwrap_or(&[]))?;
        match r.noise_bandwidth_hz {
            None => put(&[0])?,
            Some(b) => {
                put(&[1])?;
                put(&b.to_le_bytes())?;
            }
        }
    }
    Ok(at)
}

/// Write the body of `frame` into `body`; returns its kind and length.
fn encode_body(frame: &Frame, body: &mut [u8]) -> Result<(u8, usize), CodecError> {
    let too_small = |_| CodecError::BufferTooSmall;
    Ok(match frame {
        Frame::Header { header: h, version } => {
            // The header of either format this encoder writes: 1.2 (one
            // record a frame) or 2.0 (record blocks); the bodies are alike.
            let written = match version.major {
                1 => VERSION_1,
                2 => VERSION,
                _ => {
                    return Err(CodecError::UnknownVersion {
                        major: version.major,
                        minor: version.minor,
                    })
                }
            };
            let base = postcard::to_slice(
                &WireHeader {
                    magic: MAGIC,
                    major: written.major,
                    minor: written.minor,
                    device_id: h.device_id,
                    epoch_ms: h.epoch_ms,
                    min_tx_dbm: h.min_tx.map(|v| v.0),
                    max_tx_dbm: h.max_tx.map(|v| v.0),
                    tx_step_db: h.tx_step.map(|v| v.0),
                    antenna_gain_dbi: h.antenna_gain.map(|v| v.0),
                },
                &mut *body,
            )
            .map_err(too_small)?
            .len();
            // The 1.1 fields follow the 1.0 ones, so a 1.0 reader (which
            // ignores trailing bytes) still reads the header.
            let ext = postcard::to_slice(
                &WireHeaderV11 {
                    required_snr_db: h.required_snr.map(|v| v.0),
                    eirp_cap_dbm: h.eirp_cap.map(|v| v.0),
                },
                body.get_mut(base..).ok_or(CodecError::BufferTooSmall)?,
            )
            .map_err(too_small)?
            .len();
            // 1.2 appends the rate table, and only when there is one: a
            // header without rates has the bytes of a 1.1 body (but its minor).
            let ext2 = if h.rates.is_empty() {
                0
            } else {
                write_rates(
                    &h.rates,
                    body.get_mut(base + ext..)
                        .ok_or(CodecError::BufferTooSmall)?,
                )?
            };
            (KIND_HEADER, base + ext + ext2)
        }
        Frame::Record(r) => {
            let n = postcard::to_slice(&WireRecord::from(r), body)
                .map_err(too_small)?
                .len();
            // The 1.2 `rate` is the last field and is left out when absent
            // (its `None` tag is the last byte): a record without a rate is
            // byte for byte a 1.1 record, one byte shorter.
            let n = if r.rate.is_none() {
                n.saturating_sub(1)
            } else {
                n
            };
            (KIND_RECORD, n)
        }
        Frame::Decision(d) => {
            let n = postcard::to_slice(
                &WireDecision {
                    t_ms: d.t_ms,
                    tx_dbm: d.tx_dbm,
                    outcome: d.outcome,
                    reason: d.reason,
                },
                &mut *body,
            )
            .map_err(too_small)?
            .len();
            // Since 1.2 the chosen rate follows, only when there is one (as
            // a record's): `01` and its index.
            let n = match d.rate {
                None => n,
                Some(m) => {
                    let end = n + 2;
                    body.get_mut(n..end)
                        .ok_or(CodecError::BufferTooSmall)?
                        .copy_from_slice(&[1, m]);
                    end
                }
            };
            (KIND_DECISION, n)
        }
        Frame::Block(b) => {
            let src = b.body();
            body.get_mut(..src.len())
                .ok_or(CodecError::BufferTooSmall)?
                .copy_from_slice(src);
            (KIND_BLOCK, src.len())
        }
        Frame::Other { kind } => return Err(CodecError::UnknownKind(*kind)),
    })
}

/// Put kind and `seq` in front of the `body_len` bytes of body at
/// `payload[3..]` and the CRC after them; returns the payload's length.
pub(super) fn seal_payload(
    kind: u8,
    seq: u16,
    body_len: usize,
    payload: &mut [u8; MAX_PAYLOAD],
) -> Result<usize, CodecError> {
    let [k, s0, s1, ..] = payload;
    *k = kind;
    [*s0, *s1] = seq.to_le_bytes();
    let crc_at = 3 + body_len;
    let crc = crc32c(payload.get(..crc_at).ok_or(CodecError::BufferTooSmall)?);
    payload
        .get_mut(crc_at..crc_at + 4)
        .ok_or(CodecError::BufferTooSmall)?
        .copy_from_slice(&crc.to_le_bytes());
    Ok(crc_at + 4)
}

/// Write the payload of `frame` (kind, `seq`, body, CRC) into `payload`;
/// returns its length.
pub(super) fn encode_payload(
    seq: u16,
    frame: &Frame,
    payload: &mut [u8; MAX_PAYLOAD],
) -> Result<usize, CodecError> {
    let (kind, body_len) = {
        let body = payload
            .get_mut(3..MAX_PAYLOAD - 4)
            .ok_or(CodecError::BufferTooSmall)?;
        encode_body(frame, body)?
    };
    seal_payload(kind, seq, body_len, payload)
}

/// A `u64` LEB128 varint as postcard reads it: at most
/// [`leb128::MAX_LEN`] bytes, the last of ten at most 1 (no bits past 64);
/// non-minimal encodings are accepted, as postcard accepts them.
#[inline]
pub(super) fn take_varint_u64(bytes: &[u8]) -> Option<(u64, &[u8])> {
    // A varint of up to 8 bytes (values below 2^56: every time stamp of a
    // real log) in one word: the first byte without the continuation bit
    // ends it, and three shift-and-mask steps pack the 7-bit groups. The
    // byte-by-byte loop below cost 13 instructions per byte, about 70 per
    // record of the bench log (5.4-byte time stamps); this about 20
    // (callgrind, x86-64).
    if let Some(w) = bytes.first_chunk::<8>() {
        let w = u64::from_le_bytes(*w);
        let stops = !w & 0x8080_8080_8080_8080;
        if stops != 0 {
            // 1..=8 bytes.
            let len = (stops.trailing_zeros() / 8 + 1) as usize;
            let x = w & (u64::MAX >> (64 - 8 * len)) & 0x7F7F_7F7F_7F7F_7F7F;
            let x = (x & 0x007F_007F_007F_007F) | ((x & 0x7F00_7F00_7F00_7F00) >> 1);
            let x = (x & 0x0000_3FFF_0000_3FFF) | ((x & 0x3FFF_0000_3FFF_0000) >> 2);
            let x = (x & 0x0000_0000_0FFF_FFFF) | ((x & 0x0FFF_FFFF_0000_0000) >> 4);
            return Some((x, bytes.get(len..).unwrap_or(&[])));
        }
    }
    let mut out = 0u64;
    for (i, &b) in bytes.iter().enumerate().take(leb128::MAX_LEN) {
        out |= u64::from(b & 0x7F) << (7 * i);
        if b & 0x80 == 0 {
            if i == leb128::MAX_LEN - 1 && b > 1 {
                return None;
            }
            return Some((out, bytes.get(i + 1..).unwrap_or(&[])));
        }
    }
    None
}

/// An `Option<f32>` as postcard reads it: tag 0 (none) or 1 followed by
/// four little-endian bytes; any other tag is refused.
#[inline]
/// An `Option<u8>` that older formats do not write: no bytes left is `None`.
fn take_trailing_option_u8(bytes: &[u8]) -> Option<(Option<u8>, &[u8])> {
    match bytes {
        [] => Some((None, bytes)),
        [0, rest @ ..] => Some((None, rest)),
        [1, v, rest @ ..] => Some((Some(*v), rest)),
        _ => None,
    }
}

fn take_option_f32(bytes: &[u8]) -> Option<(Option<f32>, &[u8])> {
    match bytes {
        [0, rest @ ..] => Some((None, rest)),
        [1, a, b, c, d, rest @ ..] => Some((Some(f32::from_le_bytes([*a, *b, *c, *d])), rest)),
        _ => None,
    }
}

/// A payload that passed its CRC: a frame, or a record block whose body is
/// `p[3..3 + body_len]` of the payload given, already checked whole.
// Built once per frame and matched at once, never stored.
#[allow(clippy::large_enum_variant)]
pub(super) enum Payload {
    /// Any frame but a record block.
    Frame(Decoded),
    /// A record block (format 2).
    Block {
        /// Sequence number of the frame.
        seq: u16,
        /// Length of the body, which starts at byte 3 of the payload.
        body_len: usize,
    },
}

/// Decode a payload into a [`Decoded`] frame, a record block as a
/// [`Frame::Block`].
pub(super) fn decode_payload(p: &[u8]) -> Result<Decoded, CodecError> {
    match parse_payload(p)? {
        Payload::Frame(d) => Ok(d),
        Payload::Block { seq, body_len } => {
            let body = p.get(3..3 + body_len).ok_or(CodecError::TooShort)?;
            Ok(Decoded {
                seq,
                frame: Frame::Block(compact::RecordBlock::new(body)?),
            })
        }
    }
}

/// Check a payload's CRC and decode it: kind, seq, body, CRC.
pub(super) fn parse_payload(p: &[u8]) -> Result<Payload, CodecError> {
    if p.len() < MIN_PAYLOAD {
        return Err(CodecError::TooShort);
    }
    let (content, crc) = p
        .split_at_checked(p.len() - 4)
        .ok_or(CodecError::TooShort)?;
    let &[c0, c1, c2, c3] = crc else {
        return Err(CodecError::TooShort);
    };
    let want = [c0, c1, c2, c3];
    let mut c = Crc32c::new();
    c.update(content);
    if c.value() != u32::from_le_bytes(want) {
        return Err(CodecError::Crc);
    }
    let (head, body) = content.split_at_checked(3).ok_or(CodecError::TooShort)?;
    let &[kind, s0, s1] = head else {
        return Err(CodecError::TooShort);
    };
    let seq = u16::from_le_bytes([s0, s1]);
    // Bytes after the fields this version knows are ignored (newer minors
    // append fields).
    let frame = match kind {
        KIND_HEADER => {
            let (h, rest) =
                postcard::take_from_bytes::<WireHeader>(body).map_err(|_| CodecError::Payload)?;
            // 1.0 headers end here; 1.1 appends its fields.
            let (ext, rest) = if rest.is_empty() || (h.major, h.minor) < (1, 1) {
                let none = WireHeaderV11 {
                    required_snr_db: None,
                    eirp_cap_dbm: None,
                };
                (none, &[][..])
            } else {
                postcard::take_from_bytes::<WireHeaderV11>(rest).map_err(|_| CodecError::Payload)?
            };
            // 1.2 appends the rate table.
            let rates = if rest.is_empty() || (h.major, h.minor) < (1, 2) {
                RateTable::empty()
            } else {
                let (wire, _) = postcard::take_from_bytes::<WireHeaderV12>(rest)
                    .map_err(|_| CodecError::Payload)?;
                let mut list = [Rate::default(); MAX_RATES];
                for (slot, w) in list.iter_mut().zip(wire.rates.iter()) {
                    *slot = Rate::new(
                        w.name.as_str(),
                        Db(w.required_snr_db),
                        w.airtime_us,
                        w.noise_bandwidth_hz,
                    )
                    .map_err(|_| CodecError::Payload)?;
                }
                let list = list.get(..wire.rates.len()).unwrap_or(&[]);
                RateTable::new(list).map_err(|_| CodecError::Payload)?
            };
            if h.magic != MAGIC {
                return Err(CodecError::BadMagic);
            }
            if h.major != VERSION.major && h.major != VERSION_1.major {
                return Err(CodecError::UnknownVersion {
                    major: h.major,
                    minor: h.minor,
                });
            }
            Frame::Header {
                header: LogHeader {
                    device_id: h.device_id,
                    epoch_ms: h.epoch_ms,
                    min_tx: h.min_tx_dbm.map(Dbm),
                    max_tx: h.max_tx_dbm.map(Dbm),
                    tx_step: h.tx_step_db.map(Db),
                    antenna_gain: h.antenna_gain_dbi.map(Dbi),
                    required_snr: ext.required_snr_db.map(Db),
                    eirp_cap: ext.eirp_cap_dbm.map(Dbm),
                    rates,
                },
                version: Version {
                    major: h.major,
                    minor: h.minor,
                },
            }
        }
        KIND_RECORD => Frame::Record(record_body(body).ok_or(CodecError::Payload)?),
        KIND_BLOCK => {
            compact::validate(body)?;
            return Ok(Payload::Block {
                seq,
                body_len: body.len(),
            });
        }
        KIND_DECISION => {
            let (d, rest) =
                postcard::take_from_bytes::<WireDecision>(body).map_err(|_| CodecError::Payload)?;
            let (rate, _) = take_trailing_option_u8(rest).ok_or(CodecError::Payload)?;
            Frame::Decision(DecisionRecord {
                t_ms: d.t_ms,
                tx_dbm: d.tx_dbm,
                outcome: d.outcome,
                reason: d.reason,
                rate,
            })
        }
        kind => Frame::Other { kind },
    };
    Ok(Payload::Frame(Decoded { seq, frame }))
}

#[cfg(test)]
#[allow(
    clippy::unwrap_used,
    clippy::indexing_slicing,
    clippy::cast_possible_truncation
)]
mod tests {
    use super::*;
    use crate::record::codec::{decode_frame, encode_record, MAX_FRAME};

    #[test]
    fn record_body_reads_what_postcard_reads() {
        fn bits(r: &LogRecord) -> (u64, [Option<u32>; 3], Option<u8>) {
            (
                r.t_ms,
                [r.tx_dbm, r.rssi_dbm, r.noise_dbm].map(|v| v.map(f32::to_bits)),
                r.rate,
            )
        }
        fn check(body: &[u8]) {
            let ours = record_body(body);
            // A body that ends right before the 1.2 `rate` is a 1.0/1.1
            // record: its rate reads as `None`.
            type V11 = (u64, Option<f32>, Option<f32>, Option<f32>);
            let theirs = postcard::take_from_bytes::<WireRecord>(body)
                .ok()
                .map(|(r, _)| LogRecord::from(r))
                .or_else(|| match postcard::take_from_bytes::<V11>(body) {
                    Ok(((t_ms, tx_dbm, rssi_dbm, noise_dbm), [])) => Some(LogRecord {
                        t_ms,
                        tx_dbm,
                        rssi_dbm,
                        noise_dbm,
                        rate: None,
                    }),
                    _ => None,
                });
            assert_eq!(
                ours.as_ref().map(bits),
                theirs.as_ref().map(bits),
                "{body:?}"
            );
        }
        // Bytes from an LCG, drawn mostly from the values that matter to the
        // grammar (option tags, varint continuation bits, the tenth byte's
        // limit), every length up to 30.
        let mut x: u32 = 3;
        let mut next = || {
            x = x.wrapping_mul(1_103_515_245).wrapping_add(12_345);
            (x >> 16) as u8
        };
        for len in 0..30usize {
            for _ in 0..4000 {
                let mut body = [0u8; 30];
                for b in body.iter_mut().take(len) {
                    let r = next();
                    *b = match r % 8 {
                        0 => 0,
                        1 => 1,
                        2 => 2,
                        3 => 0x80,
                        4 => 0x81,
                        5 => 0xFF,
                        _ => next(),
                    };
                }
                check(&body[..len]);
            }
        }
        // Varints of every length 1..=11 with each last byte, then valid
        // options and trailing bytes.
        for n in 1..=11usize {
            for last in [0u8, 1, 2, 0x7F, 0x80] {
                let mut body = [0u8; 40];
                body[..n - 1].fill(0xFF);
                body[n - 1] = last;
                body[n] = 1;
                body[n + 1..n + 5].copy_from_slice(&(-90.5f32).to_le_bytes());
                body[n + 5] = 0;
                body[n + 6] = 1;
                body[n + 7..n + 11]
                    .copy_from_slice(&f32::NAN.to_bits().wrapping_add(3).to_le_bytes());
                for end in n..=n + 14 {
                    check(&body[..end]);
                }
            }
        }
        // Time stamps of every varint length, with bodies short and long
        // enough for the one-word path and the byte loop alike.
        for k in 0..64u32 {
            for t in [1u64 << k, (1u64 << k) - 1, (1u64 << k) | 0x55] {
                let mut body = [0u8; 40];
                let (v, n) = leb128::encode(t);
                body[..n].copy_from_slice(&v[..n]);
                for end in 0..=n + 3 {
                    check(&body[..end]);
                }
                assert_eq!(
                    take_varint_u64(&body).map(|(x, r)| (x, r.len())),
                    Some((t, 40 - n))
                );
            }
        }
        // Every encoded record reads back.
        let mut buf = [0u8; MAX_FRAME];
        for t in [0u64, 1, 127, 128, 1 << 35, u64::MAX] {
            for v in [None, Some(-0.0f32), Some(14.0), Some(f32::INFINITY)] {
                let r = LogRecord {
                    t_ms: t,
                    tx_dbm: v,
                    rssi_dbm: Some(-97.25),
                    noise_dbm: v,
                    rate: None,
                };
                let n = encode_record(9, &r, &mut buf).unwrap().len();
                let d = decode_frame(&buf[..n - 1]).unwrap();
                assert_eq!(d.frame, Frame::Record(r));
            }
        }
    }
    #[test]
    fn own_varint_writes_what_postcard_writes() {
        // The wire format is postcard's u64 varint; our writer must agree
        // with postcard's own for every length 1..=10.
        let mut values = [0u64; 3 * 10 + 2];
        for k in 0..10u32 {
            let edge = 1u64.checked_shl(7 * k).unwrap_or(0);
            values[3 * k as usize] = edge;
            values[3 * k as usize + 1] = edge.wrapping_sub(1);
            values[3 * k as usize + 2] = edge.wrapping_add(1);
        }
        values[30] = u64::MAX;
        values[31] = 1500;
        for v in values {
            let mut ours = [0u8; 16];
            let mut theirs = [0u8; 16];
            let a = postcard::to_slice(
                &WireDecision {
                    t_ms: v,
                    tx_dbm: 1.0,
                    outcome: 2,
                    reason: 3,
                },
                &mut ours,
            )
            .unwrap()
            .len();
            // postcard's own u64 writer, for comparison.
            let b = postcard::to_slice(&(v, 1.0f32, 2u8, 3u8), &mut theirs)
                .unwrap()
                .len();
            assert_eq!(&ours[..a], &theirs[..b], "t_ms = {v}");
            let (back, _) = postcard::take_from_bytes::<WireDecision>(&ours[..a]).unwrap();
            assert_eq!(back.t_ms, v);
        }
        // The documented example: 1500 = dc 0b.
        assert_eq!(
            leb128::encode(1500),
            ([0xdc, 0x0b, 0, 0, 0, 0, 0, 0, 0, 0], 2)
        );
        assert_eq!(leb128::encode(u64::MAX).1, leb128::MAX_LEN);
    }

    /// The payload of a header frame as a 1.0 writer made it: the 1.0 fields
    /// only, minor version 0.
    fn header_v10_payload(h: &LogHeader, out: &mut [u8; MAX_PAYLOAD]) -> usize {
        out[0] = KIND_HEADER;
        out[1..3].copy_from_slice(&0u16.to_le_bytes());
        let n = postcard::to_slice(
            &WireHeader {
                magic: MAGIC,
                major: 1,
                minor: 0,
                device_id: h.device_id,
                epoch_ms: h.epoch_ms,
                min_tx_dbm: h.min_tx.map(|v| v.0),
                max_tx_dbm: h.max_tx.map(|v| v.0),
                tx_step_db: h.tx_step.map(|v| v.0),
                antenna_gain_dbi: h.antenna_gain.map(|v| v.0),
            },
            &mut out[3..],
        )
        .unwrap()
        .len();
        let crc = crc32c(&out[..3 + n]);
        out[3 + n..3 + n + 4].copy_from_slice(&crc.to_le_bytes());
        3 + n + 4
    }

    #[test]
    fn a_1_0_header_reads_without_the_1_1_fields_and_a_1_1_header_with_them() {
        let h = LogHeader {
            device_id: 77,
            epoch_ms: 1_790_000_000_000,
            min_tx: Some(Dbm(2.0)),
            max_tx: Some(Dbm(20.0)),
            tx_step: Some(Db(2.0)),
            antenna_gain: Some(Dbi(1.5)),
            required_snr: Some(Db(-15.0)),
            eirp_cap: Some(Dbm(16.15)),
            rates: crate::rate::RateTable::empty(),
        };
        // 1.0: the fields it has, the 1.1 fields absent.
        let mut p = [0u8; MAX_PAYLOAD];
        let n = header_v10_payload(&h, &mut p);
        let d = decode_payload(&p[..n]).unwrap();
        let want = LogHeader {
            required_snr: None,
            eirp_cap: None,
            ..h
        };
        assert_eq!(
            d.frame,
            Frame::Header {
                header: want,
                version: Version { major: 1, minor: 0 }
            }
        );
        // The same frame through the whole decoder (COBS and all).
        let mut wire = [0u8; MAX_FRAME];
        let m = crate::record::codec::cobs::encode(&p[..n], &mut wire).unwrap();
        assert_eq!(decode_frame(&wire[..m]).unwrap().frame, d.frame);
        // 1.1: both fields read back, and each alone.
        for (snr, cap) in [
            (Some(Db(-15.0)), Some(Dbm(16.15))),
            (None, Some(Dbm(30.0))),
            (Some(Db(8.0)), None),
        ] {
            let h = LogHeader {
                required_snr: snr,
                eirp_cap: cap,
                ..h
            };
            let mut q = [0u8; MAX_PAYLOAD];
            let n = encode_payload(
                0,
                &Frame::Header {
                    header: h,
                    version: VERSION,
                },
                &mut q,
            )
            .unwrap();
            assert_eq!(
                decode_payload(&q[..n]).unwrap().frame,
                Frame::Header {
                    header: h,
                    version: VERSION
                }
            );
        }
        // 1.2: the rate table reads back whole.
        let rates = crate::rate::RateTable::new(&[
            Rate::new("sf7", Db(-7.5), 41_216, Some(125e3)).unwrap(),
            Rate::new("sf12", Db(-20.0), 991_232, Some(125e3)).unwrap(),
        ])
        .unwrap();
        let h = LogHeader { rates, ..h };
        let mut q = [0u8; MAX_PAYLOAD];
        let frame = Frame::Header {
            header: h,
            version: VERSION,
        };
        let n = encode_payload(0, &frame, &mut q).unwrap();
        assert_eq!(decode_payload(&q[..n]).unwrap().frame, frame);
        // A full table of eight long names still fits one frame.
        let names = [
            "aaaaaaa1", "aaaaaaa2", "aaaaaaa3", "aaaaaaa4", "aaaaaaa5", "aaaaaaa6", "aaaaaaa7",
            "aaaaaaa8",
        ];
        let mut list = [Rate::default(); MAX_RATES];
        for (slot, name) in list.iter_mut().zip(names) {
            *slot = Rate::new(name, Db(-1.5), 60_000_000, Some(1e12)).unwrap();
        }
        let full = LogHeader {
            rates: RateTable::new(&list).unwrap(),
            required_snr: Some(Db(1.0)),
            eirp_cap: Some(Dbm(14.0)),
            min_tx: Some(Dbm(1.0)),
            max_tx: Some(Dbm(1.0)),
            tx_step: Some(Db(1.0)),
            antenna_gain: Some(Dbi(1.0)),
            device_id: u64::MAX,
            epoch_ms: u64::MAX,
        };
        let frame = Frame::Header {
            header: full,
            version: VERSION,
        };
        let n = encode_payload(0, &frame, &mut q).unwrap();
        assert_eq!(decode_payload(&q[..n]).unwrap().frame, frame);
    }

    #[test]
    fn a_decision_keeps_its_rate_and_a_1_1_decision_reads_without_one() {
        let base = DecisionRecord {
            t_ms: 1500,
            tx_dbm: 7.0,
            outcome: 1,
            reason: 2,
            rate: None,
        };
        let mut q = [0u8; MAX_PAYLOAD];
        for d in [
            base,
            DecisionRecord {
                rate: Some(5),
                ..base
            },
        ] {
            let n = encode_payload(9, &Frame::Decision(d), &mut q).unwrap();
            assert_eq!(decode_payload(&q[..n]).unwrap().frame, Frame::Decision(d));
            // Without a rate, the bytes of a 1.1 decision: t_ms (2 bytes),
            // tx (4), outcome, reason; with one, `01 05` after them.
            let body = n - 3 - 4;
            assert_eq!(body, if d.rate.is_some() { 10 } else { 8 });
        }
        // Too small a buffer for the rate is an error, not a truncation.
        let d = DecisionRecord {
            rate: Some(5),
            ..base
        };
        let mut wire = [0u8; MAX_FRAME];
        let n = crate::record::codec::encode_frame(9, &Frame::Decision(d), &mut wire)
            .unwrap()
            .len();
        for size in 0..n {
            let small = &mut wire[..size];
            assert!(crate::record::codec::encode_frame(9, &Frame::Decision(d), small).is_err());
        }
    }

    #[test]
    fn header_rates_write_what_postcard_writes() {
        let table = RateTable::new(&[
            Rate::new("sf7", Db(-7.5), 41_216, Some(125e3)).unwrap(),
            Rate::new("sf12", Db(-20.0), 991_232, Some(125e3)).unwrap(),
            Rate::new("x", Db(3.0), 60_000_000, Some(1.0)).unwrap(),
        ])
        .unwrap();
        let no_bw = RateTable::new(&[Rate::new("fsk", Db(8.0), 127, None).unwrap()]).unwrap();
        for t in [table, no_bw, RateTable::empty()] {
            let mut ours = [0u8; MAX_PAYLOAD];
            let n = write_rates(&t, &mut ours).unwrap();
            let mut rates = heapless::Vec::new();
            for r in t.as_slice() {
                let mut name = heapless::String::new();
                name.push_str(r.name.as_str()).unwrap();
                let w = WireRate {
                    name,
                    required_snr_db: r.required_snr.0,
                    airtime_us: r.airtime_us,
                    noise_bandwidth_hz: r.noise_bandwidth_hz,
                };
                assert!(rates.push(w).is_ok());
            }
            let mut theirs = [0u8; MAX_PAYLOAD];
            let m = postcard::to_slice(&WireHeaderV12 { rates }, &mut theirs)
                .unwrap()
                .len();
            assert_eq!(&ours[..n], &theirs[..m]);
            // Too small a buffer is an error at every size, never a panic.
            for size in 0..n {
                assert_eq!(
                    write_rates(&t, &mut ours[..size]),
                    Err(CodecError::BufferTooSmall)
                );
            }
        }
    }

    #[test]
    fn every_record_field_is_written_and_read() {
        // Each field alone set to a distinctive value, the others default:
        // the reader gets back exactly the record written, so a field the
        // field list missed on one side would come back as its default.
        let full = LogRecord {
            t_ms: 0x1234_5678,
            tx_dbm: Some(13.5),
            rssi_dbm: Some(-101.25),
            noise_dbm: Some(-117.0),
            rate: None,
        };
        let mut q = [0u8; MAX_PAYLOAD];
        for r in [
            full,
            LogRecord {
                t_ms: 1,
                ..LogRecord::default()
            },
            LogRecord {
                tx_dbm: full.tx_dbm,
                ..LogRecord::default()
            },
            LogRecord {
                rssi_dbm: full.rssi_dbm,
                ..LogRecord::default()
            },
            LogRecord {
                noise_dbm: full.noise_dbm,
                ..LogRecord::default()
            },
            LogRecord {
                rate: Some(7),
                ..LogRecord::default()
            },
        ] {
            let n = encode_payload(5, &Frame::Record(r), &mut q).unwrap();
            assert_eq!(decode_payload(&q[..n]).unwrap().frame, Frame::Record(r));
            // postcard reads it too, once the `None` rate the encoder
            // leaves out is put back.
            let mut body = q[3..n - 4].to_vec();
            if r.rate.is_none() {
                body.push(0);
            }
            let (w, _) = postcard::take_from_bytes::<WireRecord>(&body).unwrap();
            assert_eq!(LogRecord::from(w), r);
        }
    }
}
