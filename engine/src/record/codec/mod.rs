//! The framed binary log format: encoder, one-frame decoder and a streaming
//! decoder that resynchronises after damage. No allocation, no panics on any
//! bytes.
//!
//! One layer per module, each using only the ones below it:
//!
//! 1. `cobs`: byte stuffing and the `0x00` delimiter;
//! 2. [`crate::record::crc`]: the CRC-32C;
//! 3. `payload`: kind, sequence number, body and CRC of one frame, and the
//!    body of each kind (one field list per kind, shared by the encoder and
//!    the decoder); `compact`: the body of a format 2 record block;
//! 4. `stream`: [`FrameDecoder`], which cuts a byte stream into frames.
//!
//! This module holds the types all layers share and the one-frame API.
//!
//! A log is a sequence of frames, each terminated by one `0x00` byte:
//!
//! ```text
//! frame   = COBS(payload) 0x00
//! payload = kind:u8  seq:u16-le  body:postcard  crc:u32-le
//! crc     = CRC-32C over kind, seq and body
//! ```
//!
//! COBS (consistent overhead byte stuffing) removes every `0x00` from the
//! payload for one byte of overhead per 254, so `0x00` only ever ends a
//! frame: after any corruption a reader finds the next frame at the next
//! `0x00`. The 16-bit sequence number counts frames from 0 (the header) and
//! wraps; a reader uses the gap across a damaged region to tell how many
//! frames were lost.
//!
//! | kind | frame | body (postcard, in this order) |
//! |---|---|---|
//! | 0 | header | magic `b"hrlg"`, major `u8`, minor `u8`, device id `u64`, epoch ms `u64`, min tx, max tx, tx step, antenna gain (each `Option<f32>`); since 1.1 required SNR, EIRP cap (each `Option<f32>`); since 1.2 the rate table (a length, then per rate its name, required SNR `f32`, airtime µs `u32`, noise bandwidth `Option<f32>`) |
//! | 1 | record | `t_ms: u64`, `tx_dbm`, `rssi_dbm`, `noise_dbm` (each `Option<f32>`), since 1.2 `rate: Option<u8>` |
//! | 2 | decision | `t_ms: u64`, `tx_dbm: f32`, `outcome: u8`, `reason: u8` |
//! | 3 | record block (format 2) | the first record's `t_ms` (varint), then each record as its difference from the one before (see `compact`) |
//!
//! postcard writes integers as LEB128 varints, `Option` as a 0/1 byte
//! followed by the value, `f32` as 4 little-endian bytes (so NaN payloads
//! survive bit for bit). The full layout and the versioning rule are in
//! `docs/log-format.md`.
//!
//! ```
//! use headroom::record::codec::{Encoder, Event, Frame, FrameDecoder, MAX_FRAME};
//! use headroom::record::{LogHeader, LogRecord};
//!
//! // Write: one frame at a time into a caller's buffer.
//! let mut enc = Encoder::new();
//! let mut buf = [0u8; MAX_FRAME];
//! let mut log = [0u8; 2 * MAX_FRAME];
//! let mut len = 0;
//! let frame = enc.header(&LogHeader::default(), &mut buf)?;
//! log[len..len + frame.len()].copy_from_slice(frame);
//! len += frame.len();
//! let r = LogRecord { t_ms: 5, rssi_dbm: Some(-91.5), ..Default::default() };
//! let frame = enc.record(&r, &mut buf)?;
//! log[len..len + frame.len()].copy_from_slice(frame);
//! len += frame.len();
//!
//! // Read: feed chunks of any size.
//! let mut dec: FrameDecoder = FrameDecoder::new();
//! let mut records = 0;
//! for chunk in log[..len].chunks(7) {
//!     let mut input = chunk;
//!     while let Some(event) = dec.feed(&mut input) {
//!         if let Event::Frame { frame: Frame::Record(got), .. } = event {
//!             assert_eq!(got, r);
//!             records += 1;
//!         }
//!     }
//! }
//! assert_eq!(dec.finish(), None); // nothing left over
//! assert_eq!(records, 1);
//! # Ok::<(), headroom::record::codec::CodecError>(())
//! ```

use core::fmt;

