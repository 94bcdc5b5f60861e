//! Panic-freedom, part 3: the streaming frame decoder, fed arbitrary bytes.
//!
//! Built with `--features panic-free-check` this links only if no panic
//! path is left after optimisation (see the crate's panic handler). Without
//! the feature it runs and exits 0.
#![no_std]
#![no_main]

use core::hint::black_box;

use cortex_m_rt::entry;

use headroom::record::codec::{encode_record, Event, FrameDecoder, MAX_FRAME};
use headroom::record::LogRecord;
use headroom_firmware_demo::{host, probe_f32};

#[entry]
fn main() -> ! {
    host::exit(run())
}

fn run() -> bool {
    let mut dec: FrameDecoder = FrameDecoder::new();
    let mut buf = [0u8; MAX_FRAME];
    let mut frames = 0u32;
    for k in 0..black_box(256u32) {
        let rec = LogRecord { t_ms: u64::from(k), tx_dbm: Some(probe_f32(k, 1)), rssi_dbm: None, noise_dbm: None };
        let Ok(bytes) = encode_record(k as u16, &rec, &mut buf) else {
            return false;
        };
        // Damage some frames: flip a byte chosen from outside.
        let mut frame = [0u8; MAX_FRAME];
        let n = bytes.len().min(frame.len());
        if let (Some(dst), Some(src)) = (frame.get_mut(..n), bytes.get(..n)) {
            dst.copy_from_slice(src);
        }
        let at = black_box(k as usize) % n.max(1);
        if k % 7 == 0 {
            if let Some(b) = frame.get_mut(at) {
                *b ^= black_box(0x5a);
            }
        }
        let mut input: &[u8] = black_box(frame.get(..n).unwrap_or(&[]));
        while let Some(ev) = dec.feed(&mut input) {
            if let Event::Frame { .. } = black_box(ev) {
                frames += 1;
            }
        }
    }
    black_box(dec.finish());
    frames > 0
}
