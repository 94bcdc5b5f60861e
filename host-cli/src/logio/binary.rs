//! Binary logs: the engine's frame codec over a byte stream, read once.

use std::io::{self, Read, Write};

use headroom::record::codec::{
    BlockEncoder, CodecError, Encoder, Event, Frame, FrameDecoder, MAX_FRAME,
};

use super::BinaryVersion;
use super::{
    header_differences, plural, Damage, DamageSummary, HeaderEvent, HeaderStatus, LogHeader,
    LogRecord, DAMAGE_DETAIL, HEADER_EVENT_DETAIL,
};
use crate::error::{CliError, CliResult};

/// Size of the read buffer.
const CHUNK: usize = 256 * 1024;
/// Smallest frame on the wire (kind, seq, CRC, COBS code, delimiter).
const MIN_WIRE_FRAME: u64 = 9;

/// A damaged region still being extended.
struct OpenDamage {
    start: u64,
    end: u64,
    pieces: u64,
    why: CodecError,
}

pub(super) struct BinaryReader {
    name: String,
    input: Box<dyn Read + Send>,
    buf: Box<[u8]>,
    at: usize,
    end: usize,
    eof: bool,
    done: bool,
    dec: Box<FrameDecoder>,
    header: Option<LogHeader>,
    status: HeaderStatus,
    /// Sequence number of the last intact frame.
    last_seq: Option<u16>,
    open: Option<OpenDamage>,
    /// The first [`DAMAGE_DETAIL`] regions.
    damage: Vec<Damage>,
    summary: DamageSummary,
    /// The first [`HEADER_EVENT_DETAIL`] header events, and how many there
    /// were.
    header_events: Vec<HeaderEvent>,
    header_event_count: u64,
    frames: u64,
    records: u64,
    /// Records with a `tx_dbm`, `rssi_dbm`, `noise_dbm`.
    filled: [u64; 3],
    other: u64,
    strict: bool,
    /// Whether the damage found while opening was given as a strict error.
    strict_reported: bool,
    /// A record read while opening (a log without a header frame).
    first: Option<LogRecord>,
    /// Whether the stream ended at a header of another major version.
    refused_version: bool,
}

impl BinaryReader {
    pub(super) fn new(name: String, input: Box<dyn Read + Send>, strict: bool) -> CliResult<Self> {
        let mut r = BinaryReader {
            name,
            input,
            buf: vec![0u8; CHUNK].into_boxed_slice(),
            at: 0,
            end: 0,
            eof: false,
            done: false,
            dec: Box::new(FrameDecoder::new()),
            header: None,
            status: HeaderStatus::Absent,
            last_seq: None,
            open: None,
            damage: Vec::new(),
            summary: DamageSummary::default(),
            header_events: Vec::new(),
            header_event_count: 0,
            frames: 0,
            records: 0,
            filled: [0; 3],
            other: 0,
            strict,
            strict_reported: false,
            first: None,
            refused_version: false,
        };
        // Read up to the first intact frame, to know the header.
        let first = match r.next_inner(true) {
            Some(Err(e)) if strict && r.frames == 0 && !r.refused_version => {
                // Damage before any intact frame: where the header is.
                return Err(CliError::Input(format!(
                    "{e} (the header frame is lost or damaged: --strict reads a log only with its header)"
                )));
            }
            Some(first) => Some(first?),
            None => None,
        };
        r.first = first;
        if r.frames == 0 && r.summary.regions == 0 && r.open.is_none() {
            let n = r.dec.position();
            return Err(CliError::Input(if n == 0 {
                format!("{}: empty log (0 bytes)", r.name)
            } else {
                format!(
                    "{}: {n} byte{}, all zero: no frame (is it a headroom log?)",
                    r.name,
                    plural(n)
                )
            }));
        }
        if strict {
            if let HeaderStatus::Damaged { why } = &r.status {
                return Err(CliError::Input(format!(
                    "{}: {why} (--strict reads a log only with its header)",
                    r.name
                )));
            }
        }
        Ok(r)
    }

    pub(super) fn header(&self) -> Option<&LogHeader> {
        self.header.as_ref()
    }

