//! Checks of the engine's frame codec and transmit-power controller on
//! arbitrary bytes. Each function panics (through `assert!`) when an
//! invariant breaks, and must never panic otherwise.
//!
//! This file uses only `headroom` and `std`: `tests/tests/fuzz_regressions.rs`
//! compiles it as a module to replay the kept corpus on stable.

use headroom::control::Observation;
use headroom::control::{
    Controller, ControllerConfig, Decision, EirpCap, LevelTable, Outcome, PowerSteps, Replay,
    MAX_LEVELS, SETTING_LIMIT_DB,
};
use headroom::record::codec::{
    decode_frame, encode_frame, BlockEncoder, CodecError, Decoded, Encoder, Event, Frame,
    FrameDecoder, RecordBlock, MAX_FRAME,
};
use headroom::record::{DecisionRecord, LogHeader, LogRecord};
use headroom::units::{Db, Dbi, Dbm};

/// Tolerance on powers and levels, dB: ten times the engine's grid rounding
/// tolerance (1e-4 dB), far below any real radio's step.
pub const POWER_EPS: f32 = 1e-3;

/// Most observations or frames taken from one input (keeps each run short).
const MAX_STEPS: usize = 4096;

/// The fuzz input read as a stream of small decisions; zeros once used up.
pub struct Bytes<'a> {
    data: &'a [u8],
}

impl<'a> Bytes<'a> {
    /// A reader over `data`.
    pub fn new(data: &'a [u8]) -> Self {
        Bytes { data }
    }

    /// Whether every byte has been read.
    pub fn is_empty(&self) -> bool {
        self.data.is_empty()
    }

    /// The next byte (0 at the end).
    pub fn u8(&mut self) -> u8 {
        match self.data.split_first() {
            Some((&b, rest)) => {
                self.data = rest;
                b
            }
            None => 0,
        }
    }

    /// The next two bytes, little-endian.
    pub fn u16(&mut self) -> u16 {
        u16::from_le_bytes([self.u8(), self.u8()])
    }

    /// The next four bytes, little-endian.
    pub fn u32(&mut self) -> u32 {
        u32::from_le_bytes([self.u8(), self.u8(), self.u8(), self.u8()])
    }

    /// The next eight bytes, little-endian.
    pub fn u64(&mut self) -> u64 {
        u64::from(self.u32()) | (u64::from(self.u32()) << 32)
    }

    /// True for one in `n` values of the next byte (`n` a power of two).
    pub fn one_in(&mut self, n: u8) -> bool {
        self.u8() & n.wrapping_sub(1) == 0
    }

    /// Up to `n` of the remaining bytes.
    pub fn take(&mut self, n: usize) -> &'a [u8] {
        let n = n.min(self.data.len());
        let (head, rest) = self.data.split_at(n);
        self.data = rest;
        head
    }

    /// A float near `base` (within ±32 dB in quarter steps) most of the
    /// time, sometimes any bit pattern or an edge value.
    pub fn near(&mut self, base: f32) -> f32 {
        match self.u8() % 8 {
            0 => f32::from_bits(self.u32()),
            1 => {
                const EDGE: [f32; 14] = [
                    f32::NAN,
                    f32::INFINITY,
                    f32::NEG_INFINITY,
                    0.0,
                    -0.0,
                    1e-7,
                    300.0,
                    -300.0,
                    300.001,
                    f32::MAX,
                    f32::MIN_POSITIVE,
                    1e-6,
                    0.5,
                    1.0,
                ];
                EDGE[usize::from(self.u8()) % EDGE.len()]
            }
            _ => base + f32::from(self.u8() as i8) * 0.25,
        }
    }
}

// ---------------------------------------------------------------------------
// Frame codec
// ---------------------------------------------------------------------------

/// An event in a form that compares bit for bit (NaN payloads included).
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Canon {
    /// A frame: offset, sequence number, its re-encoding.
    Frame(u64, u16, Vec<u8>),
    /// A damaged region: offset, length, error.
    Damaged(u64, u64, CodecError),
}

/// The bytes this encoder writes for `frame` with sequence number `seq`
/// (an unknown kind is represented by its kind byte alone).
fn reencode(seq: u16, frame: &Frame) -> Vec<u8> {
    match frame {
        Frame::Other { kind } => vec![*kind],
        f => {
            let mut buf = [0u8; MAX_FRAME];
            match encode_frame(seq, f, &mut buf) {
                Ok(bytes) => bytes.to_vec(),
                Err(e) => panic!("a decoded frame does not encode again: {e} ({f:?})"),
            }
        }
    }
}

fn canon(ev: &Event) -> Canon {
    match ev {
        Event::Frame { offset, seq, frame } => Canon::Frame(*offset, *seq, reencode(*seq, frame)),
        Event::Damaged { offset, len, error } => Canon::Damaged(*offset, *len, *error),
    }
}

