//! Log records as C structs, and the engine's framed binary log codec:
//! an encoder that writes header, record and decision frames into a
//! caller's buffer, and a streaming decoder that cuts a byte stream into
//! frames (resynchronising after damage). The byte layout is the engine's
//! (`docs/log-format.md`).

use headroom::record::codec::{Encoder, Event, Frame, FrameDecoder, MAX_FRAME};
use headroom::record::{DecisionRecord, LogHeader, LogRecord};
use headroom::units::{Db, Dbi, Dbm};

use crate::headroom_status;
use crate::state::{call, fits, input, required_output, slot, Block};

/// Longest frame on the wire, bytes (delimiter included): a buffer of
/// this size holds any frame.
pub const HEADROOM_MAX_FRAME: usize = 252;

const _: () = assert!(HEADROOM_MAX_FRAME == MAX_FRAME);

/// What a log says about the device that wrote it. Each `has_*` flag
/// (non-zero: present) says whether the field beside it is given; an absent
/// field is taken from the caller's settings or the engine's defaults.
#[repr(C)]
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct headroom_log_header {
    /// Identifier of the logging device (0 if unknown).
    pub device_id: u64,
    /// Unix time in ms of `t_ms = 0` in the log (0 if unknown).
    pub epoch_ms: u64,
    /// Lowest transmit power the radio can be set to, dBm.
    pub min_tx_dbm: f32,
    /// Highest transmit power the radio can be set to, dBm.
    pub max_tx_dbm: f32,
    /// Step between settable transmit powers, dB.
    pub tx_step_db: f32,
    /// Gain of the device's antenna, dBi.
    pub antenna_gain_dbi: f32,
    /// SNR below which the far end loses a packet, dB.
    pub required_snr_db: f32,
    /// Regulatory EIRP cap the device was installed under, dBm.
    pub eirp_cap_dbm: f32,
    /// `min_tx_dbm` is given.
    pub has_min_tx: u8,
    /// `max_tx_dbm` is given.
    pub has_max_tx: u8,
    /// `tx_step_db` is given.
    pub has_tx_step: u8,
    /// `antenna_gain_dbi` is given.
    pub has_antenna_gain: u8,
    /// `required_snr_db` is given.
    pub has_required_snr: u8,
    /// `eirp_cap_dbm` is given.
    pub has_eirp_cap: u8,
}

/// One logged packet. A reading whose `has_*` flag is zero was not logged:
/// such a record cannot be judged by a replay.
#[repr(C)]
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct headroom_log_record {
    /// Time of the packet, ms on the log's time base.
    pub t_ms: u64,
    /// Transmit power used for the packet, dBm.
    pub tx_dbm: f32,
    /// Received power at the far end, dBm.
    pub rssi_dbm: f32,
    /// Noise floor at the far end, dBm.
    pub noise_dbm: f32,
    /// `tx_dbm` was logged.
    pub has_tx: u8,
    /// `rssi_dbm` was logged.
    pub has_rssi: u8,
    /// `noise_dbm` was logged.
    pub has_noise: u8,
    /// Index of the packet's rate in the log header's rate table.
    pub rate: u8,
    /// `rate` was logged.
    pub has_rate: u8,
}

/// One decision of a controller replaying a log (a decision frame).
#[repr(C)]
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct headroom_decision_record {
    /// Time of the packet, ms.
    pub t_ms: u64,
    /// Transmit power chosen for the packet, dBm.
    pub tx_dbm: f32,
    /// Outcome code (`headroom_outcome_name`).
    pub outcome: u8,
    /// Reason code (`headroom_reason_name`).
    pub reason: u8,
    /// Index of the chosen rate in the rate table in force.
    pub rate: u8,
    /// `rate` is valid (a rate table is in force).
    pub has_rate: u8,
}

fn opt(has: u8, v: f32) -> Option<f32> {
    (has != 0).then_some(v)
}

fn flag<T>(o: Option<T>) -> u8 {
    u8::from(o.is_some())
}

