//! The one parser of quantities with units, for the command line and for
//! every TOML file (link, scenario, controller): `2.4GHz`, `868MHz`, `3km`,
//! `250m`, `14dBm`, `25mW`, `2.15dBi`, `290K`, `30deg`, `99.9%`.
//!
//! Rules, the same everywhere:
//! - Unit strings are matched without regard to case (`MHz`, `mhz`, `MHZ`;
//!   `km`, `KM`), and `u` or `µ` stand for micro (`uW`, `µW`). There is no
//!   mega-metre or megawatt, so `MW` is milliwatts as `mw` is.
//! - A space between number and unit is allowed (`125 kHz`).
//! - A dimensional quantity where a wrong guess is plausible (frequency,
//!   bandwidth, distance, height, absolute power) must carry its unit: a bare
//!   number is refused with a hint (`868: give a unit, e.g. 868MHz`).
//! - Ratios (dB, dBi), temperatures (K), angles (deg) and settings whose
//!   unit is in their name (`max_tx_dbm`, `--margin-db`) accept a bare
//!   number in that unit, and the unit string as well (`"20dBm"`).
//!
//! Scaling by SI prefixes is parsing; conversions between logarithmic and
//! linear powers are done by the engine. [`Q`] is the serde-facing form of a
//! quantity in a TOML file (a string or a bare number) with typed accessors.

use headroom::units::{Db, Dbi, Dbm, Hertz, Kelvin, Metres, Milliwatts, Watts};
use serde::Deserialize;

fn split(s: &str) -> Result<(f64, &str), String> {
    let s = s.trim();
    let end = s
        .char_indices()
        .find(|&(i, c)| {
            !(c.is_ascii_digit()
                || c == '.'
                || c == '+'
                || c == '-'
                || ((c == 'e' || c == 'E')
                    && s[i + 1..]
                        .starts_with(|d: char| d.is_ascii_digit() || d == '-' || d == '+')))
        })
        .map(|(i, _)| i)
        .unwrap_or(s.len());
    let (num, unit) = s.split_at(end);
    let x: f64 = num
        .parse()
        .map_err(|_| format!("'{s}' does not start with a number"))?;
    if !x.is_finite() {
        return Err(format!("'{s}' is not a finite number"));
    }
    Ok((x, unit.trim()))
}

/// The unit in the one spelling the matching uses: lower case, `µ` as `u`.
fn unit_key(unit: &str) -> String {
    unit.replace(['µ', 'μ'], "u").to_ascii_lowercase()
}

fn to_f32(x: f64, s: &str) -> Result<f32, String> {
    let y = x as f32;
    if y.is_finite() {
        Ok(y)
    } else {
        Err(format!("'{s}' is too large"))
    }
}

fn bare(s: &str, example_unit: &str) -> String {
    let t = s.trim();
    format!("{t}: give a unit, e.g. {t}{example_unit}")
}

/// A frequency or bandwidth: `Hz`, `kHz`, `MHz`, `GHz`. A bare number is
/// refused (868 Hz and 868 MHz are both plausible typing).
pub fn frequency(s: &str) -> Result<Hertz, String> {
    let (x, unit) = split(s)?;
    let scale = match unit_key(unit).as_str() {
        "" => return Err(bare(s, "MHz")),
        "hz" => 1.0,
        "khz" => 1e3,
        "mhz" => 1e6,
        "ghz" => 1e9,
        _ => {
            return Err(format!(
                "unknown frequency unit '{unit}' (use Hz, kHz, MHz or GHz)"
            ))
        }
    };
    Ok(Hertz(to_f32(x * scale, s)?))
}

/// A length (distance, height): `mm`, `cm`, `m`, `km`. A bare number is
/// refused (metres and kilometres are both plausible typing).
pub fn distance(s: &str) -> Result<Metres, String> {
    let (x, unit) = split(s)?;
    let scale = match unit_key(unit).as_str() {
        "" => return Err(bare(s, "m")),
        "m" => 1.0,
        "mm" => 1e-3,
        "cm" => 1e-2,
        "km" => 1e3,
        _ => {
            return Err(format!(
                "unknown length unit '{unit}' (use m, km, cm or mm)"
            ))
        }
    };
    Ok(Metres(to_f32(x * scale, s)?))
}

