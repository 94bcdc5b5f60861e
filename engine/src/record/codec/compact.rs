//! Layer 3, format 2: the body of a record block (frame kind 3), several
//! records in one frame, each as the difference from the one before.
//!
//! ```text
//! body   = t0:varint  record*
//! record = flags:u8  [ext:u8]  [dt:zigzag-varint]  [tx] [rssi] [noise]  [rate:u8]
//! flags  = bits 0-1 tx, 2-3 rssi, 4-5 noise: 0 absent, 1 same quarter-dB value as
//!          the field's last one in this block, 2 zigzag-varint change in
//!          quarter dB from it, 3 exact f32 (4 bytes LE); bit 6 dt follows;
//!          bit 7 ext follows
//! ext    = bits 0-1 rate: 0 absent, 1 same as the last rate of the block,
//!          2 u8 follows; 3 and bits 2-7 reserved (0)
//! ```
//!
//! Every block starts afresh: its first record's time is `t0`, the last
//! value of each reading is 0 dB, the last time step 0 ms and the last rate
//! unknown. A record's time is the previous one plus `dt`, or plus the
//! previous `dt` when the record carries none (so a log of regular steps
//! pays nothing for its times). A reading that is a whole number of
//! quarter decibels (`k / 4` for `|k| < 2^24`, read back to the same bits;
//! not `-0`) is stored as an integer; any other `f32`, NaN, infinities and
//! `-0` among them, is stored exactly. Format 2 loses nothing.

use super::payload::{leb128, take_varint_u64};
use super::{CodecError, MAX_PAYLOAD, MIN_PAYLOAD};
use crate::record::LogRecord;

/// Largest body of a frame.
pub const MAX_BLOCK_BODY: usize = MAX_PAYLOAD - MIN_PAYLOAD;

/// Quanta per decibel of a reading stored as an integer (1/4 dB).
pub const QUANTA_PER_DB: f32 = 4.0;

/// Most bytes one record can take: flags, ext, a 10-byte `dt`, three
/// 5-byte readings (a varint of at most 2^26 or an `f32` with none), rate.
const MAX_RECORD: usize = 2 + leb128::MAX_LEN + 3 * 5 + 1;

/// Reading codes of the flags byte.
const ABSENT: u8 = 0;
const SAME: u8 = 1;
const DELTA: u8 = 2;
const EXACT: u8 = 3;
/// Flag bits.
const DT: u8 = 0x40;
const EXT: u8 = 0x80;

/// What a block's reader and writer carry from one record to the next.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub(super) struct BlockState {
    t: u64,
    dt: i64,
    /// Last quarter-dB value of tx, rssi, noise.
    q: [i32; 3],
    rate: Option<u8>,
}

impl BlockState {
    pub(super) const fn new(t0: u64) -> Self {
        BlockState {
            t: t0,
            dt: 0,
            q: [0; 3],
            rate: None,
        }
    }
}

/// The quarter-dB integer of `v`, if `v` is one exactly.
#[inline]
fn on_grid(v: f32) -> Option<i32> {
    let x = v * QUANTA_PER_DB;
    // NaN fails this too.
    if x.abs().partial_cmp(&16_777_216.0) != Some(core::cmp::Ordering::Less) {
        return None;
    }
    // In range, so the cast is exact for whole numbers (and truncates
    // others, which the check below refuses).
    #[allow(clippy::cast_possible_truncation)]
    let k = x as i32;
    (from_grid(k).to_bits() == v.to_bits()).then_some(k)
}

#[inline]
fn from_grid(k: i32) -> f32 {
    // Exact for |k| < 2^24; larger values (only in damaged-but-CRC-valid
    // input) come out rounded, never as a panic.
    #[allow(clippy::cast_precision_loss)]
    let v = k as f32;
    v * (1.0 / QUANTA_PER_DB)
}

#[inline]
const fn zigzag(v: i64) -> u64 {
    ((v << 1) ^ (v >> 63)) as u64
}

#[inline]
const fn unzigzag(u: u64) -> i64 {
    ((u >> 1) as i64) ^ -((u & 1) as i64)
}

/// A small writer over a byte slice that never panics.
struct Out<'a> {
    buf: &'a mut [u8],
    at: usize,
}

