//! The framed binary log format: encoder, one-frame decoder and a streaming
//! decoder that resynchronises after damage. No allocation, no panics on any
//! bytes.
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
//! | 0 | header | magic `b"hrlg"`, major `u8`, minor `u8`, device id `u64`, epoch ms `u64`, min tx, max tx, tx step, antenna gain (each `Option<f32>`) |
//! | 1 | record | `t_ms: u64`, `tx_dbm`, `rssi_dbm`, `noise_dbm` (each `Option<f32>`) |
//! | 2 | decision | `t_ms: u64`, `tx_dbm: f32`, `outcome: u8`, `reason: u8` |
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

use serde::{Deserialize, Serialize};

use super::crc::{crc32c, Crc32c};
use super::{DecisionRecord, LogHeader, LogRecord};
use crate::units::{Db, Dbi, Dbm};

/// First four bytes of a header frame's body.
pub const MAGIC: [u8; 4] = *b"hrlg";

/// Format version written by this encoder.
pub const VERSION: Version = Version { major: 1, minor: 1 };

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
                "log format version {major}.{minor} is not supported (this build reads {}.x)",
                VERSION.major
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

#[derive(Serialize, Deserialize)]
struct WireRecord {
    #[serde(serialize_with = "leb128::serialize")]
    t_ms: u64,
    tx_dbm: Option<f32>,
    rssi_dbm: Option<f32>,
    noise_dbm: Option<f32>,
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
mod leb128 {
    use serde::ser::{SerializeTuple, Serializer};

    /// Most bytes of a `u64` varint: ceil(64 / 7).
    pub(super) const MAX_LEN: usize = 10;