pub(crate) fn log_header(h: &headroom_log_header) -> LogHeader {
    LogHeader {
        device_id: h.device_id,
        epoch_ms: h.epoch_ms,
        min_tx: opt(h.has_min_tx, h.min_tx_dbm).map(Dbm),
        max_tx: opt(h.has_max_tx, h.max_tx_dbm).map(Dbm),
        tx_step: opt(h.has_tx_step, h.tx_step_db).map(Db),
        antenna_gain: opt(h.has_antenna_gain, h.antenna_gain_dbi).map(Dbi),
        required_snr: opt(h.has_required_snr, h.required_snr_db).map(Db),
        eirp_cap: opt(h.has_eirp_cap, h.eirp_cap_dbm).map(Dbm),
        rates: headroom::rate::RateTable::empty(),
    }
}

pub(crate) fn c_log_header(h: &LogHeader) -> headroom_log_header {
    headroom_log_header {
        device_id: h.device_id,
        epoch_ms: h.epoch_ms,
        min_tx_dbm: h.min_tx.map_or(0.0, |v| v.0),
        max_tx_dbm: h.max_tx.map_or(0.0, |v| v.0),
        tx_step_db: h.tx_step.map_or(0.0, |v| v.0),
        antenna_gain_dbi: h.antenna_gain.map_or(0.0, |v| v.0),
        required_snr_db: h.required_snr.map_or(0.0, |v| v.0),
        eirp_cap_dbm: h.eirp_cap.map_or(0.0, |v| v.0),
        has_min_tx: flag(h.min_tx),
        has_max_tx: flag(h.max_tx),
        has_tx_step: flag(h.tx_step),
        has_antenna_gain: flag(h.antenna_gain),
        has_required_snr: flag(h.required_snr),
        has_eirp_cap: flag(h.eirp_cap),
    }
}

pub(crate) fn log_record(r: &headroom_log_record) -> LogRecord {
    LogRecord {
        t_ms: r.t_ms,
        tx_dbm: opt(r.has_tx, r.tx_dbm),
        rssi_dbm: opt(r.has_rssi, r.rssi_dbm),
        noise_dbm: opt(r.has_noise, r.noise_dbm),
        rate: (r.has_rate != 0).then_some(r.rate),
    }
}

fn c_log_record(r: &LogRecord) -> headroom_log_record {
    headroom_log_record {
        t_ms: r.t_ms,
        tx_dbm: r.tx_dbm.unwrap_or(0.0),
        rssi_dbm: r.rssi_dbm.unwrap_or(0.0),
        noise_dbm: r.noise_dbm.unwrap_or(0.0),
        has_tx: flag(r.tx_dbm),
        has_rssi: flag(r.rssi_dbm),
        has_noise: flag(r.noise_dbm),
        rate: r.rate.unwrap_or(0),
        has_rate: flag(r.rate),
    }
}

fn decision_record(d: &headroom_decision_record) -> DecisionRecord {
    DecisionRecord {
        t_ms: d.t_ms,
        tx_dbm: d.tx_dbm,
        outcome: d.outcome,
        reason: d.reason,
        rate: (d.has_rate != 0).then_some(d.rate),
    }
}

fn c_decision_record(d: &DecisionRecord) -> headroom_decision_record {
    headroom_decision_record {
        t_ms: d.t_ms,
        tx_dbm: d.tx_dbm,
        outcome: d.outcome,
        reason: d.reason,
        rate: d.rate.unwrap_or(0),
        has_rate: u8::from(d.rate.is_some()),
    }
}

/// Bytes of a `headroom_encoder`.
pub const HEADROOM_ENCODER_SIZE: usize = 8;

/// A frame encoder (it numbers the frames it writes from 0),
/// caller-allocated (`HEADROOM_ENCODER_SIZE` bytes, aligned to
/// `HEADROOM_STATE_ALIGN`); start with `headroom_encoder_init`.
#[repr(C, align(8))]
pub struct headroom_encoder {
    opaque: [u8; HEADROOM_ENCODER_SIZE],
}

// SAFETY: size and alignment checked just below.
unsafe impl Block for headroom_encoder {
    type Inner = Encoder;
    const TAG: u32 = 0x6872_4531;
}
const _: () = assert!(fits::<Encoder>(
    HEADROOM_ENCODER_SIZE,
    crate::HEADROOM_STATE_ALIGN
));