use super::{DecisionRecord, LogHeader, LogRecord};

mod cobs;
mod compact;
mod payload;
mod stream;

pub use compact::{BlockRecords, RecordBlock, MAX_BLOCK_BODY, QUANTA_PER_DB, RECORDS_PER_FRAME};
pub use stream::{Event, FrameDecoder};

/// First four bytes of a header frame's body.
pub const MAGIC: [u8; 4] = *b"hrlg";

/// The newest format version, written by [`BlockEncoder`]: format 2,
/// records in compact blocks (frame kind 3).
pub const VERSION: Version = Version { major: 2, minor: 0 };

/// The format 1 version written by [`Encoder`] (one record a frame), for
/// readers built before format 2.
pub const VERSION_1: Version = Version { major: 1, minor: 2 };

/// Largest payload (kind, seq, body, CRC) a frame may carry. Kept below 254
/// so that COBS adds exactly one byte.
pub const MAX_PAYLOAD: usize = 250;

/// Largest frame on the wire: COBS-encoded [`MAX_PAYLOAD`] plus the `0x00`
/// delimiter. A run of more bytes without `0x00` is damage.
pub const MAX_FRAME: usize = MAX_PAYLOAD + 2;

/// Smallest payload: kind, seq and CRC with an empty body.
const MIN_PAYLOAD: usize = 1 + 2 + 4;

/// Frame kind of the header.
pub const KIND_HEADER: u8 = 0;
/// Frame kind of a [`LogRecord`].
pub const KIND_RECORD: u8 = 1;
/// Frame kind of a [`DecisionRecord`].
pub const KIND_DECISION: u8 = 2;
/// Frame kind of a [`RecordBlock`] (format 2).
pub const KIND_BLOCK: u8 = 3;

/// A format version. Readers accept any minor version of their major
/// version (newer minors only append fields and add frame kinds) and refuse
/// other major versions.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Version {
    /// Incompatible changes.
    pub major: u8,
    /// Compatible additions.
    pub minor: u8,
}

/// Why bytes could not be encoded or decoded.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum CodecError {
    /// The output buffer cannot hold the frame.
    BufferTooSmall,
    /// More than [`MAX_FRAME`] bytes without a `0x00` delimiter.
    FrameTooLong,
    /// Too few bytes for kind, sequence number and CRC.
    TooShort,
    /// The bytes are not valid COBS (a `0x00` inside, or a block running
    /// past the end).
    Cobs,
    /// The CRC-32C does not match the frame's content.
    Crc,
    /// The CRC matched but the body does not decode as its kind says.
    Payload,
    /// A header frame without the `hrlg` magic.
    BadMagic,
    /// A header of a major version this decoder does not read.
    UnknownVersion {
        /// Major version found.
        major: u8,
        /// Minor version found.
        minor: u8,
    },
    /// The stream ended inside a frame (no final `0x00`).
    Truncated,
    /// [`Frame::Other`] has no body to encode.
    UnknownKind(u8),
}

impl fmt::Display for CodecError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CodecError::BufferTooSmall => f.write_str("output buffer too small for the frame"),
            CodecError::FrameTooLong => {
                write!(f, "no frame delimiter within {MAX_FRAME} bytes")
            }
            CodecError::TooShort => f.write_str("frame too short"),
            CodecError::Cobs => f.write_str("frame is not valid COBS"),
            CodecError::Crc => f.write_str("CRC-32C mismatch"),
            CodecError::Payload => f.write_str("frame content does not decode"),
            CodecError::BadMagic => f.write_str("header frame without the log magic"),
            CodecError::UnknownVersion { major, minor } => write!(
                f,
                "log format version {major}.{minor} is not supported (this build reads {}.x and {}.x)",
                VERSION_1.major, VERSION.major
            ),
            CodecError::Truncated => f.write_str("log ends inside a frame"),
            CodecError::UnknownKind(k) => write!(f, "frame kind {k} cannot be encoded"),
        }
    }
}

impl core::error::Error for CodecError {}

