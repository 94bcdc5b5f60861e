//! Reading and writing field logs, streaming, in constant memory.
//!
//! Two formats, told apart by the file name's extension (or chosen
//! explicitly with [`open_as`] / [`create_as`]):
//!
//! - **CSV** (`.csv`): a header row naming the columns, in any order:
//!   `t_ms` (required, whole milliseconds), `tx_dbm`, `rssi_dbm`,
//!   `noise_dbm` (optional; an empty cell is a reading that was not logged).
//!   Other columns are ignored. Lines starting with `#` are comments; a
//!   comment block opening with `# headroom-log` before the header row
//!   carries the [`LogHeader`] (`# device_id: 42`, `# max_tx_dbm: 14`, ...).
//!   Numbers are decimal; `nan`, `inf` and `-inf` are read as those floats
//!   so that the controller sees such readings and reports them as ignored.
//!   Cells are not quoted (a surrounding pair of `"` is tolerated).
//! - **binary** (`.hrlog`): the framed format of `headroom::record::codec`
//!   (see `docs/log-format.md`): COBS frames with CRC-32C, resynchronising at
//!   the next `0x00` after damage.
//!
//! ```ignore
//! let mut log = logio::open(Path::new("field.csv"))?;
//! let header = log.header().copied();
//! let mut out = logio::create(Path::new("field.hrlog"), false, header)?;
//! for rec in &mut log {
//!     out.write(&rec?)?;
//! }
//! out.finish()?; // fsync + rename into place; dropping `out` instead discards it
//! for d in log.damage() {
//!     eprintln!("{d}");
//! }
//! ```
//!
//! Reading: each item is one record or an error naming the file and the
//! line and column (CSV) or byte offset (binary). After a bad CSV row the
//! next item is the next row; after an I/O error or a broken limit the
//! stream ends. A damaged binary region is skipped and recorded in
//! [`LogReader::damage`], unless [`LogReader::set_strict`] is on, which turns
//! the first damage into an error item that ends the stream.
//!
//! Writing goes through [`crate::atomic::AtomicFile`]: a temporary file in
//! the destination's directory that [`LogWriter::finish`] flushes, fsyncs
//! and moves into place. An existing destination is refused unless `force`.
//! A writer dropped without `finish` removes its temporary file.
//!
//! Limits against hostile files: a CSV line is at most [`MAX_LINE`] bytes,
//! the comment block before the header row at most [`MAX_PREAMBLE`] bytes; a
//! binary frame is at most [`headroom::record::codec::MAX_FRAME`] bytes
//! (longer runs are damage, not memory).

mod binary;
mod csv;

use std::fmt;
use std::fs::File;
use std::path::Path;

pub use headroom::record::{LogHeader, LogRecord};

use crate::atomic::AtomicFile;
use crate::error::{CliError, CliResult};

/// Longest CSV line accepted, in bytes.
pub const MAX_LINE: usize = 4096;
/// Longest comment block before a CSV header row, in bytes.
pub const MAX_PREAMBLE: usize = 16 * 1024;
/// File name extension of the binary format.
pub const BINARY_EXT: &str = "hrlog";

/// A log file format.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum LogFormat {
    /// Comma-separated text with a header row.
    Csv,
    /// Framed binary (`.hrlog`).
    Binary,
}

impl LogFormat {
    /// The format a path's extension names: `.csv` or `.hrlog`.
    pub fn from_path(path: &Path) -> CliResult<LogFormat> {
        match path.extension().and_then(|e| e.to_str()) {
            Some(e) if e.eq_ignore_ascii_case("csv") => Ok(LogFormat::Csv),
            Some(e) if e.eq_ignore_ascii_case(BINARY_EXT) => Ok(LogFormat::Binary),
            _ => Err(CliError::Input(format!(
                "{}: cannot tell the log format from the file name (use .csv or .{BINARY_EXT}, or name the format)",
                path.display()
            ))),
        }
    }
}

impl fmt::Display for LogFormat {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            LogFormat::Csv => "csv",
            LogFormat::Binary => "binary",
        })
    }
}

/// A damaged region of a binary log that the reader skipped.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Damage {
    /// Offset in the file of the first damaged byte.
    pub byte_offset: u64,
    /// Frames lost in the region (from the frame sequence numbers; at the
    /// end of the file, the number of delimited pieces).
    pub frames_skipped: u64,
    /// Bytes skipped, delimiters included.
    pub bytes_skipped: u64,
    /// What was wrong with the first bad piece of the region.
    pub why: String,
}

