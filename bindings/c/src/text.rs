//! The engine's stable names as C strings, built at compile time from the
//! engine's own tables (no name is written twice).

use core::ffi::c_char;

use headroom::control::{Outcome, Reason};

/// Longest name, NUL included.
const NAME_LEN: usize = 24;

/// `names` as NUL-terminated fixed-size arrays (a name too long fails the build).
#[allow(clippy::indexing_slicing)] // compile time only
const fn table<const N: usize>(names: [&str; N]) -> [[u8; NAME_LEN]; N] {
    let mut t = [[0u8; NAME_LEN]; N];
    let mut i = 0;
    while i < N {
        let s = names[i].as_bytes();
        assert!(s.len() < NAME_LEN, "a name does not fit NAME_LEN");
        let mut j = 0;
        while j < s.len() {
            t[i][j] = s[j];
            j += 1;
        }
        i += 1;
    }
    t
}

#[allow(clippy::indexing_slicing)] // compile time only
const fn reason_names() -> [&'static str; Reason::COUNT] {
    let mut n = [""; Reason::COUNT];
    let mut i = 0;
    while i < Reason::COUNT {
        n[i] = Reason::ALL[i].as_str();
        i += 1;
    }
    n
}

const OUTCOMES: [Outcome; 3] = [Outcome::Delivered, Outcome::Lost, Outcome::Unjudged];

#[allow(clippy::indexing_slicing)] // compile time only
const fn outcome_names() -> [&'static str; 3] {
    let mut n = [""; 3];
    let mut i = 0;
    while i < 3 {
        n[i] = OUTCOMES[i].as_str();
        i += 1;
    }
    n
}

static REASONS: [[u8; NAME_LEN]; Reason::COUNT] = table(reason_names());
static OUTCOME_NAMES: [[u8; NAME_LEN]; 3] = table(outcome_names());

/// The stable name of a reason code (`"warm_up"`, `"hold"`, ...: the names
/// of `headroom replay`'s CSV and JSON), or NULL for an unknown code.
#[no_mangle]
pub extern "C" fn headroom_reason_name(code: u8) -> *const c_char {
    match Reason::from_code(code).and_then(|r| REASONS.get(r.index())) {
        Some(n) => n.as_ptr().cast(),
        None => core::ptr::null(),
    }
}

/// The stable name of an outcome code (`"delivered"`, `"lost"`,
/// `"unjudged"`), or NULL for an unknown code.
#[no_mangle]
pub extern "C" fn headroom_outcome_name(code: u8) -> *const c_char {
    match Outcome::from_code(code).and_then(|o| OUTCOME_NAMES.get(usize::from(o.code()))) {
        Some(n) => n.as_ptr().cast(),
        None => core::ptr::null(),
    }
}

/// Copy `s` into the caller's buffer `buf` of `len` bytes, NUL-terminated
/// and cut to fit; the length of `s` (as `strlen` would give it had the
/// buffer been large enough).
///
/// # Safety
/// `buf` is NULL or valid for writes of `len` bytes.
pub(crate) unsafe fn copy_out(s: &str, buf: *mut c_char, len: usize) -> usize {
    if buf.is_null() || len == 0 {
        return s.len();
    }
    // SAFETY: guaranteed by the caller.
    let dst = unsafe { core::slice::from_raw_parts_mut(buf.cast::<u8>(), len) };
    let n = s.len().min(len - 1);
    for (d, b) in dst.iter_mut().zip(s.as_bytes().iter().take(n)) {
        *d = *b;
    }
    if let Some(end) = dst.get_mut(n) {
        *end = 0;
    }
    s.len()
}

#[cfg(test)]
mod tests {
    use super::*;
    use core::ffi::CStr;

    #[test]
    fn names_are_the_engines() {
        for r in Reason::ALL {
            // SAFETY: a known code gives a static NUL-terminated name.
            let n = unsafe { CStr::from_ptr(headroom_reason_name(r.code())) };
            assert_eq!(n.to_str().ok(), Some(r.as_str()));
        }
        assert!(headroom_reason_name(Reason::COUNT as u8).is_null());
        for o in OUTCOMES {
            // SAFETY: as above.
            let n = unsafe { CStr::from_ptr(headroom_outcome_name(o.code())) };
            assert_eq!(n.to_str().ok(), Some(o.as_str()));
        }
        assert!(headroom_outcome_name(3).is_null());
    }

    #[test]
    fn copies_cut_to_fit() {
        let mut buf = [0x55 as c_char; 6];
        // SAFETY: the buffer holds 6 bytes.
        let n = unsafe { copy_out("min_tx_dbm", buf.as_mut_ptr(), buf.len()) };
        assert_eq!(n, 10);
        // SAFETY: copy_out NUL-terminated it.
        let s = unsafe { CStr::from_ptr(buf.as_ptr()) };
        assert_eq!(s.to_str().ok(), Some("min_t"));
    }
}