fn power_in(s: &str, bare_ok: bool) -> Result<Dbm, String> {
    let (x, unit) = split(s)?;
    let x32 = to_f32(x, s)?;
    let linear = |mw: f64| {
        Dbm::from_milliwatts(Milliwatts(to_f32(mw, s)?)).map_err(|e| format!("'{s}': {e}"))
    };
    match unit_key(unit).as_str() {
        "" if !bare_ok => Err(bare(s, "dBm")),
        "" | "dbm" => Ok(Dbm(x32)),
        "dbw" => Ok(Dbm(x32 + 30.0)),
        "uw" => linear(x * 1e-3),
        "mw" => linear(x),
        "w" => Dbm::from_watts(Watts(x32)).map_err(|e| format!("'{s}': {e}")),
        _ => Err(format!(
            "unknown power unit '{unit}' (use dBm, dBW, uW, mW or W)"
        )),
    }
}

/// An absolute power that must carry its unit: `dBm`, `dBW`, `uW`/`µW`,
/// `mW`, `W` (a bare 20 could be dBm or mW).
pub fn power_with_unit(s: &str) -> Result<Dbm, String> {
    power_in(s, false)
}

/// An absolute power for a setting whose name says dBm (`--max-tx-dbm`,
/// `max_tx_dbm`): a bare number is dBm; any power unit is accepted too.
pub fn dbm(s: &str) -> Result<Dbm, String> {
    power_in(s, true)
}

/// The same as [`dbm`]: a bare number is dBm. Kept for the `*_dbm` options
/// that use this name; a quantity whose name does not say dBm uses
/// [`power_with_unit`].
pub fn power(s: &str) -> Result<Dbm, String> {
    dbm(s)
}

/// A ratio in dB (`3dB` or `3`).
pub fn db(s: &str) -> Result<Db, String> {
    let (x, unit) = split(s)?;
    match unit_key(unit).as_str() {
        "" | "db" => Ok(Db(to_f32(x, s)?)),
        _ => Err(format!("unknown unit '{unit}' in '{s}' (use dB)")),
    }
}

/// A gain: an antenna's (`2.15dBi`, `0dBd`, or a bare number in dBi) or an
/// amplifier's (`20dB`).
pub fn gain(s: &str) -> Result<Dbi, String> {
    let (x, unit) = split(s)?;
    let x = to_f32(x, s)?;
    match unit_key(unit).as_str() {
        "" | "dbi" | "db" => Ok(Dbi(x)),
        "dbd" => Ok(Dbi(x + headroom::units::DIPOLE_GAIN_DBI)),
        _ => Err(format!("unknown gain unit '{unit}' (use dBi, dBd or dB)")),
    }
}

/// A temperature in kelvin (`290K` or `290`).
pub fn temperature(s: &str) -> Result<Kelvin, String> {
    let (x, unit) = split(s)?;
    match unit_key(unit).as_str() {
        "" | "k" => Ok(Kelvin(to_f32(x, s)?)),
        _ => Err(format!("unknown temperature unit '{unit}' (use K)")),
    }
}

/// An angle in degrees (`30deg`, `30°` or `30`).
pub fn angle(s: &str) -> Result<f32, String> {
    let (x, unit) = split(s)?;
    match unit_key(unit).as_str() {
        "" | "deg" | "°" => to_f32(x, s),
        _ => Err(format!("unknown angle unit '{unit}' (use deg)")),
    }
}

/// A plain number (probabilities, exponents, ratios).
pub fn number(s: &str) -> Result<f32, String> {
    let (x, unit) = split(s)?;
    if !unit.is_empty() {
        return Err(format!("'{s}' should be a plain number"));
    }
    to_f32(x, s)
}

/// A percentage (`1%` or `1`), returned as a percentage.
pub fn percent(s: &str) -> Result<f32, String> {
    let (x, unit) = split(s)?;
    match unit {
        "" | "%" => to_f32(x, s),
        _ => Err(format!("'{s}' should be a percentage")),
    }
}