    pub(super) fn header_status(&self) -> &HeaderStatus {
        &self.status
    }

    pub(super) fn damage(&self) -> &[Damage] {
        &self.damage
    }

    pub(super) fn damage_summary(&self) -> &DamageSummary {
        &self.summary
    }

    pub(super) fn header_events(&self) -> &[HeaderEvent] {
        &self.header_events
    }

    pub(super) fn other_frames(&self) -> u64 {
        self.other
    }

    pub(super) fn records_read(&self) -> u64 {
        self.records
    }

    pub(super) fn set_strict(&mut self, strict: bool) {
        self.strict = strict;
    }

    pub(super) fn warnings(&self) -> Vec<String> {
        let name = &self.name;
        let mut out = Vec::new();
        if let HeaderStatus::Damaged { why } = &self.status {
            out.push(format!(
                "{name}: {why}: the log's header is unknown (device facts not read)"
            ));
        }
        for d in &self.damage {
            out.push(format!("{name}: {d}"));
        }
        let s = &self.summary;
        if s.regions > self.damage.len() as u64 {
            let kinds: Vec<String> = s.by_kind.iter().map(|(k, n)| format!("{n} {k}")).collect();
            out.push(format!(
                "{name}: {} damaged regions in all ({} bytes, {} frames lost; the first {} shown; by first fault: {})",
                s.regions,
                s.bytes,
                s.frames_lost,
                self.damage.len(),
                kinds.join(", ")
            ));
        }
        for e in &self.header_events {
            out.push(format!("{name}: {e}"));
        }
        if self.header_event_count > self.header_events.len() as u64 {
            out.push(format!(
                "{name}: {} header frames after the first in all (the first {} shown)",
                self.header_event_count,
                self.header_events.len()
            ));
        }
        if self.done && self.records == 0 {
            out.push(format!("{name}: the log holds no record"));
        } else if self.done {
            for (n, f) in self.filled.iter().zip(["tx_dbm", "rssi_dbm", "noise_dbm"]) {
                if *n == 0 {
                    out.push(format!(
                        "{name}: {f} is absent in all {} records",
                        self.records
                    ));
                }
            }
        }
        out
    }

    pub(super) fn next(&mut self) -> Option<CliResult<LogRecord>> {
        if let Some(r) = self.first.take() {
            return Some(Ok(r));
        }
        // Damage found while opening, before strict mode could be set with
        // `set_strict` (the stream may have ended there already: a file
        // with no intact frame).
        if self.strict && !self.strict_reported {
            if let Some(d) = self.damage.first() {
                self.strict_reported = true;
                self.done = true;
                return Some(Err(CliError::Input(format!("{}: {d}", self.name))));
            }
        }
        self.next_inner(false)
    }

