//! Parsing quantities with units from the command line and from TOML files:
//! `2.4GHz`, `868MHz`, `3km`, `250m`, `14dBm`, `25mW`, `2.15dBi`, `290K`.
//!
//! A bare number is taken in the base unit of the quantity (Hz, m, dBm, dB, K).
//! Scaling by SI prefixes is parsing; conversions between logarithmic and
//! linear powers are done by the engine.

use headroom::units::{Db, Dbi, Dbm, Hertz, Kelvin, Metres, Milliwatts, Watts};

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

fn to_f32(x: f64, s: &str) -> Result<f32, String> {
    let y = x as f32;
    if y.is_finite() {
        Ok(y)
    } else {
        Err(format!("'{s}' is too large"))
    }
}

/// A frequency or bandwidth: `Hz`, `kHz`, `MHz`, `GHz` (bare number: Hz).
pub fn frequency(s: &str) -> Result<Hertz, String> {
    let (x, unit) = split(s)?;
    let scale = match unit.to_ascii_lowercase().as_str() {
        "" | "hz" => 1.0,
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

/// A length: `mm`, `cm`, `m`, `km` (bare number: m).
pub fn distance(s: &str) -> Result<Metres, String> {
    let (x, unit) = split(s)?;
    let scale = match unit {
        "" | "m" => 1.0,
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

/// An absolute power: `dBm`, `dBW`, `mW`, `W` (bare number: dBm).
pub fn power(s: &str) -> Result<Dbm, String> {
    let (x, unit) = split(s)?;
    let x32 = to_f32(x, s)?;
    match unit {
        "" | "dBm" | "dbm" => Ok(Dbm(x32)),
        "dBW" | "dbw" => Ok(Dbm(x32 + 30.0)),
        "mW" | "mw" => Dbm::from_milliwatts(Milliwatts(x32)).map_err(|e| e.to_string()),
        "W" | "w" => Dbm::from_watts(Watts(x32)).map_err(|e| e.to_string()),
        _ => Err(format!(
            "unknown power unit '{unit}' (use dBm, dBW, mW or W)"
        )),
    }
}

/// A ratio in dB (`3dB` or `3`).
pub fn db(s: &str) -> Result<Db, String> {
    let (x, unit) = split(s)?;
    match unit {
        "" | "dB" | "db" => Ok(Db(to_f32(x, s)?)),
        _ => Err(format!("unknown unit '{unit}' (use dB)")),
    }
}

/// An antenna gain (`2.15dBi`, `0dBd`, or a bare number in dBi).
pub fn gain(s: &str) -> Result<Dbi, String> {
    let (x, unit) = split(s)?;
    let x = to_f32(x, s)?;
    match unit {
        "" | "dBi" | "dbi" => Ok(Dbi(x)),
        "dBd" | "dbd" => Ok(Dbi(x + headroom::units::DIPOLE_GAIN_DBI)),
        _ => Err(format!("unknown gain unit '{unit}' (use dBi or dBd)")),
    }
}

/// A temperature in kelvin (`290K` or `290`).
pub fn temperature(s: &str) -> Result<Kelvin, String> {
    let (x, unit) = split(s)?;
    match unit {
        "" | "K" | "k" => Ok(Kelvin(to_f32(x, s)?)),
        _ => Err(format!("unknown temperature unit '{unit}' (use K)")),
    }
}

/// A plain number (for probabilities, exponents, K factors given as ratios).
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_units() {
        assert_eq!(frequency("2.4GHz"), Ok(Hertz(2.4e9)));
        assert_eq!(frequency("868MHz"), Ok(Hertz(868e6)));
        assert_eq!(frequency("125 kHz"), Ok(Hertz(125e3)));
        assert_eq!(distance("3km"), Ok(Metres(3000.0)));
        assert_eq!(distance("250m"), Ok(Metres(250.0)));
        assert_eq!(power("14dBm"), Ok(Dbm(14.0)));
        assert_eq!(power("-3dBW"), Ok(Dbm(27.0)));
        assert_eq!(power("-120"), Ok(Dbm(-120.0)));
        assert_eq!(number("1e-3"), Ok(1e-3));
        assert_eq!(gain("0dBd"), Ok(Dbi(2.15)));
        let p = power("1W").unwrap_or(Dbm(0.0));
        assert!((p.0 - 30.0).abs() < 1e-5);
    }

    #[test]
    fn refuses_garbage() {
        assert!(frequency("2.4 parsecs").is_err());
        assert!(frequency("GHz").is_err());
        assert!(distance("").is_err());
        assert!(power("0mW").is_err());
        assert!(number("1e999").is_err());
        assert!(number("nan").is_err());
    }
}

/// A duration with its unit: `250ms`, `30s`, `15min`, `1h`, `2d`, returned
/// in seconds. A bare number is refused: `15` could be seconds or minutes.
pub fn duration(s: &str) -> Result<headroom::units::Seconds, String> {
    let (x, unit) = split(s)?;
    let scale = match unit {
        "ms" => 1e-3,
        "s" => 1.0,
        "min" => 60.0,
        "h" => 3600.0,
        "d" => 86_400.0,
        "" => {
            return Err(format!(
                "'{s}' needs a unit: give it as 250ms, 30s, 15min, 1h or 2d"
            ))
        }
        _ => {
            return Err(format!(
                "unknown duration unit '{unit}' (use ms, s, min, h or d)"
            ))
        }
    };
    Ok(headroom::units::Seconds(to_f32(x * scale, s)?))
}

#[cfg(test)]
mod duration_tests {
    use super::duration;
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
    }
}
