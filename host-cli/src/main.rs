//! `headroom`: the command-line front end of the headroom engine (the
//! commands live in the `headroom_cli` library, `src/lib.rs`).

use std::process::ExitCode;

fn main() -> ExitCode {
    headroom_cli::run()
}
