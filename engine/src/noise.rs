//! Thermal noise, noise figure and noise temperature, the Friis cascade,
//! G/T, C/N, C/N0 and Eb/N0.
//!
//! Conventions: a noise figure `F` (linear) and a noise temperature `Te`
//! are related through the reference temperature T0 = 290 K by
//! `Te = T0·(F − 1)` (IEEE definition of noise factor, common practice).
//! Powers are computed in the logarithmic domain (`10·log10 k + 10·log10 T +
//! 10·log10 B`) so that `k·T·B ≈ 4·10⁻²¹ W` never loses precision in `f32`.

use crate::error::{finite, non_negative, positive, Error, Result};
use crate::units::{Db, Dbi, Dbm, Hertz, Kelvin};

/// Reference temperature of noise figures, 290 K (IEEE Std 100 definition
/// of noise factor; common practice).
pub const T0_K: f32 = 290.0;

/// Boltzmann constant, J/K (exact in the 2019 SI).
pub const BOLTZMANN_J_PER_K: f32 = 1.380_649e-23;

/// 10·log10(k) in dBW/(K·Hz): −228.599 2.
fn boltzmann_db() -> f32 {
    10.0 * libm::log10f(BOLTZMANN_J_PER_K)
}

fn ln10_over_10() -> f32 {
    core::f32::consts::LN_10 / 10.0
}

/// Thermal noise power `k·T·B` in dBm.
///
/// At T = 290 K this is −173.98 dBm in 1 Hz.
///
/// # Errors
/// [`Error::NotPositive`] / [`Error::NotFinite`] for a bandwidth or
/// temperature that is not a positive finite number.
pub fn thermal_noise(bandwidth: Hertz, temperature: Kelvin) -> Result<Dbm> {
    let b = positive("bandwidth", bandwidth.0)?;
    let t = positive("temperature", temperature.0)?;
    Ok(Dbm(boltzmann_db()
        + 10.0 * libm::log10f(t)
        + 10.0 * libm::log10f(b)
        + 30.0))
}

/// Noise power of a receiver with noise figure `NF`, referred to its input:
/// `k·T0·B·F` in dBm.
///
/// # Errors
/// As [`thermal_noise`]; [`Error::Negative`] for a noise figure below 0 dB
/// (F < 1 would mean a negative noise temperature).
pub fn noise_power(bandwidth: Hertz, noise_figure: Db) -> Result<Dbm> {
    let nf = non_negative("noise_figure", noise_figure.0)?;
    Ok(thermal_noise(bandwidth, Kelvin(T0_K))? + Db(nf))
}

/// Equivalent input noise temperature `Te = T0·(F − 1)` of a noise figure.
///
/// # Errors
/// [`Error::Negative`] for NF < 0 dB, [`Error::NoSolution`] if the result
/// overflows.
pub fn noise_temperature_from_figure(nf: Db) -> Result<Kelvin> {
    let nf = non_negative("noise_figure", nf.0)?;
    // expm1 keeps precision for small noise figures (0.1 dB → 6.75 K).
    let te = T0_K * libm::expm1f(nf * ln10_over_10());
    if te.is_finite() {
        Ok(Kelvin(te))
    } else {
        Err(Error::NoSolution("noise_temperature"))
    }
}

/// Noise figure `10·log10(1 + Te/T0)` of a noise temperature.
///
/// # Errors
/// [`Error::Negative`] for a negative temperature.
pub fn noise_figure_from_temperature(t: Kelvin) -> Result<Db> {
    let t = non_negative("noise_temperature", t.0)?;
    Ok(Db(libm::log1pf(t / T0_K) / ln10_over_10()))
}

/// One stage of a receive chain: its gain and noise figure.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Stage {
    /// Available power gain (negative for a lossy cable or filter).
    pub gain: Db,
    /// Noise figure (for a passive loss at T0, equal to its loss).
    pub noise_figure: Db,
}

/// A receive chain of at most `N` stages, first stage first, whose noise
/// figure follows Friis' formula
/// `F = F1 + (F2 − 1)/G1 + (F3 − 1)/(G1·G2) + …` (H. T. Friis, "Noise figures of radio receivers", Proc. IRE, 1944).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Cascade<const N: usize> {
    stages: [Stage; N],
    len: usize,
}

impl<const N: usize> Default for Cascade<N> {
    fn default() -> Self {
        Self::new()
    }
}

impl<const N: usize> Cascade<N> {
    /// An empty chain (a lossless wire: 0 dB gain, 0 dB noise figure).
    pub const fn new() -> Self {
        Self {
            stages: [Stage {
                gain: Db(0.0),
                noise_figure: Db(0.0),
            }; N],
            len: 0,
        }
    }