    /// The varint bytes of `v` and how many of them are used.
    pub(super) fn encode(v: u64) -> ([u8; MAX_LEN], usize) {
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

/// Encode one frame with sequence number `seq` into `buf`; returns the
/// frame's bytes, final `0x00` included. A header frame is written with
/// this encoder's [`VERSION`] whatever `version` it holds.
pub fn encode_frame<'b>(
    seq: u16,
    frame: &Frame,
    buf: &'b mut [u8],
) -> Result<&'b [u8], CodecError> {
    let mut payload = [0u8; MAX_PAYLOAD];
    let (kind, body_len) = {
        let (head, rest) = payload.split_at_mut(3);
        let body = rest
            .get_mut(..MAX_PAYLOAD - MIN_PAYLOAD)
            .ok_or(CodecError::BufferTooSmall)?;
        let (kind, used) = match frame {
            Frame::Header { header: h, .. } => {
                let base = postcard::to_slice(
                    &WireHeader {
                        magic: MAGIC,
                        major: VERSION.major,
                        minor: VERSION.minor,
                        device_id: h.device_id,
                        epoch_ms: h.epoch_ms,
                        min_tx_dbm: h.min_tx.map(|v| v.0),
                        max_tx_dbm: h.max_tx.map(|v| v.0),
                        tx_step_db: h.tx_step.map(|v| v.0),
                        antenna_gain_dbi: h.antenna_gain.map(|v| v.0),
                    },
                    body,
                )
                .map_err(|_| CodecError::BufferTooSmall)?
                .len();
                // The 1.1 fields follow the 1.0 ones, so a 1.0 reader
                // (which ignores trailing bytes) still reads the header.
                let ext = postcard::to_slice(
                    &WireHeaderV11 {
                        required_snr_db: h.required_snr.map(|v| v.0),
                        eirp_cap_dbm: h.eirp_cap.map(|v| v.0),
                    },
                    body.get_mut(base..).ok_or(CodecError::BufferTooSmall)?,
                )
                .map_err(|_| CodecError::BufferTooSmall)?
                .len();
                (KIND_HEADER, base + ext)
            }
            Frame::Record(r) => (
                KIND_RECORD,
                postcard::to_slice(
                    &WireRecord {
                        t_ms: r.t_ms,
                        tx_dbm: r.tx_dbm,
                        rssi_dbm: r.rssi_dbm,
                        noise_dbm: r.noise_dbm,
                    },
                    body,
                )
                .map_err(|_| CodecError::BufferTooSmall)?
                .len(),
            ),
            Frame::Decision(d) => (
                KIND_DECISION,
                postcard::to_slice(
                    &WireDecision {
                        t_ms: d.t_ms,
                        tx_dbm: d.tx_dbm,
                        outcome: d.outcome,
                        reason: d.reason,
                    },
                    body,
                )
                .map_err(|_| CodecError::BufferTooSmall)?
                .len(),
            ),
            Frame::Other { kind } => return Err(CodecError::UnknownKind(*kind)),
        };
        let [k, s0, s1] = head else {
            return Err(CodecError::BufferTooSmall);
        };
        *k = kind;
        [*s0, *s1] = seq.to_le_bytes();
        (kind, used)
    };
    let _ = kind;
    let crc_at = 3 + body_len;
    let crc = crc32c(payload.get(..crc_at).ok_or(CodecError::BufferTooSmall)?);
    payload
        .get_mut(crc_at..crc_at + 4)
        .ok_or(CodecError::BufferTooSmall)?
        .copy_from_slice(&crc.to_le_bytes());
    let payload = payload
        .get(..crc_at + 4)
        .ok_or(CodecError::BufferTooSmall)?;
    let n = cobs_encode(payload, buf)?;
    let delim = buf.get_mut(n).ok_or(CodecError::BufferTooSmall)?;
    *delim = 0;
    buf.get(..=n).ok_or(CodecError::BufferTooSmall)
}

/// Encode a header frame (sequence number 0) into `buf`.
pub fn encode_header<'b>(header: &LogHeader, buf: &'b mut [u8]) -> Result<&'b [u8], CodecError> {
    encode_frame(
        0,
        &Frame::Header {
            header: *header,
            version: VERSION,
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

/// Writes frames with consecutive sequence numbers, the first one 0.
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

    /// Encode a header frame.
    pub fn header<'b>(
        &mut self,
        header: &LogHeader,
        buf: &'b mut [u8],
    ) -> Result<&'b [u8], CodecError> {
        self.frame(
            &Frame::Header {
                header: *header,
                version: VERSION,
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

/// Index of the first `0x00` in `data`, 8 bytes per step: a word has a zero
/// byte iff `(x - 0x01..01) & !x & 0x80..80` is non-zero, and the lowest
/// set bit of that mask marks the first zero byte (little-endian).
fn find_zero(data: &[u8]) -> Option<usize> {
    const LO: u64 = 0x0101_0101_0101_0101;
    const HI: u64 = 0x8080_8080_8080_8080;
    let mut chunks = data.chunks_exact(8);
    let mut base = 0usize;
    for ch in &mut chunks {
        let mut w = [0u8; 8];
        w.copy_from_slice(ch);
        let x = u64::from_le_bytes(w);
        let m = x.wrapping_sub(LO) & !x & HI;
        if m != 0 {
            return Some(base + (m.trailing_zeros() / 8) as usize);
        }
        base += 8;
    }
    chunks
        .remainder()
        .iter()
        .position(|&b| b == 0)
        .map(|i| base + i)
}

/// COBS-encode `src` into `dst`; returns the encoded length (no delimiter).
fn cobs_encode(src: &[u8], dst: &mut [u8]) -> Result<usize, CodecError> {
    let mut code_at = 0usize;
    let mut out = 1usize;
    let mut code: u8 = 1;
    if dst.is_empty() {
        return Err(CodecError::BufferTooSmall);
    }
    for &b in src {
        if b == 0 {
            *dst.get_mut(code_at).ok_or(CodecError::BufferTooSmall)? = code;
            code_at = out;
            out += 1;
            code = 1;
        } else {
            *dst.get_mut(out).ok_or(CodecError::BufferTooSmall)? = b;
            out += 1;
            code += 1;
            if code == 0xFF {
                *dst.get_mut(code_at).ok_or(CodecError::BufferTooSmall)? = code;
                code_at = out;
                out += 1;
                code = 1;
            }
        }
    }
    *dst.get_mut(code_at).ok_or(CodecError::BufferTooSmall)? = code;
    Ok(out)
}

/// Whether `src` is well-formed COBS (no `0x00`, blocks end exactly at the
/// end). Walks the code bytes only.
fn cobs_valid(src: &[u8]) -> bool {
    let mut i = 0usize;
    while let Some(&code) = src.get(i) {
        if code == 0 {
            return false;
        }
        let next = i + usize::from(code);
        match src.get(i + 1..next) {
            Some(block) if !block.contains(&0) => i = next,
            _ => return false,
        }
    }
    true
}

/// COBS-decode `src`, which holds no `0x00`, into `dst`; returns the
/// decoded length. Frames of this format never have a code byte 0xFF
/// (payloads are shorter than 254 bytes), so decoding is one copy that drops
/// the first code byte, and a `0x00` where each later code byte was; a code
/// 0xFF goes to the general decoder.
fn cobs_decode_fast(src: &[u8], dst: &mut [u8]) -> Result<usize, CodecError> {
    let n = src.len().saturating_sub(1);
    let out = dst.get_mut(..n).ok_or(CodecError::FrameTooLong)?;
    out.copy_from_slice(src.get(1..).unwrap_or(&[]));
    let mut i = match src.first() {
        Some(&0xFF) => return cobs_decode(src, dst),
        Some(&c) => usize::from(c),
        None => return Ok(0),
    };
    while let Some(&code) = src.get(i) {
        if code == 0xFF {
            return cobs_decode(src, dst);
        }
        // i >= 1 here: the code byte becomes the 0x00 it stands for.
        *out.get_mut(i - 1).ok_or(CodecError::Cobs)? = 0;
        i += usize::from(code);
    }
    if i == src.len() {
        Ok(n)
    } else {
        Err(CodecError::Cobs)
    }
}

/// COBS-decode `src` into `dst`; returns the decoded length.
fn cobs_decode(src: &[u8], dst: &mut [u8]) -> Result<usize, CodecError> {
    let mut i = 0usize;
    let mut out = 0usize;
    while let Some(&code) = src.get(i) {
        if code == 0 {
            return Err(CodecError::Cobs);
        }
        let n = usize::from(code) - 1;
        let block = src.get(i + 1..i + 1 + n).ok_or(CodecError::Cobs)?;
        if block.contains(&0) {
            return Err(CodecError::Cobs);
        }
        dst.get_mut(out..out + n)
            .ok_or(CodecError::FrameTooLong)?
            .copy_from_slice(block);
        out += n;
        i += 1 + n;
        if code != 0xFF && i < src.len() {
            *dst.get_mut(out).ok_or(CodecError::FrameTooLong)? = 0;
            out += 1;
        }
    }
    Ok(out)
}

/// COBS-decode `buf` in place; returns the decoded length.
fn cobs_decode_in_place(buf: &mut [u8]) -> Result<usize, CodecError> {
    let len = buf.len();
    let mut i = 0usize;
    let mut out = 0usize;
    while let Some(&code) = buf.get(i) {
        if code == 0 {
            return Err(CodecError::Cobs);
        }
        let n = usize::from(code) - 1;
        let end = i + 1 + n;
        match buf.get(i + 1..end) {
            Some(block) if !block.contains(&0) => {}
            _ => return Err(CodecError::Cobs),
        }
        // out <= i always, so the copy moves bytes towards the front.
        buf.copy_within(i + 1..end, out);
        out += n;
        i = end;
        if code != 0xFF && i < len {
            *buf.get_mut(out).ok_or(CodecError::Cobs)? = 0;
            out += 1;
        }
    }
    Ok(out)
}

/// Decode one frame: its COBS bytes without the final `0x00`. The buffer is
/// decoded in place (its content is changed).
pub fn decode_frame(frame: &mut [u8]) -> Result<Decoded, CodecError> {
    if frame.len() > MAX_FRAME - 1 {
        return Err(CodecError::FrameTooLong);
    }
    if frame.len() < MIN_PAYLOAD + 1 {
        return Err(CodecError::TooShort);
    }
    let n = cobs_decode_in_place(frame)?;
    decode_payload(frame.get(..n).ok_or(CodecError::Cobs)?)
}

/// Decode one piece between delimiters (so without `0x00`), through
/// `scratch`.
fn decode_piece(src: &[u8], scratch: &mut [u8]) -> Result<Decoded, CodecError> {
    if src.len() < MIN_PAYLOAD + 1 {
        return Err(CodecError::TooShort);
    }
    if src.len() > MAX_FRAME - 1 {
        return Err(CodecError::FrameTooLong);
    }
    let n = cobs_decode_fast(src, scratch)?;
    decode_payload(scratch.get(..n).ok_or(CodecError::Cobs)?)
}

/// A record body, read the way postcard reads a `WireRecord` (same values,
/// same inputs refused; bytes after the fields ignored), without going
/// through serde: postcard's generic path cost about 130 of the 410
/// instructions of a record frame's decoding (callgrind, x86-64), this one
/// about 60 with the one-word varint below (about 115 with a byte loop for
/// it). `record_body_reads_what_postcard_reads` checks the two agree.
fn record_body(body: &[u8]) -> Option<LogRecord> {
    let (t_ms, rest) = take_varint_u64(body)?;
    let (tx_dbm, rest) = take_option_f32(rest)?;
    let (rssi_dbm, rest) = take_option_f32(rest)?;
    let (noise_dbm, _) = take_option_f32(rest)?;
    Some(LogRecord {
        t_ms,
        tx_dbm,
        rssi_dbm,
        noise_dbm,
    })
}

/// A `u64` LEB128 varint as postcard reads it: at most
/// [`leb128::MAX_LEN`] bytes, the last of ten at most 1 (no bits past 64);
/// non-minimal encodings are accepted, as postcard accepts them.
#[inline]
fn take_varint_u64(bytes: &[u8]) -> Option<(u64, &[u8])> {
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
fn take_option_f32(bytes: &[u8]) -> Option<(Option<f32>, &[u8])> {
    match bytes {
        [0, rest @ ..] => Some((None, rest)),
        [1, a, b, c, d, rest @ ..] => Some((Some(f32::from_le_bytes([*a, *b, *c, *d])), rest)),
        _ => None,
    }
}

/// Decode a payload: kind, seq, body, CRC.
fn decode_payload(p: &[u8]) -> Result<Decoded, CodecError> {
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
            let ext = if rest.is_empty() || h.minor == 0 {
                WireHeaderV11 {
                    required_snr_db: None,
                    eirp_cap_dbm: None,
                }
            } else {
                postcard::take_from_bytes::<WireHeaderV11>(rest)
                    .map_err(|_| CodecError::Payload)?
                    .0
            };
            if h.magic != MAGIC {
                return Err(CodecError::BadMagic);
            }
            if h.major != VERSION.major {
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
                },
                version: Version {
                    major: h.major,
                    minor: h.minor,
                },
            }
        }
        KIND_RECORD => Frame::Record(record_body(body).ok_or(CodecError::Payload)?),
        KIND_DECISION => {
            let (d, _) =
                postcard::take_from_bytes::<WireDecision>(body).map_err(|_| CodecError::Payload)?;
            Frame::Decision(DecisionRecord {
                t_ms: d.t_ms,
                tx_dbm: d.tx_dbm,
                outcome: d.outcome,
                reason: d.reason,
            })
        }
        kind => Frame::Other { kind },
    };
    Ok(Decoded { seq, frame })
}

/// What the streaming decoder found.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Event {
    /// An intact frame.
    Frame {
        /// Stream offset of the frame's first byte.
        offset: u64,
        /// Sequence number of the frame.
        seq: u16,
        /// Content of the frame.
        frame: Frame,
    },
    /// Bytes that are not an intact frame and were skipped.
    Damaged {
        /// Stream offset of the first skipped byte.
        offset: u64,
        /// Number of bytes skipped (a delimiter that ended them included).
        len: u64,
        /// What was wrong with them.
        error: CodecError,
    },
}

