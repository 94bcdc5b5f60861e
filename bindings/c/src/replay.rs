//! Replay of a field log through the controller (the engine's
//! `control::Replay`: the semantics of `headroom replay`, record by record),
//! and its running totals.

use headroom::control::{ControllerConfig, Reason, Summary};

use crate::codec::{headroom_log_header, headroom_log_record, log_record};
use crate::settings::{headroom_settings, resolved};
use crate::state::{call, fits, input, output, required_output, slot, slot_ref, Block, Slot};
use crate::{headroom_status, WindowReplay};

/// Bytes of a `headroom_replay`.
/// (568 in use on a 64-bit host today; the rest is room for what the
/// engine adds.)
pub const HEADROOM_REPLAY_SIZE: usize = 2048;

/// Number of reason codes (length of `headroom_summary.ignored_readings`).
pub const HEADROOM_REASON_COUNT: usize = 21;

const _: () = assert!(HEADROOM_REASON_COUNT == Reason::COUNT);

/// A replay's state, caller-allocated (`HEADROOM_REPLAY_SIZE` bytes,
/// aligned to `HEADROOM_STATE_ALIGN`); start with `headroom_replay_init`.
#[repr(C, align(8))]
pub struct headroom_replay {
    opaque: [u8; HEADROOM_REPLAY_SIZE],
}

// SAFETY: size and alignment checked just below.
unsafe impl Block for headroom_replay {
    type Inner = WindowReplay;
    const TAG: u32 = 0x6872_5231;
}
const _: () = assert!(fits::<WindowReplay>(
    HEADROOM_REPLAY_SIZE,
    crate::HEADROOM_STATE_ALIGN
));

/// One replayed record.
#[repr(C)]
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct headroom_replayed_record {
    /// Time of the record, ms.
    pub t_ms: u64,
    /// Power the controller chose for this record, dBm.
    pub chosen_dbm: f32,
    /// SNR the packet would have had at the chosen power, dB
    /// (`has_replayed_snr`).
    pub replayed_snr_db: f32,
    /// The controller's path-loss estimate after this record, dB
    /// (`has_path_loss`).
    pub path_loss_db: f32,
    /// The adaptive margin after this record, dB.
    pub margin_db: f32,
    /// Power chosen for the next record, dBm.
    pub next_tx_dbm: f32,
    /// Outcome code (`headroom_outcome_name`).
    pub outcome: u8,
    /// Reason code (`headroom_reason_name`).
    pub reason: u8,
    /// 1: lost as logged, 0: delivered as logged, -1: not judgeable.
    pub logged_lost: i8,
    /// Non-zero: `chosen_dbm` was the highest allowed level.
    pub at_max: u8,
    /// `replayed_snr_db` is valid.
    pub has_replayed_snr: u8,
    /// `path_loss_db` is valid.
    pub has_path_loss: u8,
    /// Index of the chosen rate in the rate table in force.
    pub rate: u8,
    /// `rate` is valid (a rate table is in force).
    pub has_rate: u8,
}

/// A replay's running totals: counts and linear sums, so that totals of
/// many logs (devices, threads, machines) add up exactly (the engine's
/// `control::Summary`; `headroom replay --format json` prints them as `sums`).
#[repr(C)]
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct headroom_summary {
    /// Logs in these totals.
    pub logs: u64,
    /// Records replayed.
    pub records: u64,
    /// Records judged (delivered + lost).
    pub judged: u64,
    /// Judged records lost.
    pub lost: u64,
    /// Records that could not be judged.
    pub unjudged: u64,
    /// Judged records sent at the highest allowed level.
    pub judged_at_max: u64,
    /// Of those, the lost ones.
    pub lost_at_max: u64,
    /// Records whose power differs from the previous record's.
    pub power_changes: u64,
    /// Readings ignored, by reason code (only the `ignored_*` reasons count).
    pub ignored_readings: [u64; HEADROOM_REASON_COUNT],
    /// Σ chosen power, mW.
    pub tx_mw_sum: f64,
    /// Σ highest allowed power, mW.
    pub max_mw_sum: f64,
    /// Logged records judged by the same rule.
    pub logged_judged: u64,
    /// Of those, lost as logged.
    pub logged_lost: u64,
    /// Records sent whose readings never came back.
    pub logged_without_readings: u64,
    /// Records with a finite logged transmit power.
    pub logged_records_with_tx: u64,
    /// Σ logged transmit power over those, mW.
    pub logged_tx_mw_sum: f64,
    /// Σ chosen power over the same records, mW.
    pub logged_chosen_mw_sum: f64,
    /// Highest power chosen, dBm (`has_max_tx_used`).
    pub max_tx_dbm_used: f32,
    /// Highest level the controller was allowed, dBm.
    pub max_allowed_dbm: f32,
    /// `max_tx_dbm_used` is valid.
    pub has_max_tx_used: u8,
}

