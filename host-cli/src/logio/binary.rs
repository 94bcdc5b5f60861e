//! Binary logs: the engine's frame codec over a file, streaming.

use std::fs::File;
use std::io::{self, Read, Write};

use headroom::record::codec::{CodecError, Encoder, Event, Frame, FrameDecoder, MAX_FRAME};

use super::{Damage, LogHeader, LogRecord};
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
    file: File,
    buf: Box<[u8]>,
    at: usize,
    end: usize,
    eof: bool,
    done: bool,
    dec: Box<FrameDecoder>,
    header: Option<LogHeader>,
    /// Sequence number of the last intact frame.
    last_seq: Option<u16>,
    open: Option<OpenDamage>,
    damage: Vec<Damage>,
    other: u64,
    strict: bool,
    /// Whether the damage found while opening was given as a strict error.
    strict_reported: bool,
    /// A record read while opening (a log without a header frame).
    first: Option<LogRecord>,
}

impl BinaryReader {
    pub(super) fn new(name: String, file: File) -> CliResult<Self> {
        let mut r = BinaryReader {
            name,
            file,
            buf: vec![0u8; CHUNK].into_boxed_slice(),
            at: 0,
            end: 0,
            eof: false,
            done: false,
            dec: Box::new(FrameDecoder::new()),
            header: None,
            last_seq: None,
            open: None,
            damage: Vec::new(),
            other: 0,
            strict: false,
            strict_reported: false,
            first: None,
        };
        // Read up to the first intact frame, to know the header.
        if let Some(first) = r.next_inner(true) {
            r.first = Some(first?);
        }
        Ok(r)
    }

    pub(super) fn header(&self) -> Option<&LogHeader> {
        self.header.as_ref()
    }

    pub(super) fn damage(&self) -> &[Damage] {
        &self.damage
    }

    pub(super) fn other_frames(&self) -> u64 {
        self.other
    }

    pub(super) fn set_strict(&mut self, strict: bool) {
        self.strict = strict;
    }

    pub(super) fn next(&mut self) -> Option<CliResult<LogRecord>> {
        if let Some(r) = self.first.take() {
            return Some(Ok(r));
        }
        // Damage found while opening, before strict mode could be set (the
        // stream may have ended there already: a file with no intact frame).
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
                Some(Event::Frame { seq, frame, .. }) => {
                    let after_header = matches!(frame, Frame::Header { .. });
                    self.close_damage(Some((seq, after_header)));
                    self.last_seq = Some(seq);
                    match frame {
                        Frame::Header { header, .. } => {
                            if self.header.is_none() {
                                self.header = Some(header);
                            } else {
                                self.other += 1;
                            }
                            if opening {
                                return None;
                            }
                        }
                        Frame::Record(r) => return Some(Ok(r)),
                        Frame::Decision(_) | Frame::Other { .. } => {
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

    fn refill(&mut self) -> CliResult {
        if self.eof {
            return Ok(());
        }
        self.at = 0;
        self.end = 0;
        loop {
            match self.file.read(&mut self.buf) {
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
        let mut why = o.why.to_string();
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
        self.damage.push(Damage {
            byte_offset: o.start,
            frames_skipped: frames,
            bytes_skipped: bytes,
            why,
        });
    }
}

/// Writes records as frames; a header frame first.
pub(super) struct BinaryEncoder {
    enc: Encoder,
    buf: [u8; MAX_FRAME],
}

fn codec_io(e: CodecError) -> io::Error {
    io::Error::other(e.to_string())
}

impl BinaryEncoder {
    pub(super) fn new() -> Self {
        BinaryEncoder {
            enc: Encoder::new(),
            buf: [0; MAX_FRAME],
        }
    }

    pub(super) fn start(
        &mut self,
        out: &mut dyn Write,
        header: Option<&LogHeader>,
    ) -> io::Result<()> {
        let h = header.copied().unwrap_or_default();
        let frame = self.enc.header(&h, &mut self.buf).map_err(codec_io)?;
        out.write_all(frame)
    }

    pub(super) fn write(&mut self, out: &mut dyn Write, r: &LogRecord) -> io::Result<()> {
        let frame = self.enc.record(r, &mut self.buf).map_err(codec_io)?;
        out.write_all(frame)
    }
}
