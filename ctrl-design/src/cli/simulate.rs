//! `ctrl-design simulate` (work in progress).

use super::CliError;

/// Arguments of `ctrl-design simulate`.
#[derive(Debug, clap::Args)]
pub struct Args {}

/// Runs the subcommand.
pub fn run(_args: Args) -> Result<(), CliError> {
    Err(CliError::failure("`simulate` is not implemented yet"))
}
