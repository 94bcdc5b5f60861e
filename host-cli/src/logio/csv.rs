//! CSV logs: a streaming reader over `csv::ByteRecord` (no allocation per
//! row) that reads its input once, front to back, and a writer.

use std::fmt;
use std::io::{self, BufRead, BufReader, Read, Write};

use headroom::record::noise_from_snr;
use headroom::units::{Db, Dbi, Dbm};

use super::{
    plural, Field, HeaderStatus, LogHeader, LogRecord, ReadOptions, MAX_LINE, MAX_PREAMBLE,
};
use crate::error::{printable, CliError, CliResult};

/// First word of the comment block that carries a [`LogHeader`].
pub(super) const MAGIC: &str = "headroom-log";
/// Version written after [`MAGIC`]; the CSV layout follows the binary
/// format's version numbers.
const VERSION: &str = "1.2";
/// Column names, in the order the writer puts them.
const COLUMNS: [Field; 4] = [Field::TMs, Field::TxDbm, Field::RssiDbm, Field::NoiseDbm];
/// The UTF-8 byte-order mark some editors put first.
const BOM: &[u8] = b"\xEF\xBB\xBF";

/// A line over [`MAX_LINE`] bytes, found while reading.
#[derive(Debug)]
struct LineTooLong {
    line: u64,
}

impl fmt::Display for LineTooLong {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: line is longer than {MAX_LINE} bytes", self.line)
    }
}

impl std::error::Error for LineTooLong {}

/// The bytes last handed to the CSV parser, kept to number the line of an
/// error from the bytes already read (the input is never read twice).
#[derive(Default)]
struct Chunk {
    bytes: Vec<u8>,
    /// Offset of its first byte in the parser's input.
    start: u64,
    /// Lines finished before it.
    lines: u64,
}

impl Chunk {
    /// The 1-based line of parser-input offset `at`, if it is in this chunk.
    fn line_of(&self, at: u64) -> Option<u64> {
        let i = usize::try_from(at.checked_sub(self.start)?).ok()?;
        let before = self.bytes.get(..i)?;
        // `at` itself must be in the chunk.
        self.bytes.get(i)?;
        Some(self.lines + count_newlines(before) + 1)
    }
}

/// Fails the read once a line grows past [`MAX_LINE`], so a file without
/// newlines cannot make the CSV parser buffer it whole. The bytes before a
/// too-long line are passed on first, so the rows before it are still read;
/// the error comes with the next read. Keeps a copy of the last two chunks
/// it passed on (the CSV parser's buffer is one chunk), so that the line of
/// any row the parser has just read is known without reading again.
struct LineLimit<R> {
    inner: R,
    /// Bytes since the last newline.
    run: usize,
    /// Lines finished so far, including those read before the CSV parser.
    lines: u64,
    /// Line number of a too-long line found in the last chunk.
    deferred: Option<u64>,
    /// Bytes passed on so far.
    passed: u64,
    /// The last chunk passed on, and the one before.
    last: Chunk,
    before: Chunk,
    /// Lines of `# headroom-log` blocks after the header row: the first
    /// [`super::HEADER_EVENT_DETAIL`], and how many in all.
    late_blocks: Vec<u64>,
    late_block_count: u64,
    /// The last bytes passed on (fewer than [`LATE_BLOCK`]), for a block
    /// mark split between two chunks.
    carry: Vec<u8>,
}

/// A header block's first line, after the newline that ends the line before.
const LATE_BLOCK: &[u8] = b"\n# headroom-log";

impl<R> LineLimit<R> {
    fn new(inner: R, lines: u64) -> Self {
        LineLimit {
            inner,
            run: 0,
            lines,
            deferred: None,
            passed: 0,
            last: Chunk::default(),
            before: Chunk::default(),
            late_blocks: Vec::new(),
            late_block_count: 0,
            carry: Vec::new(),
        }
    }

    /// Note the `# headroom-log` lines in `bytes`, about to be passed on
    /// (the comment lines after the header row, which the CSV parser skips
    /// without a word). `self.lines` is still the count before them.
    fn find_late_blocks(&mut self, bytes: &[u8]) {
        let keep = LATE_BLOCK.len() - 1;
        // A mark split between the last chunk and this one.
        let mut joined = std::mem::take(&mut self.carry);
        let from_carry = joined.len();
        joined.extend_from_slice(bytes.get(..keep.min(bytes.len())).unwrap_or(&[]));
        if memchr::memmem::find(&joined, LATE_BLOCK).is_some_and(|i| i < from_carry) {
            self.late_block(self.lines + 1);
        }
        for i in memchr::memmem::find_iter(bytes, LATE_BLOCK) {
            let before = bytes.get(..=i).map_or(0, count_newlines);
            self.late_block(self.lines + before + 1);
        }
        let tail = joined.len().saturating_sub(keep);
        self.carry = if bytes.len() >= keep {
            bytes.get(bytes.len() - keep..).unwrap_or(&[]).to_vec()
        } else {
            joined.get(tail..).unwrap_or(&[]).to_vec()
        };
    }

    fn late_block(&mut self, line: u64) {
        self.late_block_count += 1;
        if self.late_blocks.len() < super::HEADER_EVENT_DETAIL {
            self.late_blocks.push(line);
        }
    }

    /// The 1-based line of parser-input offset `at` (a byte already passed
    /// on, at most two chunks back); 0 if it is not known.
    fn line_of(&self, at: u64) -> u64 {
        self.last
            .line_of(at)
            .or_else(|| self.before.line_of(at))
            .unwrap_or(0)
    }