/// A streaming decoder: feed it byte chunks of any size, get frames and
/// damaged regions with their stream offsets. `N` bounds the frame length
/// it can hold (at least [`MAX_FRAME`] to read every valid frame); memory is
/// two buffers of `N` bytes.
///
/// After damage it resumes at the next `0x00`. When a piece between two
/// delimiters fails to decode (for example garbage glued in front of an
/// intact frame), it also tries the piece's suffixes, so an intact frame
/// right after garbage is still found. A `0x00` right after damage is
/// reported as part of it; elsewhere `0x00` bytes between frames are padding
/// and ignored.
#[derive(Debug, Clone)]
pub struct FrameDecoder<const N: usize = MAX_FRAME> {
    /// The current piece (its last `N` bytes once it is longer).
    buf: [u8; N],
    /// Bytes in `buf`.
    len: usize,
    /// Write position in `buf` once the piece is longer than `N` (ring).
    ring: usize,
    /// Bytes of the current piece not held in `buf`.
    dropped: u64,
    /// Stream offset of the current piece's first byte.
    start: u64,
    /// Stream offset of the next byte to be fed.
    pos: u64,
    /// Scratch for decoding.
    scratch: [u8; N],
    /// A frame found behind damage, reported after it.
    pending: Option<Event>,
    /// Whether the last piece was damaged (a `0x00` right after damage is
    /// part of it; elsewhere runs of `0x00` are padding).
    after_damage: bool,
}