    /// Appends a stage after the last one; hands the stage back when the
    /// chain already holds `N` stages.
    ///
    /// # Errors
    /// `Err(stage)` when full.
    pub fn push(&mut self, stage: Stage) -> core::result::Result<(), Stage> {
        match self.stages.get_mut(self.len) {
            Some(slot) => {
                *slot = stage;
                self.len += 1;
                Ok(())
            }
            None => Err(stage),
        }
    }

    /// The stages pushed so far, first stage first.
    pub fn stages(&self) -> &[Stage] {
        self.stages.get(..self.len).unwrap_or(&[])
    }

    /// Number of stages.
    pub fn len(&self) -> usize {
        self.len
    }

    /// `true` when no stage has been pushed.
    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// Total gain, the sum of the stage gains in dB.
    pub fn gain(&self) -> Db {
        self.stages().iter().fold(Db(0.0), |g, s| g + s.gain)
    }

    /// Equivalent input noise temperature of the chain,
    /// `Te = Te1 + Te2/G1 + Te3/(G1·G2) + …` (Friis' formula in temperatures).
    ///
    /// # Errors
    /// [`Error::NotFinite`] for a non-finite gain or noise figure,
    /// [`Error::Negative`] for a negative noise figure, [`Error::NoSolution`]
    /// if the sum overflows.
    pub fn noise_temperature(&self) -> Result<Kelvin> {
        let mut te = 0.0_f32;
        let mut gain_before_db = 0.0_f32;
        for s in self.stages() {
            let g = finite("stage_gain", s.gain.0)?;
            let ti = noise_temperature_from_figure(s.noise_figure)?.0;
            te += ti * libm::exp10f(-gain_before_db / 10.0);
            gain_before_db += g;
        }
        if te.is_finite() {
            Ok(Kelvin(te))
        } else {
            Err(Error::NoSolution("cascade_noise_temperature"))
        }
    }

    /// Noise figure of the chain by Friis' formula (computed through the
    /// noise temperatures, which keeps precision for low-noise chains).
    ///
    /// # Errors
    /// As [`Cascade::noise_temperature`].
    pub fn noise_figure(&self) -> Result<Db> {
        noise_figure_from_temperature(self.noise_temperature()?)
    }
}

/// System noise temperature `Tsys = Ta + Te` referred to the receiver input
/// (the antenna terminals): antenna noise temperature plus the receiver's
/// equivalent input noise temperature `T0·(F − 1)`.
///
/// # Errors
/// [`Error::Negative`] for a negative antenna temperature or noise figure.
pub fn system_noise_temperature(antenna: Kelvin, receiver_nf: Db) -> Result<Kelvin> {
    let ta = non_negative("antenna_temperature", antenna.0)?;
    let te = noise_temperature_from_figure(receiver_nf)?.0;
    Ok(Kelvin(ta + te))
}

/// Figure of merit `G/T = G − 10·log10(Tsys)` in dB/K.
///
/// # Errors
/// [`Error::NotFinite`] for a non-finite gain, [`Error::NotPositive`] for a
/// system temperature that is not positive.
pub fn g_over_t(gain: Dbi, system_temperature: Kelvin) -> Result<Db> {
    let g = finite("gain", gain.0)?;
    let t = positive("system_temperature", system_temperature.0)?;
    Ok(Db(g - 10.0 * libm::log10f(t)))
}

/// Carrier-to-noise ratio `C/N = C − N` in dB.
///
/// # Errors
/// [`Error::NotFinite`] for a non-finite level.
pub fn carrier_to_noise(c: Dbm, n: Dbm) -> Result<Db> {
    let c = finite("carrier", c.0)?;
    let n = finite("noise", n.0)?;
    Ok(Db(c - n))
}

/// Carrier-to-noise-density ratio `C/N0 = C − 10·log10(k·Tsys)` in dB-Hz
/// (C in dBm converted to dBW).
///
/// # Errors
/// [`Error::NotFinite`] for a non-finite carrier, [`Error::NotPositive`] for
/// a system temperature that is not positive.
pub fn carrier_to_noise_density(c: Dbm, system_temperature: Kelvin) -> Result<Db> {
    let c = finite("carrier", c.0)?;
    let t = positive("system_temperature", system_temperature.0)?;
    Ok(Db(c - 30.0 - boltzmann_db() - 10.0 * libm::log10f(t)))
}

