//! `headroom synth` (being written).

use crate::error::{CliError, CliResult};

/// Arguments of `headroom synth`.
#[derive(clap::Args)]
pub struct Args {}

/// Run the command.
pub fn run(_args: Args) -> CliResult {
    Err(CliError::Input("synth: not available in this build yet".into()))
}
