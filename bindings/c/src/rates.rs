//! The joint choice of rate and power from C: a rate table as a setting
//! (`"rates"`, resolved with every other setting by the engine) and the
//! controller and replay built with an energy profile, which prices each
//! rate (`headroom_controller_init_energy`, `headroom_replay_init_energy`).

use core::ffi::c_char;

use headroom::control::settings::{Setting, Value};
use headroom::control::ControllerConfig;
use headroom::energy::ChargeTable;
use headroom::rate::{Rate, RateTable, MAX_RATES, RATE_NAME_LEN};
use headroom::units::Db;

use crate::codec::headroom_log_header;
use crate::controller::{headroom_controller, State};
use crate::energy::{headroom_energy_profile, profile};
use crate::replay::headroom_replay;
use crate::settings::{headroom_settings, layer_mut, resolved};
use crate::state::{call, input, slot, Slot};
use crate::{headroom_status, WindowController, WindowReplay};

/// Most rates of a rate table.
pub const HEADROOM_MAX_RATES: usize = 8;
/// Longest rate name, bytes (without the terminating NUL).
pub const HEADROOM_RATE_NAME_LEN: usize = 8;
/// Bytes of a rate's name field: the longest name and its NUL.
pub const HEADROOM_RATE_NAME_SIZE: usize = 9;

const _: () = assert!(HEADROOM_RATE_NAME_SIZE == HEADROOM_RATE_NAME_LEN + 1);

const _: () = assert!(HEADROOM_MAX_RATES == MAX_RATES);
const _: () = assert!(HEADROOM_RATE_NAME_LEN == RATE_NAME_LEN);

/// One data rate of the radio.
#[repr(C)]
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct headroom_rate {
    /// The rate's name as logs spell it (`"sf9"`): 1 to
    /// `HEADROOM_RATE_NAME_LEN` printable ASCII bytes, NUL-terminated.
    pub name: [c_char; HEADROOM_RATE_NAME_SIZE],
    /// SNR below which the far end loses a packet at this rate, dB.
    pub required_snr_db: f32,
    /// Time on air of one packet at this rate, µs.
    pub airtime_us: u32,
    /// Noise bandwidth of the receiver at this rate, Hz (`has_noise_bandwidth`).
    pub noise_bandwidth_hz: f32,
    /// Non-zero: `noise_bandwidth_hz` is given (all rates of a table, or none).
    pub has_noise_bandwidth: u8,
}

/// The engine's rate of `r`.
fn rate(r: &headroom_rate) -> Result<Rate, headroom_status> {
    let mut bytes = [0u8; HEADROOM_RATE_NAME_LEN];
    let mut len = None;
    for (i, c) in r.name.iter().enumerate() {
        if *c == 0 {
            len = Some(i);
            break;
        }
        if let Some(b) = bytes.get_mut(i) {
            // A C char is a byte.
            #[allow(clippy::cast_sign_loss)]
            {
                *b = *c as u8;
            }
        }
    }
    let name = len
        .and_then(|n| bytes.get(..n))
        .and_then(|b| core::str::from_utf8(b).ok())
        .ok_or(headroom_status::HEADROOM_ERR_INVALID_INPUT)?;
    let bandwidth = (r.has_noise_bandwidth != 0).then_some(r.noise_bandwidth_hz);
    Ok(Rate::new(
        name,
        Db(r.required_snr_db),
        r.airtime_us,
        bandwidth,
    )?)
}

/// Set `"rates"` to the `count` rates at `rates` (0 to
/// `HEADROOM_MAX_RATES`; none: the power only). With a table and no
/// `required_snr_db` of its own, each rate's requirement is its own. More
/// than one rate needs an energy profile to choose between them: start the
/// controller or the replay with `headroom_controller_init_energy` or
/// `headroom_replay_init_energy`.
///
/// # Safety
/// `s` is NULL or points to a `headroom_settings`; `rates` is NULL (with
/// `count` 0) or valid for reads of `count` `headroom_rate`s.
#[no_mangle]
pub unsafe extern "C" fn headroom_settings_set_rates(
    s: *mut headroom_settings,
    rates: *const headroom_rate,
    count: usize,
) -> headroom_status {
    call(|| {
        // SAFETY: guaranteed by the caller.
        let layer = unsafe { layer_mut(s) }?;
        if count > HEADROOM_MAX_RATES {
            return Err(headroom_status::HEADROOM_ERR_TABLE_FULL);
        }
        let given: &[headroom_rate] = if count == 0 {
            &[]
        } else if rates.is_null() {
            return Err(headroom_status::HEADROOM_ERR_NULL);
        } else {
            // SAFETY: `rates` is valid for reads of `count` rates (caller).
            unsafe { core::slice::from_raw_parts(rates, count) }
        };
        let mut v = [Rate::default(); MAX_RATES];
        for (slot, r) in v.iter_mut().zip(given) {
            *slot = rate(r)?;
        }
        let table = RateTable::new(v.get(..count).unwrap_or(&[]))?;
        Ok(layer.set(Setting::Rates, Value::Rates(table))?)
    })
}

/// The charge table of `p` (the controller's view of the energy profile).
///
/// # Safety
/// `p` is NULL or points to a `headroom_energy_profile`.
#[inline(never)]
unsafe fn charge(p: *const headroom_energy_profile) -> Result<ChargeTable, headroom_status> {
    // SAFETY: guaranteed by the caller.
    let prof = profile(unsafe { input(p) }?)?;
    Ok(ChargeTable::from_profile(&prof)?)
}