/// Decode `stream` with a `FrameDecoder<N>`, fed in chunks whose sizes
/// come from `sizes` (cycled; 0 means the whole rest), then finish.
/// Checks the events' offsets against the stream length.
pub fn decode_stream<const N: usize>(stream: &[u8], sizes: &[u8]) -> Vec<Canon> {
    let mut dec: FrameDecoder<N> = FrameDecoder::new();
    let mut out = Vec::new();
    let mut rest = stream;
    let mut k = 0usize;
    while !rest.is_empty() {
        let size = match sizes.get(k % sizes.len().max(1)) {
            Some(&s) if s > 0 => usize::from(s),
            _ => rest.len(),
        };
        k += 1;
        let (mut chunk, tail) = rest.split_at(size.min(rest.len()));
        rest = tail;
        while let Some(ev) = dec.feed(&mut chunk) {
            out.push(canon(&ev));
        }
        assert!(chunk.is_empty(), "feed returned None with input left");
    }
    let total = stream.len() as u64;
    assert_eq!(
        dec.position(),
        total,
        "decoder position after the whole stream"
    );
    while let Some(ev) = dec.finish() {
        out.push(canon(&ev));
        assert!(out.len() <= stream.len() + 2, "finish does not stop");
    }
    let mut last = 0u64;
    for ev in &out {
        match ev {
            Canon::Frame(offset, _, bytes) => {
                assert!(*offset >= last, "events out of order: {out:?}");
                assert!(*offset < total, "frame beyond the stream");
                let _ = bytes;
                last = *offset + 1;
            }
            Canon::Damaged(offset, len, _) => {
                assert!(*offset >= last, "events out of order: {out:?}");
                assert!(*len > 0, "empty damaged region");
                assert!(
                    offset + len <= total,
                    "damage beyond the stream: {ev:?} of {total}"
                );
                last = offset + len;
            }
        }
    }
    out
}

fn frames_only(events: &[Canon]) -> Vec<Canon> {
    events
        .iter()
        .filter(|e| matches!(e, Canon::Frame(..)))
        .cloned()
        .collect()
}

/// Target `frame_decoder`: the one-frame decoder and the streaming decoder
/// on arbitrary bytes (mode 0), on clean logs built from the input (mode 1)
/// and on such logs with one corruption (mode 2).
pub fn frame_decoder(data: &[u8]) {
    let mut b = Bytes::new(data);
    match b.u8() % 3 {
        0 => raw_stream(&mut b),
        1 => clean_log(&mut b, false),
        _ => clean_log(&mut b, true),
    }
}

fn raw_stream(b: &mut Bytes<'_>) {
    let nsizes = usize::from(b.u8() % 8);
    let sizes = b.take(nsizes).to_vec();
    let stream = b.take(usize::MAX);
    // Every piece through the one-frame decoder; what decodes must encode
    // again to bytes that decode to the same thing.
    for piece in stream.split(|&x| x == 0) {
        let p = piece.to_vec();
        if let Ok(d) = decode_frame(&p) {
            check_reencode(&d);
        }
    }
    let whole = decode_stream::<MAX_FRAME>(stream, &[]);
    let chunked = decode_stream::<MAX_FRAME>(stream, &sizes);
    assert_eq!(whole, chunked, "events depend on how the stream is chunked");
    let big = decode_stream::<1024>(stream, &sizes);
    assert_eq!(
        frames_only(&whole),
        frames_only(&big),
        "a larger decoder finds other frames"
    );
    // A decoder too small for real frames must still be safe.
    let _ = decode_stream::<16>(stream, &sizes);
    let _ = decode_stream::<1>(stream, &sizes);
}

fn check_reencode(d: &Decoded) {
    if matches!(d.frame, Frame::Other { .. }) {
        return;
    }
    let e1 = reencode(d.seq, &d.frame);
    let (last, body) = e1.split_last().unwrap_or((&1, &[]));
    assert_eq!(*last, 0, "an encoded frame ends with 0x00");
    assert!(
        !body.contains(&0),
        "an encoded frame holds no 0x00 before its end"
    );
    let p = body.to_vec();
    match decode_frame(&p) {
        Ok(d2) => {
            assert_eq!(d2.seq, d.seq);
            assert_eq!(
                reencode(d2.seq, &d2.frame),
                e1,
                "decode(encode(x)) differs from x"
            );
        }
        Err(e) => panic!("a freshly encoded frame does not decode: {e}"),
    }
}

fn opt(b: &mut Bytes<'_>, base: f32) -> Option<f32> {
    if b.one_in(4) {
        None
    } else {
        Some(b.near(base))
    }
}

/// A frame of a built log: its byte range `[start, end]` in the stream
/// (`end` is the delimiter), sequence number and bytes.
type Placed = (u64, u64, u16, Vec<u8>);

