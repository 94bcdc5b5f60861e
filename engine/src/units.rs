//! Quantities with their units.
//!
//! Decibel quantities come in two kinds: *relative* ([`Db`], [`Dbi`]) and
//! *absolute* ([`Dbm`], [`Dbw`]). The operators allow only what makes
//! physical sense: an absolute level plus or minus a relative one is an
//! absolute level; the difference of two absolute levels is relative; two
//! absolute levels cannot be added.
//!
//! Linear quantities ([`Hertz`], [`Metres`], [`Kelvin`], [`Watts`],
//! [`Milliwatts`]) are plain `f32` newtypes, as are the energy quantities
//! ([`Volts`], [`Milliamps`], [`Microamps`], [`Microcoulombs`],
//! [`Milliseconds`], [`Seconds`], [`MilliampHours`], [`Days`], [`Microjoules`]).

use core::ops::{Add, AddAssign, Neg, Sub, SubAssign};

use crate::error::{finite, positive, Result};

/// Speed of light in vacuum, m/s (exact by the SI definition of the metre).
pub const SPEED_OF_LIGHT_M_PER_S: f32 = 299_792_458.0;

/// Difference between EIRP and ERP: gain of a half-wave dipole over an
/// isotropic radiator, 2.15 dB (common practice; ITU-R BS.561 uses the same figure).
pub const DIPOLE_GAIN_DBI: f32 = 2.15;

