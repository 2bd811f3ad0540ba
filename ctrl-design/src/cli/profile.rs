//! `ctrl-design profile` (work in progress).

use super::CliError;

/// Arguments of `ctrl-design profile`.
#[derive(Debug, clap::Args)]
pub struct Args {}

/// Runs the subcommand.
pub fn run(_args: Args) -> Result<(), CliError> {
    Err(CliError::failure("`profile` is not implemented yet"))
}