/// A log built from the input and its frames.
fn build_log(b: &mut Bytes<'_>) -> (Vec<u8>, Vec<Placed>) {
    let mut enc = Encoder::new();
    let mut log = Vec::new();
    let mut frames = Vec::new();
    let mut buf = [0u8; MAX_FRAME];
    let n = usize::from(b.u8() % 64);
    let with_header = b.one_in(2);
    for i in 0..n + usize::from(with_header) {
        let seq = enc.next_seq();
        let frame = if with_header && i == 0 {
            Frame::Header {
                header: LogHeader {
                    device_id: b.u64(),
                    epoch_ms: b.u64(),
                    min_tx: opt(b, -9.0).map(Dbm),
                    max_tx: opt(b, 14.0).map(Dbm),
                    tx_step: opt(b, 1.0).map(Db),
                    antenna_gain: opt(b, 2.15).map(Dbi),
                    required_snr: opt(b, 8.0).map(Db),
                    eirp_cap: opt(b, 16.15).map(Dbm),
                    rates: headroom::rate::RateTable::empty(),
                },
                version: headroom::record::codec::VERSION,
            }
        } else if b.one_in(8) {
            Frame::Decision(DecisionRecord {
                t_ms: b.u64(),
                tx_dbm: b.near(10.0),
                outcome: b.u8(),
                reason: b.u8(),
                rate: None,
            })
        } else {
            Frame::Record(LogRecord {
                t_ms: u64::from(b.u32()),
                tx_dbm: opt(b, 10.0),
                rssi_dbm: opt(b, -90.0),
                noise_dbm: opt(b, -115.0),
                rate: None,
            })
        };
        let bytes = match enc.frame(&frame, &mut buf) {
            Ok(x) => x.to_vec(),
            Err(e) => panic!("a frame of a log does not encode: {e} ({frame:?})"),
        };
        let start = log.len() as u64;
        log.extend_from_slice(&bytes);
        frames.push((start, log.len() as u64 - 1, seq, bytes));
    }
    (log, frames)
}

fn clean_log(b: &mut Bytes<'_>, corrupt: bool) {
    let nsizes = usize::from(b.u8() % 8);
    let sizes = b.take(nsizes).to_vec();
    let (log, frames) = build_log(b);
    if !corrupt {
        let got = decode_stream::<MAX_FRAME>(&log, &sizes);
        let want: Vec<Canon> = frames
            .iter()
            .map(|(s, _, q, bytes)| Canon::Frame(*s, *q, bytes.clone()))
            .collect();
        assert_eq!(got, want, "a clean log does not decode to its frames");
        return;
    }
    // One corruption; `keep(start, end)` says whether a frame survives it
    // and at which offset it is then found.
    let len = log.len() as u64;
    let at = if len == 0 {
        0
    } else {
        u64::from(b.u32()) % (len + 1)
    };
    let mut bad = log.clone();
    let keep: Box<dyn Fn(u64, u64) -> Option<u64>> = match b.u8() % 4 {
        0 => {
            // Flip bits of one byte.
            let x = b.u8().max(1);
            match bad.get_mut(at as usize) {
                Some(byte) => *byte ^= x,
                None => return,
            }
            Box::new(move |s, e| if at >= s && at <= e { None } else { Some(s) })
        }
        1 => {
            // Insert garbage before byte `at`.
            let n = usize::from(b.u8()) + 1;
            let garbage = b.take(n).to_vec();
            let g = garbage.len() as u64;
            let at_us = at as usize;
            bad.splice(at_us..at_us, garbage);
            Box::new(move |s, e| {
                if at > s && at <= e {
                    None
                } else if s >= at {
                    Some(s + g)
                } else {
                    Some(s)
                }
            })
        }
        2 => {
            // Delete bytes `at..to`.
            let to = (at + u64::from(b.u8()) + 1).min(len);
            bad.drain(at as usize..to as usize);
            Box::new(move |s, e| {
                if e < at {
                    Some(s)
                } else if s >= to {
                    Some(s - (to - at))
                } else {
                    None
                }
            })
        }
        _ => {
            // Cut the log at `at`.
            bad.truncate(at as usize);
            Box::new(move |s, e| if e < at { Some(s) } else { None })
        }
    };
    let got = decode_stream::<MAX_FRAME>(&bad, &sizes);
    let got_frames = frames_only(&got);
    // Every frame the corruption did not touch is found, in order, at its
    // (shifted) offset; extra frames may appear only from the inserted bytes.
    let mut it = got_frames.iter();
    for (s, e, q, bytes) in &frames {
        if let Some(offset) = keep(*s, *e) {
            let want = Canon::Frame(offset, *q, bytes.clone());
            assert!(
                it.any(|g| *g == want),
                "intact frame seq {q} at {offset} not recovered; events {got:?}"
            );
        }
    }
}

// ---------------------------------------------------------------------------
// Format 2: record blocks
// ---------------------------------------------------------------------------

