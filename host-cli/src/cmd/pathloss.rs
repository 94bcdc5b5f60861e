//! `headroom pathloss` (being written).

use crate::error::{CliError, CliResult};

/// Arguments of `headroom pathloss`.
#[derive(clap::Args)]
pub struct Args {}

/// Run the command.
pub fn run(_args: Args) -> CliResult {
    Err(CliError::Input("pathloss: not available in this build yet".into()))
}
