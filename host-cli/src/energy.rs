//! The energy profile file: a TOML description of what a radio draws, read
//! by `headroom battery` (and by whatever else needs a radio's charge per
//! packet).
//!
//! Top-level keys, with the unit in the name (numbers only, no unit strings):
//!
//! | key | meaning | range |
//! |---|---|---|
//! | `supply_v` | supply voltage, V | 0.5..=60 |
//! | `tx_current_ma` | list of `[dBm, mA]`, strictly increasing in dBm, at most 16 points | dBm −40..=40, mA above 0 up to 5000 |
//! | `airtime_ms` | time on air of one packet (or a `[modem]` table) | above 0 up to 60000 |
//! | `rx_window_ms` | receive window after each packet | 0..=60000 |
//! | `rx_current_ma` | receive current | 0..=1000 |
//! | `per_packet_uc` | fixed charge per reading (wake-up, sensor, processor), µC | 0..=1e7 |
//! | `sleep_current_ua` | sleep current, µA | 0..=1e5 |
//! | `battery_mah` | battery capacity (optional: no battery life without it) | above 0 up to 1e7 |
//! | `usable_fraction` | refinement, off unless given | above 0 up to 1 |
//! | `self_discharge_per_year` | refinement, off unless given, fraction per year | 0..=1 |
//! | `sleep_outside_active` | refinement, off unless `true` | |
//! | `max_retries` | resends per reading | 0..=255 |
//! | `description` | free text | |
//!
//! A `[modem]` table instead of `airtime_ms` computes the airtime with the
//! engine: `kind = "chirp"` (`spreading_factor`, `bandwidth_hz`,
//! `coding_rate` as `"4/5"`..`"4/8"`, `preamble_symbols`, `explicit_header`,
//! `crc`, `low_data_rate` = `"auto"`, `"on"` or `"off"`, `payload_bytes`) or
//! `kind = "packet"` (`bit_rate`, `preamble_bits`, `sync_bits`,
//! `header_bits`, `crc_bits`, `coding` as `"k/n"`, `payload_bytes`). Every
//! key of the chosen kind is required: no default changes an airtime
//! silently. Unknown keys are refused; every error names the file and the key.
//!
//! `[[rate]]` entries (at most eight) list the radio's data rates, in the
//! order of the table ([`headroom::rate::RateTable`]); quantities carry
//! their units and go through the one unit parser:
//!
//! | key | meaning |
//! |---|---|
//! | `name` | 1 to 8 ASCII characters, as logs name the rate (`sf9`) |
//! | `required_snr` | SNR the far end needs at this rate: `"-12.5 dB"` (a bare number is dB) |
//! | `airtime` | time on air of one packet at this rate: `"205.824 ms"` (a bare number is refused) |
//! | `modem` | instead of `airtime`: `[modem]` keys that differ from the profile's, `{ spreading_factor = 9 }`; the engine computes the airtime for the profile's payload |
//! | `noise_bandwidth` | optional: `"125 kHz"` (a bare number is refused); every rate or none |
//!
//! An error in an entry names it: `rate 2 (sf8): airtime: ...`.

use std::io::Read as _;
use std::path::Path;

use headroom::energy::airtime::{ChirpModem, CodeRate, LowDataRate, PacketModem};
use headroom::energy::{Battery, EnergyProfile, Refinements, TxCurrentTable, TX_POINTS};
use headroom::units::{
    Hertz, Microamps, Microcoulombs, MilliampHours, Milliamps, Milliseconds, Volts,
};
use headroom::Error;
use serde::Deserialize;

use headroom::rate::RateTable;

use crate::error::{printable, CliError, CliResult};
use crate::output::json_num;
use crate::quantity::{self, Q};
use crate::rates;