/// A record as bits, so that NaN payloads compare.
pub type RecordBits = (u64, [Option<u32>; 3], Option<u8>);

pub fn record_bits(r: &LogRecord) -> RecordBits {
    (
        r.t_ms,
        [r.tx_dbm, r.rssi_dbm, r.noise_dbm].map(|v| v.map(f32::to_bits)),
        r.rate,
    )
}

/// Target `block_decoder`: format 2. Mode 0: the bytes as a block body (a
/// block that reads encodes back to the same bytes and decodes to the same
/// records). Mode 1: a log of blocks built from the input decodes to its
/// records bit for bit, whatever the chunking. Mode 2: the same log with
/// one byte changed or cut short: every block the damage did not touch
/// still gives all its records, in order, and no record is made up.
pub fn block_decoder(data: &[u8]) {
    let mut b = Bytes::new(data);
    match b.u8() % 3 {
        0 => raw_block(b.take(usize::MAX)),
        mode => block_log(&mut b, mode == 2),
    }
}

fn raw_block(body: &[u8]) {
    let Ok(block) = RecordBlock::new(body) else {
        return;
    };
    assert_eq!(block.body(), body);
    let n = block.records().count();
    let mut buf = [0u8; MAX_FRAME];
    let wire = match encode_frame(7, &Frame::Block(block), &mut buf) {
        Ok(w) => w.to_vec(),
        Err(e) => panic!("a block that reads does not encode: {e}"),
    };
    let Some((_, frame)) = wire.split_last() else {
        panic!("an empty frame")
    };
    match decode_frame(frame) {
        Ok(Decoded {
            seq: 7,
            frame: Frame::Block(again),
        }) => {
            assert_eq!(again, block, "a block does not decode to itself");
            assert_eq!(again.records().count(), n);
        }
        other => panic!("an encoded block does not decode: {other:?}"),
    }
    // Re-encoded record by record (the encoder's own choices), the records
    // come back bit for bit.
    let recs: Vec<LogRecord> = block.records().collect();
    let (log, _) = encode_blocks(&recs, 255);
    let got: Vec<RecordBits> = stream_records(&log, &[]);
    let want: Vec<RecordBits> = recs.iter().map(record_bits).collect();
    assert_eq!(got, want, "records of a block re-encoded differ");
}

/// A block frame's byte range `[start, end]` and the range of its records.
type PlacedBlock = (usize, usize, usize, usize);

/// A format 2 log of `recs` (no header) and, per block frame, its byte
/// range `[start, end]` and the range of records it holds.
fn encode_blocks(recs: &[LogRecord], per_frame: u8) -> (Vec<u8>, Vec<PlacedBlock>) {
    let mut enc = BlockEncoder::with_records_per_frame(per_frame);
    let mut buf = [0u8; MAX_FRAME];
    let mut log = Vec::new();
    let mut blocks = Vec::new();
    let mut first = 0usize;
    for (i, r) in recs.iter().enumerate() {
        let f = match enc.record(r, &mut buf) {
            Ok(f) => f.to_vec(),
            Err(e) => panic!("a record does not encode: {e} ({r:?})"),
        };
        if !f.is_empty() {
            // The frame holds the records up to this one, or up to the one
            // before if this one opened the next block.
            let end = i + 1 - enc.pending();
            blocks.push((log.len(), log.len() + f.len() - 1, first, end));
            first = end;
            log.extend_from_slice(&f);
        }
    }
    let f = match enc.flush(&mut buf) {
        Ok(f) => f.to_vec(),
        Err(e) => panic!("the last block does not encode: {e}"),
    };
    if !f.is_empty() {
        blocks.push((log.len(), log.len() + f.len() - 1, first, recs.len()));
        log.extend_from_slice(&f);
    }
    assert!(f.is_empty() || enc.pending() == 0);
    (log, blocks)
}

/// The bytes of a format 2 log of `recs` and its number of block frames.
pub fn encode_blocks_for_test(recs: &[LogRecord], per_frame: u8) -> (Vec<u8>, usize) {
    let (log, blocks) = encode_blocks(recs, per_frame);
    (log, blocks.len())
}

/// The records a stream decoder finds in `log`, fed in chunks of `sizes`.
pub fn stream_records(log: &[u8], sizes: &[u8]) -> Vec<RecordBits> {
    let mut dec: FrameDecoder = FrameDecoder::new();
    let mut out = Vec::new();
    let mut rest = log;
    let mut k = 0usize;
    loop {
        let size = match sizes.get(k % sizes.len().max(1)) {
            Some(&s) => usize::from(s) + 1,
            None => rest.len(),
        };
        k += 1;
        let (mut chunk, more) = rest.split_at(size.min(rest.len()));
        rest = more;
        while let Some(ev) = dec.feed(&mut chunk) {
            if let Event::Frame {
                frame: Frame::Record(r),
                ..
            } = ev
            {
                out.push(record_bits(&r));
            }
        }
        if rest.is_empty() {
            break;
        }
    }
    while let Some(ev) = dec.finish() {
        if let Event::Frame {
            frame: Frame::Record(r),
            ..
        } = ev
        {
            out.push(record_bits(&r));
        }
    }
    out
}

