//! Panic-freedom, part 2: the frame encoders: format 1 (records,
//! decisions, header) and format 2 (record blocks, flush).
//!
//! Built with `--features panic-free-check` this links only if no panic
//! path is left after optimisation (see the crate's panic handler). Without
//! the feature it runs and exits 0.
#![no_std]
#![no_main]

use core::hint::black_box;

use cortex_m_rt::entry;

use headroom::record::codec::{
    encode_decision, encode_header, encode_record, BlockEncoder, MAX_FRAME,
};
use headroom::record::{DecisionRecord, LogHeader, LogRecord};
use headroom_firmware_demo::{host, probe_f32};

#[entry]
fn main() -> ! {
    host::exit(run())
}

fn run() -> bool {
    let mut buf = [0u8; MAX_FRAME];
    let mut ok = encode_header(black_box(&LogHeader::default()), &mut buf).is_ok();
    let mut blocks = BlockEncoder::with_records_per_frame(black_box(16));
    ok &= blocks
        .header(black_box(&LogHeader::default()), &mut buf)
        .is_ok();
    for k in 0..black_box(256u32) {
        let t_ms = black_box(u64::from(k).wrapping_mul(0x0123_4567_89ab));
        let rec = LogRecord {
            t_ms,
            tx_dbm: Some(probe_f32(k, 1)),
            rssi_dbm: if k % 3 == 0 {
                None
            } else {
                Some(probe_f32(k, 2))
            },
            noise_dbm: Some(probe_f32(k, 3)),
            rate: if k % 5 == 0 { None } else { Some(k as u8) },
        };
        let seq = black_box(k as u16);
        ok &= black_box(encode_record(seq, black_box(&rec), &mut buf)).is_ok();
        // Format 2: blocks, with a buffer of any size (too small: an error).
        let size = black_box(if k % 7 == 0 {
            (k as usize) % 40
        } else {
            MAX_FRAME
        });
        let mut block_buf = [0u8; MAX_FRAME];
        let out = blocks.record(
            black_box(&rec),
            block_buf.get_mut(..size).unwrap_or(&mut []),
        );
        ok &= black_box(out.is_ok() || size < MAX_FRAME);
        if k % 64 == 63 {
            ok &= black_box(blocks.flush(&mut buf)).is_ok();
        }
        let d = DecisionRecord {
            t_ms,
            tx_dbm: probe_f32(k, 4),
            outcome: k as u8,
            reason: (k >> 8) as u8,
            rate: if k % 3 == 0 { None } else { Some(k as u8) },
        };
        ok &= black_box(encode_decision(seq, black_box(&d), &mut buf)).is_ok();
        // A buffer too small must be an error, not a panic.
        let small = black_box((k as usize) % 8);
        let mut tiny = [0u8; 8];
        black_box(encode_decision(seq, &d, tiny.get_mut(..small).unwrap_or(&mut [])).is_err());
    }
    ok
}