/// The content of one frame.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
// A header (with its rate table) is about 260 bytes, a record 40: without
// a heap there is nothing to box it in, and a header comes once per log.
#[allow(clippy::large_enum_variant)]
pub enum Frame {
    /// The log's header and the format version it was written in.
    Header {
        /// What the log says about its device.
        header: LogHeader,
        /// Format version of the log.
        version: Version,
    },
    /// One logged packet.
    Record(LogRecord),
    /// One decision of a controller replaying on target.
    Decision(DecisionRecord),
    /// Several records, each stored as its difference from the one before
    /// (format 2). [`decode_frame`] gives the block; [`FrameDecoder`]
    /// gives its records one by one, each as a [`Frame::Record`].
    Block(RecordBlock),
    /// A frame of a kind this decoder does not know (from a newer minor
    /// version); its CRC was good, its body is skipped.
    Other {
        /// The frame kind.
        kind: u8,
    },
}

/// One decoded frame and its sequence number.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Decoded {
    /// Sequence number of the frame.
    pub seq: u16,
    /// Content of the frame.
    pub frame: Frame,
}

/// Encode one frame with sequence number `seq` into `buf`; returns the
/// frame's bytes, final `0x00` included. A header frame of major version 1
/// is written as [`VERSION_1`], of major version 2 as [`VERSION`]; another
/// major version is [`CodecError::UnknownVersion`].
pub fn encode_frame<'b>(
    seq: u16,
    frame: &Frame,
    buf: &'b mut [u8],
) -> Result<&'b [u8], CodecError> {
    let mut payload = [0u8; MAX_PAYLOAD];
    let len = payload::encode_payload(seq, frame, &mut payload)?;
    let payload = payload.get(..len).ok_or(CodecError::BufferTooSmall)?;
    let n = cobs::encode(payload, buf)?;
    let delim = buf.get_mut(n).ok_or(CodecError::BufferTooSmall)?;
    *delim = 0;
    buf.get(..=n).ok_or(CodecError::BufferTooSmall)
}

/// Encode a header frame of format 1 ([`VERSION_1`], sequence number 0)
/// into `buf`, for the one-record frames of [`encode_record`].
pub fn encode_header<'b>(header: &LogHeader, buf: &'b mut [u8]) -> Result<&'b [u8], CodecError> {
    encode_frame(
        0,
        &Frame::Header {
            header: *header,
            version: VERSION_1,
        },
        buf,
    )
}

/// Encode a record frame with sequence number `seq` into `buf`.
pub fn encode_record<'b>(
    seq: u16,
    record: &LogRecord,
    buf: &'b mut [u8],
) -> Result<&'b [u8], CodecError> {
    encode_frame(seq, &Frame::Record(*record), buf)
}

/// Encode a decision frame with sequence number `seq` into `buf`.
pub fn encode_decision<'b>(
    seq: u16,
    decision: &DecisionRecord,
    buf: &'b mut [u8],
) -> Result<&'b [u8], CodecError> {
    encode_frame(seq, &Frame::Decision(*decision), buf)
}

/// Writes format 1 ([`VERSION_1`]): one frame per record, with
/// consecutive sequence numbers, the first one 0. [`BlockEncoder`] writes
/// the compact format 2.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Encoder {
    seq: u16,
}

impl Encoder {
    /// An encoder whose next frame gets sequence number 0.
    pub const fn new() -> Self {
        Encoder { seq: 0 }
    }

    /// Sequence number of the next frame.
    pub const fn next_seq(&self) -> u16 {
        self.seq
    }

    /// Encode `frame` into `buf` and advance the sequence number (only on
    /// success).
    pub fn frame<'b>(&mut self, frame: &Frame, buf: &'b mut [u8]) -> Result<&'b [u8], CodecError> {
        let out = encode_frame(self.seq, frame, buf)?;
        self.seq = self.seq.wrapping_add(1);
        Ok(out)
    }

    /// Encode a header frame ([`VERSION_1`]).
    pub fn header<'b>(
        &mut self,
        header: &LogHeader,
        buf: &'b mut [u8],
    ) -> Result<&'b [u8], CodecError> {
        self.frame(
            &Frame::Header {
                header: *header,
                version: VERSION_1,
            },
            buf,
        )
    }

    /// Encode a record frame.
    pub fn record<'b>(
        &mut self,
        record: &LogRecord,
        buf: &'b mut [u8],
    ) -> Result<&'b [u8], CodecError> {
        self.frame(&Frame::Record(*record), buf)
    }

    /// Encode a decision frame.
    pub fn decision<'b>(
        &mut self,
        decision: &DecisionRecord,
        buf: &'b mut [u8],
    ) -> Result<&'b [u8], CodecError> {
        self.frame(&Frame::Decision(*decision), buf)
    }
}