impl<const N: usize> Default for FrameDecoder<N> {
    fn default() -> Self {
        Self::new()
    }
}

impl<const N: usize> FrameDecoder<N> {
    /// A decoder at stream offset 0.
    pub const fn new() -> Self {
        FrameDecoder {
            buf: [0; N],
            len: 0,
            ring: 0,
            dropped: 0,
            start: 0,
            pos: 0,
            scratch: [0; N],
            pending: None,
            after_damage: false,
        }
    }

    /// Stream offset of the next byte to be fed.
    pub const fn position(&self) -> u64 {
        self.pos
    }

    /// Consume bytes from the front of `input` until one event is complete,
    /// and return it; `None` once `input` is used up (a partial frame is
    /// kept for the next chunk).
    pub fn feed(&mut self, input: &mut &[u8]) -> Option<Event> {
        // Tested before taken: `take` copies the whole `Option<Event>` out
        // and back on every call, pending or not.
        if self.pending.is_some() {
            return self.pending.take();
        }
        loop {
            let data: &[u8] = input;
            if data.is_empty() {
                return None;
            }
            match find_zero(data) {
                None => {
                    self.push(data);
                    *input = &[];
                    return None;
                }
                Some(at) => {
                    let Some((piece, rest)) = data.split_at_checked(at) else {
                        // find_zero returns an index inside `data`.
                        self.push(data);
                        *input = &[];
                        return None;
                    };
                    *input = rest.get(1..).unwrap_or(&[]);
                    if self.len == 0 && self.dropped == 0 && !piece.is_empty() {
                        // The whole piece is in this chunk: decode it where
                        // it is; only a damaged one is copied for salvage.
                        if let Ok(d) = decode_piece(piece, &mut self.scratch) {
                            let offset = self.pos;
                            self.pos += piece.len() as u64 + 1;
                            self.start = self.pos;
                            self.after_damage = false;
                            return Some(Event::Frame {
                                offset,
                                seq: d.seq,
                                frame: d.frame,
                            });
                        }
                    }
                    self.push(piece);
                    self.pos += 1;
                    if let Some(ev) = self.end_piece(1) {
                        return Some(ev);
                    }
                }
            }
        }
    }

