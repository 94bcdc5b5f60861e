//! `headroom rain` (being written).

use crate::error::{CliError, CliResult};

/// Arguments of `headroom rain`.
#[derive(clap::Args)]
pub struct Args {}

/// Run the command.
pub fn run(_args: Args) -> CliResult {
    Err(CliError::Input("rain: not available in this build yet".into()))
}
