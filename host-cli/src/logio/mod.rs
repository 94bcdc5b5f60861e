//! Reading and writing field logs, streaming, in constant memory.
//!
//! Two formats, told apart by the file name's extension (or named with
//! `--from` / [`ReadOptions::format`], [`create_as`]):
//!
//! - **CSV** (`.csv`): a header row naming the columns, in any order:
//!   `t_ms` (whole milliseconds), `tx_dbm`, `rssi_dbm`, and `noise_dbm` or
//!   `snr_db` (an empty cell is a reading that was not logged), and
//!   optionally `rate`, the name of a rate of the header's table (format
//!   1.2: `# rate: sf7, -7.5 dB, 41.216 ms, 125000 Hz` lines, read by
//!   [`crate::rates::parse_line`]). A log with
//!   an SNR and no noise floor is a full log: noise = RSSI − SNR, per row,
//!   by [`headroom::record::noise_from_snr`]. Columns named otherwise are
//!   mapped with `--column FIELD=NAME` ([`ColumnMap`]). Other columns are
//!   ignored. Lines starting with `#` are comments; a comment block opening
//!   with `# headroom-log` before the header row carries the [`LogHeader`]
//!   (`# device_id: 42`, `# max_tx_dbm: 14`, ...). A UTF-8 byte-order mark
//!   first is skipped. Numbers are decimal; `nan`, `inf` and `-inf` are
//!   read as those floats so that the controller sees such readings and
//!   reports them as ignored. Cells are not quoted (a surrounding pair of
//!   `"` is tolerated).
//! - **binary** (`.hrlog`): the framed format of `headroom::record::codec`
//!   (see `docs/log-format.md`): COBS frames with CRC-32C, resynchronising at
//!   the next `0x00` after damage.
//!
//! A command that reads logs flattens [`InputArgs`] into its arguments and
//! opens each with [`open_with`]:
//!
//! ```ignore
//! let mut log = logio::open_with(Path::new("field.csv"), &args.input.options())?;
//! let header = log.header().copied(); // and log.header_status()
//! let mut out = logio::create(Path::new("field.hrlog"), false, header)?;
//! for rec in &mut log {
//!     out.write(&rec?)?;
//! }
//! out.finish()?; // fsync + rename into place; dropping `out` instead discards it
//! for w in log.warnings() {
//!     diag.warn(&w); // the reader prints nothing itself
//! }
//! ```
//!
//! Reading: the input (a file, `-` for standard input, a named pipe or
//! another special file) is read once, front to back: the line of a CSV
//! error is counted in the bytes already read. Each item is one record or
//! an error naming the file and the line and column (CSV) or byte offset
//! (binary). After a bad CSV row the next item is the next row; after an
//! I/O error or a broken limit the stream ends. A damaged binary region is
//! skipped and counted ([`LogReader::damage_summary`]; the first
//! [`DAMAGE_DETAIL`] also in detail, [`LogReader::damage`]), unless
//! [`ReadOptions::strict`], which turns the first damage into an error item
//! that ends the stream and a lost or damaged header into an error at open
//! ([`LogReader::header_status`] tells which without it). A header frame
//! after the first one or after records is reported
//! ([`LogReader::header_events`]), never applied. An empty log, or one of
//! zero bytes only, is refused at open.
//!
//! Writing goes through [`crate::atomic::AtomicFile`]: a temporary file in
//! the destination's directory that [`LogWriter::finish`] flushes, fsyncs
//! and moves into place. An existing destination is refused unless `force`.
//! A writer dropped without `finish` removes its temporary file.
//!
//! Limits against hostile files: a CSV line is at most [`MAX_LINE`] bytes,
//! the comment block before the header row at most [`MAX_PREAMBLE`] bytes; a
//! binary frame is at most [`headroom::record::codec::MAX_FRAME`] bytes
//! (longer runs are damage, not memory). Memory per log read does not grow
//! with its length nor with its damage: about 256 KiB of read buffer
//! (binary) or 64 KiB of parser buffer plus two 64 KiB copies for line
//! numbers (CSV), at most [`DAMAGE_DETAIL`] damaged regions and
//! [`HEADER_EVENT_DETAIL`] header events in detail, and one counter per
//! kind of damage.

mod ahead;
mod binary;
pub mod columns;
mod csv;

pub use ahead::ReadAhead;

use std::fmt;
use std::fs::File;
use std::io::Read;
use std::path::Path;

pub use headroom::record::{LogHeader, LogRecord};

use crate::atomic::AtomicFile;
use crate::error::{printable, CliError, CliResult};

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
                printable(&path.display().to_string())
            ))),
        }
    }
}

/// The version of the binary format a writer writes.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, clap::ValueEnum)]
pub enum BinaryVersion {
    /// Format 1.2: one record a frame, readable by every build.
    #[value(name = "1")]
    V1,
    /// Format 2.0: records in compact blocks (about a seventh of the bytes
    /// of format 1 on the demo logs); builds before it refuse the log.
    #[default]
    #[value(name = "2")]
    V2,
}

impl BinaryVersion {
    /// The version's number, as `--binary-version` takes it.
    pub fn number(self) -> u8 {
        match self {
            BinaryVersion::V1 => 1,
            BinaryVersion::V2 => 2,
        }
    }
}

/// How to write a log: `--binary-version`, for the commands that write one.
#[derive(clap::Args, Clone, Copy, Debug, Default)]
pub struct OutputArgs {
    /// Version of the binary log format written (.hrlog): 2 (compact,
    /// the default) or 1 (for readers built before format 2).
    #[arg(long, value_enum, default_value_t = BinaryVersion::V2, value_name = "VERSION")]
    pub binary_version: BinaryVersion,
}

