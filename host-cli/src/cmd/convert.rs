//! `headroom convert` (being written).

use crate::error::{CliError, CliResult};

/// Arguments of `headroom convert`.
#[derive(clap::Args)]
pub struct Args {}

/// Run the command.
pub fn run(_args: Args) -> CliResult {
    Err(CliError::Input("convert: not available in this build yet".into()))
}
