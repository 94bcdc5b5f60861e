//! Panic-freedom, part 3: the streaming frame decoder, fed intact,
//! damaged and arbitrary bytes. (No encoder here: its own check is
//! `panic_free_encoder`.)
//!
//! Built with `--features panic-free-check` this links only if no panic
//! path is left after optimisation (see the crate's panic handler). Without
//! the feature it runs and exits 0.
#![no_std]
#![no_main]

use core::hint::black_box;

use cortex_m_rt::entry;

use headroom::record::codec::{Event, FrameDecoder};
use headroom_firmware_demo::host;

/// Two record frames of a log written by `headroom synth` (format 1.0),
/// delimiters included: the decoder must find them whatever surrounds them.
const FRAMES: [u8; 53] = [
    0x03, 0x01, 0x01, 0x01, 0x02, 0x01, 0x01, 0x04, 0x60, 0x41, 0x01, 0x01, 0x04, 0xa6, 0xc2, 0x01,
    0x01, 0x07, 0xea, 0xc2, 0x0b, 0x4b, 0xc8, 0xb2, 0x00, 0x03, 0x01, 0x02, 0x05, 0xe0, 0xd4, 0x03,
    0x01, 0x01, 0x04, 0x60, 0x41, 0x01, 0x01, 0x04, 0xae, 0xc2, 0x01, 0x01, 0x07, 0xea, 0xc2, 0x99,
    0x23, 0xab, 0x81, 0x00, 0x00,
];

#[entry]
fn main() -> ! {
    host::exit(run())
}

fn feed(dec: &mut FrameDecoder, bytes: &[u8], frames: &mut u32) {
    let mut input: &[u8] = black_box(bytes);
    while let Some(ev) = dec.feed(&mut input) {
        if let Event::Frame { .. } = black_box(ev) {
            *frames += 1;
        }
    }
}

fn run() -> bool {
    let mut dec: FrameDecoder = FrameDecoder::new();
    let mut frames = 0u32;
    let mut noise = [0u8; 97];
    let mut x = black_box(0x2545_f491u32);
    for k in 0..black_box(256u32) {
        // Intact frames, then the same with one byte changed.
        let mut copy = black_box(FRAMES);
        feed(&mut dec, &copy, &mut frames);
        let at = black_box(k as usize) % copy.len();
        if let Some(b) = copy.get_mut(at) {
            *b ^= black_box(0x5a);
        }
        feed(&mut dec, &copy, &mut frames);
        // Arbitrary bytes, sometimes longer than any frame without a zero.
        for b in noise.iter_mut() {
            x ^= x << 13;
            x ^= x >> 17;
            x ^= x << 5;
            *b = if k % 3 == 0 { (x as u8) | 1 } else { x as u8 };
        }
        for _ in 0..(k % 4) {
            feed(&mut dec, &noise, &mut frames);
        }
    }
    black_box(dec.finish());
    // Each intact copy was found.
    frames >= 512
}
