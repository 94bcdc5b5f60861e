//! `headroom budget` (being written).

use crate::error::{CliError, CliResult};

/// Arguments of `headroom budget`.
#[derive(clap::Args)]
pub struct Args {}

/// Run the command.
pub fn run(_args: Args) -> CliResult {
    Err(CliError::Input("budget: not available in this build yet".into()))
}