impl fmt::Display for LogFormat {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            LogFormat::Csv => "csv",
            LogFormat::Binary => "binary",
        })
    }
}

/// Damaged regions kept in detail; the rest are only counted (see
/// [`DamageSummary`]), so that a file of any number of damaged regions
/// costs the same memory.
pub const DAMAGE_DETAIL: usize = 16;
/// Header events (a second or late header frame) kept in detail; the rest
/// are only counted.
pub const HEADER_EVENT_DETAIL: usize = 16;

/// A field of a log record, as a CSV column names it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Field {
    /// Time of the packet, ms.
    TMs,
    /// Transmit power, dBm.
    TxDbm,
    /// Received power at the far end, dBm.
    RssiDbm,
    /// Noise floor at the far end, dBm.
    NoiseDbm,
    /// SNR at the far end, dB: read where a log has no noise floor
    /// (noise = RSSI − SNR, [`headroom::record::noise_from_snr`]).
    SnrDb,
    /// The rate the packet was sent at, by name (a rate of the header's
    /// table, `# rate:` lines).
    Rate,
}

impl Field {
    /// Every field, in the order a CSV writer puts its columns (`snr_db`,
    /// read only, last).
    pub const ALL: [Field; 6] = [
        Field::TMs,
        Field::TxDbm,
        Field::RssiDbm,
        Field::NoiseDbm,
        Field::SnrDb,
        Field::Rate,
    ];

    /// The column name.
    pub fn name(self) -> &'static str {
        match self {
            Field::TMs => "t_ms",
            Field::TxDbm => "tx_dbm",
            Field::RssiDbm => "rssi_dbm",
            Field::NoiseDbm => "noise_dbm",
            Field::SnrDb => "snr_db",
            Field::Rate => "rate",
        }
    }

    /// The field a column name names (any case).
    pub fn from_name(name: &str) -> Option<Field> {
        Field::ALL
            .into_iter()
            .find(|f| f.name().eq_ignore_ascii_case(name))
    }

    fn names() -> String {
        Field::ALL.map(Field::name).join(", ")
    }
}

/// `--column FIELD=NAME`: the CSV column `NAME` holds `FIELD`.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ColumnMap {
    /// The field.
    pub field: Field,
    /// The column's name in the log (matched without regard to case).
    pub column: String,
}

impl std::str::FromStr for ColumnMap {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, String> {
        let Some((field, column)) = s.split_once('=') else {
            return Err(format!(
                "'{}' is not FIELD=NAME (for example rssi_dbm=RSSI; fields: {})",
                printable(s),
                Field::names()
            ));
        };
        let (field, column) = (field.trim(), column.trim());
        let Some(f) = Field::from_name(field) else {
            return Err(format!(
                "'{}' is not a log field (fields: {})",
                printable(field),
                Field::names()
            ));
        };
        if column.is_empty() {
            return Err(format!("{}= names no column", f.name()));
        }
        Ok(ColumnMap {
            field: f,
            column: column.to_string(),
        })
    }
}

/// How to read a log: its format if the name does not tell, CSV columns
/// named otherwise, strictness, and whether the readings a replay needs
/// must be there.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct ReadOptions {
    /// The format; `None`: told by the file name's extension.
    pub format: Option<LogFormat>,
    /// CSV columns named otherwise (ignored for binary logs, which have no
    /// column names).
    pub columns: Vec<ColumnMap>,
    /// Any damage is an error item, a damaged header an error at open.
    pub strict: bool,
    /// A CSV log must have the columns a replay judges by: `t_ms`,
    /// `tx_dbm`, `rssi_dbm`, and `noise_dbm` or `snr_db`; without one it is
    /// refused at open, naming the column.
    pub require_readings: bool,
    /// The names of the rate table in force (an energy profile's), in
    /// order: a CSV `rate` column is read against them when the log's
    /// header has no table of its own (the records' indices are then into
    /// that table).
    pub rate_names: Vec<String>,
}

/// The options of a command that reads logs, to flatten into its
/// arguments (`#[command(flatten)]`).
#[derive(Clone, Debug, Default, clap::Args)]
pub struct InputArgs {
    /// Format of the log(s), where the file name does not tell (standard
    /// input `-`, other extensions).
    #[arg(long, value_enum, value_name = "FORMAT")]
    pub from: Option<LogFormat>,
    /// A CSV column named otherwise: `--column rssi_dbm=RSSI` reads the
    /// column `RSSI` as `rssi_dbm` (repeatable; fields: t_ms, tx_dbm,
    /// rssi_dbm, noise_dbm, snr_db, rate).
    #[arg(long = "column", value_name = "FIELD=NAME")]
    pub columns: Vec<ColumnMap>,
    /// Any damage is an error: a damaged or lost header, a damaged binary
    /// region (instead of skipping it).
    #[arg(long)]
    pub strict: bool,
}

impl InputArgs {
    /// The read options these arguments give.
    pub fn options(&self) -> ReadOptions {
        ReadOptions {
            format: self.from,
            columns: self.columns.clone(),
            strict: self.strict,
            require_readings: true,
            rate_names: Vec::new(),
        }
    }

    /// [`InputArgs::options`], with the rate table in force (an energy
    /// profile's) to read a CSV `rate` column by when a log's header has
    /// none.
    pub fn options_with_rates(&self, rates: &headroom::rate::RateTable) -> ReadOptions {
        ReadOptions {
            rate_names: rates
                .as_slice()
                .iter()
                .map(|r| r.name.as_str().to_string())
                .collect(),
            ..self.options()
        }
    }
}