fn c_summary(s: &Summary) -> headroom_summary {
    headroom_summary {
        logs: s.logs,
        records: s.records,
        judged: s.judged,
        lost: s.lost,
        unjudged: s.unjudged,
        judged_at_max: s.judged_at_max,
        lost_at_max: s.lost_at_max,
        power_changes: s.power_changes,
        ignored_readings: s.ignored_readings,
        tx_mw_sum: s.tx_mw_sum,
        max_mw_sum: s.max_mw_sum,
        logged_judged: s.logged.judged,
        logged_lost: s.logged.lost,
        logged_without_readings: s.logged.without_readings,
        logged_records_with_tx: s.logged.records_with_tx,
        logged_tx_mw_sum: s.logged.tx_mw_sum,
        logged_chosen_mw_sum: s.logged.chosen_mw_sum,
        max_tx_dbm_used: s.max_tx_dbm_used.map_or(0.0, |d| d.0),
        max_allowed_dbm: s.max_allowed.0,
        has_max_tx_used: u8::from(s.max_tx_dbm_used.is_some()),
    }
}

/// Start the replay `r` with the settings `s` over the log's header
/// `header` (NULL: the log has none) and the engine's defaults: with
/// settings just initialised, the settings `headroom replay LOG` uses.
///
/// # Safety
/// `r` is NULL or points to a writable `headroom_replay`; `s` and `header`
/// as for `headroom_controller_init`.
#[no_mangle]
pub unsafe extern "C" fn headroom_replay_init(
    r: *mut headroom_replay,
    s: *const headroom_settings,
    header: *const headroom_log_header,
) -> headroom_status {
    // SAFETY: guaranteed by the caller.
    let Some(slot) = (unsafe { slot(r) }) else {
        return headroom_status::HEADROOM_ERR_NULL;
    };
    // The settings and the replay are built in frames of their own (not
    // inlined here): together in one frame they passed the stack a
    // Cortex-M0 with 16 KiB of RAM leaves beside the C demo's statics.
    // SAFETY: guaranteed by the caller.
    match unsafe { resolved_config(s, header) } {
        Ok(config) => build_replay(slot, &config),
        Err(e) => slot.set::<headroom_replay>(Err(e)),
    }
}

/// The settings in force for a replay (see [`headroom_replay_init`]).
///
/// # Safety
/// As for [`headroom_replay_init`].
#[inline(never)]
pub(crate) unsafe fn resolved_config(
    s: *const headroom_settings,
    header: *const headroom_log_header,
) -> Result<ControllerConfig, headroom_status> {
    // SAFETY: guaranteed by the caller.
    Ok(unsafe { resolved(s, header) }?.config)
}

/// Build the replay of `config` into `slot`.
#[inline(never)]
fn build_replay(slot: &mut Slot<WindowReplay>, config: &ControllerConfig) -> headroom_status {
    let replay = WindowReplay::new(*config).map_err(headroom_status::from);
    slot.set::<headroom_replay>(replay)
}

/// Replay one record; what happened to it goes to `step` (NULL: not wanted).
///
/// # Safety
/// `r` points to a `headroom_replay`; `record` to a `headroom_log_record`;
/// `step` is NULL or valid for a write.
#[no_mangle]
pub unsafe extern "C" fn headroom_replay_step(
    r: *mut headroom_replay,
    record: *const headroom_log_record,
    step: *mut headroom_replayed_record,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let slot = unsafe { slot(r) }.ok_or(headroom_status::HEADROOM_ERR_NULL)?;
        let replay = slot.get_mut::<headroom_replay>()?;
        // SAFETY: guaranteed by the caller.
        let rec = log_record(unsafe { input(record) }?);
        let s = replay.step(&rec);
        let c = headroom_replayed_record {
            t_ms: s.t_ms,
            chosen_dbm: s.chosen.0,
            replayed_snr_db: s.replayed_snr.map_or(0.0, |d| d.0),
            path_loss_db: s.path_loss_estimate.map_or(0.0, |d| d.0),
            margin_db: s.margin.0,
            next_tx_dbm: s.next_tx.0,
            outcome: s.outcome.code(),
            reason: s.reason.code(),
            logged_lost: match s.logged_lost {
                Some(true) => 1,
                Some(false) => 0,
                None => -1,
            },
            at_max: u8::from(s.at_max),
            has_replayed_snr: u8::from(s.replayed_snr.is_some()),
            has_path_loss: u8::from(s.path_loss_estimate.is_some()),
            rate: s.rate.unwrap_or(0),
            has_rate: u8::from(s.rate.is_some()),
        };
        // SAFETY: guaranteed by the caller.
        unsafe { output(step, c) };
        Ok(())
    })
}

/// The totals so far to `summary`.
///
/// # Safety
/// `r` points to a `headroom_replay`; `summary` is valid for a write.
#[no_mangle]
pub unsafe extern "C" fn headroom_replay_summary(
    r: *const headroom_replay,
    summary: *mut headroom_summary,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let slot = unsafe { slot_ref(r) }.ok_or(headroom_status::HEADROOM_ERR_NULL)?;
        let replay = slot.get::<headroom_replay>()?;
        // SAFETY: guaranteed by the caller.
        unsafe { required_output(summary, c_summary(replay.summary())) }
    })
}