    /// Keep a copy of `bytes`, passed on, which hold `newlines` newlines.
    fn keep(&mut self, bytes: &[u8], newlines: u64) {
        std::mem::swap(&mut self.last, &mut self.before);
        self.last.bytes.clear();
        self.last.bytes.extend_from_slice(bytes);
        self.last.start = self.passed;
        self.last.lines = self.lines;
        self.passed += bytes.len() as u64;
        self.lines += newlines;
    }
}

impl<R: Read> Read for LineLimit<R> {
    fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
        if let Some(line) = self.deferred.take() {
            return Err(too_long(line));
        }
        let n = self.inner.read(buf)?;
        let chunk = buf.get(..n).unwrap_or(&[]);
        let scan = scan_lines(chunk, self.run);
        match scan.long_at {
            None => {
                self.find_late_blocks(chunk);
                self.keep(chunk, scan.newlines);
                self.run = scan.run;
                Ok(n)
            }
            Some(start) => {
                let line = self.lines + scan.newlines + 1;
                let passed = chunk.get(..start).unwrap_or(&[]);
                self.find_late_blocks(passed);
                self.keep(passed, scan.newlines);
                if start == 0 {
                    Err(too_long(line))
                } else {
                    self.deferred = Some(line);
                    self.run = 0;
                    Ok(start)
                }
            }
        }
    }
}

fn count_newlines(bytes: &[u8]) -> u64 {
    memchr::memchr_iter(b'\n', bytes).count() as u64
}

/// What one pass over a chunk found about its lines.
struct Scan {
    /// Newlines before `long_at`, or in the whole chunk.
    newlines: u64,
    /// Where the first line longer than [`MAX_LINE`] starts (0 if it
    /// started in an earlier chunk), if there is one.
    long_at: Option<usize>,
    /// Without a long line: bytes after the chunk's last newline, plus
    /// `run` if it has none.
    run: usize,
}

/// One pass over `chunk` (the line before it `run` bytes long so far),
/// newline to newline with `memchr`. (It replaced a per-byte count, a
/// quick test and an exact walk: 55 instructions fewer per 24-byte row,
/// callgrind of a CSV replay, 2 064 -> 2 009 per row.)
fn scan_lines(chunk: &[u8], run: usize) -> Scan {
    let mut newlines = 0u64;
    let mut start = 0usize;
    let mut carried = run;
    for i in memchr::memchr_iter(b'\n', chunk) {
        if carried + (i - start) > MAX_LINE {
            return Scan {
                newlines,
                long_at: Some(start),
                run: 0,
            };
        }
        newlines += 1;
        start = i + 1;
        carried = 0;
    }
    let tail = carried + (chunk.len() - start);
    if tail > MAX_LINE {
        Scan {
            newlines,
            long_at: Some(start),
            run: 0,
        }
    } else {
        Scan {
            newlines,
            long_at: None,
            run: tail,
        }
    }
}

fn too_long(line: u64) -> io::Error {
    io::Error::new(io::ErrorKind::InvalidData, LineTooLong { line })
}

/// Column positions of the fields in a row.
#[derive(Clone, Copy)]
struct Columns {
    t: usize,
    tx: Option<usize>,
    rssi: Option<usize>,
    noise: Option<usize>,
    snr: Option<usize>,
    rate: Option<usize>,
}

/// The reading columns, in the order of [`CsvReader::filled`].
const READINGS: [Field; 4] = [Field::TxDbm, Field::RssiDbm, Field::NoiseDbm, Field::SnrDb];

impl Columns {
    fn reading(&self, k: usize) -> Option<usize> {
        match k {
            0 => self.tx,
            1 => self.rssi,
            2 => self.noise,
            _ => self.snr,
        }
    }
}

type Input = io::Chain<io::Cursor<Vec<u8>>, Box<dyn Read + Send>>;

pub(super) struct CsvReader {
    name: String,
    rdr: ::csv::Reader<LineLimit<Input>>,
    rec: ::csv::ByteRecord,
    cols: Columns,
    /// The name each column was found under (for warnings).
    col_names: [Option<String>; 4],
    header: Option<LogHeader>,
    status: HeaderStatus,
    done: bool,
    rows: u64,
    /// Rows with a value in each reading column ([`READINGS`] order).
    filled: [u64; 4],
    /// Rows whose noise floor was computed from the SNR.
    noise_from_snr: u64,
    /// Lines of further `# headroom-log` blocks before the header row.
    late_blocks: Vec<u64>,
    /// The rate names a `rate` cell is read against when the header has no
    /// table ([`ReadOptions::rate_names`]).
    rate_names: Vec<String>,
}