/// Largest profile file read, bytes.
pub const MAX_FILE_BYTES: u64 = 1 << 20;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct ProfileFile {
    description: Option<String>,
    supply_v: f64,
    tx_current_ma: Vec<(f64, f64)>,
    airtime_ms: Option<f64>,
    rx_window_ms: f64,
    rx_current_ma: f64,
    per_packet_uc: f64,
    sleep_current_ua: f64,
    battery_mah: Option<f64>,
    usable_fraction: Option<f64>,
    self_discharge_per_year: Option<f64>,
    sleep_outside_active: Option<bool>,
    max_retries: Option<i64>,
    modem: Option<ModemSpec>,
    rate: Option<Vec<RateSpec>>,
}

/// One `[[rate]]` entry: a name, the SNR the far end needs at this rate, and
/// the airtime either given (`airtime = "41.216 ms"`) or computed by the
/// engine from `modem`, a table of `[modem]` keys that override the
/// profile's own `[modem]` (`modem = { spreading_factor = 7 }`).
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RateSpec {
    name: String,
    required_snr: Q,
    airtime: Option<Q>,
    modem: Option<ModemSpec>,
    noise_bandwidth: Option<Q>,
}

#[derive(Debug, Clone, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct ModemSpec {
    kind: Option<String>,
    payload_bytes: Option<i64>,
    // chirp
    spreading_factor: Option<i64>,
    bandwidth_hz: Option<f64>,
    coding_rate: Option<String>,
    preamble_symbols: Option<i64>,
    explicit_header: Option<bool>,
    crc: Option<bool>,
    low_data_rate: Option<String>,
    // packet
    bit_rate: Option<f64>,
    preamble_bits: Option<i64>,
    sync_bits: Option<i64>,
    header_bits: Option<i64>,
    crc_bits: Option<i64>,
    coding: Option<String>,
}

/// Where the airtime of a profile came from.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum AirtimeSource {
    /// `airtime_ms` in the file.
    Given,
    /// A chirp spread spectrum modem and a payload.
    Chirp(ChirpModem, u8),
    /// A generic packet modem and a payload.
    Packet(PacketModem, u16),
}

impl AirtimeSource {
    /// One line for reports.
    pub fn describe(&self) -> String {
        match self {
            AirtimeSource::Given => "given (airtime_ms)".to_string(),
            AirtimeSource::Chirp(m, pl) => format!(
                "chirp SF{} {} kHz CR 4/{} preamble {} {} header{} low-data-rate {}, {pl} bytes",
                m.spreading_factor,
                m.bandwidth.0 / 1e3,
                m.coding_rate + 4,
                m.preamble_symbols,
                if m.explicit_header { "explicit" } else { "implicit" },
                if m.crc { " CRC" } else { "" },
                match (m.low_data_rate, m.low_data_rate_on()) {
                    (LowDataRate::Auto, Ok(true)) => "auto (on)",
                    (LowDataRate::Auto, _) => "auto (off)",
                    (LowDataRate::On, _) => "on",
                    (LowDataRate::Off, _) => "off",
                },
            ),
            AirtimeSource::Packet(m, pl) => format!(
                "packet {} bit/s, preamble {} + sync {} + header {} + CRC {} bits, coding {}/{}, {pl} bytes",
                m.bit_rate,
                m.preamble_bits,
                m.sync_bits,
                m.header_bits,
                m.crc_bits,
                m.coding.k,
                m.coding.n
            ),
        }
    }

    /// Channel bandwidth the modem occupies, when the file says it.
    pub fn bandwidth(&self) -> Option<Hertz> {
        match self {
            AirtimeSource::Chirp(m, _) => Some(m.bandwidth),
            _ => None,
        }
    }
}

/// A checked profile file.
#[derive(Debug, Clone)]
pub struct LoadedProfile {
    /// The engine's profile (with its battery and refinements).
    pub profile: EnergyProfile,
    /// Resends per reading, when the file gives them.
    pub max_retries: Option<u8>,
    /// Where the airtime came from.
    pub airtime_source: AirtimeSource,
    /// The file's description.
    pub description: Option<String>,
    /// The radio's rates (`[[rate]]` entries; empty when the file has none).
    pub rates: RateTable,
}

