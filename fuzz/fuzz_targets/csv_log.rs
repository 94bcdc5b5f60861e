//! Fuzz target `csv_log`: see `headroom_fuzz::cli::csv_log`.
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    headroom_fuzz::cli::csv_log(data);
});
