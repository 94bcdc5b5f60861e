//! Fuzz target `binary_log`: see `headroom_fuzz::cli::binary_log`.
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    headroom_fuzz::cli::binary_log(data);
});