    /// End of the stream: the bytes of an unfinished frame, if any, as
    /// damage ([`CodecError::Truncated`]).
    pub fn finish(&mut self) -> Option<Event> {
        if let Some(ev) = self.pending.take() {
            return Some(ev);
        }
        if self.len == 0 && self.dropped == 0 {
            return None;
        }
        let ev = Event::Damaged {
            offset: self.start,
            len: self.dropped + self.len as u64,
            error: CodecError::Truncated,
        };
        self.reset_piece();
        Some(ev)
    }

    fn push(&mut self, bytes: &[u8]) {
        self.pos += bytes.len() as u64;
        if self.dropped == 0 && self.len + bytes.len() <= N {
            if let Some(dst) = self.buf.get_mut(self.len..self.len + bytes.len()) {
                dst.copy_from_slice(bytes);
                self.len += bytes.len();
                return;
            }
        }
        // Longer than N: keep the last N bytes in a ring.
        for &b in bytes {
            if self.len < N {
                if let Some(slot) = self.buf.get_mut(self.len) {
                    *slot = b;
                }
                self.len += 1;
                self.ring = self.len % N.max(1);
            } else {
                if let Some(slot) = self.buf.get_mut(self.ring) {
                    *slot = b;
                }
                self.ring = (self.ring + 1) % N.max(1);
                self.dropped += 1;
            }
        }
    }

    fn reset_piece(&mut self) {
        self.len = 0;
        self.ring = 0;
        self.dropped = 0;
        self.start = self.pos;
    }