/// Writes format 2 ([`VERSION`]): a header frame, then the records in
/// blocks of up to [`RECORDS_PER_FRAME`] (or as many as fill a frame), one
/// frame per block, with consecutive sequence numbers. Holds the open block
/// (at most [`MAX_PAYLOAD`] bytes); [`BlockEncoder::flush`] writes it out,
/// so call it before the log is closed (a device that loses power loses
/// the open block, at most one frame of records).
#[derive(Debug, Clone)]
pub struct BlockEncoder {
    seq: u16,
    per_frame: u8,
    /// Records in the open block (0: no block open).
    count: u8,
    /// Body bytes of the open block, at `payload[3..]`.
    len: usize,
    state: compact::BlockState,
    payload: [u8; MAX_PAYLOAD],
}

impl Default for BlockEncoder {
    fn default() -> Self {
        Self::new()
    }
}

impl BlockEncoder {
    /// An encoder of blocks of [`RECORDS_PER_FRAME`] records whose next
    /// frame gets sequence number 0.
    pub const fn new() -> Self {
        Self::with_records_per_frame(RECORDS_PER_FRAME)
    }

    /// An encoder of blocks of at most `n` records (0 is taken as 1): the
    /// most records one damaged frame costs.
    pub const fn with_records_per_frame(n: u8) -> Self {
        BlockEncoder {
            seq: 0,
            per_frame: if n == 0 { 1 } else { n },
            count: 0,
            len: 0,
            state: compact::BlockState::new(0),
            payload: [0; MAX_PAYLOAD],
        }
    }

    /// Sequence number of the next frame.
    pub const fn next_seq(&self) -> u16 {
        self.seq
    }

    /// Records in the open block, not yet written.
    pub const fn pending(&self) -> usize {
        self.count as usize
    }