/// Read and check an energy profile file.
pub fn load(path: &Path) -> CliResult<LoadedProfile> {
    let text = read_limited(path)?;
    let at = |m: String| CliError::Input(format!("{}: {m}", path.display()));
    let file: ProfileFile = toml::from_str(&text).map_err(|e| at(toml_message(&text, &e)))?;
    build(file).map_err(|e| match e {
        CliError::Input(m) => at(m),
        other => other,
    })
}

fn read_limited(path: &Path) -> CliResult<String> {
    let f = std::fs::File::open(path).map_err(|e| CliError::input_file(path, "cannot open", &e))?;
    let mut text = String::new();
    f.take(MAX_FILE_BYTES + 1)
        .read_to_string(&mut text)
        .map_err(|e| CliError::input_file(path, "cannot read", &e))?;
    if text.len() as u64 > MAX_FILE_BYTES {
        return Err(CliError::Input(format!(
            "{}: larger than {} bytes: not an energy profile",
            path.display(),
            MAX_FILE_BYTES
        )));
    }
    Ok(text)
}

/// The TOML error as one line: `line N: message`.
fn toml_message(text: &str, e: &toml::de::Error) -> String {
    let msg = e.message().trim().replace('\n', " ");
    match e.span() {
        Some(span) => {
            let line = text
                .get(..span.start)
                .map_or(0, |t| t.bytes().filter(|&b| b == b'\n').count())
                + 1;
            format!("line {line}: {msg}")
        }
        None => msg,
    }
}

/// `x` within `lo..=hi` (or above `lo` when `open_low`), as f32, else an
/// error naming the key, the range and the unit.
fn ranged(key: &str, x: f64, lo: f64, hi: f64, open_low: bool, unit: &str) -> CliResult<f32> {
    let ok = x.is_finite() && x <= hi && if open_low { x > lo } else { x >= lo };
    if ok {
        Ok(x as f32)
    } else {
        let from = if open_low {
            format!("above {lo}")
        } else {
            format!("from {lo}")
        };
        Err(CliError::arg(
            key,
            format!("{x} is outside the accepted range: {from} up to {hi}{unit}"),
        ))
    }
}

fn int(key: &str, x: i64, lo: i64, hi: i64) -> CliResult<i64> {
    if (lo..=hi).contains(&x) {
        Ok(x)
    } else {
        Err(CliError::arg(
            key,
            format!("{x} is outside the accepted range {lo}..={hi}"),
        ))
    }
}

fn need<T: Copy>(key: &str, v: Option<T>, kind: &str) -> CliResult<T> {
    v.ok_or_else(|| CliError::arg(key, format!("required by modem kind '{kind}'")))
}

fn fraction(key: &str, s: &str) -> CliResult<(u8, u8)> {
    let bad = || {
        CliError::arg(
            key,
            format!("'{s}' should be a code rate k/n such as \"4/5\""),
        )
    };
    let (k, n) = s.split_once('/').ok_or_else(bad)?;
    let k: u8 = k.trim().parse().map_err(|_| bad())?;
    let n: u8 = n.trim().parse().map_err(|_| bad())?;
    Ok((k, n))
}

/// An engine refusal of an energy calculation, in words a user can act on:
/// a power outside the profile's table names `tx_option` and the table's
/// range, an interval shorter than a packet's active time names
/// `interval_option`; any other error is kept as the engine says it, with
/// its parameter renamed by `options` (as [`crate::error::engine_error`]).
pub fn refusal(
    e: &Error,
    tx_option: &str,
    interval_option: &str,
    options: &[(&str, &str)],
) -> CliError {
    match *e {
        Error::OutOfValidity {
            param: "tx_dbm",
            value,
            min,
            max,
        } => CliError::arg(
            tx_option,
            format!(
                "{value} dBm is outside the profile's transmit current table, {min}..{max} dBm \
                 (the current is not extrapolated: add a point)"
            ),
        ),
        Error::OutOfValidity {
            param: "interval_s",
            value,
            min,
            ..
        } => CliError::arg(
            interval_option,
            format!(
                "{} s is shorter than the active time of a reading, {} s \
                 (airtime and receive window, times the expected attempts)",
                json_num(value),
                json_num(min)
            ),
        ),
        _ => crate::error::engine_error(e, options),
    }
}

