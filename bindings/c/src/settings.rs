//! Controller settings by their keys, resolved and validated by the engine.
//!
//! A `headroom_settings` is one layer of the engine's settings resolution
//! (`control::settings::Layer`): the caller's explicit choices, each named
//! by its key, the same key as in the controller TOML file and the JSON of
//! `headroom replay` (`"required_snr_db"`, `"max_tx_dbm"`, ...). Init, set
//! and check go through `control::settings::resolve`, with a log header's
//! settings under the caller's and the engine's defaults under both, exactly
//! as `headroom replay --set KEY=VALUE LOG` resolves them. Every rule lives
//! in the engine: a setting the engine adds is reachable here by its key
//! without a new line.

use core::ffi::{c_char, CStr};

use headroom::control::settings::{resolve, Kind, Layer, ResolveError, Resolved, Setting, Value};
use headroom::control::{EirpCap, LevelTable, PowerSteps, MAX_LEVELS};
use headroom::units::{Db, Dbm};

use crate::codec::{headroom_log_header, log_header};
use crate::headroom_status;
use crate::state::{call, fits, optional, slot, slot_ref, Block};
use crate::text::copy_out;

/// Bytes of a `headroom_settings`.
/// (176 in use on a 64-bit host today; the rest is room for what the
/// engine adds.)
pub const HEADROOM_SETTINGS_SIZE: usize = 512;

/// Most levels in a table of power steps (`headroom_settings_set_steps_table`).
pub const HEADROOM_MAX_LEVELS: usize = 16;

const _: () = assert!(HEADROOM_MAX_LEVELS == MAX_LEVELS);

/// Controller settings, caller-allocated (`HEADROOM_SETTINGS_SIZE` bytes,
/// aligned to `HEADROOM_STATE_ALIGN`); start with `headroom_settings_init`.
#[repr(C, align(8))]
pub struct headroom_settings {
    opaque: [u8; HEADROOM_SETTINGS_SIZE],
}

// SAFETY: size and alignment checked just below.
unsafe impl Block for headroom_settings {
    type Inner = Layer;
    const TAG: u32 = 0x6872_5331;
}
const _: () = assert!(fits::<Layer>(
    HEADROOM_SETTINGS_SIZE,
    crate::HEADROOM_STATE_ALIGN
));

/// The engine's settings layer in `s`.
///
/// # Safety
/// `s` is NULL or points to a `headroom_settings` the caller owns.
pub(crate) unsafe fn layer_mut<'a>(
    s: *mut headroom_settings,
) -> Result<&'a mut Layer, headroom_status> {
    // SAFETY: guaranteed by the caller.
    let slot = unsafe { slot(s) }.ok_or(headroom_status::HEADROOM_ERR_NULL)?;
    slot.get_mut::<headroom_settings>()
}

/// The setting named by the C string `key`.
///
/// # Safety
/// `key` is NULL or a NUL-terminated string.
unsafe fn setting(key: *const c_char) -> Result<Setting, headroom_status> {
    if key.is_null() {
        return Err(headroom_status::HEADROOM_ERR_NULL);
    }
    // SAFETY: guaranteed by the caller.
    let key = unsafe { CStr::from_ptr(key) };
    key.to_str()
        .ok()
        .and_then(Setting::from_key)
        .ok_or(headroom_status::HEADROOM_ERR_UNKNOWN_SETTING)
}

/// Start `s` with no setting of its own: every setting then comes from the
/// log header given to init or check, or from the engine's defaults.
///
/// # Safety
/// `s` is NULL or points to a writable `headroom_settings`.
#[no_mangle]
pub unsafe extern "C" fn headroom_settings_init(s: *mut headroom_settings) -> headroom_status {
    // SAFETY: guaranteed by the caller.
    match unsafe { slot(s) } {
        Some(slot) => slot.set::<headroom_settings>(Ok(Layer::empty())),
        None => headroom_status::HEADROOM_ERR_NULL,
    }
}

/// Set the setting `key` to a number: dB, dBm, dBi or a probability, as
/// the setting's unit says (its key names it: `"max_tx_dbm"`,
/// `"target_outage"`); for `"eirp_cap_dbm"` the cap's level. The value is
/// judged when the settings are checked or used.
///
/// # Safety
/// `s` is NULL or points to a `headroom_settings`; `key` is NULL or a
/// NUL-terminated string.
#[no_mangle]
pub unsafe extern "C" fn headroom_settings_set_number(
    s: *mut headroom_settings,
    key: *const c_char,
    value: f32,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let layer = unsafe { layer_mut(s) }?;
        // SAFETY: guaranteed by the caller.
        let setting = unsafe { setting(key) }?;
        let v = match setting.kind() {
            Kind::Cap => Value::Cap(EirpCap::AtMost(Dbm(value))),
            _ => Value::Number(value),
        };
        Ok(layer.set(setting, v)?)
    })
}

/// Set the setting `key` to a whole number (a count of readings or
/// packets, or milliseconds, as the setting says).
///
/// # Safety
/// As `headroom_settings_set_number`.
#[no_mangle]
pub unsafe extern "C" fn headroom_settings_set_whole(
    s: *mut headroom_settings,
    key: *const c_char,
    value: u32,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let layer = unsafe { layer_mut(s) }?;
        // SAFETY: guaranteed by the caller.
        let setting = unsafe { setting(key) }?;
        Ok(layer.set(setting, Value::Whole(value))?)
    })
}

/// Set `"eirp_cap_dbm"` to no cap: only `max_tx_dbm` bounds the power.
///
/// # Safety
/// `s` is NULL or points to a `headroom_settings`.
#[no_mangle]
pub unsafe extern "C" fn headroom_settings_set_no_cap(
    s: *mut headroom_settings,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let layer = unsafe { layer_mut(s) }?;
        Ok(layer.set(Setting::EirpCapDbm, Value::Cap(EirpCap::NoCap))?)
    })
}

