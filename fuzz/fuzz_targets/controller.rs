//! Fuzz target `controller`: see `headroom_fuzz::checks::controller`.
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    headroom_fuzz::checks::controller(data);
});