/// Engine parameters named as the file's keys.
fn engine(e: Error) -> CliError {
    let key = match e.param() {
        "bandwidth_hz" => "modem.bandwidth_hz",
        "spreading_factor" => "modem.spreading_factor",
        "coding_rate" => "modem.coding_rate",
        "preamble_symbols" => "modem.preamble_symbols",
        "explicit_header" => "modem.explicit_header",
        "bit_rate" => "modem.bit_rate",
        other => other,
    };
    let msg = e.to_string();
    let rest = msg
        .strip_prefix(e.param())
        .and_then(|r| r.strip_prefix(": "))
        .unwrap_or(&msg);
    CliError::arg(key, rest)
}

fn modem(m: &ModemSpec) -> CliResult<(Milliseconds, AirtimeSource)> {
    let kind = m
        .kind
        .as_deref()
        .ok_or_else(|| CliError::arg("modem.kind", "missing: \"chirp\" or \"packet\""))?;
    let chirp_keys = [
        ("modem.spreading_factor", m.spreading_factor.is_some()),
        ("modem.bandwidth_hz", m.bandwidth_hz.is_some()),
        ("modem.coding_rate", m.coding_rate.is_some()),
        ("modem.preamble_symbols", m.preamble_symbols.is_some()),
        ("modem.explicit_header", m.explicit_header.is_some()),
        ("modem.crc", m.crc.is_some()),
        ("modem.low_data_rate", m.low_data_rate.is_some()),
    ];
    let packet_keys = [
        ("modem.bit_rate", m.bit_rate.is_some()),
        ("modem.preamble_bits", m.preamble_bits.is_some()),
        ("modem.sync_bits", m.sync_bits.is_some()),
        ("modem.header_bits", m.header_bits.is_some()),
        ("modem.crc_bits", m.crc_bits.is_some()),
        ("modem.coding", m.coding.is_some()),
    ];
    let foreign = match kind {
        "chirp" => &packet_keys[..],
        "packet" => &chirp_keys[..],
        _ => {
            return Err(CliError::arg(
                "modem.kind",
                format!("unknown modem kind '{kind}' (use \"chirp\" or \"packet\")"),
            ))
        }
    };
    if let Some((key, _)) = foreign.iter().find(|(_, set)| *set) {
        return Err(CliError::arg(
            key,
            format!("not a key of modem kind '{kind}'"),
        ));
    }
    let payload = need("modem.payload_bytes", m.payload_bytes, kind)?;
    if kind == "chirp" {
        let cr = need("modem.coding_rate", m.coding_rate.as_deref(), kind)?;
        let coding_rate = match fraction("modem.coding_rate", cr)? {
            (4, n @ 5..=8) => n - 4,
            _ => {
                return Err(CliError::arg(
                    "modem.coding_rate",
                    format!("'{cr}' is not one of \"4/5\", \"4/6\", \"4/7\", \"4/8\""),
                ))
            }
        };
        let ldr = need("modem.low_data_rate", m.low_data_rate.as_deref(), kind)?;
        let low_data_rate = match ldr {
            "auto" => LowDataRate::Auto,
            "on" => LowDataRate::On,
            "off" => LowDataRate::Off,
            other => {
                return Err(CliError::arg(
                    "modem.low_data_rate",
                    format!("'{other}' is not \"auto\", \"on\" or \"off\""),
                ))
            }
        };
        let sf = int(
            "modem.spreading_factor",
            need("modem.spreading_factor", m.spreading_factor, kind)?,
            6,
            12,
        )?;
        let bw = ranged(
            "modem.bandwidth_hz",
            need("modem.bandwidth_hz", m.bandwidth_hz, kind)?,
            7800.0,
            500_000.0,
            false,
            " Hz",
        )?;
        let preamble = int(
            "modem.preamble_symbols",
            need("modem.preamble_symbols", m.preamble_symbols, kind)?,
            6,
            65535,
        )?;
        let pl = int("modem.payload_bytes", payload, 0, 255)?;
        let c = ChirpModem {
            spreading_factor: u8::try_from(sf).unwrap_or(0),
            bandwidth: Hertz(bw),
            coding_rate,
            preamble_symbols: u16::try_from(preamble).unwrap_or(0),
            explicit_header: need("modem.explicit_header", m.explicit_header, kind)?,
            crc: need("modem.crc", m.crc, kind)?,
            low_data_rate,
        };
        let pl = u8::try_from(pl).unwrap_or(0);
        let t = c.airtime(pl).map_err(engine)?;
        Ok((t, AirtimeSource::Chirp(c, pl)))
    } else {
        let bits = |key: &str, v: Option<i64>| -> CliResult<u16> {
            let x = int(key, need(key, v, kind)?, 0, 65535)?;
            Ok(u16::try_from(x).unwrap_or(0))
        };
        let coding = need("modem.coding", m.coding.as_deref(), kind)?;
        let (k, n) = fraction("modem.coding", coding)?;
        if k == 0 || n < k {
            return Err(CliError::arg(
                "modem.coding",
                format!("'{coding}' must be k/n with 1 <= k <= n <= 255 (\"1/1\" for none)"),
            ));
        }
        let c = PacketModem {
            bit_rate: ranged(
                "modem.bit_rate",
                need("modem.bit_rate", m.bit_rate, kind)?,
                0.0,
                1e9,
                true,
                " bit/s",
            )?,
            preamble_bits: bits("modem.preamble_bits", m.preamble_bits)?,
            sync_bits: bits("modem.sync_bits", m.sync_bits)?,
            header_bits: bits("modem.header_bits", m.header_bits)?,
            crc_bits: bits("modem.crc_bits", m.crc_bits)?,
            coding: CodeRate { k, n },
        };
        let pl = u16::try_from(int("modem.payload_bytes", payload, 0, 65535)?).unwrap_or(0);
        let t = c.airtime(pl).map_err(engine)?;
        Ok((t, AirtimeSource::Packet(c, pl)))
    }
}