    /// A delimiter (`delim` bytes, already counted in `pos`) ended the piece.
    fn end_piece(&mut self, delim: u64) -> Option<Event> {
        let offset = self.start;
        let total = self.dropped + self.len as u64 + delim;
        if self.len == 0 && self.dropped == 0 {
            self.reset_piece();
            return if self.after_damage {
                Some(Event::Damaged {
                    offset,
                    len: delim,
                    error: CodecError::TooShort,
                })
            } else {
                None
            };
        }
        if self.dropped > 0 && self.ring < N {
            // Put the ring in order: oldest kept byte first (`ring` is
            // always below N; the guard makes that visible to the
            // optimiser).
            self.buf.rotate_left(self.ring);
        }
        let len = self.len;
        let whole = if self.dropped > 0 {
            Err(CodecError::FrameTooLong)
        } else {
            self.try_decode(0, len)
        };
        let ev = match whole {
            Ok(d) => Some(Event::Frame {
                offset,
                seq: d.seq,
                frame: d.frame,
            }),
            Err(error) => {
                // An intact frame may sit at the end of the piece.
                let mut found = None;
                for s in 1..len.saturating_sub(MIN_PAYLOAD) {
                    let plausible = self.buf.get(s..len).is_some_and(cobs_valid);
                    if !plausible {
                        continue;
                    }
                    if let Ok(d) = self.try_decode(s, len) {
                        found = Some((s, d));
                        break;
                    }
                }
                match found {
                    Some((s, d)) => {
                        let skipped = self.dropped + s as u64;
                        self.pending = Some(Event::Frame {
                            offset: offset + skipped,
                            seq: d.seq,
                            frame: d.frame,
                        });
                        Some(Event::Damaged {
                            offset,
                            len: skipped,
                            error,
                        })
                    }
                    None => Some(Event::Damaged {
                        offset,
                        len: total,
                        error,
                    }),
                }
            }
        };
        self.after_damage = matches!(ev, Some(Event::Damaged { .. })) && self.pending.is_none();
        self.reset_piece();
        ev
    }

    fn try_decode(&mut self, from: usize, to: usize) -> Result<Decoded, CodecError> {
        let src = self.buf.get(from..to).ok_or(CodecError::Cobs)?;
        decode_piece(src, &mut self.scratch)
    }
}

#[cfg(test)]
#[allow(
    clippy::unwrap_used,
    clippy::indexing_slicing,
    clippy::cast_possible_truncation
)]
mod tests {
    use super::*;

    fn rec(t: u64) -> LogRecord {
        LogRecord {
            t_ms: t,
            tx_dbm: Some(10.0),
            rssi_dbm: Some(-90.25),
            noise_dbm: None,
        }
    }

    #[test]
    fn cobs_known_vectors() {
        // COBS examples (Cheshire and Baker 1999 scheme), from memory.
        let cases: [(&[u8], &[u8]); 4] = [
            (&[0x00], &[0x01, 0x01]),
            (&[0x00, 0x00], &[0x01, 0x01, 0x01]),
            (&[0x11, 0x22, 0x00, 0x33], &[0x03, 0x11, 0x22, 0x02, 0x33]),
            (&[0x11, 0x00, 0x00, 0x00], &[0x02, 0x11, 0x01, 0x01, 0x01]),
        ];
        for (raw, enc) in cases {
            let mut out = [0u8; 16];
            let n = cobs_encode(raw, &mut out).unwrap();
            assert_eq!(&out[..n], enc);
            let mut back = [0u8; 16];
            let m = cobs_decode(enc, &mut back).unwrap();
            assert_eq!(&back[..m], raw);
            let mut inplace = [0u8; 16];
            inplace[..enc.len()].copy_from_slice(enc);
            let m = cobs_decode_in_place(&mut inplace[..enc.len()]).unwrap();
            assert_eq!(&inplace[..m], raw);
        }
    }

