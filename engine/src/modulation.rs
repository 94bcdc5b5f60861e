//! Bit error rate of common modulations on the AWGN channel, the Eb/N0 a
//! target bit error rate needs, and the Shannon bound.
//!
//! With γ = Eb/N0 (linear) the engine uses these formulas (common practice,
//! the textbook results for Gray-coded constellations):
//!
//! | scheme | BER | kind |
//! |---|---|---|
//! | BPSK, QPSK (Gray) | Q(√(2γ)) | exact |
//! | DBPSK | ½·exp(−γ) | exact |
//! | coherent orthogonal BFSK | Q(√γ) | exact |
//! | non-coherent orthogonal BFSK | ½·exp(−γ/2) | exact |
//! | M-PSK, M ≥ 8, Gray | (2/k)·Q(√(2kγ)·sin(π/M)), k = log2 M | nearest-neighbour approximation |
//! | square M-QAM, Gray | (4/k)·(1 − 1/√M)·Q(√(3kγ/(M − 1))) | standard approximation |
//!
//! M-PSK with M = 2 and M = 4 and 4-QAM reduce to the exact BPSK/QPSK
//! formula. The approximations are tight (within about 10 % in BER, a few
//! hundredths of a dB in Eb/N0) for BER below 10⁻³ and become optimistic
//! near BER 0.1.
//!
//! Every inverse is in closed form through [`inverse_q`] or a logarithm.

use core::f32::consts::{LN_2, PI};

use crate::error::{finite, positive, probability, solved, Error, Result};
use crate::special::{inverse_q, q_function};
use crate::units::{Db, Hertz};

/// The Shannon limit: Eb/N0 → ln 2 (−1.5917 dB) as the spectral efficiency
/// goes to zero (Shannon 1948; 10·log10(ln 2) = −1.591 745).
pub const SHANNON_LIMIT_DB: f32 = -1.5917;

/// Largest constellation order accepted (2¹⁶).
pub const MAX_ORDER: u32 = 65_536;

/// A modulation scheme with coherent or non-coherent detection on AWGN.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Modulation {
    /// Binary phase shift keying, coherent.
    Bpsk,
    /// Quadrature phase shift keying, coherent, Gray coded (same BER as BPSK).
    Qpsk,
    /// Differentially coherent BPSK.
    Dbpsk,
    /// Binary orthogonal FSK, coherent detection.
    FskCoherent,
    /// Binary orthogonal FSK, non-coherent (envelope) detection.
    FskNoncoherent,
    /// M-ary PSK, Gray coded; `order` a power of two, 2 ≤ order ≤ 65 536.
    Psk {
        /// Number of constellation points M.
        order: u32,
    },
    /// Square M-QAM, Gray coded; `order` an even power of two (4, 16, 64, …).
    Qam {
        /// Number of constellation points M.
        order: u32,
    },
}

/// The closed forms behind [`bit_error_rate`]: `BER = c·Q(√(s·γ))` or
/// `BER = ½·exp(−s·γ)`.
enum Law {
    /// BER = c·Q(√(s·γ)).
    Gaussian { c: f32, s: f32 },
    /// BER = ½·exp(−s·γ).
    Exponential { s: f32 },
}

fn bits_per_symbol(name: &'static str, order: u32) -> Result<u32> {
    if !(2..=MAX_ORDER).contains(&order) || !order.is_power_of_two() {
        return Err(Error::Unsupported(name));
    }
    Ok(order.trailing_zeros())
}