/// Set `"steps"` to every `min_tx_dbm + k·step_db` up to the ceiling.
///
/// # Safety
/// `s` is NULL or points to a `headroom_settings`.
#[no_mangle]
pub unsafe extern "C" fn headroom_settings_set_steps_uniform(
    s: *mut headroom_settings,
    step_db: f32,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let layer = unsafe { layer_mut(s) }?;
        let steps = PowerSteps::Uniform(Db(step_db));
        Ok(layer.set(Setting::Steps, Value::Steps(steps))?)
    })
}

/// Set `"steps"` to a table of `count` levels, dBm, strictly ascending
/// (1 to `HEADROOM_MAX_LEVELS`).
///
/// # Safety
/// `s` is NULL or points to a `headroom_settings`; `levels` is NULL or
/// valid for reads of `count` floats.
#[no_mangle]
pub unsafe extern "C" fn headroom_settings_set_steps_table(
    s: *mut headroom_settings,
    levels: *const f32,
    count: usize,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let layer = unsafe { layer_mut(s) }?;
        if levels.is_null() {
            return Err(headroom_status::HEADROOM_ERR_NULL);
        }
        // At most one level more than a table holds is read: enough for
        // the engine to refuse a table that is too long.
        let n = count.min(MAX_LEVELS + 1);
        // SAFETY: `levels` is valid for reads of `count ≥ n` floats (caller).
        let given = unsafe { core::slice::from_raw_parts(levels, n) };
        let mut dbm = [Dbm(0.0); MAX_LEVELS + 1];
        for (d, l) in dbm.iter_mut().zip(given) {
            *d = Dbm(*l);
        }
        let table = LevelTable::new(dbm.get(..n).unwrap_or(&[]))?;
        Ok(layer.set(Setting::Steps, Value::Steps(PowerSteps::Table(table)))?)
    })
}

/// Remove `key` from `s`: it comes from the log header or the defaults again.
///
/// # Safety
/// As `headroom_settings_set_number`.
#[no_mangle]
pub unsafe extern "C" fn headroom_settings_unset(
    s: *mut headroom_settings,
    key: *const c_char,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let layer = unsafe { layer_mut(s) }?;
        // SAFETY: guaranteed by the caller.
        let setting = unsafe { setting(key) }?;
        layer.unset(setting);
        Ok(())
    })
}

/// Resolve `s` over `header` (NULL: none) and the engine's defaults: the
/// engine's answer, or why `s` could not be read.
///
/// # Safety
/// `s` is NULL or points to a `headroom_settings`; `header` is NULL or
/// points to a `headroom_log_header`.
unsafe fn resolve_with(
    s: *const headroom_settings,
    header: *const headroom_log_header,
) -> Result<Result<Resolved, ResolveError>, headroom_status> {
    // SAFETY: guaranteed by the caller.
    let slot = unsafe { slot_ref(s) }.ok_or(headroom_status::HEADROOM_ERR_NULL)?;
    let flags = slot.get::<headroom_settings>()?;
    // SAFETY: guaranteed by the caller.
    let header = unsafe { optional(header) }.map(log_header);
    let header = header
        .as_ref()
        .map_or_else(Layer::empty, Layer::from_header);
    Ok(resolve(flags, &header, &Layer::empty(), &Layer::defaults()))
}

/// The settings in force: `s` over `header` (NULL: none) over the
/// engine's defaults, validated.
///
/// # Safety
/// As `resolve_with`.
pub(crate) unsafe fn resolved(
    s: *const headroom_settings,
    header: *const headroom_log_header,
) -> Result<Resolved, headroom_status> {
    // SAFETY: guaranteed by the caller.
    Ok(unsafe { resolve_with(s, header) }??)
}

/// Check the settings `s` over the log header `header` (NULL: none) and
/// the engine's defaults, as the controller and the replay would resolve
/// them. On a refusal of a setting its key is copied into `setting`
/// (`setting_len` bytes, NUL-terminated, cut to fit; NULL: not wanted).
///
/// # Safety
/// `s` and `header` as for `headroom_controller_init`; `setting` is NULL or
/// valid for writes of `setting_len` bytes.
#[no_mangle]
pub unsafe extern "C" fn headroom_settings_check(
    s: *const headroom_settings,
    header: *const headroom_log_header,
    setting: *mut c_char,
    setting_len: usize,
) -> headroom_status {
    // SAFETY: guaranteed by the caller.
    match unsafe { resolve_with(s, header) } {
        Ok(Ok(_)) => headroom_status::HEADROOM_OK,
        Ok(Err(e)) => {
            // SAFETY: guaranteed by the caller.
            unsafe { copy_out(e.setting(), setting, setting_len) };
            e.into()
        }
        Err(status) => status,
    }
}

/// The key of the setting with position `index` in the engine's table of
/// settings (0 to `headroom_setting_count() - 1`), copied into `buf` as
/// `headroom_settings_check` does; returns the key's length, 0 for an
/// index past the end.
///
/// # Safety
/// `buf` is NULL or valid for writes of `len` bytes.
#[no_mangle]
pub unsafe extern "C" fn headroom_setting_key(index: usize, buf: *mut c_char, len: usize) -> usize {
    match Setting::ALL.get(index) {
        // SAFETY: guaranteed by the caller.
        Some(s) => unsafe { copy_out(s.key(), buf, len) },
        None => 0,
    }
}

/// Number of settings in the engine's table.
#[no_mangle]
pub extern "C" fn headroom_setting_count() -> usize {
    Setting::COUNT
}
