//! Engine values kept in memory the C caller provides.
//!
//! Each C state type (`headroom_controller`, ...) is a block of bytes of the
//! size and alignment the header states. Inside it lies a [`Slot`]: a tag
//! that says the value was initialised, then the value. A state whose
//! initialisation failed, and zeroed memory, are refused with
//! `HEADROOM_ERR_NOT_INITIALISED` instead of being read. Memory holding
//! anything else must go through its `_init` first: its bytes could
//! happen to hold the tag.

use core::mem::{align_of, size_of, MaybeUninit};

use crate::headroom_status;

/// An engine value in a caller's block, and whether it is initialised.
#[repr(C)]
pub(crate) struct Slot<T> {
    tag: u32,
    value: MaybeUninit<T>,
}

/// A C state type: a block of bytes holding a [`Slot`] of `Inner`.
///
/// # Safety
/// `Self` must be at least as large as `Slot<Inner>` and at least as
/// aligned (checked by [`fits`] in a constant next to each implementation).
pub(crate) unsafe trait Block {
    /// The engine value it holds.
    type Inner;
    /// Tag of an initialised block of this type.
    const TAG: u32;
}

/// Whether a `Slot<T>` fits a block of `size` bytes aligned to `align`.
pub(crate) const fn fits<T>(size: usize, align: usize) -> bool {
    size_of::<Slot<T>>() <= size && align_of::<Slot<T>>() <= align
}

/// The slot in `block`, `None` for a NULL pointer.
///
/// # Safety
/// `block` is NULL or points to a live, writable block of type `B` that no
/// other reference aliases for `'a`.
pub(crate) unsafe fn slot<'a, B: Block>(block: *mut B) -> Option<&'a mut Slot<B::Inner>> {
    // SAFETY: `Block` guarantees size and alignment; the caller guarantees
    // the pointer is valid and unaliased. A `Slot` may hold any bytes: its
    // tag is a plain integer and its value is `MaybeUninit`.
    unsafe { block.cast::<Slot<B::Inner>>().as_mut() }
}

/// The slot in `block`, read-only, `None` for a NULL pointer.
///
/// # Safety
/// `block` is NULL or points to a live block of type `B` not written
/// through another reference for `'a`.
pub(crate) unsafe fn slot_ref<'a, B: Block>(block: *const B) -> Option<&'a Slot<B::Inner>> {
    // SAFETY: as in `slot`, read-only.
    unsafe { block.cast::<Slot<B::Inner>>().as_ref() }
}

impl<T> Slot<T> {
    /// Put `value` in, or mark the slot uninitialised on an error.
    pub(crate) fn set<B: Block<Inner = T>>(
        &mut self,
        value: Result<T, headroom_status>,
    ) -> headroom_status {
        match value {
            Ok(v) => {
                self.value = MaybeUninit::new(v);
                self.tag = B::TAG;
                headroom_status::HEADROOM_OK
            }
            Err(e) => {
                self.tag = 0;
                e
            }
        }
    }

    /// The value, if the slot holds one of block type `B`.
    pub(crate) fn get<B: Block<Inner = T>>(&self) -> Result<&T, headroom_status> {
        if self.tag == B::TAG {
            // SAFETY: the tag is only set right after the value is written.
            Ok(unsafe { self.value.assume_init_ref() })
        } else {
            Err(headroom_status::HEADROOM_ERR_NOT_INITIALISED)
        }
    }

    /// The value, mutable, if the slot holds one of block type `B`.
    pub(crate) fn get_mut<B: Block<Inner = T>>(&mut self) -> Result<&mut T, headroom_status> {
        if self.tag == B::TAG {
            // SAFETY: the tag is only set right after the value is written.
            Ok(unsafe { self.value.assume_init_mut() })
        } else {
            Err(headroom_status::HEADROOM_ERR_NOT_INITIALISED)
        }
    }
}

/// Run `f` and give its status (the `?` operator inside C entry points).
pub(crate) fn call(f: impl FnOnce() -> Result<(), headroom_status>) -> headroom_status {
    match f() {
        Ok(()) => headroom_status::HEADROOM_OK,
        Err(e) => e,
    }
}

/// `p` as a shared reference, or `HEADROOM_ERR_NULL`.
///
/// # Safety
/// `p` is NULL or valid for reads of a `T` for `'a`.
pub(crate) unsafe fn input<'a, T>(p: *const T) -> Result<&'a T, headroom_status> {
    // SAFETY: guaranteed by the caller.
    unsafe { p.as_ref() }.ok_or(headroom_status::HEADROOM_ERR_NULL)
}

/// `p` as an optional shared reference (NULL: none).
///
/// # Safety
/// `p` is NULL or valid for reads of a `T` for `'a`.
pub(crate) unsafe fn optional<'a, T>(p: *const T) -> Option<&'a T> {
    // SAFETY: guaranteed by the caller.
    unsafe { p.as_ref() }
}

/// Write `value` to `p` if it is not NULL.
///
/// # Safety
/// `p` is NULL or valid for writes of a `T`.
pub(crate) unsafe fn output<T>(p: *mut T, value: T) {
    // SAFETY: guaranteed by the caller; `T` is a plain C struct or number.
    if let Some(slot) = unsafe { p.as_mut() } {
        *slot = value;
    }
}

/// Write `value` to `p`, which must not be NULL.
///
/// # Safety
/// `p` is NULL or valid for writes of a `T`.
pub(crate) unsafe fn required_output<T>(p: *mut T, value: T) -> Result<(), headroom_status> {
    // SAFETY: guaranteed by the caller.
    let slot = unsafe { p.as_mut() }.ok_or(headroom_status::HEADROOM_ERR_NULL)?;
    *slot = value;
    Ok(())
}