macro_rules! newtype {
    ($(#[$m:meta])* $name:ident) => {
        $(#[$m])*
        #[derive(Debug, Clone, Copy, PartialEq, PartialOrd, Default)]
        #[cfg_attr(feature = "defmt", derive(defmt::Format))]
        #[cfg_attr(feature = "serde", derive(serde::Serialize, serde::Deserialize))]
        pub struct $name(pub f32);

        impl $name {
            /// The raw number.
            #[inline]
            pub const fn value(self) -> f32 {
                self.0
            }
            /// `true` when the number is neither NaN nor infinite.
            #[inline]
            pub fn is_finite(self) -> bool {
                self.0.is_finite()
            }
        }
    };
}

newtype!(
    /// A ratio in decibels (a gain when positive, a loss when negative in a gain context).
    Db
);
newtype!(
    /// An antenna gain in decibels over an isotropic radiator.
    Dbi
);
newtype!(
    /// An absolute power in decibels relative to 1 mW.
    Dbm
);
newtype!(
    /// An absolute power in decibels relative to 1 W.
    Dbw
);
newtype!(
    /// A frequency or bandwidth in hertz.
    Hertz
);
newtype!(
    /// A length in metres.
    Metres
);
newtype!(
    /// A temperature in kelvin.
    Kelvin
);
newtype!(
    /// A power in watts.
    Watts
);
newtype!(
    /// A power in milliwatts.
    Milliwatts
);

// --- energy quantities (see `crate::energy`) -------------------------------
newtype!(
    /// A supply voltage in volts.
    Volts
);
newtype!(
    /// A current in milliamperes (transmit and receive currents).
    Milliamps
);
newtype!(
    /// A current in microamperes (sleep and mean currents).
    Microamps
);
newtype!(
    /// A charge in microcoulombs (1 mA for 1 ms).
    Microcoulombs
);
newtype!(
    /// A duration in milliseconds (airtime, receive window).
    Milliseconds
);
newtype!(
    /// A duration in seconds (packet interval).
    Seconds
);
newtype!(
    /// A battery capacity in milliampere-hours.
    MilliampHours
);
newtype!(
    /// A duration in days (battery life).
    Days
);
newtype!(
    /// An energy in microjoules.
    Microjoules
);

impl Microcoulombs {
    /// Energy drawn from a supply at `v` volts: µC · V = µJ.
    #[inline]
    pub fn at_supply(self, v: Volts) -> Microjoules {
        Microjoules(self.0 * v.0)
    }
}

// --- relative + relative ---------------------------------------------------
impl Add for Db {
    type Output = Db;
    #[inline]
    fn add(self, r: Db) -> Db {
        Db(self.0 + r.0)
    }
}
impl Sub for Db {
    type Output = Db;
    #[inline]
    fn sub(self, r: Db) -> Db {
        Db(self.0 - r.0)
    }
}
impl Neg for Db {
    type Output = Db;
    #[inline]
    fn neg(self) -> Db {
        Db(-self.0)
    }
}
impl AddAssign for Db {
    #[inline]
    fn add_assign(&mut self, r: Db) {
        self.0 += r.0;
    }
}
impl SubAssign for Db {
    #[inline]
    fn sub_assign(&mut self, r: Db) {
        self.0 -= r.0;
    }
}
impl From<Dbi> for Db {
    #[inline]
    fn from(g: Dbi) -> Db {
        Db(g.0)
    }
}

// --- absolute +/- relative, absolute - absolute -----------------------------
macro_rules! absolute_level {
    ($abs:ident) => {
        impl Add<Db> for $abs {
            type Output = $abs;
            #[inline]
            fn add(self, r: Db) -> $abs {
                $abs(self.0 + r.0)
            }
        }
        impl Sub<Db> for $abs {
            type Output = $abs;
            #[inline]
            fn sub(self, r: Db) -> $abs {
                $abs(self.0 - r.0)
            }
        }
        impl Add<Dbi> for $abs {
            type Output = $abs;
            #[inline]
            fn add(self, r: Dbi) -> $abs {
                $abs(self.0 + r.0)
            }
        }
        impl Sub<Dbi> for $abs {
            type Output = $abs;
            #[inline]
            fn sub(self, r: Dbi) -> $abs {
                $abs(self.0 - r.0)
            }
        }
        impl Sub for $abs {
            type Output = Db;
            #[inline]
            fn sub(self, r: $abs) -> Db {
                Db(self.0 - r.0)
            }
        }
        impl AddAssign<Db> for $abs {
            #[inline]
            fn add_assign(&mut self, r: Db) {
                self.0 += r.0;
            }
        }
        impl SubAssign<Db> for $abs {
            #[inline]
            fn sub_assign(&mut self, r: Db) {
                self.0 -= r.0;
            }
        }
    };
}
absolute_level!(Dbm);
absolute_level!(Dbw);

/// `10·log10(x)` for a strictly positive finite `x`.
#[inline]
pub fn db_from_ratio(name: &'static str, x: f32) -> Result<Db> {
    let x = positive(name, x)?;
    Ok(Db(10.0 * libm::log10f(x)))
}

impl Db {
    /// Power ratio `10^(dB/10)`.
    #[inline]
    pub fn to_ratio(self) -> f32 {
        libm::exp10f(self.0 / 10.0)
    }
    /// Decibels from a power ratio (must be > 0).
    #[inline]
    pub fn from_ratio(ratio: f32) -> Result<Db> {
        db_from_ratio("ratio", ratio)
    }
}

impl Dbm {
    /// Linear power in milliwatts.
    #[inline]
    pub fn to_milliwatts(self) -> Milliwatts {
        Milliwatts(libm::exp10f(self.0 / 10.0))
    }
    /// Linear power in watts.
    #[inline]
    pub fn to_watts(self) -> Watts {
        Watts(libm::exp10f((self.0 - 30.0) / 10.0))
    }
    /// The same power in dBW (dBm − 30).
    #[inline]
    pub fn to_dbw(self) -> Dbw {
        Dbw(self.0 - 30.0)
    }
    /// dBm from milliwatts (must be > 0).
    #[inline]
    pub fn from_milliwatts(mw: Milliwatts) -> Result<Dbm> {
        Ok(Dbm(db_from_ratio("power_mw", mw.0)?.0))
    }
    /// dBm from watts (must be > 0).
    #[inline]
    pub fn from_watts(w: Watts) -> Result<Dbm> {
        Ok(Dbm(db_from_ratio("power_w", w.0)?.0 + 30.0))
    }
}

impl Dbw {
    /// The same power in dBm (dBW + 30).
    #[inline]
    pub fn to_dbm(self) -> Dbm {
        Dbm(self.0 + 30.0)
    }
    /// Linear power in watts.
    #[inline]
    pub fn to_watts(self) -> Watts {
        Watts(libm::exp10f(self.0 / 10.0))
    }
    /// dBW from watts (must be > 0).
    #[inline]
    pub fn from_watts(w: Watts) -> Result<Dbw> {
        Ok(Dbw(db_from_ratio("power_w", w.0)?.0))
    }
}

impl Milliwatts {
    /// The same power in watts.
    #[inline]
    pub fn to_watts(self) -> Watts {
        Watts(self.0 / 1000.0)
    }
}

impl Watts {
    /// The same power in milliwatts.
    #[inline]
    pub fn to_milliwatts(self) -> Milliwatts {
        Milliwatts(self.0 * 1000.0)
    }
}

/// EIRP from ERP: ERP is referred to a half-wave dipole, EIRP to an
/// isotropic radiator, so EIRP = ERP + 2.15 dB.
#[inline]
pub fn eirp_from_erp(erp: Dbm) -> Dbm {
    Dbm(erp.0 + DIPOLE_GAIN_DBI)
}

/// ERP from EIRP: ERP = EIRP − 2.15 dB.
#[inline]
pub fn erp_from_eirp(eirp: Dbm) -> Dbm {
    Dbm(eirp.0 - DIPOLE_GAIN_DBI)
}

/// Wavelength λ = c / f.
#[inline]
pub fn wavelength(frequency: Hertz) -> Result<Metres> {
    let f = positive("frequency", frequency.0)?;
    Ok(Metres(SPEED_OF_LIGHT_M_PER_S / f))
}

/// A checked dBm: finite, else an error naming the parameter.
#[inline]
pub fn checked_dbm(name: &'static str, p: Dbm) -> Result<Dbm> {
    Ok(Dbm(finite(name, p.0)?))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn conversions() {
        // 0 dBm = 1 mW, 30 dBm = 1 W = 0 dBW (definition of the units).
        assert!((Dbm(0.0).to_milliwatts().0 - 1.0).abs() < 1e-6);
        assert!((Dbm(30.0).to_watts().0 - 1.0).abs() < 1e-6);
        assert_eq!(Dbm(30.0).to_dbw(), Dbw(0.0));
        assert_eq!(Dbw(-10.0).to_dbm(), Dbm(20.0));
        let p = Dbm::from_milliwatts(Milliwatts(25.0)).unwrap_or(Dbm(0.0));
        assert!((p.0 - 13.979_4).abs() < 1e-4);
        assert!(Dbm::from_milliwatts(Milliwatts(0.0)).is_err());
        assert!(Dbm::from_watts(Watts(-1.0)).is_err());
        assert!((Dbw::from_watts(Watts(100.0)).unwrap_or(Dbw(0.0)).0 - 20.0).abs() < 1e-5);
    }

    #[test]
    fn erp_eirp_and_wavelength() {
        assert!((eirp_from_erp(Dbm(14.0)).0 - 16.15).abs() < 1e-5);
        assert!((erp_from_eirp(Dbm(16.15)).0 - 14.0).abs() < 1e-5);
        // 299.792458 MHz has a wavelength of exactly 1 m.
        let l = wavelength(Hertz(299_792_458.0)).unwrap_or(Metres(0.0));
        assert!((l.0 - 1.0).abs() < 1e-6);
        assert!(wavelength(Hertz(0.0)).is_err());
        assert!(wavelength(Hertz(f32::NAN)).is_err());
    }

    #[test]
    fn arithmetic_keeps_units() {
        let eirp = Dbm(14.0) + Dbi(3.0) - Db(1.0);
        assert_eq!(eirp, Dbm(16.0));
        assert_eq!(Dbm(-90.0) - Dbm(-100.0), Db(10.0));
        assert_eq!(-Db(3.0), Db(-3.0));
    }
}
