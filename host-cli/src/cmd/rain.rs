//! `headroom rain`: rain specific attenuation (ITU-R P.838-3) and, with the
//! slant-path options, the attenuation exceeded for a percentage of an
//! average year (ITU-R P.618-13 §2.2.1.1).

use headroom::propagation::{
    rain_attenuation_exceeded, rain_coefficients, rain_specific_attenuation, SlantPath,
};
use headroom::units::{Hertz, Metres};
use serde_json::Value;

use crate::error::{CliError, CliResult};
use crate::output::{Format, Report};
use crate::quantity;

/// Arguments of `headroom rain`.
///
/// Specific attenuation needs --frequency, --rain-rate, --elevation and
/// --tilt. The slant-path attenuation needs all four of --exceeded-percent,
/// --rain-height, --station-height and --latitude as well; --rain-rate is
/// then the rate exceeded for 0.01 % of an average year (R0.01).
#[derive(clap::Args, Debug)]
#[command(after_help = concat!("Specific attenuation (ITU-R P.838-3) needs --frequency, --rain-rate, --elevation \
and --tilt. The slant-path attenuation (ITU-R P.618-13) needs --exceeded-percent, --rain-height, \
--station-height and --latitude together, and then reads --rain-rate as R0.01, the rate exceeded \
for 0.01 % of an average year.", "\n\n", caution!()))]
pub struct Args {
    /// Carrier frequency, e.g. 12GHz (unit required). P.838: 1-1000 GHz;
    /// slant path (P.618): 1-55 GHz.
    #[arg(long, value_parser = quantity::frequency)]
    frequency: Hertz,
    /// Rain rate in mm/h, 0-300 (25 or 25mm/h). For the slant path: R0.01.
    #[arg(long, value_parser = rain_rate)]
    rain_rate: f32,
    /// Path elevation angle, 0-90 deg (above 0 for the slant path), 30 or 30deg.
    #[arg(long, value_parser = quantity::angle)]
    elevation: f32,
    /// Polarisation tilt relative to the horizontal in degrees (-180..180), or
    /// horizontal (0), vertical (90), circular (45).
    #[arg(long, value_parser = tilt, allow_negative_numbers = true)]
    tilt: f32,
    /// Slant path: percentage of an average year, 0.001-5 (e.g. 0.01 or 0.01%).
    #[arg(long, value_parser = quantity::percent)]
    exceeded_percent: Option<f32>,
    /// Slant path: rain height above mean sea level (ITU-R P.839), with its
    /// unit, e.g. 3.6km or 3600m.
    #[arg(long, value_parser = rain_height)]
    rain_height: Option<Metres>,
    /// Slant path: earth-station height above mean sea level, with its unit,
    /// e.g. 120m.
    #[arg(long, value_parser = station_height, allow_negative_numbers = true)]
    station_height: Option<Metres>,
    /// Slant path: earth-station latitude, -90..90 deg (north positive), 51.5 or 51.5deg.
    #[arg(long, value_parser = quantity::angle, allow_negative_numbers = true)]
    latitude: Option<f32>,
    /// Output format.
    #[arg(long, value_enum, default_value = "table")]
    format: Format,
}

/// A tilt in degrees or a polarisation name.
fn tilt(s: &str) -> Result<f32, String> {
    match s.trim().to_ascii_lowercase().as_str() {
        "horizontal" | "h" => Ok(0.0),
        "vertical" | "v" => Ok(90.0),
        "circular" | "c" => Ok(45.0),
        _ => quantity::angle(s).map_err(|_| {
            format!("'{s}' is neither an angle in degrees nor horizontal/vertical/circular")
        }),
    }
}

/// Plausible rain height above mean sea level: 0-10 km (ITU-R P.839 gives
/// up to about 5.5 km; common practice).
const RAIN_HEIGHT_M: (f32, f32) = (0.0, 10e3);
/// Plausible earth-station height: -500 m (below sea level) to 8 km.
const STATION_HEIGHT_M: (f32, f32) = (-500.0, 8e3);
/// Plausible rain rate: 0-300 mm/h (common practice: the highest R0.01 of
/// ITU-R P.837 maps are about 150 mm/h).
const RAIN_RATE_MM_H: (f32, f32) = (0.0, 300.0);

