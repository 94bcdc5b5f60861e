//! The per-packet transmit-power controller (the engine's
//! `control::Controller` over a window of `HEADROOM_WINDOW` readings).

use headroom::control::{Decision, Observation, Reason};
use headroom::units::{Db, Dbm};

use crate::codec::headroom_log_header;
use crate::settings::{headroom_settings, resolved};
use crate::state::{call, fits, input, output, required_output, slot, slot_ref, Block};
use crate::{headroom_status, WindowController};

/// Bytes of a `headroom_controller`.
/// (272 in use on a 64-bit host today; the rest is room for what the
/// engine adds.)
pub const HEADROOM_CONTROLLER_SIZE: usize = 1024;

/// A controller's state, caller-allocated (`HEADROOM_CONTROLLER_SIZE`
/// bytes, aligned to `HEADROOM_STATE_ALIGN`; a plain copy of the bytes is
/// a copy of the controller); start with `headroom_controller_init`.
#[repr(C, align(8))]
pub struct headroom_controller {
    opaque: [u8; HEADROOM_CONTROLLER_SIZE],
}

/// The controller and the reason of its last decision.
pub(crate) struct State {
    controller: WindowController,
    last: Option<Reason>,
}

impl State {
    /// A controller that has not decided yet.
    pub(crate) fn new(controller: WindowController) -> Self {
        State {
            controller,
            last: None,
        }
    }
}

// SAFETY: size and alignment checked just below.
unsafe impl Block for headroom_controller {
    type Inner = State;
    const TAG: u32 = 0x6872_4331;
}
const _: () = assert!(fits::<State>(
    HEADROOM_CONTROLLER_SIZE,
    crate::HEADROOM_STATE_ALIGN
));

/// `headroom_observation.kind`: the packet was delivered and the far end
/// reported its readings (`tx_dbm`, `rssi_dbm`, `noise_dbm`, and `snr_db`
/// when `has_snr` is non-zero).
pub const HEADROOM_OBSERVATION_FEEDBACK: u8 = 0;
/// `headroom_observation.kind`: the packet was acknowledged without readings.
pub const HEADROOM_OBSERVATION_ACKED: u8 = 1;
/// `headroom_observation.kind`: the packet was lost.
pub const HEADROOM_OBSERVATION_LOST: u8 = 2;
/// `headroom_observation.kind`: the far end's beacon was heard
/// (`beacon_tx_dbm`, `rssi_dbm`); open loop.
pub const HEADROOM_OBSERVATION_BEACON: u8 = 3;
/// `headroom_observation.kind`: nothing is known about the packet.
pub const HEADROOM_OBSERVATION_MISSING: u8 = 4;

/// What the device learnt about the packet it just sent (or the beacon it
/// heard). `kind` says which fields are read; the others are ignored.
#[repr(C)]
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct headroom_observation {
    /// Time of the packet, ms.
    pub t_ms: u64,
    /// One of `HEADROOM_OBSERVATION_*`.
    pub kind: u8,
    /// `snr_db` is given (non-zero): used instead of `rssi − noise`.
    pub has_snr: u8,
    /// Power the packet was actually sent at, dBm.
    pub tx_dbm: f32,
    /// Received power at the far end (of a beacon: here), dBm.
    pub rssi_dbm: f32,
    /// Noise floor at the far end, dBm.
    pub noise_dbm: f32,
    /// SNR the far end measured, dB.
    pub snr_db: f32,
    /// Power the far end sent its beacon at, dBm.
    pub beacon_tx_dbm: f32,
}