impl fmt::Display for Damage {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "byte {}: skipped {} damaged byte{} ({} frame{} lost): {}",
            self.byte_offset,
            self.bytes_skipped,
            if self.bytes_skipped == 1 { "" } else { "s" },
            self.frames_skipped,
            if self.frames_skipped == 1 { "" } else { "s" },
            self.why
        )
    }
}

/// A streaming reader of a log file; iterate it for the records.
pub struct LogReader {
    inner: Inner,
}

enum Inner {
    // Both boxed: the readers' states are hundreds of bytes and differ in
    // size by as much; one allocation per file opened.
    Csv(Box<csv::CsvReader>),
    Binary(Box<binary::BinaryReader>),
}

/// Open a log, its format told by the extension.
pub fn open(path: &Path) -> CliResult<LogReader> {
    open_as(path, None)
}

/// Open a log in `format`, or by the extension if `None`.
pub fn open_as(path: &Path, format: Option<LogFormat>) -> CliResult<LogReader> {
    let format = match format {
        Some(f) => f,
        None => LogFormat::from_path(path)?,
    };
    let file = File::open(path).map_err(|e| CliError::input_file(path, "cannot open", &e))?;
    crate::atomic::note_input_file(path, &file);
    let name = path.display().to_string();
    let inner = match format {
        LogFormat::Csv => Inner::Csv(Box::new(csv::CsvReader::new(name, path, file)?)),
        LogFormat::Binary => Inner::Binary(Box::new(binary::BinaryReader::new(name, file)?)),
    };
    Ok(LogReader { inner })
}

impl LogReader {
    /// The format being read.
    pub fn format(&self) -> LogFormat {
        match &self.inner {
            Inner::Csv(_) => LogFormat::Csv,
            Inner::Binary(_) => LogFormat::Binary,
        }
    }

    /// The log's header, if it has one.
    pub fn header(&self) -> Option<&LogHeader> {
        match &self.inner {
            Inner::Csv(r) => r.header(),
            Inner::Binary(r) => r.header(),
        }
    }

    /// Damaged regions skipped so far (binary logs; always empty for CSV).
    pub fn damage(&self) -> &[Damage] {
        match &self.inner {
            Inner::Csv(_) => &[],
            Inner::Binary(r) => r.damage(),
        }
    }

    /// Frames of other kinds than records (decisions, kinds of a newer
    /// format version) skipped so far.
    pub fn other_frames(&self) -> u64 {
        match &self.inner {
            Inner::Csv(_) => 0,
            Inner::Binary(r) => r.other_frames(),
        }
    }

    /// In strict mode the first damage of a binary log is an error item
    /// that ends the stream. CSV errors are always error items.
    pub fn set_strict(&mut self, strict: bool) {
        if let Inner::Binary(r) = &mut self.inner {
            r.set_strict(strict);
        }
    }
}

impl Iterator for LogReader {
    type Item = CliResult<LogRecord>;

    fn next(&mut self) -> Option<Self::Item> {
        match &mut self.inner {
            Inner::Csv(r) => r.next(),
            Inner::Binary(r) => r.next(),
        }
    }
}

/// A writer of a log file; call [`LogWriter::finish`] to keep the file.
pub struct LogWriter {
    out: AtomicFile,
    enc: Encoder,
    written: u64,
}

enum Encoder {
    Csv(csv::CsvEncoder),
    Binary(Box<binary::BinaryEncoder>),
}

/// Create a log, its format told by the extension. `header` goes into the
/// log's header (binary: the header frame; CSV: the `#` comment block,
/// written only when it says something).
pub fn create(path: &Path, force: bool, header: Option<LogHeader>) -> CliResult<LogWriter> {
    create_as(path, None, force, header)
}

