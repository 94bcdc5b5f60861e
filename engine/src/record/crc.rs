//! CRC-32C (Castagnoli), the checksum of every binary log frame.
//!
//! Parameters (CRC catalogue name CRC-32/ISCSI): polynomial 0x1EDC6F41
//! (reflected 0x82F63B78), initial value 0xFFFFFFFF, input and output
//! reflected, final XOR 0xFFFFFFFF, check value over the nine ASCII bytes
//! `"123456789"` = 0xE3069283.
//!
//! Chosen over the Ethernet CRC-32 because its Hamming distance is higher for
//! the short messages a log frame carries. One 256-entry table (1 KiB of
//! flash), one table lookup per byte.

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
            c = if c & 1 != 0 { (c >> 1) ^ POLY_REFLECTED } else { c >> 1 };
            k += 1;
        }
        table[i as usize] = c;
        i += 1;
    }
    table
}

static TABLE: [u32; 256] = make_table();

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
#[allow(clippy::unwrap_used, clippy::indexing_slicing)]
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
    fn empty_is_zero() {
        assert_eq!(crc32c(&[]), 0);
    }
}