    /// The next record; with `opening`, stop at the first intact frame of
    /// any kind (returning `None` unless it is a record).
    fn next_inner(&mut self, opening: bool) -> Option<CliResult<LogRecord>> {
        loop {
            if self.done {
                return None;
            }
            let mut input = self.buf.get(self.at..self.end).unwrap_or(&[]);
            let before = input.len();
            let ev = if input.is_empty() && self.eof {
                match self.dec.finish() {
                    Some(ev) => Some(ev),
                    None => {
                        self.done = true;
                        self.close_damage(None);
                        if self.frames == 0 && self.summary.regions > 0 {
                            self.status = HeaderStatus::Damaged {
                                why: "no intact frame: the header frame is lost".into(),
                            };
                        }
                        return None;
                    }
                }
            } else {
                self.dec.feed(&mut input)
            };
            self.at += before - input.len();
            match ev {
                None => {
                    if let Err(e) = self.refill() {
                        self.done = true;
                        return Some(Err(e));
                    }
                }
                Some(Event::Damaged { offset, len, error }) => {
                    if let CodecError::UnknownVersion { .. } = error {
                        self.done = true;
                        self.refused_version = true;
                        return Some(Err(CliError::Input(format!(
                            "{}: byte {offset}: {error}",
                            self.name
                        ))));
                    }
                    if self.strict {
                        self.done = true;
                        return Some(Err(CliError::Input(format!(
                            "{}: byte {offset}: damaged ({error})",
                            self.name
                        ))));
                    }
                    match &mut self.open {
                        Some(o) if o.end == offset => {
                            o.end = offset + len;
                            o.pieces += 1;
                        }
                        _ => {
                            self.close_damage(None);
                            self.open = Some(OpenDamage {
                                start: offset,
                                end: offset + len,
                                pieces: 1,
                                why: error,
                            });
                        }
                    }
                }
                // The hot path: a record after the first frame. Matched
                // apart so that only the record is moved out of the event:
                // binding the whole `frame` copied the event (some 300 bytes,
                // for the header's rate table) at every record, 30 of the
                // 120 instructions of this function per record (callgrind).
                Some(Event::Frame {
                    seq,
                    frame: Frame::Record(r),
                    ..
                }) if self.frames != 0 => {
                    self.close_damage(Some((seq, false)));
                    self.last_seq = Some(seq);
                    self.frames += 1;
                    return Some(Ok(self.count_record(r)));
                }
                Some(Event::Frame { offset, seq, frame }) => {
                    let is_header = matches!(frame, Frame::Header { .. });
                    let first_frame = self.frames == 0;
                    if first_frame {
                        self.status = self.first_frame_status(seq, is_header);
                    }
                    self.close_damage(Some((seq, is_header)));
                    self.last_seq = Some(seq);
                    self.frames += 1;
                    match frame {
                        Frame::Header { header, .. } => {
                            if first_frame {
                                self.header = Some(header);
                            } else {
                                self.late_header(offset, &header);
                            }
                            if opening {
                                return None;
                            }
                        }
                        Frame::Record(r) => return Some(Ok(self.count_record(r))),
                        // The stream decoder hands out a block's records
                        // one by one, never the block itself.
                        Frame::Decision(_) | Frame::Other { .. } | Frame::Block(_) => {
                            self.other += 1;
                            if opening {
                                return None;
                            }
                        }
                    }
                }
            }
        }
    }

    /// Count a record read (and which readings it has); returns it.
    #[inline]
    fn count_record(&mut self, r: LogRecord) -> LogRecord {
        self.records += 1;
        for (n, v) in self
            .filled
            .iter_mut()
            .zip([r.tx_dbm, r.rssi_dbm, r.noise_dbm])
        {
            *n += u64::from(v.is_some());
        }
        r
    }

    /// The header status, told by the first intact frame (`seq`, whether it
    /// is a header) and the damage before it.
    fn first_frame_status(&self, seq: u16, is_header: bool) -> HeaderStatus {
        if is_header {
            return HeaderStatus::Present;
        }
        if seq == 0 {
            // Frame 0 is this one: the log was written without a header.
            return HeaderStatus::Absent;
        }
        // The first damage of the log, if any (all of it is before this
        // frame).
        let first_damage = match (self.damage.first(), &self.open) {
            (Some(d), _) => Some((d.byte_offset, d.why.clone())),
            (None, Some(o)) => Some((o.start, o.why.to_string())),
            (None, None) => None,
        };
        let why = match first_damage {
            Some((0, e)) => format!(
                "byte 0: the header frame is damaged ({e}); the first intact frame is frame {seq}"
            ),
            Some((at, e)) => format!(
                "byte {at}: the header frame is lost ({e}); the first intact frame is frame {seq}"
            ),
            None => format!("the log starts at frame {seq}: frame 0 (the header) is missing"),
        };
        HeaderStatus::Damaged { why }
    }

    /// A header frame after the first frame: counted, and kept in detail up
    /// to [`HEADER_EVENT_DETAIL`]. A repeat of the header in force before
    /// any record is not an event.
    fn late_header(&mut self, offset: u64, h: &LogHeader) {
        let differs = match &self.header {
            Some(first) => header_differences(first, h),
            None => Vec::new(),
        };
        if self.header.is_some() && differs.is_empty() && self.records == 0 {
            return;
        }
        self.header_event_count += 1;
        if self.header_events.len() < HEADER_EVENT_DETAIL {
            self.header_events.push(HeaderEvent {
                byte_offset: offset,
                after_records: self.records,
                differs,
                had_header: self.header.is_some(),
            });
        }
    }