/// A probability as a fraction (`0.01`) or a percentage with its sign (`1%`),
/// returned as a fraction.
pub fn fraction(s: &str) -> Result<f32, String> {
    let (x, unit) = split(s)?;
    match unit {
        "" => to_f32(x, s),
        "%" => to_f32(x / 100.0, s),
        _ => Err(format!(
            "'{s}' should be a fraction (0.01) or a percentage (1%)"
        )),
    }
}

/// Outage `1 − availability` from `0.999` or `99.9%`, computed in f64 so that
/// 99.9999 % keeps its digits. A bare number of 1 or more (`99`) is refused
/// as ambiguous.
pub fn outage(s: &str) -> Result<f64, String> {
    let (x, unit) = split(s)?;
    let outage = match unit {
        "%" => {
            if !(x > 0.0 && x < 100.0) {
                return Err(format!("'{s}' must be strictly between 0% and 100%"));
            }
            (100.0 - x) / 100.0
        }
        "" => {
            if x >= 1.0 {
                return Err(format!(
                    "'{s}' is ambiguous: give a fraction below 1 (0.99) or a percentage with its sign (99%)"
                ));
            }
            if x <= 0.0 {
                return Err(format!("'{s}' must be strictly between 0 and 1"));
            }
            1.0 - x
        }
        _ => return Err(format!("'{s}' is not a number")),
    };
    let o = outage as f32;
    if o > 0.0 && o < 1.0 {
        Ok(outage)
    } else {
        Err(format!("'{s}' is too close to 0 or 1 to compute with"))
    }
}

/// A quantity in a TOML file: a string with a unit (`"868MHz"`) or a bare
/// number. The accessors apply the same rules as the command line: a bare
/// number is refused where the unit must be given.
///
/// ```toml
/// frequency = "868MHz"   # Q::frequency
/// max_tx_dbm = 20        # Q::dbm: the key names the unit
/// max_tx_dbm = "100mW"   # the same key with a unit string
/// ```
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(untagged)]
pub enum Q {
    /// `"868MHz"`.
    Text(String),
    /// `868`.
    Number(f64),
}

impl Q {
    /// The text the parsers read (a bare number printed as written).
    pub fn text(&self) -> String {
        match self {
            Q::Text(s) => s.clone(),
            Q::Number(x) => format!("{x}"),
        }
    }

    /// Whether this is a bare number.
    pub fn is_bare(&self) -> bool {
        matches!(self, Q::Number(_))
    }

    /// A frequency or bandwidth ([`frequency`]): unit required.
    pub fn frequency(&self) -> Result<Hertz, String> {
        frequency(&self.text())
    }
    /// A distance or height ([`distance`]): unit required.
    pub fn distance(&self) -> Result<Metres, String> {
        distance(&self.text())
    }
    /// An absolute power ([`power_with_unit`]): unit required.
    pub fn power(&self) -> Result<Dbm, String> {
        power_with_unit(&self.text())
    }
    /// A power for a key that names dBm ([`dbm`]): bare is dBm.
    pub fn dbm(&self) -> Result<Dbm, String> {
        dbm(&self.text())
    }
    /// A ratio ([`db`]): bare is dB.
    pub fn db(&self) -> Result<Db, String> {
        db(&self.text())
    }
    /// An antenna gain ([`gain`]): bare is dBi.
    pub fn gain(&self) -> Result<Dbi, String> {
        gain(&self.text())
    }
    /// A temperature ([`temperature`]): bare is K.
    pub fn temperature(&self) -> Result<Kelvin, String> {
        temperature(&self.text())
    }
    /// An angle ([`angle`]): bare is degrees.
    pub fn angle(&self) -> Result<f32, String> {
        angle(&self.text())
    }
    /// A plain number ([`number`]).
    pub fn number(&self) -> Result<f32, String> {
        number(&self.text())
    }
    /// A probability as `0.01` or `"1%"` ([`fraction`]).
    pub fn fraction(&self) -> Result<f32, String> {
        fraction(&self.text())
    }
    /// An availability as `0.999` or `"99.9%"`, returned as the outage ([`outage`]).
    pub fn outage(&self) -> Result<f64, String> {
        outage(&self.text())
    }
}

