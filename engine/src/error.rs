//! The error type of the engine's calculations.
//!
//! Each variant names the offending parameter so that a command-line front
//! end can say which argument was wrong without guessing.

use core::fmt;

/// Why a calculation refused its input.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Error {
    /// The parameter is NaN or infinite.
    NotFinite(&'static str),
    /// The parameter must be strictly positive (a distance, a bandwidth, a frequency).
    NotPositive(&'static str),
    /// The parameter must not be negative.
    Negative(&'static str),
    /// A probability must lie strictly between 0 and 1.
    ProbabilityOutOfRange(&'static str),
    /// The parameter is outside the published validity range of the model.
    OutOfValidity {
        /// Parameter name.
        param: &'static str,
        /// Value given.
        value: f32,
        /// Lowest valid value.
        min: f32,
        /// Highest valid value.
        max: f32,
    },
    /// The parameter is not one the model supports (an order that is not a
    /// power of two, a square QAM order, ...).
    Unsupported(&'static str),
    /// The inverse problem has no solution for these inputs (the target is
    /// unreachable, or the result would be infinite).
    NoSolution(&'static str),
}

impl Error {
    /// Name of the parameter at fault (`frequency_hz`, `distance_m`, ...),
    /// so that a front end can name its own option or key instead.
    pub fn param(&self) -> &'static str {
        match *self {
            Error::NotFinite(p)
            | Error::NotPositive(p)
            | Error::Negative(p)
            | Error::ProbabilityOutOfRange(p)
            | Error::Unsupported(p)
            | Error::NoSolution(p) => p,
            Error::OutOfValidity { param, .. } => param,
        }
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Error::NotFinite(p) => write!(f, "{p}: must be a finite number"),
            Error::NotPositive(p) => write!(f, "{p}: must be greater than zero"),
            Error::Negative(p) => write!(f, "{p}: must not be negative"),
            Error::ProbabilityOutOfRange(p) => {
                write!(f, "{p}: must be a probability strictly between 0 and 1")
            }
            Error::OutOfValidity {
                param,
                value,
                min,
                max,
            } => write!(
                f,
                "{param}: {value} is outside the model's published validity range {min}..{max}"
            ),
            Error::Unsupported(p) => write!(f, "{p}: value not supported by this model"),
            Error::NoSolution(p) => write!(f, "{p}: no solution for these inputs"),
        }
    }
}

impl core::error::Error for Error {}

/// Result of an engine calculation.
pub type Result<T> = core::result::Result<T, Error>;

/// `x` if finite, else [`Error::NotFinite`].
#[inline]
pub fn finite(name: &'static str, x: f32) -> Result<f32> {
    if x.is_finite() {
        Ok(x)
    } else {
        Err(Error::NotFinite(name))
    }
}

/// `x` if finite and strictly positive.
#[inline]
pub fn positive(name: &'static str, x: f32) -> Result<f32> {
    let x = finite(name, x)?;
    if x > 0.0 {
        Ok(x)
    } else {
        Err(Error::NotPositive(name))
    }
}

/// `x` if finite and not negative.
#[inline]
pub fn non_negative(name: &'static str, x: f32) -> Result<f32> {
    let x = finite(name, x)?;
    if x >= 0.0 {
        Ok(x)
    } else {
        Err(Error::Negative(name))
    }
}

/// `p` if it is a probability strictly inside (0, 1).
#[inline]
pub fn probability(name: &'static str, p: f32) -> Result<f32> {
    let p = finite(name, p)?;
    if p > 0.0 && p < 1.0 {
        Ok(p)
    } else {
        Err(Error::ProbabilityOutOfRange(name))
    }
}

/// `x` if finite and within `[min, max]`, else [`Error::OutOfValidity`].
#[inline]
pub fn within(name: &'static str, x: f32, min: f32, max: f32) -> Result<f32> {
    let x = finite(name, x)?;
    if x >= min && x <= max {
        Ok(x)
    } else {
        Err(Error::OutOfValidity {
            param: name,
            value: x,
            min,
            max,
        })
    }
}

/// `x` if finite, else [`Error::NoSolution`]: for results that overflow.
#[inline]
pub fn solved(name: &'static str, x: f32) -> Result<f32> {
    if x.is_finite() {
        Ok(x)
    } else {
        Err(Error::NoSolution(name))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn checks_refuse_bad_values() {
        assert_eq!(finite("x", f32::NAN), Err(Error::NotFinite("x")));
        assert_eq!(positive("d", 0.0), Err(Error::NotPositive("d")));
        assert_eq!(non_negative("h", -1.0), Err(Error::Negative("h")));
        assert_eq!(
            probability("p", 1.0),
            Err(Error::ProbabilityOutOfRange("p"))
        );
        assert!(within("f", 2000.0, 150.0, 1500.0).is_err());
        assert_eq!(within("f", 900.0, 150.0, 1500.0), Ok(900.0));
    }
}
