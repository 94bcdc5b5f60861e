//! The result code of every call, and the engine's error values mapped onto it.

use core::ffi::c_char;

use headroom::control::settings::ResolveError;
use headroom::control::ConfigError;
use headroom::energy::profile::TableError;
use headroom::rate::RateError;
use headroom::record::codec::CodecError;
use headroom::Error;

/// What a call did: `HEADROOM_OK`, or why it refused. Codes are stable:
/// new ones are only appended. [`headroom_status_message`] gives each a
/// one-line description.
#[repr(C)]
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum headroom_status {
    /// Success.
    HEADROOM_OK = 0,
    /// A pointer argument that must not be NULL was NULL.
    HEADROOM_ERR_NULL = 1,
    /// The state was not initialised, or its initialisation failed.
    HEADROOM_ERR_NOT_INITIALISED = 2,
    /// No setting has this key (or the key is not UTF-8).
    HEADROOM_ERR_UNKNOWN_SETTING = 3,
    /// A setting without a default is set nowhere (`required_snr_db`).
    HEADROOM_ERR_SETTING_MISSING = 4,
    /// A value of the wrong type for the setting (a number for a count, ...).
    HEADROOM_ERR_SETTING_WRONG_KIND = 5,
    /// A whole number too large for the setting.
    HEADROOM_ERR_SETTING_TOO_LARGE = 6,
    /// A value is NaN or infinite.
    HEADROOM_ERR_NOT_FINITE = 7,
    /// A value must be greater than zero.
    HEADROOM_ERR_NOT_POSITIVE = 8,
    /// A value must not be negative.
    HEADROOM_ERR_NEGATIVE = 9,
    /// A setting is outside its allowed range.
    HEADROOM_ERR_OUT_OF_RANGE = 10,
    /// A setting contradicts another one, or would be dangerous.
    HEADROOM_ERR_INCONSISTENT = 11,
    /// Another refusal of the settings (from a newer engine).
    HEADROOM_ERR_INVALID_SETTINGS = 12,
    /// A probability is not strictly between 0 and 1.
    HEADROOM_ERR_PROBABILITY = 13,
    /// An input is outside the model's published validity range.
    HEADROOM_ERR_OUT_OF_VALIDITY = 14,
    /// An input the model does not support.
    HEADROOM_ERR_UNSUPPORTED = 15,
    /// No solution for these inputs (unreachable target, infinite result,
    /// a battery life without a battery).
    HEADROOM_ERR_NO_SOLUTION = 16,
    /// Another refusal of an input (from a newer engine).
    HEADROOM_ERR_INVALID_INPUT = 17,
    /// The observation's kind is none of `HEADROOM_OBSERVATION_*`.
    HEADROOM_ERR_OBSERVATION_KIND = 18,
    /// No update yet: there is no reason to report.
    HEADROOM_ERR_NO_DECISION_YET = 19,
    /// The transmit current table has no point.
    HEADROOM_ERR_TABLE_EMPTY = 20,
    /// The transmit current table has more points than it holds.
    HEADROOM_ERR_TABLE_FULL = 21,
    /// The transmit current table's powers are not strictly increasing.
    HEADROOM_ERR_TABLE_NOT_INCREASING = 22,
    /// The output buffer cannot hold the frame.
    HEADROOM_ERR_BUFFER_TOO_SMALL = 23,
    /// More bytes than a frame may have without a `0x00` delimiter.
    HEADROOM_ERR_FRAME_TOO_LONG = 24,
    /// A frame too short for kind, sequence number and CRC.
    HEADROOM_ERR_FRAME_TOO_SHORT = 25,
    /// Bytes that are not valid COBS.
    HEADROOM_ERR_COBS = 26,
    /// A frame whose CRC-32C does not match.
    HEADROOM_ERR_CRC = 27,
    /// A frame whose body does not decode as its kind says.
    HEADROOM_ERR_PAYLOAD = 28,
    /// A header frame without the log magic.
    HEADROOM_ERR_BAD_MAGIC = 29,
    /// A log of a major version this library does not read.
    HEADROOM_ERR_UNKNOWN_VERSION = 30,
    /// The stream ends inside a frame.
    HEADROOM_ERR_TRUNCATED = 31,
    /// A frame kind that cannot be encoded.
    HEADROOM_ERR_UNKNOWN_KIND = 32,
    /// Another codec error (from a newer engine).
    HEADROOM_ERR_CODEC = 33,
}

use headroom_status as S;

/// A one-line description of `status` (a static, NUL-terminated string;
/// never NULL: an unknown code gets "unknown status code").
#[no_mangle]
pub extern "C" fn headroom_status_message(status: i32) -> *const c_char {
    let text: &'static core::ffi::CStr = match status {
        0 => c"ok",
        1 => c"a required pointer argument is NULL",
        2 => c"the state is not initialised, or its initialisation failed",
        3 => c"no setting has this key",
        4 => c"a setting without a default is not set",
        5 => c"a value of the wrong type for this setting",
        6 => c"a whole number too large for this setting",
        7 => c"a value is not a finite number",
        8 => c"a value must be greater than zero",
        9 => c"a value must not be negative",
        10 => c"a setting is outside its allowed range",
        11 => c"a setting contradicts another one",
        12 => c"the settings are refused",
        13 => c"a probability must lie strictly between 0 and 1",
        14 => c"an input is outside the model's published validity range",
        15 => c"an input the model does not support",
        16 => c"no solution for these inputs",
        17 => c"an input is refused",
        18 => c"unknown observation kind",
        19 => c"no update yet",
        20 => c"the transmit current table has no point",
        21 => c"the transmit current table has too many points",
        22 => c"the transmit current table's powers are not strictly increasing",
        23 => c"the output buffer is too small for the frame",
        24 => c"no frame delimiter within the longest frame",
        25 => c"frame too short",
        26 => c"frame is not valid COBS",
        27 => c"CRC-32C mismatch",
        28 => c"frame content does not decode",
        29 => c"header frame without the log magic",
        30 => c"log format major version not supported",
        31 => c"log ends inside a frame",
        32 => c"frame kind cannot be encoded",
        33 => c"the frame is refused",
        _ => c"unknown status code",
    };
    text.as_ptr()
}