fn block_log(b: &mut Bytes<'_>, corrupt: bool) {
    let per_frame = b.u8();
    let nsizes = usize::from(b.u8() % 8);
    let sizes = b.take(nsizes).to_vec();
    let n = usize::from(b.u8()) * 2;
    let mut t = b.u64();
    let mut recs = Vec::with_capacity(n);
    for _ in 0..n {
        t = next_t(b, t);
        recs.push(LogRecord {
            t_ms: t,
            tx_dbm: opt(b, 10.0),
            rssi_dbm: opt(b, -90.0),
            noise_dbm: opt(b, -115.0),
            rate: if b.one_in(2) { None } else { Some(b.u8() % 4) },
        });
    }
    let (log, blocks) = encode_blocks(&recs, per_frame);
    let want: Vec<RecordBits> = recs.iter().map(record_bits).collect();
    if !corrupt {
        assert_eq!(stream_records(&log, &sizes), want, "a clean log of blocks");
        return;
    }
    let at = if log.is_empty() {
        return;
    } else {
        (b.u32() as usize) % log.len()
    };
    let mut bad = log.clone();
    let touched: Box<dyn Fn(usize, usize) -> bool> = if b.one_in(2) {
        let x = b.u8().max(1);
        if let Some(byte) = bad.get_mut(at) {
            *byte ^= x;
        }
        Box::new(move |s, e| at >= s && at <= e)
    } else {
        bad.truncate(at);
        Box::new(move |_, e| e >= at)
    };
    let got = stream_records(&bad, &sizes);
    // The records of untouched blocks, in order, are a subsequence of what
    // came out; everything that came out was written.
    let mut it = got.iter();
    for &(s, e, from, to) in &blocks {
        if touched(s, e) {
            continue;
        }
        for w in want.get(from..to).unwrap_or(&[]) {
            assert!(
                it.any(|g| g == w),
                "a record of an untouched block is lost: {w:?}"
            );
        }
    }
    for g in &got {
        assert!(want.contains(g), "a record never written came out: {g:?}");
    }
}

// ---------------------------------------------------------------------------
// Controller
// ---------------------------------------------------------------------------

/// A configuration: the defaults with some settings replaced from the input.
pub fn config_from(b: &mut Bytes<'_>) -> ControllerConfig {
    let mut c = ControllerConfig::sub_ghz_node();
    for _ in 0..b.u8() % 8 {
        let field = b.u8() % 25;
        let small = |b: &mut Bytes<'_>, base: u16| -> u16 {
            match b.u8() % 3 {
                0 => b.u16(),
                _ => base
                    .saturating_add(u16::from(b.u8() % 16))
                    .saturating_sub(8),
            }
        };
        match field {
            0 => c.required_snr_db = Db(b.near(c.required_snr_db.0)),
            1 => {
                c.target_outage = match b.u8() % 4 {
                    0 => f32::from_bits(b.u32()),
                    1 => {
                        const EDGE: [f32; 9] =
                            [0.0, 1.0, 1e-6, 0.5, 0.500_000_1, 9e-7, f32::NAN, -0.01, 2.0];
                        EDGE[usize::from(b.u8()) % EDGE.len()]
                    }
                    _ => f32::from(b.u8().max(1)) / 512.0,
                }
            }
            2 => c.min_tx_dbm = Dbm(b.near(c.min_tx_dbm.0)),
            3 => c.max_tx_dbm = Dbm(b.near(c.max_tx_dbm.0)),
            4 => {
                c.eirp_cap_dbm = match c.eirp_cap_dbm {
                    EirpCap::AtMost(l) => EirpCap::AtMost(Dbm(b.near(l.0))),
                    EirpCap::NoCap => EirpCap::NoCap,
                }
            }
            5 => c.antenna_gain_dbi = Dbi(b.near(c.antenna_gain_dbi.0)),
            6 => c.far_antenna_gain_dbi = Dbi(b.near(c.far_antenna_gain_dbi.0)),
            7 => c.start_tx_dbm = Dbm(b.near(c.start_tx_dbm.0)),
            8 => c.steps = steps_from(b),
            9 => c.max_step_up_db = Db(b.near(c.max_step_up_db.0)),
            10 => c.max_step_down_db = Db(b.near(c.max_step_down_db.0)),
            11 => c.deadband_db = Db(b.near(c.deadband_db.0)),
            12 => c.margin_step_db = Db(b.near(c.margin_step_db.0)),
            13 => c.margin_min_db = Db(b.near(c.margin_min_db.0)),
            14 => c.margin_max_db = Db(b.near(c.margin_max_db.0)),
            15 => c.min_readings = small(b, c.min_readings),
            16 => c.spread_memory = small(b, 8),
            17 => c.climb_after_losses = small(b, c.climb_after_losses),
            18 => {
                c.stale_after_ms = if b.one_in(2) {
                    b.u32()
                } else {
                    u32::from(b.u8()) * 100
                }
            }
            19 => c.rssi_min_dbm = Dbm(b.near(c.rssi_min_dbm.0)),
            20 => c.rssi_max_dbm = Dbm(b.near(c.rssi_max_dbm.0)),
            21 => c.rssi_saturation_dbm = Dbm(b.near(c.rssi_saturation_dbm.0)),
            22 => c.noise_min_dbm = Dbm(b.near(c.noise_min_dbm.0)),
            23 => c.noise_max_dbm = Dbm(b.near(c.noise_max_dbm.0)),
            _ => c.default_noise_dbm = Dbm(b.near(c.default_noise_dbm.0)),
        }
    }
    c
}