/// The controller's answer to one observation.
#[repr(C)]
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct headroom_decision {
    /// Transmit power for the next packet, dBm.
    pub tx_dbm: f32,
    /// Adaptive margin after this update, dB.
    pub margin_db: f32,
    /// What the estimates asked for before rounding and limits, dBm
    /// (valid when `has_wanted` is non-zero).
    pub wanted_dbm: f32,
    /// Predicted path loss, antenna gains included, dB (`has_path_loss`).
    pub path_loss_db: f32,
    /// RMS prediction error of the loss to noise, dB (`has_spread`).
    pub spread_db: f32,
    /// Filtered noise floor at the far end, dBm (`has_noise`).
    pub noise_dbm: f32,
    /// Readings in the window.
    pub readings: u16,
    /// Why this power (`headroom_reason_name`).
    pub reason: u8,
    /// `wanted_dbm` is valid.
    pub has_wanted: u8,
    /// `path_loss_db` is valid.
    pub has_path_loss: u8,
    /// `spread_db` is valid.
    pub has_spread: u8,
    /// `noise_dbm` is valid.
    pub has_noise: u8,
}

fn value_and_flag(v: Option<f32>) -> (f32, u8) {
    match v {
        Some(v) => (v, 1),
        None => (0.0, 0),
    }
}

pub(crate) fn c_decision(d: &Decision) -> headroom_decision {
    let (wanted_dbm, has_wanted) = value_and_flag(d.wanted().map(|v| v.0));
    let (path_loss_db, has_path_loss) = value_and_flag(d.path_loss().map(|v| v.0));
    let (spread_db, has_spread) = value_and_flag(d.spread().map(|v| v.0));
    let (noise_dbm, has_noise) = value_and_flag(d.noise().map(|v| v.0));
    headroom_decision {
        tx_dbm: d.tx.0,
        margin_db: d.margin().0,
        wanted_dbm,
        path_loss_db,
        spread_db,
        noise_dbm,
        readings: d.readings,
        reason: d.reason.code(),
        has_wanted,
        has_path_loss,
        has_spread,
        has_noise,
    }
}

fn observation(o: &headroom_observation) -> Result<Observation, headroom_status> {
    let t_ms = o.t_ms;
    Ok(match o.kind {
        HEADROOM_OBSERVATION_FEEDBACK => Observation::Feedback {
            t_ms,
            tx: Dbm(o.tx_dbm),
            rssi: Dbm(o.rssi_dbm),
            noise: Dbm(o.noise_dbm),
            snr: (o.has_snr != 0).then_some(Db(o.snr_db)),
        },
        HEADROOM_OBSERVATION_ACKED => Observation::Acked { t_ms },
        HEADROOM_OBSERVATION_LOST => Observation::Lost { t_ms },
        HEADROOM_OBSERVATION_BEACON => Observation::Beacon {
            t_ms,
            beacon_tx: Dbm(o.beacon_tx_dbm),
            rssi: Dbm(o.rssi_dbm),
        },
        HEADROOM_OBSERVATION_MISSING => Observation::Missing { t_ms },
        _ => return Err(headroom_status::HEADROOM_ERR_OBSERVATION_KIND),
    })
}

/// Start the controller `c` with the settings `s` over the log header
/// `header` (NULL: none; a device without a log passes NULL) and the
/// engine's defaults. On a refusal `c` is left uninitialised, and
/// `headroom_settings_check` names the setting at fault.
///
/// # Safety
/// `c` is NULL or points to a writable `headroom_controller`; `s` is NULL
/// or points to a `headroom_settings`; `header` is NULL or points to a
/// `headroom_log_header`.
#[no_mangle]
pub unsafe extern "C" fn headroom_controller_init(
    c: *mut headroom_controller,
    s: *const headroom_settings,
    header: *const headroom_log_header,
) -> headroom_status {
    // SAFETY: guaranteed by the caller.
    let Some(slot) = (unsafe { slot(c) }) else {
        return headroom_status::HEADROOM_ERR_NULL;
    };
    // SAFETY: guaranteed by the caller.
    let state = unsafe { resolved(s, header) }
        .and_then(|r| Ok(State::new(WindowController::new(r.config)?)));
    slot.set::<headroom_controller>(state)
}