/// `Eb/N0 = C/N0 − 10·log10(Rb)` in dB, for a bit rate `Rb` in bit/s.
///
/// # Errors
/// [`Error::NotFinite`] for a non-finite C/N0, [`Error::NotPositive`] for a
/// bit rate that is not positive.
pub fn ebn0_from_cn0(cn0_dbhz: Db, bit_rate_bps: f32) -> Result<Db> {
    let cn0 = finite("cn0", cn0_dbhz.0)?;
    let rb = positive("bit_rate", bit_rate_bps)?;
    Ok(Db(cn0 - 10.0 * libm::log10f(rb)))
}

/// `Eb/N0 = C/N + 10·log10(B/Rb)` in dB, where `B` is the noise bandwidth in
/// which C/N was measured.
///
/// # Errors
/// [`Error::NotFinite`] for a non-finite C/N, [`Error::NotPositive`] for a
/// bandwidth or bit rate that is not positive.
pub fn ebn0_from_cn(cn: Db, bandwidth: Hertz, bit_rate_bps: f32) -> Result<Db> {
    let cn = finite("cn", cn.0)?;
    let b = positive("bandwidth", bandwidth.0)?;
    let rb = positive("bit_rate", bit_rate_bps)?;
    Ok(Db(cn + 10.0 * libm::log10f(b) - 10.0 * libm::log10f(rb)))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ktb_at_t0() {
        // kT0 = −173.98 dBm/Hz (from k = 1.380649e-23 J/K and T0 = 290 K).
        let n = thermal_noise(Hertz(1.0), Kelvin(T0_K)).unwrap_or(Dbm(0.0));
        assert!((n.0 + 173.975).abs() < 0.01, "{n:?}");
        // 125 kHz with NF 6 dB: −173.98 + 50.97 + 6 = −117.0 dBm.
        let n = noise_power(Hertz(125e3), Db(6.0)).unwrap_or(Dbm(0.0));
        assert!((n.0 + 117.006).abs() < 0.01, "{n:?}");
        assert!(thermal_noise(Hertz(0.0), Kelvin(290.0)).is_err());
        assert!(noise_power(Hertz(1.0), Db(-1.0)).is_err());
    }

    #[test]
    fn figure_temperature_round_trip() {
        // NF 3.01 dB ↔ Te = 290 K (F = 2).
        let t = noise_temperature_from_figure(Db(3.0103)).unwrap_or(Kelvin(0.0));
        assert!((t.0 - 290.0).abs() < 0.05);
        let f = noise_figure_from_temperature(Kelvin(290.0)).unwrap_or(Db(0.0));
        assert!((f.0 - 3.0103).abs() < 1e-4);
    }

    #[test]
    fn cascade_friis() {
        // LNA 20 dB / 1 dB, then mixer −8 dB / 8 dB, then IF amp 30 dB / 10 dB.
        let mut c: Cascade<3> = Cascade::new();
        assert!(c.noise_figure().map(|f| f.0 == 0.0).unwrap_or(false));
        for s in [
            Stage {
                gain: Db(20.0),
                noise_figure: Db(1.0),
            },
            Stage {
                gain: Db(-8.0),
                noise_figure: Db(8.0),
            },
            Stage {
                gain: Db(30.0),
                noise_figure: Db(10.0),
            },
        ] {
            assert!(c.push(s).is_ok());
        }
        let extra = Stage {
            gain: Db(1.0),
            noise_figure: Db(1.0),
        };
        assert_eq!(c.push(extra), Err(extra));
        // F = 1.2589 + (6.3096 − 1)/100 + (10 − 1)/(100 · 0.15849) = 1.8797 → 2.741 dB.
        let f = c.noise_figure().unwrap_or(Db(0.0));
        assert!((f.0 - 2.741).abs() < 0.005, "{f:?}");
        assert_eq!(c.gain(), Db(42.0));
        assert_eq!(c.len(), 3);
    }

    #[test]
    fn ratios() {
        assert_eq!(carrier_to_noise(Dbm(-100.0), Dbm(-117.0)), Ok(Db(17.0)));
        let g = g_over_t(Dbi(30.0), Kelvin(100.0)).unwrap_or(Db(0.0));
        assert!((g.0 - 10.0).abs() < 1e-5);
        let cn0 = carrier_to_noise_density(Dbm(-120.0), Kelvin(290.0)).unwrap_or(Db(0.0));
        assert!((cn0.0 - 53.975).abs() < 0.01);
        let e = ebn0_from_cn0(Db(53.98), 1000.0).unwrap_or(Db(0.0));
        assert!((e.0 - 23.98).abs() < 1e-4);
        let e = ebn0_from_cn(Db(3.0), Hertz(125e3), 5470.0).unwrap_or(Db(0.0));
        assert!((e.0 - (3.0 + 13.589)).abs() < 0.01);
        assert!(ebn0_from_cn0(Db(50.0), 0.0).is_err());
    }
}