/// Start `enc`: its next frame gets sequence number 0.
///
/// # Safety
/// `enc` is NULL or points to a writable `headroom_encoder`.
#[no_mangle]
pub unsafe extern "C" fn headroom_encoder_init(enc: *mut headroom_encoder) -> headroom_status {
    // SAFETY: guaranteed by the caller.
    match unsafe { slot(enc) } {
        Some(slot) => slot.set::<headroom_encoder>(Ok(Encoder::new())),
        None => headroom_status::HEADROOM_ERR_NULL,
    }
}

/// Encode one frame with `enc` into `buf` (`cap` bytes) and write its
/// length, final `0x00` included, to `len`. Nothing is written and the
/// sequence number does not advance on an error.
///
/// # Safety
/// `enc` points to a `headroom_encoder`; `buf` is valid for writes of
/// `cap` bytes; `len` is valid for a write.
unsafe fn encode(
    enc: *mut headroom_encoder,
    frame: &Frame,
    buf: *mut u8,
    cap: usize,
    len: *mut usize,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let slot = unsafe { slot(enc) }.ok_or(headroom_status::HEADROOM_ERR_NULL)?;
        let enc = slot.get_mut::<headroom_encoder>()?;
        if buf.is_null() || len.is_null() {
            return Err(headroom_status::HEADROOM_ERR_NULL);
        }
        // SAFETY: `buf` is valid for writes of `cap` bytes (caller).
        let out = unsafe { core::slice::from_raw_parts_mut(buf, cap) };
        let n = enc.frame(frame, out)?.len();
        // SAFETY: `len` is valid for a write (caller).
        unsafe { required_output(len, n) }
    })
}

/// Encode a header frame of `header` into `buf` (`cap` bytes); its
/// length to `len`.
///
/// # Safety
/// `enc` points to a `headroom_encoder`; `header` to a
/// `headroom_log_header`; `buf` is valid for writes of `cap` bytes; `len`
/// for one `size_t`.
#[no_mangle]
pub unsafe extern "C" fn headroom_encode_header(
    enc: *mut headroom_encoder,
    header: *const headroom_log_header,
    buf: *mut u8,
    cap: usize,
    len: *mut usize,
) -> headroom_status {
    // SAFETY: guaranteed by the caller.
    let h = match unsafe { input(header) } {
        Ok(h) => log_header(h),
        Err(e) => return e,
    };
    // This encoder writes format 1 frames (one record a frame), so its
    // header says 1.x.
    let frame = Frame::Header {
        header: h,
        version: headroom::record::codec::VERSION_1,
    };
    // SAFETY: guaranteed by the caller.
    unsafe { encode(enc, &frame, buf, cap, len) }
}

/// Encode a record frame of `record` into `buf`; its length to `len`.
///
/// # Safety
/// As `headroom_encode_header`, with `record` pointing to a `headroom_log_record`.
#[no_mangle]
pub unsafe extern "C" fn headroom_encode_record(
    enc: *mut headroom_encoder,
    record: *const headroom_log_record,
    buf: *mut u8,
    cap: usize,
    len: *mut usize,
) -> headroom_status {
    // SAFETY: guaranteed by the caller.
    let r = match unsafe { input(record) } {
        Ok(r) => log_record(r),
        Err(e) => return e,
    };
    // SAFETY: guaranteed by the caller.
    unsafe { encode(enc, &Frame::Record(r), buf, cap, len) }
}

/// Encode a decision frame of `decision` into `buf`; its length to `len`.
///
/// # Safety
/// As `headroom_encode_header`, with `decision` pointing to a
/// `headroom_decision_record`.
#[no_mangle]
pub unsafe extern "C" fn headroom_encode_decision(
    enc: *mut headroom_encoder,
    decision: *const headroom_decision_record,
    buf: *mut u8,
    cap: usize,
    len: *mut usize,
) -> headroom_status {
    // SAFETY: guaranteed by the caller.
    let d = match unsafe { input(decision) } {
        Ok(d) => decision_record(d),
        Err(e) => return e,
    };
    // SAFETY: guaranteed by the caller.
    unsafe { encode(enc, &Frame::Decision(d), buf, cap, len) }
}

