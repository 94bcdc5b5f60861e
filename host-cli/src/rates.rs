//! A radio's rate table as people write it: one rate as text (the value of
//! a CSV log header's `# rate:` line, the keys of a profile's `[[rate]]`
//! entry), the table from its entries with every error naming the entry, and
//! the table as reports print it. The table itself, its limits and its
//! checks are the engine's ([`headroom::rate`]); quantities go through the
//! one unit parser ([`crate::quantity`]).
//!
//! A CSV header line, one per rate, in table order:
//!
//! ```text
//! # rate: NAME, REQUIRED_SNR dB, AIRTIME[, NOISE_BANDWIDTH]
//! # rate: sf7, -7.5 dB, 41.216 ms, 125000 Hz
//! ```
//!
//! The required SNR is a ratio (a bare number is dB), the airtime a duration
//! with its unit (`us`, `ms`, `s`; a bare number is refused) and the noise
//! bandwidth a frequency with its unit (a bare number is refused).

use headroom::rate::{Rate, RateTable, MAX_AIRTIME_US};

use crate::quantity;

/// A rate from its fields as text. `Err` says which field and why.
pub fn rate_from_text(
    name: &str,
    required_snr: &str,
    airtime: &str,
    noise_bandwidth: Option<&str>,
) -> Result<Rate, String> {
    let snr = quantity::db(required_snr).map_err(|e| format!("required SNR: {e}"))?;
    let us = quantity::duration_us(airtime).map_err(|e| format!("airtime: {e}"))?;
    rate_with_airtime(name, snr, us, noise_bandwidth)
}

/// A rate whose airtime is already known in microseconds (computed by the
/// engine from a modem description, say).
pub fn rate_with_airtime(
    name: &str,
    required_snr: headroom::units::Db,
    airtime_us: u64,
    noise_bandwidth: Option<&str>,
) -> Result<Rate, String> {
    let airtime = u32::try_from(airtime_us)
        .ok()
        .filter(|&us| us > 0 && us <= MAX_AIRTIME_US)
        .ok_or_else(|| {
            format!(
                "airtime: {} is outside the accepted range: above 0 up to 60 s",
                show_airtime(airtime_us)
            )
        })?;
    let bw = noise_bandwidth
        .map(|b| quantity::frequency(b).map_err(|e| format!("noise bandwidth: {e}")))
        .transpose()?;
    Rate::new(name, required_snr, airtime, bw.map(|b| b.0)).map_err(|e| e.to_string())
}

/// The value of a CSV header's `# rate:` line, parsed.
pub fn parse_line(value: &str) -> Result<Rate, String> {
    let parts: Vec<&str> = value.split(',').map(str::trim).collect();
    match parts.as_slice() {
        [name, snr, airtime] => rate_from_text(name, snr, airtime, None),
        [name, snr, airtime, bw] => rate_from_text(name, snr, airtime, Some(bw)),
        _ => Err(format!(
            "'{}' is not NAME, REQUIRED_SNR dB, AIRTIME[, NOISE_BANDWIDTH] (e.g. sf7, -7.5 dB, 41.216 ms, 125 kHz)",
            crate::error::printable(value.trim())
        )),
    }
}

/// A rate as the value of a CSV header's `# rate:` line; [`parse_line`]
/// reads it back to the same rate, bit for bit.
pub fn format_line(r: &Rate) -> String {
    let mut s = format!(
        "{}, {} dB, {}",
        r.name,
        r.required_snr.0,
        show_airtime(u64::from(r.airtime_us))
    );
    if let Some(b) = r.noise_bandwidth_hz {
        s.push_str(&format!(", {b} Hz"));
    }
    s
}

/// Microseconds as milliseconds, exactly (`41.216 ms`, `100 ms`).
pub fn show_airtime(us: u64) -> String {
    let (ms, frac) = (us / 1000, us % 1000);
    if frac == 0 {
        format!("{ms} ms")
    } else {
        let f = format!("{frac:03}");
        format!("{ms}.{} ms", f.trim_end_matches('0'))
    }
}

/// The table of `rates`, each given with the words that name its entry in
/// the file (`rate 2 (sf8)`): an entry refused by the engine's checks of the
/// table as a whole (a duplicate name, bandwidths on some rates only, too
/// many rates) is named.
pub fn table(rates: &[(String, Rate)]) -> Result<RateTable, String> {
    let all: Vec<Rate> = rates.iter().map(|(_, r)| *r).collect();
    if let Err(e) = RateTable::new(&all) {
        // The first entry at which the table stops being valid.
        let at = (1..=all.len())
            .find(|&n| all.get(..n).is_some_and(|p| RateTable::new(p).is_err()))
            .and_then(|n| rates.get(n - 1));
        return Err(match at {
            Some((entry, _)) => format!("{entry}: {e}"),
            None => e.to_string(),
        });
    }
    RateTable::new(&all).map_err(|e| e.to_string())
}

/// The table, one line per rate, for reports: name, required SNR, airtime,
/// noise bandwidth.
pub fn describe(t: &RateTable) -> Vec<String> {
    t.as_slice()
        .iter()
        .map(|r| {
            let bw = r
                .noise_bandwidth_hz
                .map(|b| format!(", noise bandwidth {}", quantity::show::frequency(b)))
                .unwrap_or_default();
            format!(
                "{}: required SNR {}, airtime {}{bw}",
                r.name,
                quantity::show::db(r.required_snr.0),
                show_airtime(u64::from(r.airtime_us))
            )
        })
        .collect()
}