impl CsvReader {
    pub(super) fn new(
        name: String,
        input: Box<dyn Read + Send>,
        opts: &ReadOptions,
    ) -> CliResult<Self> {
        let mut input = BufReader::with_capacity(8 * 1024, input);
        let start = input
            .fill_buf()
            .map_err(|e| CliError::Io(format!("{name}: cannot read: {e}")))?;
        if start.is_empty() {
            return Err(CliError::Input(format!(
                "{name}: empty log (0 bytes): no header row"
            )));
        }
        if start.iter().all(|&b| b == 0) {
            return Err(CliError::Input(format!(
                "{name}: starts with zero bytes, not text (is it a CSV log?)"
            )));
        }
        if start.starts_with(BOM) {
            input.consume(BOM.len());
        }
        let pre = read_preamble(&name, &mut input)?;
        if opts.strict {
            if let HeaderStatus::Damaged { why } = &pre.status {
                return Err(CliError::Input(format!(
                    "{name}: {why} (--strict reads a log only with an intact header)"
                )));
            }
        }
        // The CSV parser buffers by itself: hand it the input directly,
        // after what the preamble reader had buffered already.
        let rest = input.buffer().to_vec();
        let input = io::Cursor::new(rest).chain(input.into_inner());
        let mut rdr = ::csv::ReaderBuilder::new()
            .has_headers(true)
            .flexible(false)
            .quoting(false)
            .comment(Some(b'#'))
            .buffer_capacity(64 * 1024)
            .from_reader(LineLimit::new(input, pre.lines));
        let names = match rdr.byte_headers() {
            Ok(h) => h.clone(),
            Err(e) => {
                let at = last_byte(&rdr);
                return Err(csv_error(&name, rdr.get_ref(), at, e).0);
            }
        };
        if names.is_empty() || (names.len() == 1 && names.get(0) == Some(b"")) {
            return Err(CliError::Input(format!(
                "{name}: no header row (expected columns {})",
                COLUMNS.map(Field::name).join(",")
            )));
        }
        let header_line = rdr.get_ref().line_of(last_byte(&rdr));
        let (cols, col_names) = find_columns(&name, header_line, &names, opts)?;
        Ok(CsvReader {
            name,
            rdr,
            rec: ::csv::ByteRecord::new(),
            cols,
            col_names,
            header: pre.header,
            status: pre.status,
            done: false,
            rows: 0,
            filled: [0; 4],
            noise_from_snr: 0,
            late_blocks: pre.late_blocks,
            rate_names: opts.rate_names.clone(),
        })
    }

    pub(super) fn header(&self) -> Option<&LogHeader> {
        self.header.as_ref()
    }

    pub(super) fn header_status(&self) -> &HeaderStatus {
        &self.status
    }

    pub(super) fn records_read(&self) -> u64 {
        self.rows
    }

    pub(super) fn warnings(&self) -> Vec<String> {
        let name = &self.name;
        let mut out = Vec::new();
        if let HeaderStatus::Damaged { why } = &self.status {
            out.push(format!(
                "{name}: {why}: the header's other fields were read, this one is unknown"
            ));
        }
        if self.noise_from_snr > 0 {
            out.push(format!(
                "{name}: noise_dbm computed as rssi_dbm - snr_db in {} row{} (the log has no noise floor there)",
                self.noise_from_snr,
                plural(self.noise_from_snr)
            ));
        }
        for line in &self.late_blocks {
            out.push(format!(
                "{name}:{line}: a '# {MAGIC}' block after the first: ignored (the first header applies)"
            ));
        }
        let limit = self.rdr.get_ref();
        for line in &limit.late_blocks {
            out.push(format!(
                "{name}:{line}: a '# {MAGIC}' block after the header row: ignored (the header before the rows applies)"
            ));
        }
        let listed = self.late_blocks.len() + limit.late_blocks.len();
        let total = self.late_blocks.len() as u64 + limit.late_block_count;
        if total > listed as u64 {
            out.push(format!(
                "{name}: {total} '# {MAGIC}' blocks after the first in all (the first {listed} shown)"
            ));
        }
        if self.done {
            if self.rows == 0 {
                out.push(format!("{name}: the log holds no record"));
            } else {
                for (k, f) in READINGS.iter().enumerate() {
                    let present = self.cols.reading(k).is_some();
                    if !present && *f != Field::SnrDb {
                        let covered = *f == Field::NoiseDbm && self.cols.snr.is_some();
                        if !covered {
                            out.push(format!(
                                "{name}: no column {}: absent in every record",
                                f.name()
                            ));
                        }
                    } else if present && self.filled.get(k) == Some(&0) {
                        let col = self
                            .col_names
                            .get(k)
                            .and_then(Option::as_deref)
                            .unwrap_or(f.name());
                        out.push(format!(
                            "{name}: column {} ({}) is empty in all {} rows",
                            printable(col),
                            f.name(),
                            self.rows
                        ));
                    }
                }
            }
        }
        out
    }

    pub(super) fn next(&mut self) -> Option<CliResult<LogRecord>> {
        if self.done {
            return None;
        }
        match self.rdr.read_byte_record(&mut self.rec) {
            Ok(false) => {
                self.done = true;
                None
            }
            Ok(true) => match self.parse_row() {
                Ok(r) => {
                    self.rows += 1;
                    Some(Ok(r))
                }
                Err((col, why)) => {
                    let line = self.rdr.get_ref().line_of(last_byte(&self.rdr));
                    Some(Err(CliError::Input(format!(
                        "{}:{line}: column {col}: {why}",
                        self.name
                    ))))
                }
            },
            Err(e) => {
                let at = last_byte(&self.rdr);
                let (err, fatal) = csv_error(&self.name, self.rdr.get_ref(), at, e);
                self.done = fatal;
                Some(Err(err))
            }
        }
    }

