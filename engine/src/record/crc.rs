//! CRC-32C (Castagnoli), the checksum of every binary log frame.
//!
//! Parameters (CRC catalogue name CRC-32/ISCSI): polynomial 0x1EDC6F41
//! (reflected 0x82F63B78), initial value 0xFFFFFFFF, input and output
//! reflected, final XOR 0xFFFFFFFF, check value over the nine ASCII bytes
//! `"123456789"` = 0xE3069283.
//!
//! Chosen over the Ethernet CRC-32 because its Hamming distance is higher for
//! the short messages a log frame carries. By default one 256-entry table
//! (1 KiB of flash), one table lookup per byte; the `fast-crc` feature adds
//! seven more tables (8 KiB in all) to take 8 bytes per step ("slicing by
//! 8"), several times faster on a host. Both give the same checksums.

/// The reflected CRC-32C polynomial.
pub const POLY_REFLECTED: u32 = 0x82F6_3B78;

/// CRC-32C of the ASCII bytes `"123456789"` (the catalogue's check value).
pub const CHECK: u32 = 0xE306_9283;

// `get` is not available in a const fn; `i` stays below 256 by the loop bound.
#[allow(clippy::indexing_slicing)]
const fn make_table() -> [u32; 256] {
    let mut table = [0u32; 256];
    let mut i: u32 = 0;
    while i < 256 {
        let mut c = i;
        let mut k = 0;
        while k < 8 {
            c = if c & 1 != 0 {
                (c >> 1) ^ POLY_REFLECTED
            } else {
                c >> 1
            };
            k += 1;
        }
        table[i as usize] = c;
        i += 1;
    }
    table
}

static TABLE: [u32; 256] = make_table();

/// Tables for 8 bytes per step: `T[k][i]` is the CRC state after byte `i`
/// followed by `k` zero bytes.
#[cfg(feature = "fast-crc")]
#[allow(clippy::indexing_slicing)] // `i` < 256 and `k` < 8 by the loop bounds
const fn make_tables8() -> [[u32; 256]; 8] {
    let mut t = [[0u32; 256]; 8];
    t[0] = make_table();
    let mut k = 1;
    while k < 8 {
        let mut i = 0;
        while i < 256 {
            let prev = t[k - 1][i];
            t[k][i] = (prev >> 8) ^ t[0][(prev & 0xFF) as usize];
            i += 1;
        }
        k += 1;
    }
    t
}

#[cfg(feature = "fast-crc")]
static TABLES8: [[u32; 256]; 8] = make_tables8();

/// Entry `(x & 0xFF)` of table `k`; the index is below 256 by the mask.
#[cfg(feature = "fast-crc")]
#[inline(always)]
fn t8(k: usize, x: u32) -> u32 {
    TABLES8
        .get(k)
        .and_then(|t| t.get((x & 0xFF) as usize))
        .copied()
        .unwrap_or(0)
}

/// A running CRC-32C over bytes given in pieces.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Crc32c {
    state: u32,
}

impl Default for Crc32c {
    fn default() -> Self {
        Self::new()
    }
}

impl Crc32c {
    /// A new checksum over no bytes yet.
    pub const fn new() -> Self {
        Self { state: 0xFFFF_FFFF }
    }

    /// Add `bytes` to the checksum.
    pub fn update(&mut self, bytes: &[u8]) {
        let mut c = self.state;
        #[cfg(feature = "fast-crc")]
        let bytes = {
            let mut chunks = bytes.chunks_exact(8);
            for ch in &mut chunks {
                let mut lo = [0u8; 4];
                let mut hi = [0u8; 4];
                lo.copy_from_slice(ch.get(..4).unwrap_or(&[0; 4]));
                hi.copy_from_slice(ch.get(4..).unwrap_or(&[0; 4]));
                let lo = u32::from_le_bytes(lo) ^ c;
                let hi = u32::from_le_bytes(hi);
                c = t8(7, lo)
                    ^ t8(6, lo >> 8)
                    ^ t8(5, lo >> 16)
                    ^ t8(4, lo >> 24)
                    ^ t8(3, hi)
                    ^ t8(2, hi >> 8)
                    ^ t8(1, hi >> 16)
                    ^ t8(0, hi >> 24);
            }
            chunks.remainder()
        };
        for &b in bytes {
            let idx = ((c ^ u32::from(b)) & 0xFF) as usize;
            // `idx` is below 256, so the lookup always succeeds.
            c = (c >> 8) ^ TABLE.get(idx).copied().unwrap_or(0);
        }
        self.state = c;
    }

    /// The checksum of all bytes added so far.
    pub const fn value(&self) -> u32 {
        self.state ^ 0xFFFF_FFFF
    }
}

/// CRC-32C of `bytes` in one call.
pub fn crc32c(bytes: &[u8]) -> u32 {
    let mut c = Crc32c::new();
    c.update(bytes);
    c.value()
}

#[cfg(test)]
#[allow(
    clippy::unwrap_used,
    clippy::indexing_slicing,
    clippy::cast_possible_truncation
)]
mod tests {
    use super::*;

    #[test]
    fn catalogue_check_value() {
        // CRC catalogue, CRC-32/ISCSI: check=0xe3069283 (from memory).
        assert_eq!(crc32c(b"123456789"), CHECK);
    }

    #[test]
    fn pieces_equal_whole() {
        let mut c = Crc32c::new();
        c.update(b"1234");
        c.update(b"");
        c.update(b"56789");
        assert_eq!(c.value(), CHECK);
    }

    #[test]
    fn every_length_matches_bitwise() {
        // Against a bit-at-a-time CRC from the parameters above, for every
        // length and alignment up to 40 bytes (covers both table paths).
        fn bitwise(data: &[u8]) -> u32 {
            let mut c = 0xFFFF_FFFFu32;
            for &b in data {
                c ^= u32::from(b);
                for _ in 0..8 {
                    c = if c & 1 != 0 {
                        (c >> 1) ^ POLY_REFLECTED
                    } else {
                        c >> 1
                    };
                }
            }
            !c
        }
        let data: [u8; 48] = core::array::from_fn(|i| (i as u8).wrapping_mul(37).wrapping_add(11));
        for start in 0..8 {
            for len in 0..40 {
                let d = &data[start..start + len];
                assert_eq!(crc32c(d), bitwise(d), "start {start} len {len}");
            }
        }
    }

    #[test]
    fn empty_is_zero() {
        assert_eq!(crc32c(&[]), 0);
    }
}
