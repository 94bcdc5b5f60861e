//! `headroom noise` (being written).

use crate::error::{CliError, CliResult};

/// Arguments of `headroom noise`.
#[derive(clap::Args)]
pub struct Args {}

/// Run the command.
pub fn run(_args: Args) -> CliResult {
    Err(CliError::Input("noise: not available in this build yet".into()))
}