/// A plausible range of a setting, checked when it is read; the message gives
/// the range in the unit a person reads.
pub fn check_range(
    value: f32,
    lo: f32,
    hi: f32,
    shown: &dyn Fn(f32) -> String,
) -> Result<f32, String> {
    if value.is_finite() && (lo..=hi).contains(&value) {
        Ok(value)
    } else {
        Err(format!(
            "{} is outside the plausible range {}..{}",
            shown(value),
            shown(lo),
            shown(hi)
        ))
    }
}

/// Quantities in the unit a person reads, with a fixed number of decimals
/// per quantity.
pub mod show {
    /// `868.300 MHz`, `2.440 GHz`, `125.000 kHz`.
    pub fn frequency(hz: f32) -> String {
        let a = hz.abs();
        if a >= 1e9 {
            format!("{:.3} GHz", hz / 1e9)
        } else if a >= 1e6 {
            format!("{:.3} MHz", hz / 1e6)
        } else if a >= 1e3 {
            format!("{:.3} kHz", hz / 1e3)
        } else {
            format!("{hz:.3} Hz")
        }
    }
    /// `1.400 km`, `30.0 m`, `5.0 mm`.
    pub fn distance(m: f32) -> String {
        let a = m.abs();
        if a >= 1e9 {
            format!("{m:.3e} m")
        } else if a >= 1e3 {
            format!("{:.3} km", m / 1e3)
        } else if a >= 1.0 || a == 0.0 {
            format!("{m:.1} m")
        } else {
            format!("{:.1} mm", m * 1e3)
        }
    }
    /// `12.34 dB`.
    pub fn db(x: f32) -> String {
        format!("{x:.2} dB")
    }
    /// `14.00 dBm`.
    pub fn dbm(x: f32) -> String {
        format!("{x:.2} dBm")
    }
    /// `290.0 K`.
    pub fn kelvin(x: f32) -> String {
        format!("{x:.1} K")
    }
    /// `3.20` (a plain number).
    pub fn number(x: f32) -> String {
        format!("{x:.2}")
    }
    /// `30.0 deg`.
    pub fn degrees(x: f32) -> String {
        format!("{x:.1} deg")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_units() {
        assert_eq!(frequency("2.4GHz"), Ok(Hertz(2.4e9)));
        assert_eq!(frequency("868MHz"), Ok(Hertz(868e6)));
        assert_eq!(frequency("868mhz"), Ok(Hertz(868e6)));
        assert_eq!(frequency("125 kHz"), Ok(Hertz(125e3)));
        assert_eq!(distance("3km"), Ok(Metres(3000.0)));
        assert_eq!(distance("2KM"), Ok(Metres(2000.0)));
        assert_eq!(distance("250m"), Ok(Metres(250.0)));
        assert_eq!(power_with_unit("14dBm"), Ok(Dbm(14.0)));
        assert_eq!(power_with_unit("-3dBW"), Ok(Dbm(27.0)));
        assert_eq!(dbm("-120"), Ok(Dbm(-120.0)));
        assert_eq!(dbm("20dBm"), Ok(Dbm(20.0)));
        assert_eq!(number("1e-3"), Ok(1e-3));
        assert_eq!(gain("0dBd"), Ok(Dbi(2.15)));
        assert_eq!(angle("30deg"), Ok(30.0));
        assert_eq!(angle("30"), Ok(30.0));
        assert_eq!(fraction("1%"), Ok(0.01));
        let p = power_with_unit("1W").unwrap_or(Dbm(0.0));
        assert!((p.0 - 30.0).abs() < 1e-5);
        let u = power_with_unit("10uW").unwrap_or(Dbm(0.0));
        let mu = power_with_unit("10µW").unwrap_or(Dbm(0.0));
        assert!((u.0 + 20.0).abs() < 1e-4 && u == mu, "{u:?} {mu:?}");
    }

    #[test]
    fn bare_dimensional_numbers_are_refused_with_a_hint() {
        assert_eq!(
            frequency("868"),
            Err("868: give a unit, e.g. 868MHz".to_string())
        );
        assert!(distance("3").is_err_and(|e| e.contains("3m")));
        assert!(power_with_unit("20").is_err_and(|e| e.contains("20dBm")));
        assert_eq!(
            Q::Number(868.0).frequency(),
            Err("868: give a unit, e.g. 868MHz".into())
        );
        assert_eq!(Q::Number(20.0).dbm(), Ok(Dbm(20.0)));
        assert_eq!(Q::Text("20dBm".into()).dbm(), Ok(Dbm(20.0)));
    }

    #[test]
    fn refuses_garbage() {
        assert!(frequency("2.4 parsecs").is_err());
        assert!(frequency("GHz").is_err());
        assert!(distance("").is_err());
        assert!(power_with_unit("0mW").is_err());
        assert!(number("1e999").is_err());
        assert!(number("nan").is_err());
    }

    #[test]
    fn availability_text() {
        assert!((outage("0.99").unwrap_or(0.0) - 0.01).abs() < 1e-12);
        assert!((outage("99.9%").unwrap_or(0.0) - 0.001).abs() < 1e-12);
        assert!((outage("99.99999 %").unwrap_or(0.0) - 1e-7).abs() < 1e-15);
        assert!(outage("99").is_err());
        assert!(outage("1").is_err());
        assert!(outage("0").is_err());
        assert!(outage("100%").is_err());
        assert!(outage("-5%").is_err());
        assert!(outage("nan").is_err());
        assert!(outage("0.9x").is_err());
    }

    #[test]
    fn ranges_are_shown_in_units() {
        let e = check_range(1e30, 0.0, 10_000.0, &|x| show::distance(x)).err();
        assert_eq!(
            e.as_deref(),
            Some("1.000e30 m is outside the plausible range 0.0 m..10.000 km")
        );
    }
}

/// A duration with its unit: `250ms`, `30s`, `15min`, `1h`, `2d` (and `us`
/// or `µs` for microseconds), returned in seconds. A bare number is refused:
/// `15` could be seconds or minutes.
pub fn duration(s: &str) -> Result<headroom::units::Seconds, String> {
    let secs = duration_f64(s)?;
    Ok(headroom::units::Seconds(to_f32(secs, s)?))
}

/// A duration as whole microseconds (`41.216ms` is 41216), for the airtime
/// of a rate; read in f64 so that every microsecond up to a minute is kept.
/// A bare number is refused as in [`duration`].
pub fn duration_us(s: &str) -> Result<u64, String> {
    let us = (duration_f64(s)? * 1e6).round();
    if !(0.0..=1e15).contains(&us) {
        return Err(format!("'{}' is not a duration from 0 up", s.trim()));
    }
    #[allow(clippy::cast_possible_truncation, clippy::cast_sign_loss)] // checked above
    Ok(us as u64)
}

fn duration_f64(s: &str) -> Result<f64, String> {
    let (x, unit) = split(s)?;
    let scale = match unit_key(unit).as_str() {
        "us" => 1e-6,
        "ms" => 1e-3,
        "s" => 1.0,
        "min" => 60.0,
        "h" => 3600.0,
        "d" => 86_400.0,
        "" => {
            return Err(format!(
                "'{}' needs a unit: give it as 250ms, 30s, 15min, 1h or 2d",
                s.trim()
            ))
        }
        _ => {
            return Err(format!(
                "unknown duration unit '{unit}' (use us, ms, s, min, h or d)"
            ))
        }
    };
    Ok(x * scale)
}

#[cfg(test)]
mod duration_tests {
    use super::{duration, duration_us};
    use headroom::units::Seconds;

    #[test]
    fn durations_with_units() {
        assert_eq!(duration("15min"), Ok(Seconds(900.0)));
        assert_eq!(duration("30s"), Ok(Seconds(30.0)));
        assert_eq!(duration("1h"), Ok(Seconds(3600.0)));
        assert_eq!(duration("250ms"), Ok(Seconds(0.25)));
        assert_eq!(duration("2 d"), Ok(Seconds(172_800.0)));
        let bare = duration("15").unwrap_err();
        assert!(bare.contains("needs a unit"), "{bare}");
        assert!(duration("15 fortnights").is_err());
        assert!(duration("min").is_err());
        assert_eq!(duration_us("41.216ms"), Ok(41_216));
        assert_eq!(duration_us("59.999999 s"), Ok(59_999_999));
        assert_eq!(duration_us("7 µs"), Ok(7));
        assert!(duration_us("41.216").is_err_and(|e| e.contains("needs a unit")));
        assert!(duration_us("-1ms").is_err());
    }
}