fn steps_from(b: &mut Bytes<'_>) -> PowerSteps {
    match b.u8() % 3 {
        0 => PowerSteps::Uniform(Db(b.near(1.0))),
        1 => PowerSteps::Uniform(Db(f32::from(b.u8()) / 16.0)),
        _ => {
            let n = usize::from(b.u8() % (MAX_LEVELS as u8 + 2));
            let mut levels = Vec::with_capacity(n);
            let mut l = -10.0 + f32::from(b.u8() as i8) * 0.5;
            for _ in 0..n {
                levels.push(Dbm(l));
                l += f32::from(b.u8()) / 8.0;
            }
            let strictly_ascending = levels.windows(2).all(|w| w[0].0 < w[1].0);
            let in_range = levels.iter().all(|l| l.0.abs() <= SETTING_LIMIT_DB);
            // The controller keeps table levels as whole 0.01 dB or 1/64 dB.
            let whole = |per_db: f64| {
                levels.iter().all(|l| {
                    let x = f64::from(l.0) * per_db;
                    x == x.round()
                })
            };
            let centi = levels.iter().all(|l| {
                format!("{}", l.0)
                    .split('.')
                    .nth(1)
                    .is_none_or(|d| d.len() <= 2)
            });
            let representable = centi || whole(64.0);
            match LevelTable::new(&levels) {
                Ok(t) => {
                    assert!(
                        (1..=MAX_LEVELS).contains(&n)
                            && strictly_ascending
                            && in_range
                            && representable
                    );
                    assert_eq!(t.levels(), &levels[..]);
                    PowerSteps::Table(t)
                }
                Err(e) => {
                    assert!(
                        n == 0
                            || n > MAX_LEVELS
                            || !strictly_ascending
                            || !in_range
                            || !representable,
                        "a good table refused: {levels:?}: {e}"
                    );
                    assert_eq!(e.setting(), "steps.table");
                    PowerSteps::Uniform(Db(1.0))
                }
            }
        }
    }
}

/// Whether `tx` is a supported level of `cfg` (checked here, not by the
/// controller's own `is_level`).
fn on_grid(cfg: &ControllerConfig, tx: f32) -> bool {
    match cfg.steps {
        PowerSteps::Uniform(s) => {
            let k = (f64::from(tx) - f64::from(cfg.min_tx_dbm.0)) / f64::from(s.0);
            (k - k.round()).abs() * f64::from(s.0) <= f64::from(POWER_EPS)
        }
        PowerSteps::Table(t) => t.levels().iter().any(|l| (l.0 - tx).abs() <= POWER_EPS),
    }
}

/// The invariants of one transmit power chosen under `cfg`, after `prev`.
pub fn check_power(cfg: &ControllerConfig, tx: Dbm, prev: Option<Dbm>, what: &str) {
    let p = tx.0;
    assert!(p.is_finite(), "{what}: power {p} not finite");
    assert!(
        p >= cfg.min_tx_dbm.0 - POWER_EPS,
        "{what}: {p} dBm below min_tx {}",
        cfg.min_tx_dbm.0
    );
    assert!(
        p <= cfg.max_tx_dbm.0 + POWER_EPS,
        "{what}: {p} dBm above max_tx {}",
        cfg.max_tx_dbm.0
    );
    assert!(
        p + cfg.antenna_gain_dbi.0
            <= cfg.eirp_cap_dbm.level().map_or(f32::INFINITY, |c| c.0) + POWER_EPS,
        "{what}: EIRP {} dBm above the cap {}",
        p + cfg.antenna_gain_dbi.0,
        cfg.eirp_cap_dbm.level().map_or(f32::INFINITY, |c| c.0)
    );
    assert!(
        on_grid(cfg, p),
        "{what}: {p} dBm is not a supported level of {:?}",
        cfg.steps
    );
    if let Some(q) = prev {
        assert!(
            p - q.0 <= cfg.max_step_up_db.0 + POWER_EPS,
            "{what}: rose {} dB, more than max_step_up_db {}",
            p - q.0,
            cfg.max_step_up_db.0
        );
        assert!(
            q.0 - p <= cfg.max_step_down_db.0 + POWER_EPS,
            "{what}: fell {} dB, more than max_step_down_db {}",
            q.0 - p,
            cfg.max_step_down_db.0
        );
    }
}

