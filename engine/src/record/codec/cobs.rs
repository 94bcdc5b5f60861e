//! Layer 1: COBS (consistent overhead byte stuffing) and the `0x00`
//! delimiter. Knows nothing of frames: bytes in, bytes out.
//!
//! COBS removes every `0x00` from a block of bytes for one byte of overhead
//! per 254, so `0x00` only ever ends a frame: after any corruption a reader
//! finds the next frame at the next `0x00`.

use super::CodecError;

/// Index of the first `0x00` in `data`, 8 bytes per step: a word has a zero
/// byte iff `(x - 0x01..01) & !x & 0x80..80` is non-zero, and the lowest
/// set bit of that mask marks the first zero byte (little-endian).
pub(super) fn find_zero(data: &[u8]) -> Option<usize> {
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
pub(super) fn encode(src: &[u8], dst: &mut [u8]) -> Result<usize, CodecError> {
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
/// end). Walks the code bytes only: the stream decoder's salvage uses it to
/// skip implausible suffixes before decoding any.
pub(super) fn valid(src: &[u8]) -> bool {
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

/// COBS-decode `src` into `dst`; returns the decoded length. The only COBS
/// decoder of the codec.
///
/// `src` must hold no `0x00` (the stream decoder hands over the bytes
/// between delimiters; [`super::decode_frame`] checks). Decoding is one
/// copy that drops the first code byte, then a walk over the later code
/// bytes: each becomes the `0x00` it stands for, except after a code 0xFF
/// (a full block, no zero), where the code byte is removed and the rest
/// moved one byte to the front. Frames of this format never hold a code
/// 0xFF (payloads are shorter than 254 bytes), so the move is for other
/// input only.
pub(super) fn decode(src: &[u8], dst: &mut [u8]) -> Result<usize, CodecError> {
    let n = src.len().saturating_sub(1);
    let out = dst.get_mut(..n).ok_or(CodecError::FrameTooLong)?;
    out.copy_from_slice(src.get(1..).unwrap_or(&[]));
    let first = match src.first() {
        Some(&0) => return Err(CodecError::Cobs),
        Some(&c) => c,
        None => return Ok(0),
    };
    let mut i = usize::from(first);
    // `src[j]` (after the code bytes removed so far) is at `out[j - base]`.
    let mut base = 1usize;
    // Whether the block before `src[i]` was full (code 0xFF): then the code
    // byte at `i` stands for no zero and is removed.
    let mut full = first == 0xFF;
    if !full {
        // Every frame of this format: each code byte becomes the 0x00 it
        // stands for, until a code 0 or 0xFF (`i >= 1` here).
        while let Some(&code) = src.get(i) {
            if code.wrapping_sub(1) >= 0xFE {
                break;
            }
            *out.get_mut(i - 1).ok_or(CodecError::Cobs)? = 0;
            i += usize::from(code);
        }
    }
    // The rest, from a code 0 (not COBS) or the first full block on.
    while let Some(&code) = src.get(i) {
        if code == 0 {
            return Err(CodecError::Cobs);
        }
        // `i >= base`: each code byte removed follows a block of 254 bytes.
        let at = i.wrapping_sub(base);
        if full {
            // Move the rest one byte to the front, over the code byte
            // (checked accesses: no panic path for the firmware).
            for k in at..n.saturating_sub(base) {
                let next = out.get(k + 1).copied().unwrap_or(0);
                if let Some(slot) = out.get_mut(k) {
                    *slot = next;
                }
            }
            base += 1;
        } else {
            *out.get_mut(at).ok_or(CodecError::Cobs)? = 0;
        }
        full = code == 0xFF;
        i += usize::from(code);
    }
    if i == src.len() {
        Ok((n + 1).saturating_sub(base))
    } else {
        Err(CodecError::Cobs)
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

    /// A plain block-by-block COBS decoder, for comparison only.
    fn reference_decode(src: &[u8], dst: &mut [u8]) -> Option<usize> {
        let mut i = 0usize;
        let mut out = 0usize;
        while let Some(&code) = src.get(i) {
            if code == 0 {
                return None;
            }
            let n = usize::from(code) - 1;
            let block = src.get(i + 1..i + 1 + n)?;
            if block.contains(&0) {
                return None;
            }
            dst.get_mut(out..out + n)?.copy_from_slice(block);
            out += n;
            i += 1 + n;
            if code != 0xFF && i < src.len() {
                *dst.get_mut(out)? = 0;
                out += 1;
            }
        }
        Some(out)
    }

    #[test]
    fn known_vectors() {
        // COBS examples (Cheshire and Baker 1999 scheme), from memory.
        let mut long = [0u8; 256];
        let mut long_enc = [0u8; 258];
        for (k, b) in long.iter_mut().enumerate().take(254) {
            *b = (k % 255 + 1) as u8;
        }
        long[254] = 0;
        long[255] = 7;
        // 254 non-zero bytes: code 0xFF, the block, then code 1 for the zero
        // and code 2 for the last byte.
        long_enc[0] = 0xFF;
        long_enc[1..255].copy_from_slice(&long[..254]);
        long_enc[255] = 0x01;
        long_enc[256] = 0x02;
        long_enc[257] = 7;
        let cases: [(&[u8], &[u8]); 5] = [
            (&[0x00], &[0x01, 0x01]),
            (&[0x00, 0x00], &[0x01, 0x01, 0x01]),
            (&[0x11, 0x22, 0x00, 0x33], &[0x03, 0x11, 0x22, 0x02, 0x33]),
            (&[0x11, 0x00, 0x00, 0x00], &[0x02, 0x11, 0x01, 0x01, 0x01]),
            (&long, &long_enc),
        ];
        for (raw, enc) in cases {
            let mut out = [0u8; 300];
            let n = encode(raw, &mut out).unwrap();
            assert_eq!(&out[..n], enc);
            let mut back = [0u8; 300];
            let m = decode(enc, &mut back).unwrap();
            assert_eq!(&back[..m], raw);
            assert!(valid(enc));
        }
    }

    #[test]
    fn decode_agrees_with_a_block_by_block_decoder() {
        // Zero-free inputs (as the stream decoder hands over), from an LCG,
        // with long runs so that 0xFF codes and bad chains both occur.
        let mut x: u32 = 1;
        for len in 0..600usize {
            for _ in 0..20 {
                let mut src = [0u8; 600];
                for b in src.iter_mut().take(len) {
                    x = x.wrapping_mul(1_103_515_245).wrapping_add(12_345);
                    let r = (x >> 16) as u8;
                    *b = match r % 8 {
                        0 => (r % 12) + 1,
                        1 => 0xFF,
                        _ => r.max(1),
                    };
                }
                let src = &src[..len];
                let mut a = [0u8; 600];
                let mut b = [0u8; 600];
                let fa = decode(src, &mut a);
                let fb = reference_decode(src, &mut b);
                assert_eq!(fa.is_ok(), fb.is_some(), "{src:?}");
                if let (Ok(na), Some(nb)) = (fa, fb) {
                    assert_eq!(&a[..na], &b[..nb]);
                }
                assert_eq!(fb.is_some(), valid(src));
            }
        }
        // Round trips through long zero-free runs (several 0xFF codes).
        for len in [253usize, 254, 255, 508, 509, 520] {
            let mut raw = [0u8; 520];
            for (k, b) in raw.iter_mut().enumerate().take(len) {
                *b = if k % 300 == 299 {
                    0
                } else {
                    (k % 250 + 1) as u8
                };
            }
            let mut enc = [0u8; 540];
            let n = encode(&raw[..len], &mut enc).unwrap();
            let mut back = [0u8; 540];
            let m = decode(&enc[..n], &mut back).unwrap();
            assert_eq!(&back[..m], &raw[..len], "len {len}");
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
}