    #[test]
    fn fast_cobs_decoder_agrees_with_the_general_one() {
        // Zero-free inputs (as the stream decoder hands over), from an LCG,
        // with long runs so that 0xFF codes and bad chains both occur.
        let mut x: u32 = 1;
        for len in 0..300usize {
            for _ in 0..20 {
                let mut src = [0u8; 300];
                for b in src.iter_mut().take(len) {
                    x = x.wrapping_mul(1_103_515_245).wrapping_add(12_345);
                    let r = (x >> 16) as u8;
                    *b = if r.is_multiple_of(4) {
                        (r % 12) + 1
                    } else {
                        r.max(1)
                    };
                }
                let src = &src[..len];
                let mut a = [0u8; 300];
                let mut b = [0u8; 300];
                let fa = cobs_decode_fast(src, &mut a);
                let fb = cobs_decode(src, &mut b);
                assert_eq!(fa.is_ok(), fb.is_ok(), "{src:?}");
                if let (Ok(na), Ok(nb)) = (fa, fb) {
                    assert_eq!(&a[..na], &b[..nb]);
                }
                assert_eq!(fb.is_ok(), cobs_valid(src));
            }
        }
    }

    #[test]
    fn record_body_reads_what_postcard_reads() {
        fn bits(r: &LogRecord) -> (u64, [Option<u32>; 3]) {
            (
                r.t_ms,
                [r.tx_dbm, r.rssi_dbm, r.noise_dbm].map(|v| v.map(f32::to_bits)),
            )
        }
        fn check(body: &[u8]) {
            let ours = record_body(body);
            let theirs = postcard::take_from_bytes::<WireRecord>(body)
                .ok()
                .map(|(r, _)| LogRecord {
                    t_ms: r.t_ms,
                    tx_dbm: r.tx_dbm,
                    rssi_dbm: r.rssi_dbm,
                    noise_dbm: r.noise_dbm,
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
                };
                let n = encode_record(9, &r, &mut buf).unwrap().len();
                let d = decode_frame(&mut buf[..n - 1]).unwrap();
                assert_eq!(d.frame, Frame::Record(r));
            }
        }
    }

    #[test]
    fn find_zero_agrees_with_a_plain_search() {
        let mut x: u32 = 7;
        for len in 0..64usize {
            for _ in 0..50 {
                let mut d = [0u8; 64];
                for b in d.iter_mut().take(len) {
                    x = x.wrapping_mul(1_103_515_245).wrapping_add(12_345);
                    let r = (x >> 16) as u8;
                    // Zeros rare, and 0x80/0x01 bytes that fool naive tricks.
                    *b = match r % 16 {
                        0 => 0,
                        1 => 0x80,
                        2 => 0x01,
                        _ => r | 1,
                    };
                }
                let d = &d[..len];
                assert_eq!(find_zero(d), d.iter().position(|&b| b == 0), "{d:?}");
            }
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
                }),
            ),
        ] {
            let n = encode_frame(seq, &f, &mut buf).unwrap().len();
            assert_eq!(buf[n - 1], 0);
            assert!(!buf[..n - 1].contains(&0));
            let d = decode_frame(&mut buf[..n - 1]).unwrap();
            assert_eq!(d, Decoded { seq, frame: f });
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
        assert!(decode_frame(&mut buf[..n - 1]).is_err());
    }

    #[test]
    fn streaming_resumes_after_garbage() {
        let mut log = [0u8; 200];
        let mut len = 0;
        let mut enc = Encoder::new();
        let mut buf = [0u8; MAX_FRAME];
        for t in 0..2 {
            let f = enc.record(&rec(t), &mut buf).unwrap();
            log[len..len + f.len()].copy_from_slice(f);
            len += f.len();
        }
        let first = len / 2;
        // Glue garbage without a delimiter in front of the second frame.
        let mut s = [0u8; 220];
        s[..first].copy_from_slice(&log[..first]);
        s[first..first + 5].copy_from_slice(&[9, 9, 9, 9, 9]);
        s[first + 5..len + 5].copy_from_slice(&log[first..len]);
        let mut dec: FrameDecoder = FrameDecoder::new();
        let mut input = &s[..len + 5];
        let mut events = [None; 4];
        let mut k = 0;
        while let Some(ev) = dec.feed(&mut input) {
            events[k] = Some(ev);
            k += 1;
        }
        assert_eq!(k, 3);
        assert!(matches!(
            events[0],
            Some(Event::Frame {
                offset: 0,
                seq: 0,
                ..
            })
        ));
        assert!(
            matches!(events[1], Some(Event::Damaged { offset, len: 5, .. }) if offset == first as u64)
        );
        assert!(matches!(events[2], Some(Event::Frame { seq: 1, .. })));
    }
}