/// Whether a log's header was read.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum HeaderStatus {
    /// The log has a header, read intact.
    Present,
    /// The log has no header (it was written without one).
    Absent,
    /// The log had a header that is lost or damaged (binary: frame 0 lost
    /// or failing its CRC; CSV: a malformed `# headroom-log` block); `why`
    /// says which. A CSV header keeps its fields that were read.
    Damaged {
        /// What was wrong, with its position.
        why: String,
    },
}

impl fmt::Display for HeaderStatus {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            HeaderStatus::Present => f.write_str("present"),
            HeaderStatus::Absent => f.write_str("absent"),
            HeaderStatus::Damaged { why } => write!(f, "damaged: {why}"),
        }
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
            plural(self.bytes_skipped),
            self.frames_skipped,
            plural(self.frames_skipped),
            self.why
        )
    }
}

/// Every damaged region of a log, counted (the first [`DAMAGE_DETAIL`] are
/// also kept in detail, [`LogReader::damage`]).
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct DamageSummary {
    /// Damaged regions.
    pub regions: u64,
    /// Bytes skipped in all of them.
    pub bytes: u64,
    /// Frames lost in all of them.
    pub frames_lost: u64,
    /// Regions by what was wrong with their first piece (one entry per
    /// kind of damage: a handful at most).
    pub by_kind: Vec<(String, u64)>,
}

impl DamageSummary {
    /// Count one region.
    fn add(&mut self, d: &Damage, kind: String) {
        self.regions += 1;
        self.bytes += d.bytes_skipped;
        self.frames_lost += d.frames_skipped;
        match self.by_kind.iter_mut().find(|(k, _)| *k == kind) {
            Some((_, n)) => *n += 1,
            None => self.by_kind.push((kind, 1)),
        }
    }
}

/// A header frame after the first one, or after the records.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct HeaderEvent {
    /// Offset in the file of the frame.
    pub byte_offset: u64,
    /// Records read before it.
    pub after_records: u64,
    /// Header fields (their CSV keys) that differ from the header in force
    /// (empty: the same header again; all of them when there was none).
    pub differs: Vec<&'static str>,
    /// Whether the log had a header before this one.
    pub had_header: bool,
}

impl fmt::Display for HeaderEvent {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let place = if self.after_records > 0 {
            format!(
                "after {} record{}",
                self.after_records,
                plural(self.after_records)
            )
        } else {
            "before the records".to_string()
        };
        if !self.had_header {
            write!(
                f,
                "byte {}: a header frame {place}, not at the start: ignored (the log is read as without a header)",
                self.byte_offset
            )
        } else if self.differs.is_empty() {
            write!(
                f,
                "byte {}: the header frame again, {place} (same fields)",
                self.byte_offset
            )
        } else {
            write!(
                f,
                "byte {}: another header frame {place} with different {}: ignored (the first header applies)",
                self.byte_offset,
                self.differs.join(", ")
            )
        }
    }
}

/// The header fields that differ between `a` and `b`, by CSV key (floats
/// compared bit for bit).
fn header_differences(a: &LogHeader, b: &LogHeader) -> Vec<&'static str> {
    let bits = |v: Option<f32>| v.map(f32::to_bits);
    let pairs = [
        ("device_id", a.device_id == b.device_id),
        ("epoch_ms", a.epoch_ms == b.epoch_ms),
        (
            "min_tx_dbm",
            bits(a.min_tx.map(|v| v.0)) == bits(b.min_tx.map(|v| v.0)),
        ),
        (
            "max_tx_dbm",
            bits(a.max_tx.map(|v| v.0)) == bits(b.max_tx.map(|v| v.0)),
        ),
        (
            "tx_step_db",
            bits(a.tx_step.map(|v| v.0)) == bits(b.tx_step.map(|v| v.0)),
        ),
        (
            "antenna_gain_dbi",
            bits(a.antenna_gain.map(|v| v.0)) == bits(b.antenna_gain.map(|v| v.0)),
        ),
        (
            "required_snr_db",
            bits(a.required_snr.map(|v| v.0)) == bits(b.required_snr.map(|v| v.0)),
        ),
        (
            "eirp_cap_dbm",
            bits(a.eirp_cap.map(|v| v.0)) == bits(b.eirp_cap.map(|v| v.0)),
        ),
        ("rate", a.rates == b.rates),
    ];
    pairs
        .into_iter()
        .filter(|(_, same)| !same)
        .map(|(k, _)| k)
        .collect()
}

