//! Read speed of the log readers, as a replay would consume them.
//!
//! `cargo run --release -p headroom-cli --example logio_speed -- FILE...`
//! prints the records read and the records per second for each file.

#[allow(dead_code)]
#[path = "../src/atomic.rs"]
mod atomic;
#[allow(dead_code)]
#[path = "../src/error.rs"]
mod error;
#[allow(dead_code, unused_imports)]
#[path = "../src/logio/mod.rs"]
mod logio;
#[allow(dead_code)]
#[path = "../src/quantity.rs"]
mod quantity;
#[allow(dead_code)]
#[path = "../src/rates.rs"]
mod rates;

use std::path::Path;
use std::process::ExitCode;
use std::time::Instant;

fn main() -> ExitCode {
    let mut status = ExitCode::SUCCESS;
    for arg in std::env::args().skip(1) {
        let start = Instant::now();
        let mut log = match logio::open(Path::new(&arg)) {
            Ok(l) => l,
            Err(e) => {
                eprintln!("{e}");
                status = ExitCode::FAILURE;
                continue;
            }
        };
        let mut n: u64 = 0;
        let mut sum = 0.0f64;
        for rec in &mut log {
            match rec {
                Ok(r) => {
                    n += 1;
                    sum += f64::from(r.rssi_dbm.unwrap_or(0.0));
                }
                Err(e) => {
                    eprintln!("{e}");
                    status = ExitCode::FAILURE;
                    break;
                }
            }
        }
        let s = start.elapsed().as_secs_f64();
        println!(
            "{arg}: {n} records in {s:.3} s = {:.1} M records/s (checksum {sum:.1}, {} damaged regions)",
            n as f64 / s / 1e6,
            log.damage().len()
        );
    }
    status
}