fn check_decision<const W: usize>(
    cfg: &ControllerConfig,
    c: &Controller<W>,
    d: &Decision,
    prev: Option<Dbm>,
) {
    check_power(cfg, d.tx, prev, "decision");
    assert_eq!(
        d.tx.0.to_bits(),
        c.tx().0.to_bits(),
        "decision and controller disagree"
    );
    assert!(
        c.is_level(d.tx),
        "the controller does not call its own choice {:?} a level (limits {:?}, min_tx {:?}, steps {:?})",
        d.tx,
        c.limits(),
        cfg.min_tx_dbm,
        cfg.steps
    );
    let (lo, hi) = c.limits();
    assert!(
        d.tx.0 >= lo.0 - POWER_EPS && d.tx.0 <= hi.0 + POWER_EPS,
        "{d:?} outside {lo:?}..{hi:?}"
    );
    let m = d.margin().0;
    // Within the bounds; bounds closer than the margin's resolution
    // (1/8192 dB) give the multiple of it nearest their middle.
    let slack = if cfg.margin_max_db.0 - cfg.margin_min_db.0 < 1.0 / 8192.0 {
        0.5 / 8192.0 + 1e-6
    } else {
        0.0
    };
    assert!(
        m.is_finite() && m >= cfg.margin_min_db.0 - slack && m <= cfg.margin_max_db.0 + slack,
        "margin {m} outside [{}, {}]",
        cfg.margin_min_db.0,
        cfg.margin_max_db.0
    );
    if let Some(s) = d.spread() {
        assert!(s.0.is_finite() && s.0 >= 0.0, "spread {s:?}");
    }
    if let Some(w) = d.wanted() {
        assert!(w.0.is_finite(), "wanted {w:?}");
    }
    if let Some(pl) = d.path_loss() {
        assert!(pl.0.is_finite(), "path loss {pl:?}");
    }
    if let Some(n) = d.noise() {
        assert!(
            n.0 >= cfg.noise_min_dbm.0 - 0.1 && n.0 <= cfg.noise_max_dbm.0 + 0.1,
            "mean noise {n:?} outside the plausible range"
        );
    }
    assert!(
        usize::from(d.readings) <= W,
        "{} readings in a window of {W}",
        d.readings
    );
}

/// Target `controller`: a configuration from the input (refused or not,
/// never a panic), then up to 4096 observations (mode 0) or log records
/// through a replay (mode 1), checking every decision.
pub fn controller(data: &[u8]) {
    let mut b = Bytes::new(data);
    let mode = b.u8();
    let cfg = config_from(&mut b);
    match (mode % 2, (mode / 2) % 3) {
        (0, 0) => observe::<8>(cfg, &mut b),
        (0, 1) => observe::<64>(cfg, &mut b),
        (0, _) => observe::<MAX_WINDOW_FUZZ>(cfg, &mut b),
        (_, 0) => replay::<8>(cfg, &mut b),
        (_, _) => replay::<64>(cfg, &mut b),
    }
}

/// Largest window the target builds (the engine's limit is 4096).
const MAX_WINDOW_FUZZ: usize = 512;

fn new_controller<const W: usize>(cfg: ControllerConfig) -> Option<Controller<W>> {
    match Controller::<W>::new(cfg) {
        Ok(c) => {
            assert!(cfg.validate().is_ok(), "accepted but validate() refuses");
            check_power(&cfg, c.tx(), None, "start");
            let (lo, hi) = c.limits();
            assert!(
                lo.0.is_finite() && hi.0.is_finite() && lo.0 <= hi.0,
                "limits {lo:?}..{hi:?}"
            );
            Some(c)
        }
        Err(e) => {
            if cfg.validate().is_ok() {
                assert_eq!(e.setting(), "min_readings", "valid settings refused: {e}");
                assert!(usize::from(cfg.min_readings) > W);
            }
            assert!(!e.to_string().is_empty() && !e.to_string().contains('\n'));
            None
        }
    }
}

fn next_t(b: &mut Bytes<'_>, t: u64) -> u64 {
    match b.u8() % 16 {
        0 => b.u64(),
        1 => t.saturating_sub(u64::from(b.u16())),
        2 => t.saturating_add(u64::from(b.u32())),
        _ => t.saturating_add(u64::from(b.u8()) * 100),
    }
}