fn law(m: Modulation) -> Result<Law> {
    Ok(match m {
        Modulation::Bpsk | Modulation::Qpsk => Law::Gaussian { c: 1.0, s: 2.0 },
        Modulation::Dbpsk => Law::Exponential { s: 1.0 },
        Modulation::FskCoherent => Law::Gaussian { c: 1.0, s: 1.0 },
        Modulation::FskNoncoherent => Law::Exponential { s: 0.5 },
        Modulation::Psk { order } => {
            let k = bits_per_symbol("psk_order", order)?;
            if k <= 2 {
                Law::Gaussian { c: 1.0, s: 2.0 }
            } else {
                let kf = k as f32;
                let sin = libm::sinf(PI / order as f32);
                Law::Gaussian {
                    c: 2.0 / kf,
                    s: 2.0 * kf * sin * sin,
                }
            }
        }
        Modulation::Qam { order } => {
            let k = bits_per_symbol("qam_order", order)?;
            if k % 2 != 0 {
                // 8-, 32-, 128-QAM are not square.
                return Err(Error::Unsupported("qam_order"));
            }
            let kf = k as f32;
            let side = libm::exp2f(kf / 2.0);
            Law::Gaussian {
                c: 4.0 / kf * (1.0 - 1.0 / side),
                s: 3.0 * kf / (order as f32 - 1.0),
            }
        }
    })
}

/// Bit error rate of `m` at `ebn0` on the AWGN channel (see the module
/// table for the formula of each scheme).
///
/// # Errors
/// [`Error::NotFinite`] for a non-finite Eb/N0; [`Error::Unsupported`] for a
/// PSK order that is not a power of two in 2..=65 536 or a QAM order that is
/// not an even power of two.
pub fn bit_error_rate(m: Modulation, ebn0: Db) -> Result<f32> {
    let db = finite("ebn0", ebn0.0)?;
    let gamma = libm::exp10f(db / 10.0);
    Ok(match law(m)? {
        Law::Gaussian { c, s } => c * q_function(libm::sqrtf(s * gamma)),
        Law::Exponential { s } => 0.5 * libm::expf(-s * gamma),
    })
}

/// The Eb/N0 at which `m` reaches bit error rate `ber`: the inverse of
/// [`bit_error_rate`], in closed form.
///
/// # Errors
/// [`Error::ProbabilityOutOfRange`] unless 0 < ber < 1;
/// [`Error::NoSolution`] when the scheme's BER at Eb/N0 → 0 is already no
/// larger than `ber` (for BPSK, ber ≥ 0.5); [`Error::Unsupported`] as in
/// [`bit_error_rate`].
pub fn required_ebn0(m: Modulation, ber: f32) -> Result<Db> {
    let ber = probability("ber", ber)?;
    let gamma = match law(m)? {
        Law::Gaussian { c, s } => {
            let p = ber / c;
            if p >= 0.5 {
                return Err(Error::NoSolution("ber"));
            }
            let x = inverse_q(p)?;
            x * x / s
        }
        Law::Exponential { s } => {
            if ber >= 0.5 {
                return Err(Error::NoSolution("ber"));
            }
            -libm::logf(2.0 * ber) / s
        }
    };
    if gamma > 0.0 {
        Ok(Db(solved("ebn0", 10.0 * libm::log10f(gamma))?))
    } else {
        Err(Error::NoSolution("ber"))
    }
}

/// Shannon capacity `C = B·log2(1 + S/N)` in bit/s.
///
/// # Errors
/// [`Error::NotPositive`] for a bandwidth that is not positive,
/// [`Error::NotFinite`] for a non-finite SNR, [`Error::NoSolution`] if the
/// capacity overflows.
pub fn shannon_capacity(bandwidth: Hertz, snr: Db) -> Result<f32> {
    let b = positive("bandwidth", bandwidth.0)?;
    let snr_db = finite("snr", snr.0)?;
    let snr = libm::exp10f(snr_db / 10.0);
    // log1p keeps precision at low SNR (−30 dB → 1.44e-3 bit/s/Hz).
    let bits = if snr.is_finite() {
        libm::log1pf(snr) / LN_2
    } else {
        // 10^(dB/10) overflowed: log2(1 + snr) ≈ dB·log2(10)/10.
        snr_db * core::f32::consts::LOG2_10 / 10.0
    };
    solved("capacity", b * bits)
}