    /// The record in `self.rec`, or the bad column and why.
    fn parse_row(&mut self) -> Result<LogRecord, (&'static str, String)> {
        let rec = &self.rec;
        let cols = self.cols;
        let t_cell = unquote(rec.get(cols.t).unwrap_or(b""));
        let Some(t_ms) = parse_u64(t_cell) else {
            return Err(bad_time(t_cell));
        };
        let tx_dbm = float_cell(rec, cols.tx, "tx_dbm")?;
        let rssi_dbm = float_cell(rec, cols.rssi, "rssi_dbm")?;
        let mut noise_dbm = float_cell(rec, cols.noise, "noise_dbm")?;
        let snr_db = match cols.snr {
            Some(_) => float_cell(rec, cols.snr, "snr_db")?,
            None => None,
        };
        for (k, v) in [tx_dbm, rssi_dbm, noise_dbm, snr_db].iter().enumerate() {
            if let (Some(_), Some(n)) = (v, self.filled.get_mut(k)) {
                *n += 1;
            }
        }
        if noise_dbm.is_none() {
            if let (Some(rssi), Some(snr)) = (rssi_dbm, snr_db) {
                noise_dbm = Some(noise_from_snr(rssi, snr));
                self.noise_from_snr += 1;
            }
        }
        let rate = match cols.rate {
            Some(i) => {
                let cell = unquote(rec.get(i).unwrap_or(b""));
                if cell.is_empty() {
                    None
                } else {
                    let rates = self.header.as_ref().map(|h| h.rates).unwrap_or_default();
                    let name = std::str::from_utf8(cell).ok();
                    let found = if rates.is_empty() && !self.rate_names.is_empty() {
                        name.and_then(|n| self.rate_names.iter().position(|r| r == n))
                            .and_then(|i| u8::try_from(i).ok())
                    } else {
                        name.and_then(|n| rates.index_of(n))
                    };
                    if found.is_none() {
                        return Err(unknown_rate(cell, &rates, &self.rate_names));
                    }
                    found
                }
            }
            None => None,
        };
        Ok(LogRecord {
            t_ms,
            tx_dbm,
            rssi_dbm,
            noise_dbm,
            rate,
        })
    }
}

/// Why a rate cell names no rate of the header's table.
#[cold]
#[inline(never)]
fn unknown_rate(
    cell: &[u8],
    rates: &headroom::rate::RateTable,
    fallback: &[String],
) -> (&'static str, String) {
    let why = if rates.is_empty() && !fallback.is_empty() {
        format!(
            "'{}' is not a rate of the table in force (rates: {}; the log's header has none)",
            show(cell),
            fallback.join(", ")
        )
    } else if rates.is_empty() {
        format!(
            "'{}' names a rate, but the log's header has no rate table ('# rate:' lines, or a profile's [[rate]] entries where the command takes --energy)",
            show(cell)
        )
    } else {
        format!(
            "'{}' is not a rate of the log's header (rates: {})",
            show(cell),
            crate::rates::names(rates)
        )
    };
    ("rate", why)
}

/// Why a time cell is bad (kept out of the row loop: only errors build
/// messages).
#[cold]
#[inline(never)]
fn bad_time(cell: &[u8]) -> (&'static str, String) {
    if cell.is_empty() {
        ("t_ms", "empty (every row needs a time)".into())
    } else {
        (
            "t_ms",
            format!("'{}' is not a whole number of milliseconds", show(cell)),
        )
    }
}

/// The reading in column `idx` of `rec` (`None` if the column is absent or
/// the cell empty), or the column and why it is bad.
#[inline(always)]
fn float_cell(
    rec: &::csv::ByteRecord,
    idx: Option<usize>,
    col: &'static str,
) -> Result<Option<f32>, (&'static str, String)> {
    let Some(i) = idx else { return Ok(None) };
    let cell = unquote(rec.get(i).unwrap_or(b""));
    if cell.is_empty() {
        return Ok(None);
    }
    match parse_f32(cell) {
        Some(v) => Ok(Some(v)),
        None => Err(bad_float(col, cell)),
    }
}

#[cold]
#[inline(never)]
fn bad_float(col: &'static str, cell: &[u8]) -> (&'static str, String) {
    (col, format!("'{}' is not a number", show(cell)))
}

/// Offset in the CSV parser's input of the last byte of the row just read.
/// (A row's own recorded position is where the parser started looking for
/// it, before skipping blank and comment lines.)
fn last_byte<R: Read>(rdr: &::csv::Reader<R>) -> u64 {
    rdr.position().byte().saturating_sub(1)
}

/// A CSV parser error (`at`: the last byte read) as a CLI error, and
/// whether the stream must end.
fn csv_error<R>(name: &str, lines: &LineLimit<R>, at: u64, e: ::csv::Error) -> (CliError, bool) {
    match e.kind() {
        ::csv::ErrorKind::UnequalLengths {
            expected_len, len, ..
        } => {
            let line = lines.line_of(at);
            (
                CliError::Input(format!(
                    "{name}:{line}: row has {len} cell{}, the header row has {expected_len}",
                    plural(*len)
                )),
                false,
            )
        }
        ::csv::ErrorKind::Io(io) => {
            if let Some(long) = io.get_ref().and_then(|x| x.downcast_ref::<LineTooLong>()) {
                (CliError::Input(format!("{name}:{long}")), true)
            } else {
                (CliError::Io(format!("{name}: cannot read: {io}")), true)
            }
        }
        _ => (
            CliError::Input(format!("{name}: {}", printable(&e.to_string()))),
            true,
        ),
    }
}

/// What the comment lines before the header row said.
struct Preamble {
    header: Option<LogHeader>,
    status: HeaderStatus,
    /// Lines read.
    lines: u64,
    /// Lines of `# headroom-log` blocks after the first (at most
    /// [`super::HEADER_EVENT_DETAIL`]: the preamble is short).
    late_blocks: Vec<u64>,
}