/// Create a log in `format`, or by the extension if `None`.
pub fn create_as(
    path: &Path,
    format: Option<LogFormat>,
    force: bool,
    header: Option<LogHeader>,
) -> CliResult<LogWriter> {
    let format = match format {
        Some(f) => f,
        None => LogFormat::from_path(path)?,
    };
    let mut out = AtomicFile::create(path, force)?;
    let mut enc = match format {
        LogFormat::Csv => Encoder::Csv(csv::CsvEncoder::new()),
        LogFormat::Binary => Encoder::Binary(Box::new(binary::BinaryEncoder::new())),
    };
    let res = match &mut enc {
        Encoder::Csv(e) => e.start(&mut out, header.as_ref()),
        Encoder::Binary(e) => e.start(&mut out, header.as_ref()),
    };
    res.map_err(|e| out.io_error(e))?;
    Ok(LogWriter {
        out,
        enc,
        written: 0,
    })
}

impl LogWriter {
    /// Append one record.
    pub fn write(&mut self, r: &LogRecord) -> CliResult {
        let res = match &mut self.enc {
            Encoder::Csv(e) => e.write(&mut self.out, r),
            Encoder::Binary(e) => e.write(&mut self.out, r),
        };
        res.map_err(|e| self.out.io_error(e))?;
        self.written += 1;
        Ok(())
    }

    /// Records written so far.
    pub fn records_written(&self) -> u64 {
        self.written
    }

    /// Flush, fsync and move the file into place.
    pub fn finish(self) -> CliResult {
        self.out.commit()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rec(t_ms: u64) -> LogRecord {
        LogRecord {
            t_ms,
            tx_dbm: Some(10.0),
            rssi_dbm: Some(-97.5),
            noise_dbm: None,
        }
    }

    fn names(dir: &Path) -> Vec<std::ffi::OsString> {
        std::fs::read_dir(dir)
            .expect("list")
            .map(|e| e.expect("entry").file_name())
            .collect()
    }

    #[test]
    fn a_writer_dropped_without_finish_leaves_no_file_and_no_temp() {
        for name in ["out.csv", "out.hrlog"] {
            let dir = tempfile::tempdir().expect("temp dir");
            let p = dir.path().join(name);
            {
                let mut w = create(&p, false, Some(LogHeader::default())).expect("create");
                // Enough rows to spill the write buffer into the temporary file.
                for t in 0..20_000 {
                    w.write(&rec(t)).expect("write");
                }
                assert_eq!(
                    names(dir.path()).len(),
                    1,
                    "{name}: the temporary file while writing"
                );
                assert!(
                    !p.exists(),
                    "{name}: nothing under the final name before finish"
                );
            }
            assert!(
                names(dir.path()).is_empty(),
                "{name}: {:?}",
                names(dir.path())
            );
        }
    }

    #[test]
    fn finish_keeps_every_record_and_no_temp() {
        for name in ["out.csv", "out.hrlog"] {
            let dir = tempfile::tempdir().expect("temp dir");
            let p = dir.path().join(name);
            let mut w = create(&p, false, None).expect("create");
            for t in 0..5_000 {
                w.write(&rec(t)).expect("write");
            }
            assert_eq!(w.records_written(), 5_000);
            w.finish().expect("finish");
            assert_eq!(names(dir.path()), vec![std::ffi::OsString::from(name)]);
            let got: Vec<_> = open(&p)
                .expect("open")
                .map(|r| r.expect("record"))
                .collect();
            assert_eq!(got.len(), 5_000, "{name}");
            assert_eq!(got.last(), Some(&rec(4_999)), "{name}");
            // The output now exists: a second writer is refused before any work.
            let e = create(&p, false, None).err().expect("refused");
            assert_eq!(e.exit_code(), 2, "{name}");
            assert!(e.to_string().contains("--force"), "{name}: {e}");
        }
    }

    #[test]
    fn strict_reports_damage_of_a_file_with_no_intact_frame() {
        let dir = tempfile::tempdir().expect("temp dir");
        let p = dir.path().join("garbage.hrlog");
        std::fs::write(&p, vec![0x55u8; 2000]).expect("seed");
        // Lenient: no record, one damaged region.
        let mut log = open(&p).expect("open");
        assert!(log.by_ref().next().is_none());
        assert_eq!(log.damage().len(), 1);
        assert_eq!(log.damage().first().map(|d| d.bytes_skipped), Some(2000));
        // Strict: that damage is an error item, then the stream ends.
        let mut log = open(&p).expect("open");
        log.set_strict(true);
        let e = log
            .next()
            .expect("an item")
            .expect_err("damage is an error");
        assert_eq!(e.exit_code(), 2);
        assert!(e.to_string().contains("garbage.hrlog: byte 0:"), "{e}");
        assert!(log.next().is_none());
    }
}