/// Minimum Eb/N0 for error-free transmission at spectral efficiency η
/// (bit/s/Hz): `Eb/N0 = (2^η − 1)/η`, which tends to
/// [`SHANNON_LIMIT_DB`] as η → 0.
///
/// # Errors
/// [`Error::NotPositive`] for η ≤ 0, [`Error::NoSolution`] for η so large
/// that 2^η overflows (η > 127).
pub fn shannon_min_ebn0(spectral_efficiency_bps_per_hz: f32) -> Result<Db> {
    let eta = positive("spectral_efficiency", spectral_efficiency_bps_per_hz)?;
    let ratio = libm::expm1f(eta * LN_2) / eta;
    let ratio = solved("ebn0", ratio)?;
    Ok(Db(10.0 * libm::log10f(ratio)))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bpsk_table_value() {
        // BER 1e-5 needs 9.59 dB for BPSK (common practice, textbook tables).
        let e = required_ebn0(Modulation::Bpsk, 1e-5).unwrap_or(Db(0.0));
        assert!((e.0 - 9.5879).abs() < 0.01, "{e:?}");
        let b = bit_error_rate(Modulation::Bpsk, e).unwrap_or(1.0);
        assert!((b - 1e-5).abs() < 1e-8);
    }

    #[test]
    fn inverse_round_trips() {
        let schemes = [
            Modulation::Bpsk,
            Modulation::Qpsk,
            Modulation::Dbpsk,
            Modulation::FskCoherent,
            Modulation::FskNoncoherent,
            Modulation::Psk { order: 8 },
            Modulation::Psk { order: 64 },
            Modulation::Qam { order: 16 },
            Modulation::Qam { order: 1024 },
        ];
        for m in schemes {
            for &ber in &[1e-2_f32, 1e-4, 1e-6, 1e-9] {
                let e = required_ebn0(m, ber).unwrap_or(Db(f32::NAN));
                let back = bit_error_rate(m, e).unwrap_or(f32::NAN);
                assert!(
                    ((back - ber) / ber).abs() < 1e-3,
                    "{m:?} {ber} {e:?} {back}"
                );
            }
        }
    }

    #[test]
    fn refusals() {
        assert_eq!(
            required_ebn0(Modulation::Qam { order: 8 }, 1e-3),
            Err(Error::Unsupported("qam_order"))
        );
        assert_eq!(
            required_ebn0(Modulation::Psk { order: 6 }, 1e-3),
            Err(Error::Unsupported("psk_order"))
        );
        assert_eq!(
            required_ebn0(Modulation::Psk { order: 1 }, 1e-3),
            Err(Error::Unsupported("psk_order"))
        );
        assert_eq!(
            required_ebn0(Modulation::Bpsk, 0.0),
            Err(Error::ProbabilityOutOfRange("ber"))
        );
        assert_eq!(
            required_ebn0(Modulation::Bpsk, 0.5),
            Err(Error::NoSolution("ber"))
        );
        assert_eq!(
            required_ebn0(Modulation::Dbpsk, 0.6),
            Err(Error::NoSolution("ber"))
        );
        assert!(bit_error_rate(Modulation::Bpsk, Db(f32::NAN)).is_err());
    }

    #[test]
    fn shannon() {
        let lim = shannon_min_ebn0(1e-6).unwrap_or(Db(0.0));
        assert!((lim.0 - SHANNON_LIMIT_DB).abs() < 1e-3);
        // η = 1: Eb/N0 = 1 → 0 dB.
        assert!(shannon_min_ebn0(1.0)
            .map(|d| d.0.abs() < 1e-5)
            .unwrap_or(false));
        // 1 MHz at 0 dB SNR carries 1 Mbit/s.
        let c = shannon_capacity(Hertz(1e6), Db(0.0)).unwrap_or(0.0);
        assert!((c - 1e6).abs() < 1.0);
        assert!(shannon_min_ebn0(200.0).is_err());
        assert!(shannon_capacity(Hertz(-1.0), Db(0.0)).is_err());
    }
}