impl From<ConfigError> for headroom_status {
    fn from(e: ConfigError) -> Self {
        match e {
            ConfigError::NotFinite { .. } => S::HEADROOM_ERR_NOT_FINITE,
            ConfigError::NotPositive { .. } => S::HEADROOM_ERR_NOT_POSITIVE,
            ConfigError::Negative { .. } => S::HEADROOM_ERR_NEGATIVE,
            ConfigError::OutOfRange { .. } => S::HEADROOM_ERR_OUT_OF_RANGE,
            ConfigError::Inconsistent { .. } => S::HEADROOM_ERR_INCONSISTENT,
            _ => S::HEADROOM_ERR_INVALID_SETTINGS,
        }
    }
}

impl From<ResolveError> for headroom_status {
    fn from(e: ResolveError) -> Self {
        match e {
            ResolveError::Missing(_) => S::HEADROOM_ERR_SETTING_MISSING,
            ResolveError::WrongKind(_) => S::HEADROOM_ERR_SETTING_WRONG_KIND,
            ResolveError::TooLarge { .. } => S::HEADROOM_ERR_SETTING_TOO_LARGE,
            ResolveError::Invalid(c) => c.into(),
            _ => S::HEADROOM_ERR_INVALID_SETTINGS,
        }
    }
}

impl From<Error> for headroom_status {
    fn from(e: Error) -> Self {
        match e {
            Error::NotFinite(_) => S::HEADROOM_ERR_NOT_FINITE,
            Error::NotPositive(_) => S::HEADROOM_ERR_NOT_POSITIVE,
            Error::Negative(_) => S::HEADROOM_ERR_NEGATIVE,
            Error::ProbabilityOutOfRange(_) => S::HEADROOM_ERR_PROBABILITY,
            Error::OutOfValidity { .. } => S::HEADROOM_ERR_OUT_OF_VALIDITY,
            Error::Unsupported(_) => S::HEADROOM_ERR_UNSUPPORTED,
            Error::NoSolution(_) => S::HEADROOM_ERR_NO_SOLUTION,
            _ => S::HEADROOM_ERR_INVALID_INPUT,
        }
    }
}

impl From<TableError> for headroom_status {
    fn from(e: TableError) -> Self {
        match e {
            TableError::Empty => S::HEADROOM_ERR_TABLE_EMPTY,
            TableError::Full { .. } => S::HEADROOM_ERR_TABLE_FULL,
            TableError::NotIncreasing { .. } => S::HEADROOM_ERR_TABLE_NOT_INCREASING,
            TableError::BadPoint { error, .. } => error.into(),
            _ => S::HEADROOM_ERR_INVALID_INPUT,
        }
    }
}

impl From<CodecError> for headroom_status {
    fn from(e: CodecError) -> Self {
        match e {
            CodecError::BufferTooSmall => S::HEADROOM_ERR_BUFFER_TOO_SMALL,
            CodecError::FrameTooLong => S::HEADROOM_ERR_FRAME_TOO_LONG,
            CodecError::TooShort => S::HEADROOM_ERR_FRAME_TOO_SHORT,
            CodecError::Cobs => S::HEADROOM_ERR_COBS,
            CodecError::Crc => S::HEADROOM_ERR_CRC,
            CodecError::Payload => S::HEADROOM_ERR_PAYLOAD,
            CodecError::BadMagic => S::HEADROOM_ERR_BAD_MAGIC,
            CodecError::UnknownVersion { .. } => S::HEADROOM_ERR_UNKNOWN_VERSION,
            CodecError::Truncated => S::HEADROOM_ERR_TRUNCATED,
            CodecError::UnknownKind(_) => S::HEADROOM_ERR_UNKNOWN_KIND,
            _ => S::HEADROOM_ERR_CODEC,
        }
    }
}

impl From<RateError> for headroom_status {
    fn from(e: RateError) -> Self {
        match e {
            RateError::TooMany => S::HEADROOM_ERR_TABLE_FULL,
            RateError::DuplicateName | RateError::MixedBandwidth => S::HEADROOM_ERR_INCONSISTENT,
            _ => S::HEADROOM_ERR_INVALID_INPUT,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use core::ffi::CStr;

    #[test]
    fn every_code_has_its_own_message() {
        let mut seen = std::collections::HashSet::new();
        for code in 0..=S::HEADROOM_ERR_CODEC as i32 {
            // SAFETY: the function returns a static NUL-terminated string.
            let m = unsafe { CStr::from_ptr(headroom_status_message(code)) };
            let m = m.to_str().unwrap_or("");
            assert!(!m.is_empty() && m != "unknown status code", "{code}");
            assert!(seen.insert(m.to_owned()), "{code}: {m} twice");
        }
        // SAFETY: as above.
        let m = unsafe { CStr::from_ptr(headroom_status_message(999)) };
        assert_eq!(m.to_str().ok(), Some("unknown status code"));
    }
}