fn height(s: &str, (lo, hi): (f32, f32)) -> Result<Metres, String> {
    let h = quantity::distance(s)?;
    quantity::check_range(h.0, lo, hi, &quantity::show::distance).map(Metres)
}

/// A rain height with its unit, e.g. 3.6km (a bare 3.6 is refused: metres
/// and kilometres are both plausible, and a wrong guess gives a silent 0 dB).
fn rain_height(s: &str) -> Result<Metres, String> {
    height(s, RAIN_HEIGHT_M)
}

/// An earth-station height with its unit, e.g. 120m.
fn station_height(s: &str) -> Result<Metres, String> {
    height(s, STATION_HEIGHT_M)
}

fn rain_rate(s: &str) -> Result<f32, String> {
    let r = quantity::number(s.trim_end_matches("mm/h"))?;
    quantity::check_range(r, RAIN_RATE_MM_H.0, RAIN_RATE_MM_H.1, &|x| {
        format!("{x} mm/h")
    })
}

/// The options of `rain` by the engine parameter they become, so that an
/// engine error names the option.
const OPTIONS: &[(&str, &str)] = &[
    ("frequency_hz", "--frequency"),
    ("rain_rate_mm_h", "--rain-rate"),
    ("elevation_deg", "--elevation"),
    ("tilt_deg", "--tilt"),
    ("exceeded_percent", "--exceeded-percent"),
    ("rain_height_km", "--rain-height"),
    ("station_height_km", "--station-height"),
    ("latitude_deg", "--latitude"),
];

fn opt(e: headroom::Error) -> CliError {
    crate::error::engine_error(&e, OPTIONS)
}

/// Run the command.
pub fn run(a: Args) -> CliResult {
    crate::link::pointing_at_help("rain", run_inner(a))
}

fn run_inner(a: Args) -> CliResult {
    let (k, alpha) = rain_coefficients(a.frequency, a.tilt, a.elevation).map_err(opt)?;
    let gamma =
        rain_specific_attenuation(a.frequency, a.rain_rate, a.tilt, a.elevation).map_err(opt)?;
    let mut r = Report::new();
    r.num("frequency_hz", a.frequency.0, "Hz");
    r.num("rain_rate_mm_h", a.rain_rate, "mm/h");
    r.num("elevation_deg", a.elevation, "deg");
    r.num("tilt_deg", a.tilt, "deg");
    r.num("k", k, "");
    r.num("alpha", alpha, "");
    r.num("specific_attenuation_db_per_km", gamma, "dB/km");
    r.value(
        "specific_attenuation_method",
        Value::String("ITU-R P.838-3".into()),
    );

    let slant = [
        ("--exceeded-percent", a.exceeded_percent.is_some()),
        ("--rain-height", a.rain_height.is_some()),
        ("--station-height", a.station_height.is_some()),
        ("--latitude", a.latitude.is_some()),
    ];
    if slant.iter().any(|s| s.1) {
        if let Some((missing, _)) = slant.iter().find(|s| !s.1) {
            return Err(CliError::arg(
                missing,
                "the slant-path attenuation needs --exceeded-percent, --rain-height, --station-height and --latitude together",
            ));
        }
        if let (Some(p), Some(hr), Some(hs), Some(lat)) = (
            a.exceeded_percent,
            a.rain_height,
            a.station_height,
            a.latitude,
        ) {
            let path = SlantPath {
                rain_rate_001: a.rain_rate,
                rain_height_km: hr.0 / 1000.0,
                station_height_km: hs.0 / 1000.0,
                latitude_deg: lat,
                elevation_deg: a.elevation,
                frequency: a.frequency,
                tilt_deg: a.tilt,
            };
            let att = rain_attenuation_exceeded(&path, p).map_err(opt)?;
            r.num("exceeded_percent", p, "%");
            r.num("rain_height_km", path.rain_height_km, "km");
            r.num("station_height_km", path.station_height_km, "km");
            r.num("latitude_deg", lat, "deg");
            r.num("attenuation_db", att.0, "dB");
            r.value(
                "attenuation_method",
                Value::String("ITU-R P.618-13 2.2.1.1".into()),
            );
        }
    }
    r.print(a.format)
}