impl Out<'_> {
    fn put(&mut self, bytes: &[u8]) -> Option<()> {
        let end = self.at.checked_add(bytes.len())?;
        self.buf.get_mut(self.at..end)?.copy_from_slice(bytes);
        self.at = end;
        Some(())
    }
    fn varint(&mut self, v: u64) -> Option<()> {
        let (b, n) = leb128::encode(v);
        self.put(b.get(..n)?)
    }
}

/// Write the varint of a block's first time into `out`; its length.
pub(super) fn write_t0(t0: u64, out: &mut [u8]) -> Option<usize> {
    let mut o = Out { buf: out, at: 0 };
    o.varint(t0)?;
    Some(o.at)
}

/// Write `r` after the records `st` has seen into `out`; returns the bytes
/// written and advances `st`, or `None` (and `st` unchanged) if `out` is
/// too small.
pub(super) fn write_record(st: &mut BlockState, r: &LogRecord, out: &mut [u8]) -> Option<usize> {
    let mut tmp = [0u8; MAX_RECORD];
    let mut next = *st;
    let mut o = Out {
        buf: &mut tmp,
        at: 1,
    };
    let mut flags = 0u8;
    if r.rate.is_some() {
        flags |= EXT;
        let code = if r.rate == st.rate { SAME } else { DELTA };
        o.put(&[code])?;
    }
    // Two's-complement difference: any step, backwards included, round
    // trips through the wrapping sum of the reader.
    #[allow(clippy::cast_possible_wrap)]
    let dt = r.t_ms.wrapping_sub(st.t) as i64;
    if dt != st.dt {
        flags |= DT;
        o.varint(zigzag(dt))?;
    }
    next.t = r.t_ms;
    next.dt = dt;
    for (i, v) in [r.tx_dbm, r.rssi_dbm, r.noise_dbm].into_iter().enumerate() {
        let last = next.q.get_mut(i)?;
        let code = match v {
            None => ABSENT,
            Some(v) => match on_grid(v) {
                Some(k) if k == *last => SAME,
                Some(k) => {
                    o.varint(zigzag(i64::from(k) - i64::from(*last)))?;
                    *last = k;
                    DELTA
                }
                None => {
                    o.put(&v.to_bits().to_le_bytes())?;
                    EXACT
                }
            },
        };
        flags |= code << (2 * i);
    }
    if let Some(rate) = r.rate {
        if r.rate != st.rate {
            o.put(&[rate])?;
        }
        next.rate = r.rate;
    }
    let n = o.at;
    *tmp.first_mut()? = flags;
    out.get_mut(..n)?.copy_from_slice(tmp.get(..n)?);
    *st = next;
    Some(n)
}

/// A varint, with a short path for the one-byte ones most changes and
/// steps of a block are (the general reader's one-word path needs eight
/// bytes at hand and a few shifts; its byte loop, near a body's end, about
/// 13 instructions a byte).
#[inline(always)]
fn take_varint(bytes: &[u8]) -> Option<(u64, &[u8])> {
    match bytes.split_first() {
        Some((&b, rest)) if b < 0x80 => Some((u64::from(b), rest)),
        _ => take_varint_u64(bytes),
    }
}

/// A zigzag varint of at most 32 bits, as a reading's change.
#[inline(always)]
fn take_delta(bytes: &[u8]) -> Option<(i32, &[u8])> {
    let (u, rest) = take_varint(bytes)?;
    let d = i32::try_from(unzigzag(u)).ok()?;
    Some((d, rest))
}