/// Bytes of a `headroom_decoder`.
pub const HEADROOM_DECODER_SIZE: usize = 1024;

/// A streaming frame decoder, caller-allocated (`HEADROOM_DECODER_SIZE`
/// bytes, aligned to `HEADROOM_STATE_ALIGN`); start with
/// `headroom_decoder_init`.
#[repr(C, align(8))]
pub struct headroom_decoder {
    opaque: [u8; HEADROOM_DECODER_SIZE],
}

// SAFETY: size and alignment checked just below.
unsafe impl Block for headroom_decoder {
    type Inner = FrameDecoder;
    const TAG: u32 = 0x6872_4431;
}
const _: () = assert!(fits::<FrameDecoder>(
    HEADROOM_DECODER_SIZE,
    crate::HEADROOM_STATE_ALIGN
));

/// `headroom_event.kind`: an intact header frame (`header`, `version_*`).
pub const HEADROOM_EVENT_HEADER: u8 = 0;
/// `headroom_event.kind`: an intact record frame (`record`).
pub const HEADROOM_EVENT_RECORD: u8 = 1;
/// `headroom_event.kind`: an intact decision frame (`decision`).
pub const HEADROOM_EVENT_DECISION: u8 = 2;
/// `headroom_event.kind`: an intact frame of a kind this library does not
/// know (`frame_kind`; from a newer minor version), skipped.
pub const HEADROOM_EVENT_OTHER: u8 = 3;
/// `headroom_event.kind`: `length` bytes that are not an intact frame,
/// skipped (`error` says why).
pub const HEADROOM_EVENT_DAMAGED: u8 = 4;

/// What the decoder found. The fields that `kind` does not name are zero.
#[repr(C)]
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct headroom_event {
    /// One of `HEADROOM_EVENT_*`.
    pub kind: u8,
    /// Frame kind byte of a `HEADROOM_EVENT_OTHER` frame.
    pub frame_kind: u8,
    /// Sequence number of an intact frame.
    pub seq: u16,
    /// Format version of a header frame.
    pub version_major: u8,
    /// Format version of a header frame.
    pub version_minor: u8,
    /// Why the bytes of a `HEADROOM_EVENT_DAMAGED` were skipped
    /// (a `headroom_status` code).
    pub error: i32,
    /// Stream offset of the frame's (or the damage's) first byte.
    pub offset: u64,
    /// Bytes skipped as damage.
    pub length: u64,
    /// The header of a `HEADROOM_EVENT_HEADER`.
    pub header: headroom_log_header,
    /// The record of a `HEADROOM_EVENT_RECORD`.
    pub record: headroom_log_record,
    /// The decision of a `HEADROOM_EVENT_DECISION`.
    pub decision: headroom_decision_record,
}

fn c_event(ev: &Event) -> headroom_event {
    let mut e = headroom_event::default();
    match *ev {
        Event::Frame {
            offset,
            seq,
            ref frame,
        } => {
            e.offset = offset;
            e.seq = seq;
            match frame {
                Frame::Header { header, version } => {
                    e.kind = HEADROOM_EVENT_HEADER;
                    e.header = c_log_header(header);
                    e.version_major = version.major;
                    e.version_minor = version.minor;
                }
                Frame::Record(r) => {
                    e.kind = HEADROOM_EVENT_RECORD;
                    e.record = c_log_record(r);
                }
                Frame::Decision(d) => {
                    e.kind = HEADROOM_EVENT_DECISION;
                    e.decision = c_decision_record(d);
                }
                Frame::Other { kind } => {
                    e.kind = HEADROOM_EVENT_OTHER;
                    e.frame_kind = *kind;
                }
                // The streaming decoder hands out a format 2 block's records
                // one event each; a whole block is only what the one-shot
                // decoder returns, so this arm is not reached from a stream.
                Frame::Block(_) => {
                    e.kind = HEADROOM_EVENT_OTHER;
                    e.frame_kind = headroom::record::codec::KIND_BLOCK;
                }
            }
        }
        Event::Damaged { offset, len, error } => {
            e.kind = HEADROOM_EVENT_DAMAGED;
            e.offset = offset;
            e.length = len;
            e.error = headroom_status::from(error) as i32;
        }
    }
    e
}