/// Start the controller `c` as `headroom_controller_init` does, with the
/// energy profile `p` costing each rate of the settings' rate table
/// (`headroom_settings_set_rates`): with several rates it chooses the rate
/// with the power, for the least charge per delivered packet at the target
/// loss. The profile must cover every power the controller may use.
///
/// # Safety
/// As `headroom_controller_init`; `p` is NULL or points to a
/// `headroom_energy_profile`.
#[no_mangle]
pub unsafe extern "C" fn headroom_controller_init_energy(
    c: *mut headroom_controller,
    s: *const headroom_settings,
    header: *const headroom_log_header,
    p: *const headroom_energy_profile,
) -> headroom_status {
    // SAFETY: guaranteed by the caller.
    let Some(slot) = (unsafe { slot(c) }) else {
        return headroom_status::HEADROOM_ERR_NULL;
    };
    // SAFETY: guaranteed by the caller.
    let state = unsafe { resolved(s, header) }.and_then(|r| {
        // SAFETY: guaranteed by the caller.
        let table = unsafe { charge(p) }?;
        Ok(State::new(WindowController::with_charge(
            r.config,
            Some(table),
        )?))
    });
    slot.set::<headroom_controller>(state)
}

/// Start the replay `r` as `headroom_replay_init` does, with the energy
/// profile `p` costing each rate of the settings' rate table: the replay
/// `headroom replay --energy PROFILE LOG` makes (its rate table set here).
///
/// # Safety
/// As `headroom_replay_init`; `p` is NULL or points to a
/// `headroom_energy_profile`.
#[no_mangle]
pub unsafe extern "C" fn headroom_replay_init_energy(
    r: *mut headroom_replay,
    s: *const headroom_settings,
    header: *const headroom_log_header,
    p: *const headroom_energy_profile,
) -> headroom_status {
    // SAFETY: guaranteed by the caller.
    let Some(slot) = (unsafe { slot(r) }) else {
        return headroom_status::HEADROOM_ERR_NULL;
    };
    // As `headroom_replay_init`: the settings and the replay are built in
    // frames of their own, and the replay goes into the slot from the frame
    // that built it (a second copy in this frame passed the stack a
    // Cortex-M0 with 16 KiB of RAM leaves beside the C demo's statics).
    // SAFETY: guaranteed by the caller.
    match unsafe { crate::replay::resolved_config(s, header) } {
        // SAFETY: guaranteed by the caller.
        Ok(config) => unsafe { energy_replay(slot, &config, p) },
        Err(e) => slot.set::<headroom_replay>(Err(e)),
    }
}

/// Build the replay of `config` costed by `p` into `slot` (the profile's
/// charge table made in a frame of its own, [`charge`]).
///
/// # Safety
/// `p` is NULL or points to a `headroom_energy_profile`.
#[inline(never)]
unsafe fn energy_replay(
    slot: &mut Slot<WindowReplay>,
    config: &ControllerConfig,
    p: *const headroom_energy_profile,
) -> headroom_status {
    // SAFETY: guaranteed by the caller.
    let built = unsafe { charge(p) }
        .and_then(|c| WindowReplay::with_charge(*config, c).map_err(headroom_status::from));
    slot.set::<headroom_replay>(built)
}

/// Write the spec of a rate table and an energy profile that the demo's
/// `replay_spec_parse` (`demo/replay_log.c`) reads: one line
/// `rate NAME SNR AIRTIME_US BANDWIDTH HAS_BANDWIDTH` per rate, then
/// `profile N P0 I0 ... SUPPLY_V AIRTIME_MS RX_WINDOW_MS RX_CURRENT_MA
/// PER_PACKET_UC SLEEP_UA`, floats as the 8 hex digits of their bits. The
/// one writer of the format (the host C test and `cargo xtask c-demo` use
/// it); the battery is not part of it.
///
/// # Errors
/// The sink's.
pub fn write_spec<W: core::fmt::Write, const N: usize>(
    out: &mut W,
    rates: &RateTable,
    profile: &headroom::energy::EnergyProfile<N>,
) -> core::fmt::Result {
    struct Bits(f32);
    impl core::fmt::Display for Bits {
        fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
            write!(f, "{:08x}", self.0.to_bits())
        }
    }
    for r in rates.as_slice() {
        writeln!(
            out,
            "rate {} {} {} {} {}",
            r.name.as_str(),
            Bits(r.required_snr.0),
            r.airtime_us,
            Bits(r.noise_bandwidth_hz.unwrap_or(0.0)),
            u8::from(r.noise_bandwidth_hz.is_some())
        )?;
    }
    let pts = profile.tx_current().points();
    write!(out, "profile {}", pts.len())?;
    for p in pts {
        write!(out, " {} {}", Bits(p.power.0), Bits(p.current.0))?;
    }
    writeln!(
        out,
        " {} {} {} {} {} {}",
        Bits(profile.supply().0),
        Bits(profile.airtime().0),
        Bits(profile.rx_window().0),
        Bits(profile.rx_current().0),
        Bits(profile.per_packet().0),
        Bits(profile.sleep_current().0)
    )
}