/// Read one record after those `st` has seen; advances `st`. `None` if
/// the bytes are not a record (the block is then damaged).
#[inline(always)]
pub(super) fn read_record<'a>(
    st: &mut BlockState,
    bytes: &'a [u8],
) -> Option<(LogRecord, &'a [u8])> {
    let (&flags, mut rest) = bytes.split_first()?;
    let mut rate_code = ABSENT;
    if flags & EXT != 0 {
        let (&ext, r) = rest.split_first()?;
        if ext > DELTA {
            return None;
        }
        rate_code = ext;
        rest = r;
    }
    if flags & DT != 0 {
        let (u, r) = take_varint(rest)?;
        st.dt = unzigzag(u);
        rest = r;
    }
    #[allow(clippy::cast_sign_loss)]
    let t = st.t.wrapping_add(st.dt as u64);
    st.t = t;
    let mut vals = [None; 3];
    for (i, (slot, last)) in vals.iter_mut().zip(st.q.iter_mut()).enumerate() {
        *slot = match (flags >> (2 * i)) & 3 {
            ABSENT => None,
            SAME => Some(from_grid(*last)),
            DELTA => {
                let (d, r) = take_delta(rest)?;
                rest = r;
                *last = last.wrapping_add(d);
                Some(from_grid(*last))
            }
            _ => {
                let (b, r) = rest.split_first_chunk::<4>()?;
                rest = r;
                Some(f32::from_bits(u32::from_le_bytes(*b)))
            }
        };
    }
    let rate = match rate_code {
        ABSENT => None,
        SAME => Some(st.rate?),
        _ => {
            let (&v, r) = rest.split_first()?;
            rest = r;
            st.rate = Some(v);
            Some(v)
        }
    };
    let [tx_dbm, rssi_dbm, noise_dbm] = vals;
    Some((
        LogRecord {
            t_ms: t,
            tx_dbm,
            rssi_dbm,
            noise_dbm,
            rate,
        },
        rest,
    ))
}

/// The first time of a block body and the bytes of its records.
#[inline]
pub(super) fn take_t0(body: &[u8]) -> Option<(BlockState, &[u8])> {
    let (t0, rest) = take_varint_u64(body)?;
    Some((BlockState::new(t0), rest))
}

/// Whether `body` is a whole block (every record reads, nothing left
/// over); the number of its records.
pub(super) fn validate(body: &[u8]) -> Result<u32, CodecError> {
    let (mut st, mut rest) = take_t0(body).ok_or(CodecError::Payload)?;
    let mut n = 0u32;
    while !rest.is_empty() {
        let (_, r) = read_record(&mut st, rest).ok_or(CodecError::Payload)?;
        rest = r;
        n += 1;
    }
    Ok(n)
}

/// A record block as decoded by [`super::decode_frame`]: the body of a
/// frame of kind 3, whole (every record reads). [`RecordBlock::records`]
/// gives its records.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RecordBlock {
    len: u8,
    body: [u8; MAX_BLOCK_BODY],
}

#[cfg(feature = "defmt")]
impl defmt::Format for RecordBlock {
    fn format(&self, f: defmt::Formatter<'_>) {
        defmt::write!(f, "RecordBlock({=[u8]})", self.body())
    }
}

impl RecordBlock {
    /// A block of `body`, if it is a whole block that fits a frame.
    pub fn new(body: &[u8]) -> Result<RecordBlock, CodecError> {
        validate(body)?;
        let len = u8::try_from(body.len()).map_err(|_| CodecError::FrameTooLong)?;
        let mut b = [0u8; MAX_BLOCK_BODY];
        b.get_mut(..body.len())
            .ok_or(CodecError::FrameTooLong)?
            .copy_from_slice(body);
        Ok(RecordBlock { len, body: b })
    }

    /// The body's bytes.
    pub fn body(&self) -> &[u8] {
        self.body.get(..usize::from(self.len)).unwrap_or(&[])
    }

    /// The records of the block, in order.
    pub fn records(&self) -> BlockRecords<'_> {
        match take_t0(self.body()) {
            Some((st, rest)) => BlockRecords { st, rest },
            None => BlockRecords {
                st: BlockState::default(),
                rest: &[],
            },
        }
    }
}

/// The records of a [`RecordBlock`].
#[derive(Debug, Clone)]
pub struct BlockRecords<'a> {
    st: BlockState,
    rest: &'a [u8],
}

impl Iterator for BlockRecords<'_> {
    type Item = LogRecord;
    fn next(&mut self) -> Option<LogRecord> {
        let (r, rest) = read_record(&mut self.st, self.rest)?;
        self.rest = rest;
        Some(r)
    }
}

/// Records a [`super::BlockEncoder`] puts in one frame by default: one
/// flipped bit costs at most this many records (see `docs/log-format.md`).
pub const RECORDS_PER_FRAME: u8 = 16;

#[cfg(test)]
#[allow(clippy::unwrap_used, clippy::indexing_slicing)]
mod tests {
    use super::*;