impl ModemSpec {
    /// These keys over `base`'s: a rate's modem that changes only what
    /// differs from the profile's.
    fn over(&self, base: &ModemSpec) -> ModemSpec {
        let b = base.clone();
        ModemSpec {
            kind: self.kind.clone().or(b.kind),
            payload_bytes: self.payload_bytes.or(b.payload_bytes),
            spreading_factor: self.spreading_factor.or(b.spreading_factor),
            bandwidth_hz: self.bandwidth_hz.or(b.bandwidth_hz),
            coding_rate: self.coding_rate.clone().or(b.coding_rate),
            preamble_symbols: self.preamble_symbols.or(b.preamble_symbols),
            explicit_header: self.explicit_header.or(b.explicit_header),
            crc: self.crc.or(b.crc),
            low_data_rate: self.low_data_rate.clone().or(b.low_data_rate),
            bit_rate: self.bit_rate.or(b.bit_rate),
            preamble_bits: self.preamble_bits.or(b.preamble_bits),
            sync_bits: self.sync_bits.or(b.sync_bits),
            header_bits: self.header_bits.or(b.header_bits),
            crc_bits: self.crc_bits.or(b.crc_bits),
            coding: self.coding.clone().or(b.coding),
        }
    }
}

/// The `[[rate]]` entries as the engine's table; every error names the
/// entry (`rate 2 (sf8): airtime: ...`).
fn rate_table(specs: &[RateSpec], profile_modem: Option<&ModemSpec>) -> CliResult<RateTable> {
    let mut rates = Vec::with_capacity(specs.len());
    for (i, spec) in specs.iter().enumerate() {
        let entry = format!("rate {} ({})", i + 1, printable(&spec.name));
        let at = |m: String| CliError::Input(format!("{entry}: {m}"));
        let snr = spec
            .required_snr
            .db()
            .map_err(|e| at(format!("required_snr: {e}")))?;
        let bw = spec.noise_bandwidth.as_ref().map(Q::text);
        let airtime_us = match (&spec.airtime, &spec.modem) {
            (Some(a), None) => {
                quantity::duration_us(&a.text()).map_err(|e| at(format!("airtime: {e}")))?
            }
            (None, Some(m)) => {
                let merged = m.over(profile_modem.unwrap_or(&ModemSpec::default()));
                let (t, _) = modem(&merged).map_err(|e| at(e.to_string()))?;
                // The engine's airtime in ms, to the microsecond.
                quantity::duration_us(&format!("{}ms", t.0)).map_err(at)?
            }
            (Some(_), Some(_)) => {
                return Err(at(
                    "give either airtime or modem (the airtime computed from it), not both".into(),
                ))
            }
            (None, None) => return Err(at(
                "missing airtime: give airtime = \"41.2 ms\" or modem = { spreading_factor = 7 }"
                    .into(),
            )),
        };
        let rate =
            rates::rate_with_airtime(&spec.name, snr, airtime_us, bw.as_deref()).map_err(at)?;
        rates.push((entry, rate));
    }
    rates::table(&rates).map_err(CliError::Input)
}

