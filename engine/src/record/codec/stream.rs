//! Layer 4: the streaming decoder. Feed it byte chunks of any size; it
//! cuts them at the `0x00` delimiters, decodes each piece through the lower
//! layers and resynchronises after damage.

use super::cobs;
use super::compact::{self, BlockState};
use super::payload::{parse_payload, Payload};
use super::{CodecError, Frame, MAX_FRAME, MIN_PAYLOAD};

/// Decode one piece between delimiters (so without `0x00`), through
/// `scratch` (where a record block's body is left).
fn decode_piece(src: &[u8], scratch: &mut [u8]) -> Result<Payload, CodecError> {
    if src.len() < MIN_PAYLOAD + 1 {
        return Err(CodecError::TooShort);
    }
    if src.len() > MAX_FRAME - 1 {
        return Err(CodecError::FrameTooLong);
    }
    let n = cobs::decode(src, scratch)?;
    parse_payload(scratch.get(..n).ok_or(CodecError::Cobs)?)
}

/// The record block being handed out, record by record, from the
/// decoder's scratch buffer.
#[derive(Debug, Clone, Copy)]
struct Block {
    /// Next record's first byte and the body's end, in `scratch`.
    at: usize,
    end: usize,
    state: BlockState,
    /// Stream offset and sequence number of the block's frame.
    offset: u64,
    seq: u16,
}

/// What the streaming decoder found.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
// A header (with its rate table) is about 260 bytes, a record 40: without
// a heap there is nothing to box it in, and a header comes once per log.
#[allow(clippy::large_enum_variant)]
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
    /// The record block whose records are being handed out.
    block: Option<Block>,
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
            block: None,
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
        // The `Option` is returned as it is, not unwrapped and wrapped
        // again, which copied the whole event.
        if self.block.is_some() {
            let ev = self.block_record();
            if ev.is_some() {
                return ev;
            }
        }
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
            match cobs::find_zero(data) {
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
                            match self.intact(offset, d) {
                                Some(ev) => return Some(ev),
                                None => continue,
                            }
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
        if self.block.is_some() {
            let ev = self.block_record();
            if ev.is_some() {
                return ev;
            }
        }
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

    /// The event of an intact frame at `offset`: the frame, or for a record
    /// block its first record (the others follow from [`Self::block_record`];
    /// `None` for a block without records).
    fn intact(&mut self, offset: u64, p: Payload) -> Option<Event> {
        match p {
            Payload::Frame(d) => Some(Event::Frame {
                offset,
                seq: d.seq,
                frame: d.frame,
            }),
            Payload::Block { seq, body_len } => {
                let body = self.scratch.get(3..3 + body_len).unwrap_or(&[]);
                let (state, rest) = compact::take_t0(body)?;
                self.block = Some(Block {
                    at: 3 + body_len - rest.len(),
                    end: 3 + body_len,
                    state,
                    offset,
                    seq,
                });
                self.block_record()
            }
        }
    }

    /// The next record of the open block, if any left.
    #[inline]
    fn block_record(&mut self) -> Option<Event> {
        let b = self.block.as_mut()?;
        let bytes = self.scratch.get(b.at..b.end).unwrap_or(&[]);
        // The block was read whole before: every record reads.
        match compact::read_record(&mut b.state, bytes) {
            Some((r, rest)) => {
                b.at = b.end - rest.len();
                let ev = Event::Frame {
                    offset: b.offset,
                    seq: b.seq,
                    frame: Frame::Record(r),
                };
                if rest.is_empty() {
                    self.block = None;
                }
                Some(ev)
            }
            None => {
                self.block = None;
                None
            }
        }
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
            Ok(d) => self.intact(offset, d),
            Err(error) => {
                // An intact frame may sit at the end of the piece.
                let mut found = None;
                for s in 1..len.saturating_sub(MIN_PAYLOAD) {
                    let plausible = self.buf.get(s..len).is_some_and(cobs::valid);
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
                        // Reported after the damage: a frame as pending, a
                        // record block as the open block.
                        match d {
                            Payload::Frame(d) => {
                                self.pending = Some(Event::Frame {
                                    offset: offset + skipped,
                                    seq: d.seq,
                                    frame: d.frame,
                                });
                            }
                            Payload::Block { seq, body_len } => {
                                let body = self.scratch.get(3..3 + body_len).unwrap_or(&[]);
                                if let Some((state, rest)) = compact::take_t0(body) {
                                    self.block = Some(Block {
                                        at: 3 + body_len - rest.len(),
                                        end: 3 + body_len,
                                        state,
                                        offset: offset + skipped,
                                        seq,
                                    });
                                }
                            }
                        }
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
        self.after_damage = matches!(ev, Some(Event::Damaged { .. }))
            && self.pending.is_none()
            && self.block.is_none();
        self.reset_piece();
        ev
    }

    fn try_decode(&mut self, from: usize, to: usize) -> Result<Payload, CodecError> {
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
    use crate::record::codec::tests::rec;
    use crate::record::codec::Encoder;

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