/// The table's names, comma-separated (`sf7, sf8, sf9`).
pub fn names(t: &RateTable) -> String {
    t.as_slice()
        .iter()
        .map(|r| r.name.as_str())
        .collect::<Vec<_>>()
        .join(", ")
}

/// A record's rate index in the log's table (`from`) as an index into the
/// table in force (`to`), by name: a profile's table may list the rates in
/// another order, or more of them. Identity when the tables are the same or
/// the log has none. `Err` names the rate when the table in force lacks it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Remap {
    map: [Option<u8>; headroom::rate::MAX_RATES],
    from: RateTable,
    identity: bool,
}

impl Remap {
    /// The map from the log's table to the one in force.
    pub fn new(from: &RateTable, to: &RateTable) -> Remap {
        let mut map = [None; headroom::rate::MAX_RATES];
        for (slot, r) in map.iter_mut().zip(from.as_slice()) {
            *slot = to.index_of(r.name.as_str());
        }
        Remap {
            map,
            from: *from,
            identity: from.is_empty() || from == to,
        }
    }

    /// The index in force of a record's rate.
    pub fn apply(&self, rate: Option<u8>) -> Result<Option<u8>, String> {
        match rate {
            None => Ok(None),
            Some(i) if self.identity => Ok(Some(i)),
            Some(i) => self
                .map
                .get(usize::from(i))
                .copied()
                .flatten()
                .map(Some)
                .ok_or_else(|| match self.from.get(i) {
                    Some(r) => format!(
                        "the packet's rate '{}' is not in the rate table in force",
                        r.name
                    ),
                    None => format!("the packet's rate index {i} is not in the log's rate table"),
                }),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use headroom::units::Db;

    #[test]
    fn a_line_reads_back_bit_for_bit() {
        for r in [
            Rate::new("sf7", Db(-7.5), 41_216, Some(125e3)),
            Rate::new("sf12", Db(-20.0), 59_999_999, Some(12.5e3)),
            Rate::new("fsk", Db(8.1), 1, None),
        ] {
            let Ok(r) = r else { panic!("{r:?}") };
            let line = format_line(&r);
            assert_eq!(parse_line(&line), Ok(r), "{line}");
        }
        assert_eq!(
            parse_line("sf7, -7.5 dB, 41.216 ms, 125 kHz"),
            Rate::new("sf7", Db(-7.5), 41_216, Some(125e3)).map_err(|e| e.to_string())
        );
    }

    #[test]
    fn bad_lines_say_which_field() {
        let e = parse_line("sf7, -7.5 dB, 41").unwrap_err();
        assert!(e.starts_with("airtime: '41' needs a unit"), "{e}");
        let e = parse_line("sf7, -7.5 dB, 41 ms, 125").unwrap_err();
        assert!(e.starts_with("noise bandwidth: 125: give a unit"), "{e}");
        let e = parse_line("sf7, -7.5 dBm, 41 ms").unwrap_err();
        assert!(e.starts_with("required SNR: unknown unit"), "{e}");
        let e = parse_line("sf7, -7.5 dB").unwrap_err();
        assert!(e.contains("is not NAME, REQUIRED_SNR dB, AIRTIME"), "{e}");
        let e = parse_line("sf7, -7.5 dB, 2 min").unwrap_err();
        assert!(e.contains("above 0 up to 60 s"), "{e}");
        let e = parse_line("sf 7, -7.5 dB, 2 ms").unwrap_err();
        assert!(e.contains("rate name"), "{e}");
    }

    #[test]
    fn records_follow_their_rate_by_name() {
        let r = |n: &str| Rate::new(n, Db(-7.5), 1000, None).unwrap_or_default();
        let log = RateTable::new(&[r("a"), r("b")]).unwrap_or_default();
        let force = RateTable::new(&[r("b"), r("c"), r("a")]).unwrap_or_default();
        let m = Remap::new(&log, &force);
        assert_eq!(m.apply(Some(0)), Ok(Some(2)));
        assert_eq!(m.apply(Some(1)), Ok(Some(0)));
        assert_eq!(m.apply(None), Ok(None));
        let back = Remap::new(&force, &log);
        let e = back.apply(Some(1)).unwrap_err();
        assert!(e.contains("'c' is not in the rate table in force"), "{e}");
        assert_eq!(Remap::new(&log, &log).apply(Some(1)), Ok(Some(1)));
    }

    #[test]
    fn the_table_names_the_entry_that_breaks_it() {
        let r = |n: &str, bw: Option<f32>| Rate::new(n, Db(-7.5), 1000, bw).unwrap_or_default();
        let e = table(&[
            ("rate 1 (a)".into(), r("a", None)),
            ("rate 2 (b)".into(), r("b", None)),
            ("rate 3 (a)".into(), r("a", None)),
        ])
        .unwrap_err();
        assert!(e.starts_with("rate 3 (a): two rates"), "{e}");
        let e = table(&[
            ("rate 1 (a)".into(), r("a", None)),
            ("rate 2 (b)".into(), r("b", Some(125e3))),
        ])
        .unwrap_err();
        assert!(e.starts_with("rate 2 (b): either every rate"), "{e}");
        assert_eq!(table(&[]).map(|t| t.len()), Ok(0));
        assert_eq!(show_airtime(100_000), "100 ms");
        assert_eq!(show_airtime(41_210), "41.21 ms");
    }
}