/// Read the `#` comment lines before the header row; parse a header block.
/// A line of the block that does not read (a bad value) damages the header:
/// the other lines are still read, and the status says which line.
fn read_preamble<R: Read>(name: &str, input: &mut BufReader<R>) -> CliResult<Preamble> {
    let mut header: Option<LogHeader> = None;
    let mut status = HeaderStatus::Absent;
    let mut late_blocks = Vec::new();
    let mut in_block = false;
    let mut rates: Vec<headroom::rate::Rate> = Vec::new();
    let mut lines = 0u64;
    let mut total = 0usize;
    let mut line = Vec::with_capacity(128);
    loop {
        let first = match input.fill_buf() {
            Ok(b) => b.first().copied(),
            Err(e) => return Err(CliError::Io(format!("{name}: cannot read: {e}"))),
        };
        if first != Some(b'#') {
            break;
        }
        line.clear();
        let n = (&mut *input)
            .take(MAX_LINE as u64 + 1)
            .read_until(b'\n', &mut line)
            .map_err(|e| CliError::Io(format!("{name}: cannot read: {e}")))?;
        lines += 1;
        total += n;
        if line.len() > MAX_LINE {
            return Err(CliError::Input(format!(
                "{name}:{lines}: line is longer than {MAX_LINE} bytes"
            )));
        }
        if total > MAX_PREAMBLE {
            return Err(CliError::Input(format!(
                "{name}:{lines}: comment block before the header row is longer than {MAX_PREAMBLE} bytes"
            )));
        }
        let text = String::from_utf8_lossy(&line);
        let text = text.trim_start_matches('#').trim();
        if let Some(rest) = text
            .strip_prefix(MAGIC)
            .filter(|r| r.is_empty() || r.starts_with(char::is_whitespace))
        {
            if header.is_some() {
                // A second block: its lines are not read into the first.
                if late_blocks.len() < super::HEADER_EVENT_DETAIL {
                    late_blocks.push(lines);
                }
                in_block = false;
                continue;
            }
            let version = rest.trim();
            if let Some(major) = version.split('.').next().filter(|m| !m.is_empty()) {
                if major != "1" {
                    return Err(CliError::Input(format!(
                        "{name}:{lines}: {MAGIC} version {} is not supported (this build reads 1.x)",
                        show(version.as_bytes())
                    )));
                }
            }
            header = Some(LogHeader::default());
            status = HeaderStatus::Present;
            in_block = true;
            continue;
        }
        if let (Some(h), true) = (header.as_mut(), in_block) {
            if let Some(value) = rate_line(text) {
                // A rate table decides every result across rates: a bad
                // line is an error, not a damaged header read without it.
                let rate = crate::rates::parse_line(value)
                    .map_err(|why| CliError::Input(format!("{name}:{lines}: rate line: {why}")))?;
                rates.push(rate);
                // Checked at each line, so the line that breaks it is named.
                h.rates = headroom::rate::RateTable::new(&rates)
                    .map_err(|why| CliError::Input(format!("{name}:{lines}: rate line: {why}")))?;
                continue;
            }
            if let Err(why) = parse_header_line(text, h) {
                if matches!(status, HeaderStatus::Present) {
                    status = HeaderStatus::Damaged {
                        why: format!("line {lines}: header block damaged: {why}"),
                    };
                }
            }
        }
    }
    Ok(Preamble {
        header,
        status,
        lines,
        late_blocks,
    })
}

/// The value of a `rate: ...` header line (the key in any case).
fn rate_line(text: &str) -> Option<&str> {
    let (key, value) = text.split_once(':')?;
    key.trim().eq_ignore_ascii_case("rate").then_some(value)
}

/// Read one `key: value` line of a header block into `h`; lines without a
/// `:` are comments, unknown keys belong to newer versions: both ignored.
fn parse_header_line(text: &str, h: &mut LogHeader) -> Result<(), String> {
    let Some((key, value)) = text.split_once(':') else {
        return Ok(());
    };
    let (key, value) = (key.trim(), value.trim());
    let bad = |what: &str| {
        format!(
            "{}: '{}' is not {what}",
            show(key.as_bytes()),
            show(value.as_bytes())
        )
    };
    let float = || -> Result<Option<f32>, String> {
        if value.is_empty() {
            return Ok(None);
        }
        match value.parse::<f32>() {
            Ok(v) if v.is_finite() => Ok(Some(v)),
            _ => Err(bad("a finite number")),
        }
    };
    let int = || value.parse::<u64>().map_err(|_| bad("a whole number"));
    match key {
        "device_id" => h.device_id = int()?,
        "epoch_ms" => h.epoch_ms = int()?,
        "min_tx_dbm" => h.min_tx = float()?.map(Dbm),
        "max_tx_dbm" => h.max_tx = float()?.map(Dbm),
        "tx_step_db" => h.tx_step = float()?.map(Db),
        "antenna_gain_dbi" => h.antenna_gain = float()?.map(Dbi),
        "required_snr_db" => h.required_snr = float()?.map(Db),
        "eirp_cap_dbm" => h.eirp_cap = float()?.map(Dbm),
        // Keys of newer versions are ignored.
        _ => {}
    }
    Ok(())
}