/// Start `dec` at stream offset 0.
///
/// # Safety
/// `dec` is NULL or points to a writable `headroom_decoder`.
#[no_mangle]
pub unsafe extern "C" fn headroom_decoder_init(dec: *mut headroom_decoder) -> headroom_status {
    // SAFETY: guaranteed by the caller.
    match unsafe { slot(dec) } {
        Some(slot) => slot.set::<headroom_decoder>(Ok(FrameDecoder::new())),
        None => headroom_status::HEADROOM_ERR_NULL,
    }
}

/// Feed bytes to `dec`: it consumes bytes from `*data` (advancing `*data`
/// and decreasing `*len`) until one event is complete, writes it to
/// `event` and returns 1; returns 0 once the bytes are used up (a partial
/// frame is kept for the next call), or -1 on a NULL pointer or an
/// uninitialised decoder. Call it again until it returns 0:
///
/// ```c
/// while (headroom_decoder_feed(&dec, &p, &n, &ev) == 1) { handle(&ev); }
/// ```
///
/// # Safety
/// `dec` points to a `headroom_decoder`; `data` and `len` to a pointer and
/// a length such that `*data` is valid for reads of `*len` bytes; `event`
/// is valid for a write.
#[no_mangle]
pub unsafe extern "C" fn headroom_decoder_feed(
    dec: *mut headroom_decoder,
    data: *mut *const u8,
    len: *mut usize,
    event: *mut headroom_event,
) -> i32 {
    // SAFETY: guaranteed by the caller.
    let Some(slot) = (unsafe { slot(dec) }) else {
        return -1;
    };
    let Ok(dec) = slot.get_mut::<headroom_decoder>() else {
        return -1;
    };
    // SAFETY: guaranteed by the caller.
    let (Some(data), Some(len)) = (unsafe { data.as_mut() }, unsafe { len.as_mut() }) else {
        return -1;
    };
    if event.is_null() || (data.is_null() && *len > 0) {
        return -1;
    }
    let bytes: &[u8] = if *len == 0 {
        &[]
    } else {
        // SAFETY: `*data` is valid for reads of `*len` bytes (caller).
        unsafe { core::slice::from_raw_parts(*data, *len) }
    };
    let mut rest = bytes;
    let ev = dec.feed(&mut rest);
    let used = bytes.len() - rest.len();
    if used > 0 {
        // SAFETY: `used ≤ *len`: the pointer stays inside the caller's bytes.
        *data = unsafe { (*data).add(used) };
        *len -= used;
    }
    match ev {
        Some(ev) => {
            // SAFETY: checked non-NULL above; valid for a write (caller).
            unsafe { *event = c_event(&ev) };
            1
        }
        None => 0,
    }
}

/// At the end of the stream: the last event, if bytes were left over
/// (`HEADROOM_EVENT_DAMAGED` with `HEADROOM_ERR_TRUNCATED`, or a frame
/// found behind damage), written to `event` with 1; 0 if nothing was left;
/// -1 on a NULL pointer or an uninitialised decoder.
///
/// # Safety
/// `dec` points to a `headroom_decoder`; `event` is valid for a write.
#[no_mangle]
pub unsafe extern "C" fn headroom_decoder_finish(
    dec: *mut headroom_decoder,
    event: *mut headroom_event,
) -> i32 {
    // SAFETY: guaranteed by the caller.
    let Some(slot) = (unsafe { slot(dec) }) else {
        return -1;
    };
    let Ok(dec) = slot.get_mut::<headroom_decoder>() else {
        return -1;
    };
    if event.is_null() {
        return -1;
    }
    match dec.finish() {
        Some(ev) => {
            // SAFETY: checked non-NULL above; valid for a write (caller).
            unsafe { *event = c_event(&ev) };
            1
        }
        None => 0,
    }
}
