//! `ctrl-design emit` (work in progress).

use super::CliError;

/// Arguments of `ctrl-design emit`.
#[derive(Debug, clap::Args)]
pub struct Args {}

/// Runs the subcommand.
pub fn run(_args: Args) -> Result<(), CliError> {
    Err(CliError::failure("`emit` is not implemented yet"))
}