/// The column of each field: under the name a `--column` mapping gives it,
/// else under its own name (any case). With `require_readings`, a log
/// without `tx_dbm`, `rssi_dbm`, or either of `noise_dbm` and `snr_db` is
/// refused, naming the column.
fn find_columns(
    name: &str,
    line: u64,
    names: &::csv::ByteRecord,
    opts: &ReadOptions,
) -> CliResult<(Columns, [Option<String>; 4])> {
    let mut wanted: Vec<(Field, String)> = Field::ALL
        .into_iter()
        .map(|f| (f, f.name().to_string()))
        .collect();
    let mut mapped: Vec<Field> = Vec::new();
    for m in &opts.columns {
        if mapped.contains(&m.field) {
            return Err(CliError::arg(
                "--column",
                format!("{} is mapped twice", m.field.name()),
            ));
        }
        mapped.push(m.field);
        if let Some(w) = wanted.iter_mut().find(|(f, _)| *f == m.field) {
            w.1.clone_from(&m.column);
        }
    }
    let mut found: [Option<usize>; 6] = [None; 6];
    for (i, cell) in names.iter().enumerate() {
        let cell = unquote(cell);
        for (k, (_, col)) in wanted.iter().enumerate() {
            if cell.eq_ignore_ascii_case(col.as_bytes()) {
                if let Some(slot) = found.get_mut(k) {
                    if slot.is_some() {
                        return Err(CliError::Input(format!(
                            "{name}:{line}: column {} appears twice",
                            printable(col)
                        )));
                    }
                    *slot = Some(i);
                }
            }
        }
    }
    let seen = || {
        let mut shown: Vec<String> = names
            .iter()
            .take(SHOWN_CELLS)
            .map(|c| show(unquote(c)))
            .collect();
        if names.len() > SHOWN_CELLS {
            shown.push(format!("and {} more", names.len() - SHOWN_CELLS));
        }
        shown.join(", ")
    };
    let missing = |fields: &[Field]| {
        let want: Vec<String> = fields
            .iter()
            .map(|f| {
                let col = wanted
                    .iter()
                    .find(|(g, _)| g == f)
                    .map_or(f.name(), |(_, c)| c.as_str());
                if col == f.name() {
                    col.to_string()
                } else {
                    format!("{} (as {})", printable(col), f.name())
                }
            })
            .collect();
        let maps: Vec<String> = fields
            .iter()
            .map(|f| format!("--column {}=NAME", f.name()))
            .collect();
        CliError::Input(format!(
            "{name}:{line}: missing required column {} (accepted names: {}, or name yours with {}; the header row has: {})",
            want.join(" or "),
            fields.iter().map(|f| f.name()).collect::<Vec<_>>().join(", "),
            maps.join(" or "),
            seen()
        ))
    };
    let [t, tx, rssi, noise, snr, rate] = found;
    let Some(t) = t else {
        return Err(missing(&[Field::TMs]));
    };
    if opts.require_readings {
        if tx.is_none() {
            return Err(missing(&[Field::TxDbm]));
        }
        if rssi.is_none() {
            return Err(missing(&[Field::RssiDbm]));
        }
        if noise.is_none() && snr.is_none() {
            return Err(missing(&[Field::NoiseDbm, Field::SnrDb]));
        }
    }
    let col_name = |i: Option<usize>| i.and_then(|i| names.get(i)).map(|c| show(unquote(c)));
    Ok((
        Columns {
            t,
            tx,
            rssi,
            noise,
            snr,
            rate,
        },
        [col_name(tx), col_name(rssi), col_name(noise), col_name(snr)],
    ))
}

/// A cell without surrounding ASCII whitespace and one surrounding pair of
/// double quotes. (Trimming here rather than in the CSV parser, whose
/// trimming allocates a record per row.)
fn unquote(cell: &[u8]) -> &[u8] {
    let cell = cell.trim_ascii();
    match cell {
        [b'"', inner @ .., b'"'] => inner,
        _ => cell,
    }
}

/// A cell for an error message: text, at most 40 characters, control
/// characters escaped (and at most 80 characters once escaped).
fn show(cell: &[u8]) -> String {
    let s = String::from_utf8_lossy(cell);
    let cut: String = s.chars().take(40).collect();
    let mut out = printable(&cut);
    let long = cut.len() < s.len();
    if out.chars().count() > 80 {
        out = out.chars().take(80).collect();
        out.push_str("...");
    } else if long {
        out.push_str("...");
    }
    out
}

/// Header-row cells named in a message: the first 10, then how many more.
const SHOWN_CELLS: usize = 10;

/// A whole number of digits, no sign; `None` if not or if it overflows.
pub(super) fn parse_u64(s: &[u8]) -> Option<u64> {
    if s.is_empty() || s.len() > 20 {
        return None;
    }
    let mut v: u64 = 0;
    for &b in s {
        let d = b.wrapping_sub(b'0');
        if d > 9 {
            return None;
        }
        v = v.checked_mul(10)?.checked_add(u64::from(d))?;
    }
    Some(v)
}

/// Powers of ten that are exact in f32 (5^10 < 2^24).
const POW10: [f32; 11] = [1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10];

/// A decimal number (or `nan`, `inf`, `infinity` in any case, signed) as the
/// nearest f32.
///
/// Fast path: a plain decimal whose digits make an integer `m <= 2^24` and
/// with at most 10 fraction digits is `m / 10^k` with both operands exact in f32,
/// so the single IEEE division is correctly rounded (Clinger's fast path).
/// Anything else goes to the standard library's correctly rounded parser.
#[inline]
pub(super) fn parse_f32(s: &[u8]) -> Option<f32> {
    let (neg, digits) = match s.split_first() {
        Some((b'-', rest)) => (true, rest),
        Some((b'+', rest)) => (false, rest),
        _ => (false, s),
    };
    match fast_decimal(digits) {
        Some(v) => Some(if neg { -v } else { v }),
        None => parse_f32_std(s),
    }
}

/// The standard library's parser, out of line so that the fast path stays
/// small enough to inline into the row loop.
#[cold]
#[inline(never)]
fn parse_f32_std(s: &[u8]) -> Option<f32> {
    std::str::from_utf8(s).ok()?.parse::<f32>().ok()
}