    fn refill(&mut self) -> CliResult {
        if self.eof {
            return Ok(());
        }
        self.at = 0;
        self.end = 0;
        loop {
            match self.input.read(&mut self.buf) {
                Ok(0) => {
                    self.eof = true;
                    return Ok(());
                }
                Ok(n) => {
                    self.end = n;
                    return Ok(());
                }
                Err(e) if e.kind() == io::ErrorKind::Interrupted => continue,
                Err(e) => return Err(CliError::Io(format!("{}: cannot read: {e}", self.name))),
            }
        }
    }

    /// Record the open damaged region, now that the next intact frame (its
    /// sequence number, whether it is a header) or the end is known.
    /// (The test inline, the work out of line: 27 instructions fewer per
    /// record of a clean log, callgrind.)
    #[inline]
    fn close_damage(&mut self, next: Option<(u16, bool)>) {
        if self.open.is_some() {
            self.close_open_damage(next);
        }
    }

    #[cold]
    fn close_open_damage(&mut self, next: Option<(u16, bool)>) {
        let Some(o) = self.open.take() else { return };
        let bytes = o.end - o.start;
        let kind = o.why.to_string();
        let mut why = kind.clone();
        let frames = match next {
            // A header restarts the numbering: count the pieces.
            Some((_, true)) | None => o.pieces,
            Some((seq, false)) => {
                let expected = self.last_seq.map_or(0, |s| s.wrapping_add(1));
                let gap = u64::from(seq.wrapping_sub(expected));
                if bytes >= 65536 * MIN_WIRE_FRAME {
                    why.push_str(
                        " (region too long to count lost frames exactly: count is modulo 65536)",
                    );
                }
                gap
            }
        };
        let d = Damage {
            byte_offset: o.start,
            frames_skipped: frames,
            bytes_skipped: bytes,
            why,
        };
        self.summary.add(&d, kind);
        if self.damage.len() < DAMAGE_DETAIL {
            self.damage.push(d);
        }
    }
}

/// Writes records as frames; a header frame first. Format 2 (the default)
/// holds the records in blocks, so [`BinaryEncoder::finish`] writes the
/// last one.
pub(super) struct BinaryEncoder {
    enc: Versioned,
    buf: [u8; MAX_FRAME],
}

enum Versioned {
    V1(Encoder),
    V2(Box<BlockEncoder>),
}

fn codec_io(e: CodecError) -> io::Error {
    io::Error::other(e.to_string())
}

impl BinaryEncoder {
    pub(super) fn new(version: BinaryVersion) -> Self {
        BinaryEncoder {
            enc: match version {
                BinaryVersion::V1 => Versioned::V1(Encoder::new()),
                BinaryVersion::V2 => Versioned::V2(Box::new(BlockEncoder::new())),
            },
            buf: [0; MAX_FRAME],
        }
    }

    pub(super) fn start(
        &mut self,
        out: &mut dyn Write,
        header: Option<&LogHeader>,
    ) -> io::Result<()> {
        let h = header.copied().unwrap_or_default();
        let frame = match &mut self.enc {
            Versioned::V1(e) => e.header(&h, &mut self.buf),
            Versioned::V2(e) => e.header(&h, &mut self.buf),
        }
        .map_err(codec_io)?;
        out.write_all(frame)
    }

    pub(super) fn write(&mut self, out: &mut dyn Write, r: &LogRecord) -> io::Result<()> {
        let frame = match &mut self.enc {
            Versioned::V1(e) => e.record(r, &mut self.buf),
            Versioned::V2(e) => e.record(r, &mut self.buf),
        }
        .map_err(codec_io)?;
        out.write_all(frame)
    }

    /// Write the open block, if any.
    pub(super) fn finish(&mut self, out: &mut dyn Write) -> io::Result<()> {
        if let Versioned::V2(e) = &mut self.enc {
            let frame = e.flush(&mut self.buf).map_err(codec_io)?;
            out.write_all(frame)?;
        }
        Ok(())
    }
}