    /// Encode a header frame ([`VERSION`]). The open block, if any, stays
    /// open.
    pub fn header<'b>(
        &mut self,
        header: &LogHeader,
        buf: &'b mut [u8],
    ) -> Result<&'b [u8], CodecError> {
        let out = encode_frame(
            self.seq,
            &Frame::Header {
                header: *header,
                version: VERSION,
            },
            buf,
        )?;
        self.seq = self.seq.wrapping_add(1);
        Ok(out)
    }

    /// Add `record` to the open block. Returns the bytes to write: a whole
    /// frame when this record filled the block or did not fit in it (then
    /// it opens the next block), else nothing. On an error (`buf` too small
    /// for the frame) the record is not added and nothing is lost.
    pub fn record<'b>(
        &mut self,
        record: &LogRecord,
        buf: &'b mut [u8],
    ) -> Result<&'b [u8], CodecError> {
        if self.count == 0 {
            self.open(record.t_ms)?;
        }
        let body = self.payload.get_mut(3..MAX_PAYLOAD - 4).unwrap_or(&mut []);
        let free = body.get_mut(self.len..).unwrap_or(&mut []);
        let mut state = self.state;
        match compact::write_record(&mut state, record, free) {
            Some(n) => {
                let before = (self.len, self.state, self.count);
                self.len += n;
                self.state = state;
                self.count += 1;
                if self.count < self.per_frame {
                    return Ok(buf.get(..0).unwrap_or(&[]));
                }
                match self.seal(buf) {
                    Ok(m) => buf.get(..m).ok_or(CodecError::BufferTooSmall),
                    Err(e) => {
                        // Not written: take the record back out of the
                        // block, so that the caller may give it again.
                        (self.len, self.state, self.count) = before;
                        Err(e)
                    }
                }
            }
            None => {
                // The block is full: write it, open the next with `record`.
                let n = self.seal(buf)?;
                self.open(record.t_ms)?;
                let body = self.payload.get_mut(3..MAX_PAYLOAD - 4).unwrap_or(&mut []);
                let free = body.get_mut(self.len..).unwrap_or(&mut []);
                let used = compact::write_record(&mut self.state, record, free)
                    .ok_or(CodecError::BufferTooSmall)?;
                self.len += used;
                self.count = 1;
                buf.get(..n).ok_or(CodecError::BufferTooSmall)
            }
        }
    }

    /// Write the open block as a frame (nothing if no block is open).
    pub fn flush<'b>(&mut self, buf: &'b mut [u8]) -> Result<&'b [u8], CodecError> {
        if self.count == 0 {
            return Ok(buf.get(..0).unwrap_or(&[]));
        }
        let n = self.seal(buf)?;
        buf.get(..n).ok_or(CodecError::BufferTooSmall)
    }

    /// Open a block whose first record is at `t0`.
    fn open(&mut self, t0: u64) -> Result<(), CodecError> {
        let body = self
            .payload
            .get_mut(3..)
            .ok_or(CodecError::BufferTooSmall)?;
        self.len = compact::write_t0(t0, body).ok_or(CodecError::BufferTooSmall)?;
        self.state = compact::BlockState::new(t0);
        self.count = 0;
        Ok(())
    }

    /// Write the open block as a frame into `buf` and close it; the
    /// frame's length. On an error the block stays open.
    fn seal(&mut self, buf: &mut [u8]) -> Result<usize, CodecError> {
        let n = payload::seal_payload(KIND_BLOCK, self.seq, self.len, &mut self.payload)?;
        let p = self.payload.get(..n).ok_or(CodecError::BufferTooSmall)?;
        let m = cobs::encode(p, buf)?;
        *buf.get_mut(m).ok_or(CodecError::BufferTooSmall)? = 0;
        self.seq = self.seq.wrapping_add(1);
        self.count = 0;
        self.len = 0;
        Ok(m + 1)
    }
}

/// Decode one frame: its COBS bytes without the final `0x00`.
pub fn decode_frame(frame: &[u8]) -> Result<Decoded, CodecError> {
    if frame.len() > MAX_FRAME - 1 {
        return Err(CodecError::FrameTooLong);
    }
    if frame.len() < MIN_PAYLOAD + 1 {
        return Err(CodecError::TooShort);
    }
    if cobs::find_zero(frame).is_some() {
        return Err(CodecError::Cobs);
    }
    let mut payload = [0u8; MAX_FRAME];
    let n = cobs::decode(frame, &mut payload)?;
    payload::decode_payload(payload.get(..n).ok_or(CodecError::Cobs)?)
}

#[cfg(test)]
#[allow(
    clippy::unwrap_used,
    clippy::indexing_slicing,
    clippy::cast_possible_truncation,
    clippy::panic
)]
pub(crate) mod tests {
    use super::*;
    use crate::units::{Db, Dbi, Dbm};

    /// A record for the tests of this module and its layers.
    pub(super) fn rec(t: u64) -> LogRecord {
        LogRecord {
            t_ms: t,
            tx_dbm: Some(10.0),
            rssi_dbm: Some(-90.25),
            noise_dbm: None,
            rate: None,
        }
    }

