//! `headroom fade` (being written).

use crate::error::{CliError, CliResult};

/// Arguments of `headroom fade`.
#[derive(clap::Args)]
pub struct Args {}

/// Run the command.
pub fn run(_args: Args) -> CliResult {
    Err(CliError::Input("fade: not available in this build yet".into()))
}