fn build(f: ProfileFile) -> CliResult<LoadedProfile> {
    let supply = ranged("supply_v", f.supply_v, 0.5, 60.0, false, " V")?;
    if f.tx_current_ma.len() > TX_POINTS {
        return Err(CliError::arg(
            "tx_current_ma",
            format!("{} points: at most {TX_POINTS}", f.tx_current_ma.len()),
        ));
    }
    let mut table = TxCurrentTable::new();
    for (i, &(dbm, ma)) in f.tx_current_ma.iter().enumerate() {
        let key = format!("tx_current_ma, point {}", i + 1);
        let dbm = ranged(&key, dbm, -40.0, 40.0, false, " dBm")?;
        let ma = ranged(&key, ma, 0.0, 5000.0, true, " mA")?;
        table
            .push(headroom::units::Dbm(dbm), Milliamps(ma))
            .map_err(|e| CliError::arg("tx_current_ma", e))?;
    }
    if table.points().is_empty() {
        return Err(CliError::arg(
            "tx_current_ma",
            "needs at least one [dBm, mA] point",
        ));
    }
    let rates = rate_table(f.rate.as_deref().unwrap_or(&[]), f.modem.as_ref())?;
    let (airtime, airtime_source) = match (f.airtime_ms, &f.modem) {
        (Some(a), None) => (
            Milliseconds(ranged("airtime_ms", a, 0.0, 60_000.0, true, " ms")?),
            AirtimeSource::Given,
        ),
        (None, Some(m)) => modem(m)?,
        (Some(_), Some(_)) => {
            return Err(CliError::arg(
                "airtime_ms",
                "give either airtime_ms or a [modem] table, not both",
            ))
        }
        (None, None) => {
            return Err(CliError::arg(
                "airtime_ms",
                "missing: give airtime_ms or a [modem] table",
            ))
        }
    };
    let rx_window = ranged("rx_window_ms", f.rx_window_ms, 0.0, 60_000.0, false, " ms")?;
    let rx_current = ranged("rx_current_ma", f.rx_current_ma, 0.0, 1000.0, false, " mA")?;
    let per_packet = ranged("per_packet_uc", f.per_packet_uc, 0.0, 1e7, false, " µC")?;
    let sleep = ranged(
        "sleep_current_ua",
        f.sleep_current_ua,
        0.0,
        1e5,
        false,
        " µA",
    )?;
    let mut profile = EnergyProfile::new(
        Volts(supply),
        table,
        airtime,
        Milliseconds(rx_window),
        Milliamps(rx_current),
        Microcoulombs(per_packet),
        Microamps(sleep),
    )
    .map_err(engine)?;
    if let Some(mah) = f.battery_mah {
        let mah = ranged("battery_mah", mah, 0.0, 1e7, true, " mAh")?;
        profile = profile.with_battery(Battery::new(MilliampHours(mah)).map_err(engine)?);
    }
    let refinements = Refinements {
        usable_fraction: f
            .usable_fraction
            .map(|u| ranged("usable_fraction", u, 0.0, 1.0, true, ""))
            .transpose()?,
        self_discharge_per_year: f
            .self_discharge_per_year
            .map(|s| ranged("self_discharge_per_year", s, 0.0, 1.0, false, ""))
            .transpose()?,
        sleep_outside_active: f.sleep_outside_active.unwrap_or(false),
    };
    let profile = profile.with_refinements(refinements).map_err(engine)?;
    let max_retries = f
        .max_retries
        .map(|r| int("max_retries", r, 0, 255).map(|r| u8::try_from(r).unwrap_or(0)))
        .transpose()?;
    Ok(LoadedProfile {
        profile,
        max_retries,
        airtime_source,
        description: f.description,
        rates,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Write as _;

    const GOOD: &str = r#"
supply_v = 3.3
tx_current_ma = [[2.0, 22.0], [14.0, 44.0]]
airtime_ms = 100.0
rx_window_ms = 50.0
rx_current_ma = 10.0
per_packet_uc = 500.0
sleep_current_ua = 2.0
battery_mah = 1000.0
"#;

    fn load_text(text: &str) -> CliResult<LoadedProfile> {
        let mut f = tempfile::NamedTempFile::new().map_err(|e| CliError::Io(e.to_string()))?;
        f.write_all(text.as_bytes())
            .map_err(|e| CliError::Io(e.to_string()))?;
        load(f.path())
    }

    fn err(text: &str) -> String {
        match load_text(text) {
            Ok(_) => String::from("accepted"),
            Err(e) => e.to_string(),
        }
    }

    #[test]
    fn the_issue_keys_work() {
        let p = load_text(GOOD).map_err(|e| e.to_string());
        let Ok(p) = p else { panic!("{p:?}") };
        assert_eq!(p.airtime_source, AirtimeSource::Given);
        assert_eq!(
            p.profile.charge_per_packet(headroom::units::Dbm(14.0)),
            Ok(Microcoulombs(5400.0))
        );
        assert!(p.profile.battery().is_some());
        assert_eq!(p.profile.refinements(), &Refinements::default());
    }

    #[test]
    fn refusals_name_the_key_and_range() {
        let e = err(&format!("{GOOD}colour = 3\n"));
        assert!(
            e.contains("unknown field `colour`") && e.contains("line 10"),
            "{e}"
        );
        let e = err(&GOOD.replace("supply_v = 3.3", "supply_v = 100"));
        assert!(
            e.contains("supply_v: 100 is outside the accepted range: from 0.5 up to 60 V"),
            "{e}"
        );
        let e = err(&GOOD.replace("[[2.0, 22.0], [14.0, 44.0]]", "[[14.0, 44.0], [2.0, 22.0]]"));
        assert!(e.contains("tx_current_ma: point 2 is not above"), "{e}");
        let e = err(&GOOD.replace("airtime_ms = 100.0\n", ""));
        assert!(e.contains("airtime_ms: missing"), "{e}");
        let e = err(&GOOD.replace("sleep_current_ua = 2.0\n", ""));
        assert!(e.contains("sleep_current_ua"), "{e}");
        let e = err(&format!("{GOOD}usable_fraction = 0\n"));
        assert!(e.contains("usable_fraction: 0 is outside"), "{e}");
    }

    #[test]
    fn rate_entries_load_into_the_engine_table() {
        let text = format!(
            "{GOOD}{}",
            r#"
[[rate]]
name = "fast"
required_snr = "-7.5 dB"
airtime = "41.216 ms"
[[rate]]
name = "slow"
required_snr = -20
airtime = "0.991232 s"
"#
        );
        let p = load_text(&text).map_err(|e| e.to_string());
        let Ok(p) = p else { panic!("{p:?}") };
        assert_eq!(p.rates.len(), 2);
        assert_eq!(p.rates.get(1).map(|r| r.airtime_us), Some(991_232));
        assert_eq!(p.rates.get(1).map(|r| r.required_snr.0), Some(-20.0));
        let e = err(&text.replace("\"0.991232 s\"", "991"));
        assert!(
            e.contains("rate 2 (slow): airtime: '991' needs a unit"),
            "{e}"
        );
        let e = err(&text.replace("name = \"slow\"", "name = \"fast\""));
        assert!(
            e.contains("rate 2 (fast): two rates in the table have the same name"),
            "{e}"
        );
        let e = err(&text.replace("airtime = \"41.216 ms\"\n", ""));
        assert!(e.contains("rate 1 (fast): missing airtime"), "{e}");
        let e = err(&format!("{text}noise_bandwidth = \"125 kHz\"\n"));
        assert!(e.contains("rate 2 (slow): either every rate"), "{e}");
        let e = err(&text.replace(
            "name = \"fast\"\nrequired_snr = \"-7.5 dB\"",
            "name = \"fast\"\nrequired_snr = \"-7.5 dBm\"",
        ));
        assert!(
            e.contains("rate 1 (fast): required_snr: unknown unit"),
            "{e}"
        );
    }

    #[test]
    fn a_rate_modem_overrides_the_profile_modem() {
        let text = GOOD.replace("airtime_ms = 100.0\n", "")
            + r#"
[modem]
kind = "chirp"
spreading_factor = 7
bandwidth_hz = 125000
coding_rate = "4/5"
preamble_symbols = 8
explicit_header = true
crc = true
low_data_rate = "auto"
payload_bytes = 10

[[rate]]
name = "sf7"
required_snr = "-7.5 dB"
modem = {}
[[rate]]
name = "sf12"
required_snr = "-20 dB"
modem = { spreading_factor = 12 }
"#;
        let p = load_text(&text).map_err(|e| e.to_string());
        let Ok(p) = p else { panic!("{p:?}") };
        // The engine's airtime of the same modems (checked in the engine
        // against a published airtime calculation).
        let sf = |n: u8| {
            ChirpModem {
                spreading_factor: n,
                bandwidth: Hertz(125e3),
                coding_rate: 1,
                preamble_symbols: 8,
                explicit_header: true,
                crc: true,
                low_data_rate: LowDataRate::Auto,
            }
            .airtime(10)
            .map(|t| (t.0 * 1000.0).round())
        };
        assert_eq!(
            p.rates.get(0).map(|r| f64::from(r.airtime_us)),
            sf(7).ok().map(f64::from)
        );
        assert_eq!(
            p.rates.get(1).map(|r| f64::from(r.airtime_us)),
            sf(12).ok().map(f64::from)
        );
        let e = err(&text.replace("{ spreading_factor = 12 }", "{ spreading_factor = 13 }"));
        assert!(
            e.contains("rate 2 (sf12): modem.spreading_factor: 13 is outside"),
            "{e}"
        );
        let e = err(&text.replace("modem = {}", "modem = {}\nairtime = \"5 ms\""));
        assert!(
            e.contains("rate 1 (sf7): give either airtime or modem"),
            "{e}"
        );
    }

    #[test]
    fn chirp_modem_computes_airtime() {
        let text = GOOD.replace("airtime_ms = 100.0\n", "")
            + r#"
[modem]
kind = "chirp"
spreading_factor = 7
bandwidth_hz = 125000
coding_rate = "4/5"
preamble_symbols = 8
explicit_header = true
crc = true
low_data_rate = "auto"
payload_bytes = 10
"#;
        let p = load_text(&text).map_err(|e| e.to_string());
        assert_eq!(p.map(|p| p.profile.airtime()), Ok(Milliseconds(41.216)));
        let e = err(&text.replace("crc = true", "crc = true\nbit_rate = 5"));
        assert!(
            e.contains("modem.bit_rate: not a key of modem kind 'chirp'"),
            "{e}"
        );
        let e = err(&text.replace("spreading_factor = 7", "spreading_factor = 13"));
        assert!(
            e.contains("modem.spreading_factor: 13 is outside the accepted range 6..=12"),
            "{e}"
        );
        let e = err(&text.replace("payload_bytes = 10\n", ""));
        assert!(e.contains("modem.payload_bytes: required"), "{e}");
    }
}