fn plural(n: u64) -> &'static str {
    if n == 1 {
        ""
    } else {
        "s"
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

/// The name standing for standard input.
pub const STDIN: &str = "-";

/// Open a log, its format told by the extension; every column optional.
pub fn open(path: &Path) -> CliResult<LogReader> {
    open_as(path, None)
}

/// Open a log in `format`, or by the extension if `None`; every column
/// optional.
pub fn open_as(path: &Path, format: Option<LogFormat>) -> CliResult<LogReader> {
    open_with(
        path,
        &ReadOptions {
            format,
            ..ReadOptions::default()
        },
    )
}

/// Open a log (`-`: standard input) as `opts` say. The input is read once,
/// front to back, so pipes, standard input and other special files work
/// like files.
pub fn open_with(path: &Path, opts: &ReadOptions) -> CliResult<LogReader> {
    let stdin = path.as_os_str() == STDIN;
    let format = match opts.format {
        Some(f) => f,
        None if stdin => return Err(CliError::Input(
            "standard input: cannot tell the log format (name it with --from csv or --from binary)"
                .into(),
        )),
        None => LogFormat::from_path(path)?,
    };
    let (name, input): (String, Box<dyn Read + Send>) = if stdin {
        ("standard input".into(), Box::new(std::io::stdin()))
    } else {
        let file = File::open(path).map_err(|e| CliError::input_file(path, "cannot open", &e))?;
        crate::atomic::note_input_file(path, &file);
        if file.metadata().is_ok_and(|m| m.is_dir()) {
            return Err(CliError::Input(format!(
                "{}: is a folder, not a log",
                printable(&path.display().to_string())
            )));
        }
        (printable(&path.display().to_string()), Box::new(file))
    };
    let inner = match format {
        LogFormat::Csv => Inner::Csv(Box::new(csv::CsvReader::new(name, input, opts)?)),
        LogFormat::Binary => Inner::Binary(Box::new(binary::BinaryReader::new(
            name,
            input,
            opts.strict,
        )?)),
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

    /// The log's header, if it has one (a damaged CSV header: the fields
    /// that were read).
    pub fn header(&self) -> Option<&LogHeader> {
        match &self.inner {
            Inner::Csv(r) => r.header(),
            Inner::Binary(r) => r.header(),
        }
    }

    /// Whether the header was present, absent, or lost or damaged.
    pub fn header_status(&self) -> &HeaderStatus {
        match &self.inner {
            Inner::Csv(r) => r.header_status(),
            Inner::Binary(r) => r.header_status(),
        }
    }

    /// The first [`DAMAGE_DETAIL`] damaged regions skipped so far (binary
    /// logs; always empty for CSV). [`LogReader::damage_summary`] counts
    /// them all.
    pub fn damage(&self) -> &[Damage] {
        match &self.inner {
            Inner::Csv(_) => &[],
            Inner::Binary(r) => r.damage(),
        }
    }

    /// Every damaged region skipped so far, counted.
    pub fn damage_summary(&self) -> DamageSummary {
        match &self.inner {
            Inner::Csv(_) => DamageSummary::default(),
            Inner::Binary(r) => r.damage_summary().clone(),
        }
    }

    /// Header frames after the first one or after the records (binary), the
    /// first [`HEADER_EVENT_DETAIL`] of them.
    pub fn header_events(&self) -> &[HeaderEvent] {
        match &self.inner {
            Inner::Csv(_) => &[],
            Inner::Binary(r) => r.header_events(),
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

    /// Records read so far.
    pub fn records_read(&self) -> u64 {
        match &self.inner {
            Inner::Csv(r) => r.records_read(),
            Inner::Binary(r) => r.records_read(),
        }
    }

    /// What a command should tell the user about this log, one line each,
    /// each starting with the log's name: a lost or damaged header, noise
    /// computed from SNR, damage (the first [`DAMAGE_DETAIL`] regions, then
    /// a count), header frames after the first, and, once the log is read
    /// to its end, columns empty in every row and a log without records.
    /// The reader prints nothing itself.
    pub fn warnings(&self) -> Vec<String> {
        match &self.inner {
            Inner::Csv(r) => r.warnings(),
            Inner::Binary(r) => r.warnings(),
        }
    }

    /// In strict mode the first damage of a binary log is an error item
    /// that ends the stream. CSV errors are always error items. (Better
    /// given when opening: [`ReadOptions::strict`], which also makes a
    /// damaged header an error.)
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
    Csv(Box<csv::CsvEncoder>),
    Binary(Box<binary::BinaryEncoder>),
}

/// Create a log, its format told by the extension. `header` goes into the
/// log's header (binary: the header frame; CSV: the `#` comment block,
/// written only when it says something).
pub fn create(path: &Path, force: bool, header: Option<LogHeader>) -> CliResult<LogWriter> {
    create_as(path, None, force, header)
}

/// Create a log in `format`, or by the extension if `None`; binary in the
/// newest version.
pub fn create_as(
    path: &Path,
    format: Option<LogFormat>,
    force: bool,
    header: Option<LogHeader>,
) -> CliResult<LogWriter> {
    create_versioned(path, format, BinaryVersion::default(), force, header)
}

/// Create a log in `format` (or by the extension if `None`), binary in
/// `version`.
pub fn create_versioned(
    path: &Path,
    format: Option<LogFormat>,
    version: BinaryVersion,
    force: bool,
    header: Option<LogHeader>,
) -> CliResult<LogWriter> {
    let format = match format {
        Some(f) => f,
        None => LogFormat::from_path(path)?,
    };
    let mut out = AtomicFile::create(path, force)?;
    let mut enc = match format {
        LogFormat::Csv => Encoder::Csv(Box::new(csv::CsvEncoder::new())),
        LogFormat::Binary => Encoder::Binary(Box::new(binary::BinaryEncoder::new(version))),
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

    /// Write what the encoder holds back (binary format 2: the last
    /// block), flush, fsync and move the file into place.
    pub fn finish(mut self) -> CliResult {
        if let Encoder::Binary(e) = &mut self.enc {
            e.finish(&mut self.out).map_err(|e| self.out.io_error(e))?;
        }
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
            rate: None,
        }
    }

    fn names(dir: &Path) -> Vec<std::ffi::OsString> {
        std::fs::read_dir(dir)
            .expect("list")
            .map(|e| e.expect("entry").file_name())
            .collect()
    }

    use headroom::record::codec::{encode_frame, Frame, VERSION};
    use headroom::units::Dbm;

    /// Open `bytes` written to a file `name` in a fresh folder.
    fn open_bytes(name: &str, bytes: &[u8], opts: &ReadOptions) -> CliResult<LogReader> {
        let dir = tempfile::tempdir().expect("temp dir");
        let p = dir.path().join(name);
        std::fs::write(&p, bytes).expect("seed");
        open_with(&p, opts)
    }

    fn full() -> ReadOptions {
        ReadOptions {
            require_readings: true,
            ..ReadOptions::default()
        }
    }

    fn all(log: &mut LogReader) -> Vec<LogRecord> {
        log.by_ref().map(|r| r.expect("record")).collect()
    }

    fn err(r: CliResult<LogReader>) -> String {
        match r {
            Ok(_) => panic!("opened"),
            Err(e) => {
                assert_eq!(e.exit_code(), 2, "{e}");
                e.to_string()
            }
        }
    }

    #[test]
    fn every_record_field_survives_csv_and_binary() {
        // Every field set, without `..`: a field added to `LogRecord` must
        // be set here, and then fails this test until both writers and
        // readers carry it (see DEVELOPERS.md, "Adding a log field").
        let r = LogRecord {
            t_ms: 1_234_567,
            tx_dbm: Some(13.5),
            rssi_dbm: Some(-101.25),
            noise_dbm: Some(-117.75),
            rate: None,
        };
        for name in ["all.csv", "all.hrlog"] {
            let dir = tempfile::tempdir().expect("temp dir");
            let p = dir.path().join(name);
            let mut w = create(&p, false, None).expect("create");
            w.write(&r).expect("write");
            w.finish().expect("finish");
            let got = all(&mut open_with(&p, &full()).expect("open"));
            assert_eq!(got, vec![r], "{name}");
        }
    }

    #[test]
    fn snr_instead_of_noise_is_a_full_log() {
        let text = b"t_ms,tx_dbm,rssi_dbm,snr_db\n0,14,-100,7.5\n1,14,-101,\n2,14,,3\n";
        let mut log = open_bytes("snr.csv", text, &full()).expect("open");
        let got = all(&mut log);
        assert_eq!(got[0].noise_dbm, Some(-107.5));
        // Without an SNR or without an RSSI there is no noise floor.
        assert_eq!(got[1].noise_dbm, None);
        assert_eq!(got[2].noise_dbm, None);
        let w = log.warnings().join("\n");
        assert!(
            w.contains("noise_dbm computed as rssi_dbm - snr_db in 1 row "),
            "{w}"
        );
        // A logged noise floor wins over the SNR.
        let text = b"t_ms,tx_dbm,rssi_dbm,noise_dbm,snr_db\n0,14,-100,-120,7.5\n1,14,-100,,7.5\n";
        let got = all(&mut open_bytes("both.csv", text, &full()).expect("open"));
        assert_eq!(got[0].noise_dbm, Some(-120.0));
        assert_eq!(got[1].noise_dbm, Some(-107.5));
    }

    #[test]
    fn a_log_without_a_reading_column_is_refused_naming_it() {
        for (text, want) in [
            (
                "t_ms,tx_dbm,noise_dbm\n0,1,2\n",
                "missing required column rssi_dbm (accepted names: rssi_dbm, or name yours with --column rssi_dbm=NAME; the header row has: t_ms, tx_dbm, noise_dbm)",
            ),
            (
                "t_ms,tx_dbm,rssi_dbm\n0,1,2\n",
                "missing required column noise_dbm or snr_db (accepted names: noise_dbm, snr_db, or name yours with --column noise_dbm=NAME or --column snr_db=NAME",
            ),
            ("t_ms,rssi_dbm,snr_db\n0,1,2\n", "missing required column tx_dbm"),
            ("tx_dbm,rssi_dbm,snr_db\n0,1,2\n", "missing required column t_ms"),
        ] {
            let e = err(open_bytes("x.csv", text.as_bytes(), &full()));
            assert!(e.contains(want), "{text:?}: {e}");
            assert!(e.contains("x.csv:1: "), "{e}");
        }
        // Without the requirement (a conversion), the log opens and says
        // which column it lacks.
        let mut log =
            open_bytes("x.csv", b"t_ms,tx_dbm\n0,1\n", &ReadOptions::default()).expect("open");
        assert_eq!(all(&mut log).len(), 1);
        let w = log.warnings().join("\n");
        assert!(
            w.contains("no column rssi_dbm: absent in every record"),
            "{w}"
        );
        assert!(w.contains("no column noise_dbm"), "{w}");
    }

    #[test]
    fn columns_named_otherwise_are_mapped() {
        let m: ColumnMap = "rssi_dbm=RSSI".parse().expect("map");
        assert_eq!(m.field, Field::RssiDbm);
        assert_eq!(m.column, "RSSI");
        for (bad, want) in [
            (
                "rssi=RSSI",
                "'rssi' is not a log field (fields: t_ms, tx_dbm, rssi_dbm, noise_dbm, snr_db, rate)",
            ),
            ("rssi_dbm", "is not FIELD=NAME"),
            ("rssi_dbm=", "names no column"),
        ] {
            let e = bad.parse::<ColumnMap>().expect_err(bad);
            assert!(e.contains(want), "{bad}: {e}");
        }
        let opts = ReadOptions {
            columns: vec![
                "rssi_dbm=Rssi".parse().expect("map"),
                "snr_db=lsnr".parse().expect("map"),
                "t_ms=time".parse().expect("map"),
                "tx_dbm=power".parse().expect("map"),
            ],
            ..full()
        };
        let text = b"time,power,RSSI,LSNR,rssi_dbm\n5,10,-90,-10,1\n";
        let got = all(&mut open_bytes("m.csv", text, &opts).expect("open"));
        assert_eq!(
            got,
            vec![LogRecord {
                t_ms: 5,
                tx_dbm: Some(10.0),
                rssi_dbm: Some(-90.0),
                noise_dbm: Some(-80.0),
                rate: None,
            }]
        );
        // A mapped column that is not there is named as mapped.
        let e = err(open_bytes("m.csv", b"time,power,snr_db\n1,2,3\n", &opts));
        assert!(
            e.contains("missing required column Rssi (as rssi_dbm)"),
            "{e}"
        );
        // The same field mapped twice.
        let twice = ReadOptions {
            columns: vec![
                "rssi_dbm=a".parse().expect("map"),
                "rssi_dbm=b".parse().expect("map"),
            ],
            ..full()
        };
        let e = err(open_bytes("m.csv", text, &twice));
        assert!(e.contains("--column: rssi_dbm is mapped twice"), "{e}");
    }

    #[test]
    fn an_all_empty_column_is_a_warning_at_the_end() {
        let text = b"t_ms,tx_dbm,rssi_dbm,noise_dbm\n0,14,-90,\n1,14,-91, \n";
        let mut log = open_bytes("e.csv", text, &full()).expect("open");
        assert!(log.warnings().is_empty(), "nothing known before reading");
        assert_eq!(all(&mut log).len(), 2);
        let w = log.warnings();
        assert_eq!(w.len(), 1, "{w:?}");
        assert!(
            w[0].ends_with("/e.csv: column noise_dbm (noise_dbm) is empty in all 2 rows"),
            "{w:?}"
        );
    }

    #[test]
    fn csv_header_status_bom_and_strict() {
        let rows = "t_ms,tx_dbm,rssi_dbm,noise_dbm\n0,14,-90,-120\n";
        let block = "# headroom-log 1.1\n# max_tx_dbm: 5\n";
        // Present, absent.
        let log = open_bytes("p.csv", format!("{block}{rows}").as_bytes(), &full()).expect("open");
        assert_eq!(log.header_status(), &HeaderStatus::Present);
        assert_eq!(log.header().and_then(|h| h.max_tx), Some(Dbm(5.0)));
        let log = open_bytes("a.csv", rows.as_bytes(), &full()).expect("open");
        assert_eq!(log.header_status(), &HeaderStatus::Absent);
        assert_eq!(log.header(), None);
        // A byte-order mark before the block: the block is read.
        let mut bom = b"\xEF\xBB\xBF".to_vec();
        bom.extend_from_slice(format!("{block}{rows}").as_bytes());
        let log = open_bytes("bom.csv", &bom, &full()).expect("open");
        assert_eq!(log.header_status(), &HeaderStatus::Present);
        assert_eq!(log.header().and_then(|h| h.max_tx), Some(Dbm(5.0)));
        // And before a header row without a block.
        let mut bom = b"\xEF\xBB\xBF".to_vec();
        bom.extend_from_slice(rows.as_bytes());
        let mut log = open_bytes("bom.csv", &bom, &full()).expect("open");
        assert_eq!(all(&mut log).len(), 1);
        // A malformed block: damaged, the other fields kept, the bad line
        // named; an error under strict.
        let bad = format!("# headroom-log 1.1\n# min_tx_dbm: 2\n# max_tx_dbm: 1x\n{rows}");
        let log = open_bytes("d.csv", bad.as_bytes(), &full()).expect("open");
        match log.header_status() {
            HeaderStatus::Damaged { why } => assert!(
                why.contains(
                    "line 3: header block damaged: max_tx_dbm: '1x' is not a finite number"
                ),
                "{why}"
            ),
            other => panic!("{other:?}"),
        }
        assert_eq!(log.header().and_then(|h| h.min_tx), Some(Dbm(2.0)));
        assert_eq!(log.header().and_then(|h| h.max_tx), None);
        assert!(log
            .warnings()
            .join("")
            .contains("d.csv: line 3: header block damaged"));
        let strict = ReadOptions {
            strict: true,
            ..full()
        };
        let e = err(open_bytes("d.csv", bad.as_bytes(), &strict));
        assert!(
            e.contains("header block damaged") && e.contains("--strict"),
            "{e}"
        );
    }

    #[test]
    fn a_binary_field_absent_in_every_record_is_a_warning() {
        // `frames` writes records without a noise floor.
        let (bytes, _) = frames(Some(5.0), 3);
        let mut log = open_bytes("nn.hrlog", &bytes, &full()).expect("open");
        assert_eq!(all(&mut log).len(), 3);
        let w = log.warnings();
        assert_eq!(w.len(), 1, "{w:?}");
        assert!(
            w[0].ends_with("/nn.hrlog: noise_dbm is absent in all 3 records"),
            "{w:?}"
        );
    }

    #[test]
    fn csv_header_blocks_after_the_first_are_reported() {
        let text = "# exported by the gateway\n# headroom-log 1.1\n# max_tx_dbm: 5\n\
                    # headroom-log 1.1\n# max_tx_dbm: 20\n\
                    t_ms,tx_dbm,rssi_dbm,noise_dbm\n0,5,-90,-120\n\
                    # headroom-log 1.1\n# max_tx_dbm: 30\n1,5,-90,-120\n";
        let mut log = open_bytes("b.csv", text.as_bytes(), &full()).expect("open");
        // The block may follow free comment lines; only the first applies.
        assert_eq!(log.header_status(), &HeaderStatus::Present);
        assert_eq!(log.header().and_then(|h| h.max_tx), Some(Dbm(5.0)));
        assert_eq!(all(&mut log).len(), 2);
        let w = log.warnings().join("\n");
        assert!(
            w.contains("b.csv:4: a '# headroom-log' block after the first: ignored"),
            "{w}"
        );
        assert!(
            w.contains("b.csv:8: a '# headroom-log' block after the header row: ignored"),
            "{w}"
        );
    }

    #[test]
    fn empty_and_zero_logs_are_refused() {
        for (name, bytes, want) in [
            ("z.hrlog", vec![], "z.hrlog: empty log (0 bytes)"),
            (
                "z.hrlog",
                vec![0u8; 4000],
                "z.hrlog: 4000 bytes, all zero: no frame",
            ),
            ("z.csv", vec![], "z.csv: empty log (0 bytes)"),
            (
                "z.csv",
                vec![0u8; 4000],
                "z.csv: starts with zero bytes, not text",
            ),
        ] {
            let e = err(open_bytes(name, &bytes, &ReadOptions::default()));
            assert!(e.contains(want), "{e}");
        }
        // A header and no record: opens, and says so at the end.
        let mut log =
            open_bytes("h.csv", b"t_ms,tx_dbm,rssi_dbm,noise_dbm\n", &full()).expect("open");
        assert!(all(&mut log).is_empty());
        let w = log.warnings();
        assert_eq!(w.len(), 1, "{w:?}");
        assert!(w[0].ends_with("/h.csv: the log holds no record"), "{w:?}");
    }

    /// Frames: a header with `max_tx` (if any) at seq 0, then `n` records.
    fn frames(header: Option<f32>, n: u64) -> (Vec<u8>, Vec<usize>) {
        let mut bytes = Vec::new();
        let mut ends = Vec::new();
        let mut buf = [0u8; headroom::record::codec::MAX_FRAME];
        let mut seq = 0u16;
        if let Some(max) = header {
            let h = LogHeader {
                max_tx: Some(Dbm(max)),
                ..LogHeader::default()
            };
            let f = Frame::Header {
                header: h,
                version: VERSION,
            };
            bytes.extend_from_slice(encode_frame(0, &f, &mut buf).expect("frame"));
            ends.push(bytes.len());
            seq = 1;
        }
        for t in 0..n {
            let f = Frame::Record(rec(t));
            bytes.extend_from_slice(encode_frame(seq, &f, &mut buf).expect("frame"));
            ends.push(bytes.len());
            seq = seq.wrapping_add(1);
        }
        (bytes, ends)
    }

    #[test]
    fn binary_header_status() {
        let (good, ends) = frames(Some(5.0), 3);
        let log = open_bytes("g.hrlog", &good, &full()).expect("open");
        assert_eq!(log.header_status(), &HeaderStatus::Present);
        let (none, _) = frames(None, 3);
        let mut log = open_bytes("n.hrlog", &none, &full()).expect("open");
        assert_eq!(log.header_status(), &HeaderStatus::Absent);
        assert_eq!(all(&mut log).len(), 3);
        // A bad CRC in the header frame: damaged, records still read.
        let mut bad = good.clone();
        bad[ends[0] - 3] ^= 0x40;
        let mut log = open_bytes("b.hrlog", &bad, &full()).expect("open");
        match log.header_status() {
            HeaderStatus::Damaged { why } => assert!(
                why.contains("byte 0: the header frame is damaged (CRC-32C mismatch)"),
                "{why}"
            ),
            other => panic!("{other:?}"),
        }
        assert_eq!(log.header(), None);
        assert_eq!(all(&mut log).len(), 3);
        assert!(log.warnings()[0].contains("b.hrlog: byte 0: the header frame is damaged"));
        // Frame 0 lost whole (the file starts at frame 1).
        let log = open_bytes("l.hrlog", &good[ends[0]..], &full()).expect("open");
        assert!(
            matches!(log.header_status(), HeaderStatus::Damaged { why } if why.contains("frame 0 (the header) is missing"))
        );
        // Strict: either is an error at open that says it is the header.
        let strict = ReadOptions {
            strict: true,
            ..full()
        };
        for bytes in [&bad[..], &good[ends[0]..]] {
            let e = err(open_bytes("s.hrlog", bytes, &strict));
            assert!(e.contains("header") && e.contains("--strict"), "{e}");
        }
    }

    #[test]
    fn a_newer_major_version_is_named_as_such_even_when_strict() {
        // A header frame of version 3.0, sealed by hand: kind, seq, magic,
        // 3, 0, two zero varints and four absent options, CRC-32C, COBS
        // (every block shorter than 254 bytes: one code byte per zero).
        let mut p = vec![0u8, 0, 0, b'h', b'r', b'l', b'g', 3, 0, 0, 0, 0, 0, 0, 0];
        let crc = headroom::record::crc::crc32c(&p);
        p.extend_from_slice(&crc.to_le_bytes());
        let mut wire = Vec::new();
        for block in p.split(|&b| b == 0) {
            wire.push(block.len() as u8 + 1);
            wire.extend_from_slice(block);
        }
        wire.push(0);
        for opts in [
            full(),
            ReadOptions {
                strict: true,
                ..full()
            },
        ] {
            let e = err(open_bytes("v3.hrlog", &wire, &opts));
            assert!(
                e.contains(
                    "byte 0: log format version 3.0 is not supported (this build reads 1.x and 2.x)"
                ),
                "{e}"
            );
            assert!(!e.contains("lost or damaged"), "{e}");
        }
    }

    #[test]
    fn second_and_late_headers_are_reported() {
        let (mut bytes, _) = frames(Some(5.0), 2);
        let (again, _) = frames(Some(14.0), 1);
        let at = bytes.len();
        bytes.extend_from_slice(&again);
        let mut log = open_bytes("two.hrlog", &bytes, &full()).expect("open");
        assert_eq!(all(&mut log).len(), 3);
        assert_eq!(log.header().and_then(|h| h.max_tx), Some(Dbm(5.0)));
        assert_eq!(
            log.header_events(),
            &[HeaderEvent {
                byte_offset: at as u64,
                after_records: 2,
                differs: vec!["max_tx_dbm"],
                had_header: true,
            }]
        );
        let w = log.warnings().join("\n");
        assert!(
            w.contains(&format!("two.hrlog: byte {at}: another header frame after 2 records with different max_tx_dbm: ignored (the first header applies)")),
            "{w}"
        );
        // The same header repeated after the records is reported too.
        let (mut bytes, _) = frames(Some(5.0), 2);
        let (again, _) = frames(Some(5.0), 0);
        bytes.extend_from_slice(&again);
        let mut log = open_bytes("rep.hrlog", &bytes, &full()).expect("open");
        all(&mut log);
        assert!(log
            .warnings()
            .join("")
            .contains("the header frame again, after 2 records (same fields)"));
        // A header after records in a log that had none.
        let (mut bytes, _) = frames(None, 1);
        bytes.extend_from_slice(&again);
        let mut log = open_bytes("late.hrlog", &bytes, &full()).expect("open");
        all(&mut log);
        assert!(log
            .warnings()
            .join("")
            .contains("a header frame after 1 record, not at the start: ignored"));
    }

    #[test]
    fn damage_detail_stays_bounded_on_a_worst_case() {
        // 100 000 damaged regions: each a record frame with a flipped CRC
        // byte, between intact frames.
        let (clean, _) = frames(Some(5.0), 1);
        let mut bytes = clean.clone();
        let mut buf = [0u8; headroom::record::codec::MAX_FRAME];
        let mut seq = 2u16;
        for t in 0..100_000u64 {
            let f = encode_frame(seq, &Frame::Record(rec(t)), &mut buf).expect("frame");
            let n = f.len();
            let mut bad = f.to_vec();
            bad[n - 2] ^= 0x01;
            if bad[n - 2] == 0 {
                bad[n - 2] = 0x55;
            }
            bytes.extend_from_slice(&bad);
            seq = seq.wrapping_add(1);
            let f = encode_frame(seq, &Frame::Record(rec(t)), &mut buf).expect("frame");
            bytes.extend_from_slice(f);
            seq = seq.wrapping_add(1);
        }
        let mut log = open_bytes("worst.hrlog", &bytes, &ReadOptions::default()).expect("open");
        let n = log.by_ref().filter(Result::is_ok).count();
        assert_eq!(n, 100_001);
        assert_eq!(log.damage().len(), DAMAGE_DETAIL);
        let s = log.damage_summary();
        assert_eq!(s.regions, 100_000);
        assert_eq!(s.frames_lost, 100_000);
        // By the fault of the first piece: a flip in the CRC, or in a COBS
        // code byte; one entry per kind, the counts adding up.
        assert!(s.by_kind.len() <= 2, "{:?}", s.by_kind);
        assert_eq!(s.by_kind.iter().map(|(_, n)| n).sum::<u64>(), 100_000);
        let w = log.warnings();
        // The regions kept, the totals, and the reading these records lack.
        assert_eq!(w.len(), DAMAGE_DETAIL + 2, "{w:?}");
        assert!(
            w[DAMAGE_DETAIL].contains("100000 damaged regions in all"),
            "{w:?}"
        );
    }

    #[test]
    fn standard_input_needs_a_named_format() {
        let e = err(open_with(Path::new(STDIN), &ReadOptions::default()));
        assert!(
            e.contains("standard input: cannot tell the log format (name it with --from"),
            "{e}"
        );
    }

    #[test]
    fn messages_stay_short_whatever_the_header_row() {
        // Found by fuzzing (kept in fuzz/regressions/csv_log/): a header row
        // of many cells full of control characters made a 2 KB message.
        let mut row = Vec::new();
        for _ in 0..60 {
            row.extend_from_slice(&[0x1b; 60]);
            row.push(b',');
        }
        row.extend_from_slice(b"t_ms\n1\n");
        let e = err(open_bytes("wide.csv", &row, &full()));
        assert!(e.len() < 1200, "{} bytes: {e}", e.len());
        assert!(e.contains("and 51 more"), "{e}");
        assert!(!e.chars().any(char::is_control), "{e}");
        let mut v = b"# headroom-log 2".to_vec();
        v.extend_from_slice(&[0x1b; 3000]);
        v.extend_from_slice(b"\nt_ms\n");
        let e = err(open_bytes("v.csv", &v, &full()));
        assert!(e.len() < 300, "{} bytes: {e}", e.len());
    }

    #[test]
    fn file_names_with_control_characters_are_escaped() {
        let e = err(open_bytes("a\x1b[2Jb.csv", b"", &full()));
        assert!(e.contains("a\\u{1b}[2Jb.csv: empty log"), "{e}");
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
