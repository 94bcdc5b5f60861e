//! `headroom replay` (being written).

use crate::error::{CliError, CliResult};

/// Arguments of `headroom replay`.
#[derive(clap::Args)]
pub struct Args {}

/// Run the command.
pub fn run(_args: Args) -> CliResult {
    Err(CliError::Input("replay: not available in this build yet".into()))
}
