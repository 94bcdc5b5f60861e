//! Fuzz target `frame_decoder`: see `headroom_fuzz::checks::frame_decoder`.
#![no_main]

libfuzzer_sys::fuzz_target!(|data: &[u8]| {
    headroom_fuzz::checks::frame_decoder(data);
});