/// Feed one observation to `c`; the decision for the next packet goes to
/// `decision` (NULL: not wanted).
///
/// # Safety
/// `c` points to a `headroom_controller`; `obs` to a
/// `headroom_observation`; `decision` is NULL or valid for a write.
#[no_mangle]
pub unsafe extern "C" fn headroom_controller_update(
    c: *mut headroom_controller,
    obs: *const headroom_observation,
    decision: *mut headroom_decision,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let slot = unsafe { slot(c) }.ok_or(headroom_status::HEADROOM_ERR_NULL)?;
        let state = slot.get_mut::<headroom_controller>()?;
        // SAFETY: guaranteed by the caller.
        let o = observation(unsafe { input(obs) }?)?;
        let d = state.controller.update(&o);
        state.last = Some(d.reason);
        // SAFETY: guaranteed by the caller.
        unsafe { output(decision, c_decision(&d)) };
        Ok(())
    })
}

/// The controller in `c`, read-only.
///
/// # Safety
/// `c` is NULL or points to a `headroom_controller`.
unsafe fn state<'a>(c: *const headroom_controller) -> Result<&'a State, headroom_status> {
    // SAFETY: guaranteed by the caller.
    let slot = unsafe { slot_ref(c) }.ok_or(headroom_status::HEADROOM_ERR_NULL)?;
    slot.get::<headroom_controller>()
}

/// The power for the next packet, dBm, to `tx_dbm`.
///
/// # Safety
/// `c` points to a `headroom_controller`; `tx_dbm` is valid for a write.
#[no_mangle]
pub unsafe extern "C" fn headroom_controller_tx(
    c: *const headroom_controller,
    tx_dbm: *mut f32,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let s = unsafe { state(c) }?;
        // SAFETY: guaranteed by the caller.
        unsafe { required_output(tx_dbm, s.controller.tx().0) }
    })
}

/// The adaptive margin, dB, to `margin_db`.
///
/// # Safety
/// `c` points to a `headroom_controller`; `margin_db` is valid for a write.
#[no_mangle]
pub unsafe extern "C" fn headroom_controller_margin(
    c: *const headroom_controller,
    margin_db: *mut f32,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let s = unsafe { state(c) }?;
        // SAFETY: guaranteed by the caller.
        unsafe { required_output(margin_db, s.controller.margin().0) }
    })
}

/// The reason code of the last decision to `reason`
/// (`HEADROOM_ERR_NO_DECISION_YET` before the first update).
///
/// # Safety
/// `c` points to a `headroom_controller`; `reason` is valid for a write.
#[no_mangle]
pub unsafe extern "C" fn headroom_controller_reason(
    c: *const headroom_controller,
    reason: *mut u8,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let s = unsafe { state(c) }?;
        let r = s
            .last
            .ok_or(headroom_status::HEADROOM_ERR_NO_DECISION_YET)?;
        // SAFETY: guaranteed by the caller.
        unsafe { required_output(reason, r.code()) }
    })
}

/// The lowest and highest power the controller may choose, dBm (the
/// highest is within the radio's maximum and the EIRP cap).
///
/// # Safety
/// `c` points to a `headroom_controller`; `lowest_dbm` and `highest_dbm`
/// are valid for writes.
#[no_mangle]
pub unsafe extern "C" fn headroom_controller_limits(
    c: *const headroom_controller,
    lowest_dbm: *mut f32,
    highest_dbm: *mut f32,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let s = unsafe { state(c) }?;
        let (lo, hi) = s.controller.limits();
        if lowest_dbm.is_null() || highest_dbm.is_null() {
            return Err(headroom_status::HEADROOM_ERR_NULL);
        }
        // SAFETY: guaranteed by the caller.
        unsafe { required_output(lowest_dbm, lo.0) }?;
        // SAFETY: guaranteed by the caller.
        unsafe { required_output(highest_dbm, hi.0) }
    })
}
