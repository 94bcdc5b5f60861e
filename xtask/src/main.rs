//! `cargo xtask <step>`: project tasks that need more than cargo.

use std::process::ExitCode;

fn main() -> ExitCode {
    let step = std::env::args().nth(1).unwrap_or_default();
    match step.as_str() {
        _ => {
            eprintln!("usage: cargo xtask <firmware|bench>");
            ExitCode::from(2)
        }
    }
}
