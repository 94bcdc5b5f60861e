//! Fuzz target `link_toml`: see `headroom_fuzz::cli::link_toml`.
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    headroom_fuzz::cli::link_toml_with(data, true);
});
