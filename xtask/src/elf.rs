//! Flash and RAM of a firmware image, from its ELF section headers (no
//! external `size` tool needed).

/// Bytes of flash and of statically allocated RAM.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Footprint {
    /// Everything loaded into flash: vector table, code, read-only data and
    /// the initial values of `.data`.
    pub flash: u64,
    /// Statically allocated RAM: `.data`, `.bss`, `.uninit`. The stack takes
    /// what is left of RAM.
    pub static_ram: u64,
}

const SHF_WRITE: u32 = 0x1;
const SHF_ALLOC: u32 = 0x2;
const SHT_NOBITS: u32 = 8;

fn u16_at(b: &[u8], at: usize) -> Result<u16, String> {
    b.get(at..at + 2)
        .and_then(|s| s.try_into().ok())
        .map(u16::from_le_bytes)
        .ok_or_else(|| format!("ELF truncated at byte {at}"))
}

fn u32_at(b: &[u8], at: usize) -> Result<u32, String> {
    b.get(at..at + 4)
        .and_then(|s| s.try_into().ok())
        .map(u32::from_le_bytes)
        .ok_or_else(|| format!("ELF truncated at byte {at}"))
}

/// Footprint of a 32-bit little-endian ELF image (as every Cortex-M one is).
pub fn footprint(image: &[u8]) -> Result<Footprint, String> {
    if image.get(..4) != Some(b"\x7fELF".as_slice()) {
        return Err("not an ELF file".into());
    }
    if image.get(4) != Some(&1) || image.get(5) != Some(&1) {
        return Err("not a 32-bit little-endian ELF file".into());
    }
    let shoff = u32_at(image, 0x20)? as usize;
    let shentsize = usize::from(u16_at(image, 0x2e)?);
    let shnum = usize::from(u16_at(image, 0x30)?);
    if shentsize < 0x28 {
        return Err(format!("ELF section header size {shentsize} is too small"));
    }
    let mut fp = Footprint {
        flash: 0,
        static_ram: 0,
    };
    for i in 0..shnum {
        let h = shoff + i * shentsize;
        let kind = u32_at(image, h + 0x04)?;
        let flags = u32_at(image, h + 0x08)?;
        let size = u64::from(u32_at(image, h + 0x14)?);
        if flags & SHF_ALLOC == 0 {
            continue;
        }
        if kind != SHT_NOBITS {
            fp.flash += size;
        }
        if flags & SHF_WRITE != 0 {
            fp.static_ram += size;
        }
    }
    Ok(fp)
}

/// `len` bytes of the loaded image at virtual address `addr`, if a
/// section with contents holds them.
pub fn read_at(image: &[u8], addr: u64, len: usize) -> Option<&[u8]> {
    let shoff = u32_at(image, 0x20).ok()? as usize;
    let shentsize = usize::from(u16_at(image, 0x2e).ok()?);
    let shnum = usize::from(u16_at(image, 0x30).ok()?);
    for i in 0..shnum {
        let h = shoff + i * shentsize;
        let kind = u32_at(image, h + 0x04).ok()?;
        let flags = u32_at(image, h + 0x08).ok()?;
        let start = u64::from(u32_at(image, h + 0x0c).ok()?);
        let offset = u64::from(u32_at(image, h + 0x10).ok()?);
        let size = u64::from(u32_at(image, h + 0x14).ok()?);
        if flags & SHF_ALLOC == 0 || kind == SHT_NOBITS {
            continue;
        }
        if addr >= start && addr + len as u64 <= start + size {
            let at = usize::try_from(offset + (addr - start)).ok()?;
            return image.get(at..at + len);
        }
    }
    None
}

/// The panic location (`core::panic::Location`: file, line, column) stored
/// at `addr`, as `file:line:column`.
pub fn location_at(image: &[u8], addr: u64) -> Option<String> {
    let raw = read_at(image, addr, 16)?;
    let word = |i: usize| {
        raw.get(i..i + 4)
            .and_then(|s| s.try_into().ok())
            .map(u32::from_le_bytes)
    };
    let (ptr, len, line, col) = (word(0)?, word(4)?, word(8)?, word(12)?);
    if len == 0 || len > 512 || line == 0 {
        return None;
    }
    let file = read_at(image, u64::from(ptr), len as usize)?;
    let file = std::str::from_utf8(file).ok()?;
    file.ends_with(".rs")
        .then(|| format!("{file}:{line}:{col}"))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A minimal ELF32 image with the given (type, flags, size) sections.
    fn image(sections: &[(u32, u32, u32)]) -> Vec<u8> {
        let shoff = 0x34usize;
        let mut b = vec![0u8; shoff + sections.len() * 0x28];
        b[..4].copy_from_slice(b"\x7fELF");
        b[4] = 1;
        b[5] = 1;
        b[0x20..0x24].copy_from_slice(&(shoff as u32).to_le_bytes());
        b[0x2e..0x30].copy_from_slice(&0x28u16.to_le_bytes());
        b[0x30..0x32].copy_from_slice(&(sections.len() as u16).to_le_bytes());
        for (i, (kind, flags, size)) in sections.iter().enumerate() {
            let h = shoff + i * 0x28;
            b[h + 4..h + 8].copy_from_slice(&kind.to_le_bytes());
            b[h + 8..h + 12].copy_from_slice(&flags.to_le_bytes());
            b[h + 0x14..h + 0x18].copy_from_slice(&size.to_le_bytes());
        }
        b
    }

    #[test]
    fn counts_loaded_and_writable_sections() {
        const PROGBITS: u32 = 1;
        let img = image(&[
            (PROGBITS, SHF_ALLOC | 0x4, 1000),        // .text
            (PROGBITS, SHF_ALLOC, 200),               // .rodata
            (PROGBITS, SHF_ALLOC | SHF_WRITE, 16),    // .data: flash and RAM
            (SHT_NOBITS, SHF_ALLOC | SHF_WRITE, 300), // .bss: RAM only
            (PROGBITS, 0, 5000),                      // .debug_info: neither
        ]);
        assert_eq!(
            footprint(&img),
            Ok(Footprint {
                flash: 1216,
                static_ram: 316
            })
        );
    }

    #[test]
    fn refuses_what_is_not_elf32() {
        assert!(footprint(b"hello").is_err());
        let mut img = image(&[]);
        img[4] = 2;
        assert!(footprint(&img).is_err());
        let mut img = image(&[(1, SHF_ALLOC, 4)]);
        img.truncate(0x40);
        assert!(footprint(&img).is_err());
    }

    #[test]
    fn reads_a_panic_location_from_the_image() {
        // One loaded section at 0x1000 holding a Location and its file name.
        let mut img = image(&[(1, SHF_ALLOC, 64)]);
        let data_at = img.len();
        let h = 0x34;
        img[h + 0x0c..h + 0x10].copy_from_slice(&0x1000u32.to_le_bytes());
        img[h + 0x10..h + 0x14].copy_from_slice(&(data_at as u32).to_le_bytes());
        let mut data = vec![0u8; 64];
        let file = b"src/codec.rs";
        data[32..32 + file.len()].copy_from_slice(file);
        for (i, w) in [0x1020u32, file.len() as u32, 712, 46].iter().enumerate() {
            data[i * 4..i * 4 + 4].copy_from_slice(&w.to_le_bytes());
        }
        img.extend_from_slice(&data);
        assert_eq!(
            location_at(&img, 0x1000).as_deref(),
            Some("src/codec.rs:712:46")
        );
        assert_eq!(location_at(&img, 0x1020), None); // text, not a Location
        assert_eq!(read_at(&img, 0x2000, 4), None); // outside every section
    }
}