/// `digits` (no sign) as `m / 10^k` if they are a plain decimal (digits,
/// at most one `.`, at least one digit) with `m <= 2^24` and `k <= 10`;
/// `None` for anything else. The whole and the fraction digits in two
/// loops, so that the digit loop does not test for the point.
#[inline]
fn fast_decimal(digits: &[u8]) -> Option<f32> {
    /// Digits from the front of `rest` into `mant`; `None` once `mant`
    /// passes 2^24 (no longer exact in f32).
    fn take_digits<'a>(mut rest: &'a [u8], mant: &mut u32) -> Option<&'a [u8]> {
        while let [b, tail @ ..] = rest {
            let d = b.wrapping_sub(b'0');
            if d > 9 {
                break;
            }
            // *mant <= 2^24 before this digit, so no overflow.
            *mant = *mant * 10 + u32::from(d);
            if *mant > 1 << 24 {
                return None;
            }
            rest = tail;
        }
        Some(rest)
    }
    let mut mant: u32 = 0;
    let rest = take_digits(digits, &mut mant)?;
    let whole = digits.len() - rest.len();
    let (rest, frac) = match rest {
        [b'.', tail @ ..] => {
            let after = take_digits(tail, &mut mant)?;
            (after, tail.len() - after.len())
        }
        _ => (rest, 0),
    };
    if !rest.is_empty() || whole + frac == 0 {
        return None;
    }
    let p = POW10.get(frac)?;
    #[allow(clippy::cast_precision_loss)] // mant <= 2^24: exact
    Some(mant as f32 / p)
}

/// Writes records as CSV rows.
pub(super) struct CsvEncoder {
    line: Vec<u8>,
    /// The header's rate table: a `rate` column by name when not empty.
    rates: headroom::rate::RateTable,
}

impl CsvEncoder {
    pub(super) fn new() -> Self {
        CsvEncoder {
            line: Vec::with_capacity(256),
            rates: headroom::rate::RateTable::empty(),
        }
    }

    pub(super) fn start(
        &mut self,
        out: &mut dyn Write,
        header: Option<&LogHeader>,
    ) -> io::Result<()> {
        if let Some(h) = header.filter(|h| **h != LogHeader::default()) {
            writeln!(out, "# {MAGIC} {VERSION}")?;
            writeln!(out, "# device_id: {}", h.device_id)?;
            writeln!(out, "# epoch_ms: {}", h.epoch_ms)?;
            if let Some(v) = h.min_tx {
                writeln!(out, "# min_tx_dbm: {}", v.0)?;
            }
            if let Some(v) = h.max_tx {
                writeln!(out, "# max_tx_dbm: {}", v.0)?;
            }
            if let Some(v) = h.tx_step {
                writeln!(out, "# tx_step_db: {}", v.0)?;
            }
            if let Some(v) = h.antenna_gain {
                writeln!(out, "# antenna_gain_dbi: {}", v.0)?;
            }
            if let Some(v) = h.required_snr {
                writeln!(out, "# required_snr_db: {}", v.0)?;
            }
            if let Some(v) = h.eirp_cap {
                writeln!(out, "# eirp_cap_dbm: {}", v.0)?;
            }
            for r in h.rates.as_slice() {
                writeln!(out, "# rate: {}", crate::rates::format_line(r))?;
            }
            self.rates = h.rates;
        }
        let mut names = COLUMNS.map(Field::name).join(",");
        if !self.rates.is_empty() {
            names.push(',');
            names.push_str(Field::Rate.name());
        }
        writeln!(out, "{names}")
    }

    pub(super) fn write(&mut self, out: &mut dyn Write, r: &LogRecord) -> io::Result<()> {
        let line = &mut self.line;
        line.clear();
        write!(line, "{}", r.t_ms)?;
        for v in [r.tx_dbm, r.rssi_dbm, r.noise_dbm] {
            line.push(b',');
            if let Some(v) = v {
                // Display prints the shortest digits that read back to the
                // same f32 (`NaN`, `inf`, `-inf` for the others).
                write!(line, "{v}")?;
            }
        }
        if let Some(i) = r.rate {
            let Some(rate) = self.rates.get(i) else {
                return Err(io::Error::new(
                    io::ErrorKind::InvalidData,
                    format!(
                        "record at t_ms {} names rate {i}, which the header's table of {} rate{} does not have",
                        r.t_ms,
                        self.rates.len(),
                        if self.rates.len() == 1 { "" } else { "s" }
                    ),
                ));
            };
            line.push(b',');
            line.extend_from_slice(rate.name.as_str().as_bytes());
        } else if !self.rates.is_empty() {
            line.push(b',');
        }
        line.push(b'\n');
        out.write_all(line)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fast_path_matches_std() {
        for s in [
            "0",
            "-0",
            "1",
            "-87.5",
            "14.25",
            "0.1",
            "123456.7",
            "16777216",
            "16777217",
            "1.0000001",
            "0.0000000001",
            "0.00000000001",
            "3.4028235e38",
            ".5",
            "5.",
            "-.25",
            "1e3",
            "nan",
            "-inf",
            "Infinity",
            "NaN",
            "+7",
        ] {
            let ours = parse_f32(s.as_bytes());
            let std = s.parse::<f32>().ok();
            match (ours, std) {
                (Some(a), Some(b)) if a.is_nan() && b.is_nan() => {}
                (a, b) => assert_eq!(a.map(f32::to_bits), b.map(f32::to_bits), "{s}"),
            }
        }
        for s in ["", "-", ".", "1.2.3", "abc", "1,5", "--1"] {
            assert_eq!(parse_f32(s.as_bytes()), s.parse::<f32>().ok(), "{s}");
        }
    }

    /// `parse_f32` and `str::parse::<f32>` agree bit for bit (NaN with NaN).
    fn same_as_std(s: &str) -> Result<(), proptest::test_runner::TestCaseError> {
        let ours = parse_f32(s.as_bytes());
        let std = s.parse::<f32>().ok();
        match (ours, std) {
            (Some(a), Some(b)) if a.is_nan() && b.is_nan() => Ok(()),
            (a, b) => {
                proptest::prop_assert_eq!(a.map(f32::to_bits), b.map(f32::to_bits), "{}", s);
                Ok(())
            }
        }
    }

    #[test]
    fn fast_path_stops_above_two_to_the_24() {
        // 16777219 is not an f32: read as such and divided by 10 it gave
        // 1677722 instead of 1677721.875.
        for s in [
            "1677721.9",
            "1677721.7",
            "-16777.219",
            "167772.17",
            "16777217",
            "1.6777219",
        ] {
            same_as_std(s).unwrap();
        }
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(20_000))]