    #[test]
    fn round_trip_each_kind() {
        let mut buf = [0u8; MAX_FRAME];
        let h = LogHeader {
            device_id: 0x1234_5678_9abc,
            epoch_ms: 1_790_000_000_000,
            min_tx: Some(Dbm(-4.0)),
            max_tx: Some(Dbm(14.0)),
            tx_step: Some(Db(1.0)),
            antenna_gain: Some(Dbi(2.15)),
            required_snr: Some(Db(-15.0)),
            eirp_cap: Some(Dbm(16.15)),
            rates: crate::rate::RateTable::empty(),
        };
        for (seq, f) in [
            (
                0u16,
                Frame::Header {
                    header: h,
                    version: VERSION,
                },
            ),
            (1, Frame::Record(rec(7))),
            (
                65535,
                Frame::Decision(DecisionRecord {
                    t_ms: 9,
                    tx_dbm: 3.5,
                    outcome: 2,
                    reason: 7,
                    rate: None,
                }),
            ),
        ] {
            let n = encode_frame(seq, &f, &mut buf).unwrap().len();
            assert_eq!(buf[n - 1], 0);
            assert!(!buf[..n - 1].contains(&0));
            let d = decode_frame(&buf[..n - 1]).unwrap();
            assert_eq!(d, Decoded { seq, frame: f });
        }
    }
    /// A record of a log with every kind of value, from an LCG.
    pub(super) fn varied(i: u64) -> LogRecord {
        let x = i
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        let pick = (x >> 33) as u32;
        let reading = |shift: u32| -> Option<f32> {
            match (pick >> shift) % 8 {
                0 => None,
                1 => Some(f32::from_bits(pick.rotate_left(shift))),
                2 => Some(-0.0),
                3 => Some(-117.0),
                _ => Some(-(((pick >> (shift + 3)) % 400) as f32) * 0.25),
            }
        };
        LogRecord {
            // Mostly regular, sometimes backwards or jumping.
            t_ms: match pick % 16 {
                0 => x,
                1 => i.wrapping_mul(1000).wrapping_sub(50_000),
                _ => i * 1000,
            },
            tx_dbm: reading(4),
            rssi_dbm: reading(8),
            noise_dbm: reading(12),
            rate: match (pick >> 20) % 4 {
                0 => None,
                1 => Some(((pick >> 24) % 3) as u8),
                _ => Some(1),
            },
        }
    }

    fn bits(r: &LogRecord) -> (u64, [Option<u32>; 3], Option<u8>) {
        (
            r.t_ms,
            [r.tx_dbm, r.rssi_dbm, r.noise_dbm].map(|v| v.map(f32::to_bits)),
            r.rate,
        )
    }

    #[test]
    fn blocks_round_trip_through_the_stream_decoder() {
        for per_frame in [1u8, 3, 16, 255] {
            let mut enc = BlockEncoder::with_records_per_frame(per_frame);
            let mut log = [0u8; 64 * 1024];
            let mut len = 0;
            let mut buf = [0u8; MAX_FRAME];
            let mut put = |f: &[u8], len: &mut usize| {
                log[*len..*len + f.len()].copy_from_slice(f);
                *len += f.len();
            };
            put(
                enc.header(&LogHeader::default(), &mut buf).unwrap(),
                &mut len,
            );
            const N: u64 = 700;
            for i in 0..N {
                let f = enc.record(&varied(i), &mut buf).unwrap();
                assert!(f.len() <= MAX_FRAME);
                put(f, &mut len);
            }
            put(enc.flush(&mut buf).unwrap(), &mut len);
            assert_eq!(enc.pending(), 0);
            for chunk in [1usize, 7, 300, 64 * 1024] {
                let mut dec: FrameDecoder = FrameDecoder::new();
                let mut got = 0u64;
                let mut frames = 0u16;
                for part in log[..len].chunks(chunk) {
                    let mut input = part;
                    while let Some(ev) = dec.feed(&mut input) {
                        match ev {
                            Event::Frame {
                                frame: Frame::Record(r),
                                seq,
                                ..
                            } => {
                                assert_eq!(bits(&r), bits(&varied(got)), "record {got}");
                                frames = seq;
                                got += 1;
                            }
                            Event::Frame {
                                frame: Frame::Header { version, .. },
                                ..
                            } => assert_eq!(version, VERSION),
                            other => panic!("{other:?}"),
                        }
                    }
                }
                assert_eq!(dec.finish(), None);
                assert_eq!(got, N);
                assert_eq!(frames, enc.next_seq() - 1);
            }
        }
    }

