//! `headroom ber` (being written).

use crate::error::{CliError, CliResult};

/// Arguments of `headroom ber`.
#[derive(clap::Args)]
pub struct Args {}

/// Run the command.
pub fn run(_args: Args) -> CliResult {
    Err(CliError::Input("ber: not available in this build yet".into()))
}
