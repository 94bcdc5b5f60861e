//! `headroom solve` (being written).

use crate::error::{CliError, CliResult};

/// Arguments of `headroom solve`.
#[derive(clap::Args)]
pub struct Args {}

/// Run the command.
pub fn run(_args: Args) -> CliResult {
    Err(CliError::Input("solve: not available in this build yet".into()))
}