        #[test]
        fn parse_f32_is_std_on_random_decimals(
            s in "[+-]?[0-9]{0,12}(\\.[0-9]{0,12})?([eE][+-]?[0-9]{1,2})?"
        ) {
            same_as_std(&s)?;
        }

        #[test]
        fn parse_f32_is_std_near_the_fast_path_limits(
            m in proptest::prop_oneof![0u64..=(1u64 << 26), ((1u64 << 24) - 200)..=((1u64 << 24) + 200)],
            frac in 0usize..=12,
            neg in proptest::bool::ANY,
            lead in 0usize..=3,
        ) {
            // m with a decimal point `frac` digits from the right, and
            // leading zeros: mantissas on both sides of 2^24, fraction
            // lengths on both sides of 10.
            let digits = format!("{}{m:0>w$}", "0".repeat(lead), w = frac + 1);
            let (int, fr) = digits.split_at(digits.len() - frac);
            let s = format!("{}{int}{}{fr}", if neg { "-" } else { "" }, if frac > 0 { "." } else { "" });
            same_as_std(&s)?;
        }

        #[test]
        fn parse_f32_is_std_on_any_short_text(s in "[0-9.eE+-]{0,10}|[ -~]{0,8}") {
            same_as_std(&s)?;
        }
    }

    #[test]
    fn fast_path_exhaustive_small_decimals() {
        // Every value with up to 3 fraction digits in -200..200 against std.
        for m in -200_000i32..=200_000 {
            let s = format!("{}.{:03}", m / 1000, (m % 1000).abs());
            let s = if m < 0 && m > -1000 {
                format!("-{s}")
            } else {
                s
            };
            let ours = parse_f32(s.as_bytes()).map(f32::to_bits);
            assert_eq!(ours, s.parse::<f32>().ok().map(f32::to_bits), "{s}");
        }
    }

    #[test]
    fn line_limit_finds_the_long_line_in_any_chunking() {
        let mut text = Vec::new();
        for i in 0..3000 {
            text.extend_from_slice(format!("{i},1\n").as_bytes());
        }
        let long_at = text.len();
        text.extend(std::iter::repeat_n(b'9', MAX_LINE + 1));
        text.extend_from_slice(b"\n1,2\n");
        for chunk in [1usize, 7, 100, 4096, 65536] {
            let mut r = LineLimit::new(&text[..], 0);
            let mut got = 0usize;
            let mut buf = vec![0u8; chunk];
            let err = loop {
                match r.read(&mut buf) {
                    Ok(0) => panic!("no error, chunk {chunk}"),
                    Ok(n) => got += n,
                    Err(e) => break e,
                }
            };
            // Every byte before the long line was passed on.
            assert!(got >= long_at, "chunk {chunk}: {got} < {long_at}");
            let long = err
                .get_ref()
                .and_then(|x| x.downcast_ref::<LineTooLong>())
                .map(|l| l.line);
            assert_eq!(long, Some(3001), "chunk {chunk}");
        }
        // Exactly MAX_LINE bytes is fine.
        let mut ok = vec![b'5'; MAX_LINE];
        ok.push(b'\n');
        let mut r = LineLimit::new(&ok[..], 0);
        let mut sink = Vec::new();
        assert_eq!(r.read_to_end(&mut sink).unwrap(), MAX_LINE + 1);
    }

    #[test]
    fn late_header_blocks_are_found_in_any_chunking() {
        let mut text = b"t_ms,tx_dbm\n".to_vec();
        for i in 0..500 {
            text.extend_from_slice(format!("{i},1\n").as_bytes());
            if i % 100 == 99 {
                text.extend_from_slice(b"# headroom-log 1.1\n# max_tx_dbm: 20\n");
            }
        }
        // Lines of the blocks: 1 header row, then 100 rows and 2 lines each.
        let want: Vec<u64> = (0..5u64).map(|k| 2 + 100 * (k + 1) + 2 * k).collect();
        struct Trickle<'a>(&'a [u8], usize);
        impl Read for Trickle<'_> {
            fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
                let n = self.1.min(buf.len()).min(self.0.len());
                buf[..n].copy_from_slice(&self.0[..n]);
                self.0 = &self.0[n..];
                Ok(n)
            }
        }
        for chunk in [1usize, 2, 5, 7, 13, 14, 15, 16, 64, 4096] {
            let mut r = LineLimit::new(Trickle(&text, chunk), 0);
            let mut sink = Vec::new();
            r.read_to_end(&mut sink).unwrap();
            assert_eq!(sink, text);
            assert_eq!(r.late_blocks, want, "chunk {chunk}");
            assert_eq!(r.late_block_count, 5);
        }
    }

    #[test]
    fn u64_cells() {
        assert_eq!(parse_u64(b"0"), Some(0));
        assert_eq!(parse_u64(b"18446744073709551615"), Some(u64::MAX));
        assert_eq!(parse_u64(b"18446744073709551616"), None);
        assert_eq!(parse_u64(b"-1"), None);
        assert_eq!(parse_u64(b"1.5"), None);
        assert_eq!(parse_u64(b""), None);
    }
}
