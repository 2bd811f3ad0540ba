//! `ctrl-design pi` (work in progress).

use super::CliError;

/// Arguments of `ctrl-design pi`.
#[derive(Debug, clap::Args)]
pub struct Args {}

/// Runs the subcommand.
pub fn run(_args: Args) -> Result<(), CliError> {
    Err(CliError::failure("`pi` is not implemented yet"))
}