    #[test]
    fn a_damaged_block_costs_itself_only() {
        let mut enc = BlockEncoder::new();
        let mut log = [0u8; 4096];
        let mut len = 0;
        let mut buf = [0u8; MAX_FRAME];
        let mut starts = [0usize; 8];
        let mut k = 0;
        for i in 0..64u64 {
            let f = enc.record(&varied(i), &mut buf).unwrap();
            if !f.is_empty() {
                starts[k] = len;
                k += 1;
            }
            log[len..len + f.len()].copy_from_slice(f);
            len += f.len();
        }
        assert_eq!(k, 4);
        // Flip a bit in the second block, glue garbage before the fourth.
        log[starts[1] + 5] ^= 0x04;
        let mut s = [0u8; 4200];
        s[..starts[3]].copy_from_slice(&log[..starts[3]]);
        s[starts[3]..starts[3] + 3].copy_from_slice(&[7, 7, 7]);
        s[starts[3] + 3..len + 3].copy_from_slice(&log[starts[3]..len]);
        let mut dec: FrameDecoder = FrameDecoder::new();
        let mut input = &s[..len + 3];
        let mut times = [0u64; 64];
        let mut n = 0;
        let mut damaged = 0;
        while let Some(ev) = dec.feed(&mut input) {
            match ev {
                Event::Frame {
                    frame: Frame::Record(r),
                    ..
                } => {
                    times[n] = r.t_ms;
                    n += 1;
                }
                Event::Damaged { .. } => damaged += 1,
                other => panic!("{other:?}"),
            }
        }
        assert_eq!(damaged, 2);
        assert_eq!(n, 48);
        for (j, t) in times[..48].iter().enumerate() {
            let i = if j < 16 { j } else { j + 16 } as u64;
            assert_eq!(*t, varied(i).t_ms);
        }
    }

    #[test]
    fn a_buffer_too_small_loses_no_record() {
        // The same records written with a large buffer, and with a buffer
        // of every size below a frame at each record, retried with a large
        // one after an error: the same bytes either way.
        let mut want = [0u8; 4096];
        let mut n = 0;
        let mut enc = BlockEncoder::with_records_per_frame(4);
        let mut buf = [0u8; MAX_FRAME];
        for i in 0..40 {
            let f = enc.record(&varied(i), &mut buf).unwrap();
            want[n..n + f.len()].copy_from_slice(f);
            n += f.len();
        }
        for small in [0usize, 1, 8, 30] {
            let mut got = [0u8; 4096];
            let mut m = 0;
            let mut enc = BlockEncoder::with_records_per_frame(4);
            let mut errors = 0;
            for i in 0..40 {
                let mut tiny = [0u8; 64];
                let r = varied(i);
                let f = match enc.record(&r, &mut tiny[..small]) {
                    Ok(f) => f.to_vec(),
                    Err(e) => {
                        assert_eq!(e, CodecError::BufferTooSmall);
                        errors += 1;
                        enc.record(&r, &mut buf).unwrap().to_vec()
                    }
                };
                got[m..m + f.len()].copy_from_slice(&f);
                m += f.len();
            }
            assert!(errors >= 8, "{small}: {errors}");
            assert_eq!(&got[..m], &want[..n], "buffer of {small}");
        }
    }

    #[test]
    fn a_block_decodes_alone_and_encodes_back() {
        let mut enc = BlockEncoder::with_records_per_frame(5);
        let mut buf = [0u8; MAX_FRAME];
        let mut n = 0;
        for i in 0..5 {
            n = enc.record(&varied(i), &mut buf).unwrap().len();
        }
        let d = decode_frame(&buf[..n - 1]).unwrap();
        let Frame::Block(b) = d.frame else {
            panic!("{d:?}")
        };
        for (i, r) in b.records().enumerate() {
            assert_eq!(bits(&r), bits(&varied(i as u64)));
        }
        assert_eq!(b.records().count(), 5);
        let mut again = [0u8; MAX_FRAME];
        let m = encode_frame(d.seq, &d.frame, &mut again).unwrap().len();
        assert_eq!(&again[..m], &buf[..n]);
    }

    #[test]
    fn small_buffer_is_an_error() {
        let mut buf = [0u8; 8];
        assert_eq!(
            encode_record(1, &rec(1), &mut buf),
            Err(CodecError::BufferTooSmall)
        );
    }
    #[test]
    fn crc_catches_a_flip() {
        let mut buf = [0u8; MAX_FRAME];
        let n = encode_record(3, &rec(1000), &mut buf).unwrap().len();
        buf[5] ^= 0x10;
        if buf[5] == 0 {
            buf[5] = 0x10;
        }
        assert!(decode_frame(&buf[..n - 1]).is_err());
    }
}