    fn round_trip(recs: &[LogRecord]) -> usize {
        let mut body = [0u8; 4096];
        let mut n = write_t0(recs[0].t_ms, &mut body).unwrap();
        let mut st = BlockState::new(recs[0].t_ms);
        for r in recs {
            n += write_record(&mut st, r, &mut body[n..]).unwrap();
        }
        let (mut st, mut rest) = take_t0(&body[..n]).unwrap();
        for r in recs {
            let (got, more) = read_record(&mut st, rest).unwrap();
            assert_eq!(got.t_ms, r.t_ms);
            assert_eq!(got.rate, r.rate);
            for (a, b) in [
                (got.tx_dbm, r.tx_dbm),
                (got.rssi_dbm, r.rssi_dbm),
                (got.noise_dbm, r.noise_dbm),
            ] {
                assert_eq!(a.map(f32::to_bits), b.map(f32::to_bits), "{r:?}");
            }
            rest = more;
        }
        assert!(rest.is_empty());
        n
    }

    #[test]
    fn every_value_round_trips_bit_for_bit() {
        let odd = [
            0.0f32,
            -0.0,
            0.25,
            -0.125,
            f32::NAN,
            f32::from_bits(0xFFC0_0001),
            f32::INFINITY,
            f32::NEG_INFINITY,
            16_777_215.0 / 4.0,
            4_194_304.0,
            -4_194_304.0,
            1e30,
            f32::MIN_POSITIVE,
            -117.3,
        ];
        let mut recs = [LogRecord::default(); 14];
        for (i, v) in odd.iter().enumerate() {
            recs[i] = LogRecord {
                t_ms: [0u64, 5, 3, u64::MAX, 0, 1 << 40][i % 6],
                tx_dbm: Some(*v),
                rssi_dbm: if i % 2 == 0 { None } else { Some(-*v) },
                noise_dbm: Some(odd[(i + 3) % odd.len()]),
                rate: [None, Some(0), Some(0), Some(255), None][i % 5],
            };
        }
        round_trip(&recs);
    }

    #[test]
    fn a_regular_record_costs_two_bytes() {
        // 1 min steps, tx and noise fixed, RSSI moving by whole dB.
        let mut recs = [LogRecord::default(); 10];
        for (i, r) in recs.iter_mut().enumerate() {
            *r = LogRecord {
                t_ms: 60_000 * i as u64,
                tx_dbm: Some(14.0),
                rssi_dbm: Some(-100.0 + (i % 3) as f32),
                noise_dbm: Some(-117.0),
                rate: None,
            };
        }
        let n = round_trip(&recs);
        // t0 (1 byte); record 0: flags, tx (56 quanta from 0: 1 byte),
        // rssi and noise (2 bytes each); record 1: flags, dt (3 bytes),
        // the RSSI change; records 2..9: flags and the RSSI change.
        assert_eq!(n, 1 + 6 + 5 + 8 * 2);
    }

    #[test]
    fn grid() {
        assert_eq!(on_grid(-87.25), Some(-349));
        assert_eq!(on_grid(-0.0), None);
        assert_eq!(on_grid(0.1), None);
        assert_eq!(on_grid(f32::NAN), None);
        assert_eq!(on_grid(16_777_215.0 / 4.0), Some(16_777_215));
        assert_eq!(on_grid(4_194_304.0), None);
        assert_eq!(unzigzag(zigzag(i64::MIN)), i64::MIN);
        assert_eq!(zigzag(-1), 1);
        assert_eq!(zigzag(1), 2);
    }

    #[test]
    fn bad_bodies_are_refused() {
        // Reserved ext code, reserved ext bits, "same" rate with none
        // before, truncated varint and f32.
        for body in [
            &[0u8, 0x80, 3][..],
            &[0, 0x80, 4],
            &[0, 0x80, 1],
            &[0, 0x40, 0x80],
            &[0, 0x03, 1, 2, 3],
            &[0x80],
        ] {
            assert_eq!(validate(body), Err(CodecError::Payload), "{body:?}");
        }
        assert_eq!(validate(&[5]), Ok(0));
        assert_eq!(validate(&[5, 0, 0]), Ok(2));
    }
}
