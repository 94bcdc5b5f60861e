//! Host services through semihosting: files, the command line, exit.
//!
//! Under QEMU (`-semihosting-config enable=on,target=native`) paths are
//! relative to QEMU's working directory. Every call checks the host's answer
//! and turns a failure into a [`HostError`]; nothing here panics.

use cortex_m_semihosting::{debug, nr, syscall1};

/// Why a host call failed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, defmt::Format)]
pub enum HostError {
    /// The path is longer than [`MAX_PATH`] bytes or contains a NUL byte.
    BadPath,
    /// The host could not open the file.
    Open,
    /// The host could not tell the file's length.
    Length,
    /// The host reported a read error.
    Read,
    /// The host wrote fewer bytes than asked.
    Write,
    /// The command line does not fit the buffer, or the host has none.
    CommandLine,
}

impl HostError {
    /// One-line description.
    pub const fn as_str(self) -> &'static str {
        match self {
            HostError::BadPath => "path too long or contains NUL",
            HostError::Open => "host could not open the file",
            HostError::Length => "host could not tell the file length",
            HostError::Read => "host read failed",
            HostError::Write => "host write failed",
            HostError::CommandLine => "no command line, or longer than the buffer",
        }
    }
}

/// Longest path accepted by [`File::open`], bytes.
pub const MAX_PATH: usize = 96;

/// How to open a host file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Mode {
    /// Read, binary (`"rb"`).
    ReadBinary,
    /// Create or truncate, write, binary (`"wb"`).
    WriteBinary,
}

/// An open host file; closed when dropped.
#[derive(Debug)]
pub struct File {
    handle: usize,
}

/// Semihosting returns this (as a signed -1) for a failed open or length.
const FAILED: usize = usize::MAX;

impl File {
    /// Open `path` on the host.
    pub fn open(path: &str, mode: Mode) -> Result<File, HostError> {
        let bytes = path.as_bytes();
        if bytes.is_empty() || bytes.contains(&0) {
            return Err(HostError::BadPath);
        }
        // The host wants a NUL-terminated string.
        let mut name = [0u8; MAX_PATH + 1];
        match name.get_mut(..bytes.len()) {
            Some(dst) => dst.copy_from_slice(bytes),
            None => return Err(HostError::BadPath),
        }
        let mode = match mode {
            Mode::ReadBinary => nr::open::R_BINARY,
            Mode::WriteBinary => nr::open::W_TRUNC_BINARY,
        };
        let mut block = [name.as_ptr() as usize, mode, bytes.len()];
        // SAFETY: the block and the name outlive the call; the host only reads them.
        let handle = unsafe { syscall1(nr::OPEN, block.as_mut_ptr() as usize) };
        if handle == FAILED {
            Err(HostError::Open)
        } else {
            Ok(File { handle })
        }
    }

    /// Length of the file in bytes.
    pub fn len(&self) -> Result<usize, HostError> {
        let mut block = [self.handle];
        // SAFETY: the block outlives the call.
        let n = unsafe { syscall1(nr::FLEN, block.as_mut_ptr() as usize) };
        if n == FAILED {
            Err(HostError::Length)
        } else {
            Ok(n)
        }
    }

    /// `true` when the file is empty.
    pub fn is_empty(&self) -> Result<bool, HostError> {
        self.len().map(|n| n == 0)
    }

    /// Read up to `buf.len()` bytes; `Ok(0)` at the end of the file.
    pub fn read(&mut self, buf: &mut [u8]) -> Result<usize, HostError> {
        if buf.is_empty() {
            return Ok(0);
        }
        // The host writes into `buf`: pass a pointer taken from a mutable
        // borrow so the compiler does not assume the buffer is unchanged.
        let mut block = [self.handle, buf.as_mut_ptr() as usize, buf.len()];
        // SAFETY: `buf` is valid for writes of `buf.len()` bytes during the call.
        let not_read = unsafe { syscall1(nr::READ, block.as_mut_ptr() as usize) };
        if not_read > buf.len() {
            return Err(HostError::Read);
        }
        Ok(buf.len() - not_read)
    }

    /// Write all of `data`.
    pub fn write_all(&mut self, data: &[u8]) -> Result<(), HostError> {
        if data.is_empty() {
            return Ok(());
        }
        let mut block = [self.handle, data.as_ptr() as usize, data.len()];
        // SAFETY: `data` is valid for reads during the call.
        let not_written = unsafe { syscall1(nr::WRITE, block.as_mut_ptr() as usize) };
        if not_written == 0 {
            Ok(())
        } else {
            Err(HostError::Write)
        }
    }
}

impl Drop for File {
    fn drop(&mut self) {
        let mut block = [self.handle];
        // SAFETY: the block outlives the call. A failed close cannot be
        // reported from a destructor; the data was already written.
        let _ = unsafe { syscall1(nr::CLOSE, block.as_mut_ptr() as usize) };
    }
}

/// The command line QEMU was given (`-kernel ELF -append ARGS` gives
/// `"ELF ARGS"`), copied into `buf`.
pub fn command_line(buf: &mut [u8]) -> Result<&str, HostError> {
    // Leave room for the NUL the host appends.
    let room = buf.len().saturating_sub(1);
    let mut block = [buf.as_mut_ptr() as usize, room];
    // SAFETY: `buf` is valid for writes of `room + 1` bytes during the call.
    let r = unsafe { syscall1(nr::GET_CMDLINE, block.as_mut_ptr() as usize) };
    let n = block.get(1).copied().unwrap_or(0);
    if r != 0 || n > room {
        return Err(HostError::CommandLine);
    }
    let text = buf.get(..n).ok_or(HostError::CommandLine)?;
    core::str::from_utf8(text).map_err(|_| HostError::CommandLine)
}

/// The `i`-th word after the program name on the command line.
pub fn arg(cmdline: &str, i: usize) -> Option<&str> {
    cmdline.split_ascii_whitespace().nth(i + 1)
}

/// Write text to the host's standard output (not for use in a defmt stream).
pub fn print(text: &str) {
    if let Ok(mut out) = cortex_m_semihosting::hio::hstdout() {
        let _ = out.write_all(text.as_bytes());
    }
}

/// Write text to the host's standard error.
pub fn eprint(text: &str) {
    if let Ok(mut out) = cortex_m_semihosting::hio::hstderr() {
        let _ = out.write_all(text.as_bytes());
    }
}

/// End the program: QEMU exits with status 0 (`ok`) or 1.
pub fn exit(ok: bool) -> ! {
    debug::exit(if ok {
        debug::EXIT_SUCCESS
    } else {
        debug::EXIT_FAILURE
    });
    // Without a semihosting host the call returns: stop here.
    loop {
        cortex_m::asm::wfi();
    }
}