fn observe<const W: usize>(cfg: ControllerConfig, b: &mut Bytes<'_>) {
    let Some(mut c) = new_controller::<W>(cfg) else {
        return;
    };
    let mut prev = Some(c.tx());
    let mut t = 0u64;
    for _ in 0..MAX_STEPS {
        if b.is_empty() {
            break;
        }
        t = next_t(b, t);
        let op = b.u8() % 9;
        let obs = match op {
            0..=2 => {
                // A delivered packet near the current power over a path of
                // 60 to 187 dB, noise near −116 dBm.
                let tx = Dbm(c.tx().0 + f32::from(b.u8() as i8) / 32.0);
                let loss = 60.0 + f32::from(b.u8() / 2);
                let noise = -116.0 + f32::from(b.u8() as i8) / 8.0;
                let snr = if b.one_in(4) {
                    Some(Db(b.near(tx.0 - loss - noise)))
                } else {
                    None
                };
                Observation::Feedback {
                    t_ms: t,
                    tx,
                    rssi: Dbm(tx.0 - loss),
                    noise: Dbm(noise),
                    snr,
                }
            }
            3 => Observation::Feedback {
                t_ms: t,
                tx: Dbm(b.near(c.tx().0)),
                rssi: Dbm(b.near(-90.0)),
                noise: Dbm(b.near(-115.0)),
                snr: if b.one_in(2) {
                    None
                } else {
                    Some(Db(b.near(20.0)))
                },
            },
            4 => Observation::Acked { t_ms: t },
            5 => Observation::Lost { t_ms: t },
            6 => Observation::Beacon {
                t_ms: t,
                beacon_tx: Dbm(b.near(14.0)),
                rssi: Dbm(b.near(-95.0)),
            },
            7 => Observation::Missing { t_ms: t },
            _ => {
                if b.one_in(8) {
                    c.reset();
                    check_power(&cfg, c.tx(), None, "after reset");
                    prev = Some(c.tx());
                }
                continue;
            }
        };
        assert_eq!(obs.t_ms(), t);
        let d = c.update(&obs);
        check_decision(&cfg, &c, &d, prev);
        prev = Some(d.tx);
    }
}

fn replay<const W: usize>(cfg: ControllerConfig, b: &mut Bytes<'_>) {
    let Ok(mut r) = Replay::<W>::new(cfg) else {
        let _ = new_controller::<W>(cfg);
        return;
    };
    check_power(&cfg, r.controller().tx(), None, "replay start");
    let mut next: Option<Dbm> = None;
    let mut t = 0u64;
    let mut n = 0u64;
    for _ in 0..MAX_STEPS {
        if b.is_empty() {
            break;
        }
        t = next_t(b, t);
        let rec = LogRecord {
            t_ms: t,
            tx_dbm: opt(b, 10.0),
            rssi_dbm: opt(b, -95.0),
            noise_dbm: opt(b, -115.0),
            rate: None,
        };
        let s = r.step(&rec);
        n += 1;
        if let Some(p) = next {
            assert_eq!(
                s.chosen.0.to_bits(),
                p.0.to_bits(),
                "chosen is not the last next_tx"
            );
        }
        check_power(&cfg, s.next_tx, Some(s.chosen), "replay");
        assert_eq!(s.t_ms, t);
        let complete = matches!(
            (rec.tx_dbm, rec.rssi_dbm, rec.noise_dbm),
            (Some(_), Some(_), Some(_))
        );
        if !complete {
            assert_eq!(
                s.outcome,
                Outcome::Unjudged,
                "a record with a missing reading was judged"
            );
        }
        if let Some(snr) = s.replayed_snr {
            assert!(snr.0.is_finite());
            let lost = snr.0 < cfg.required_snr_db.0;
            assert_eq!(s.outcome == Outcome::Lost, lost, "{s:?}");
        } else {
            assert_eq!(s.outcome, Outcome::Unjudged);
        }
        next = Some(s.next_tx);
    }
    let sum = r.summary();
    assert_eq!(sum.records, n);
    assert_eq!(sum.judged + sum.unjudged, n);
    assert!(sum.lost <= sum.judged);
    if let Some(f) = sum.outage_fraction() {
        assert!((0.0..=1.0).contains(&f));
    }
    if let (Some(mean), Some(max)) = (sum.mean_tx_dbm(), sum.max_tx_dbm_used) {
        assert!(
            mean.0.is_finite() && mean.0 <= max.0 + POWER_EPS,
            "mean {mean:?} above max {max:?}"
        );
        let (lo, hi) = r.controller().limits();
        assert!(max.0 <= hi.0 + POWER_EPS && max.0 >= lo.0 - POWER_EPS);
        if let Some(saving) = sum.saving_vs_max_db() {
            assert!(saving.0 >= -POWER_EPS, "negative saving {saving:?}");
        }
    }
    assert!(sum.lost_at_max <= sum.lost && sum.judged_at_max <= sum.judged);
    assert!(sum.logged.lost <= sum.logged.judged && sum.logged.judged <= sum.judged + sum.unjudged);
}
