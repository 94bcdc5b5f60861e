//! Fuzz target `block_decoder`: see `headroom_fuzz::checks::block_decoder`.
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    headroom_fuzz::checks::block_decoder(data);
});
