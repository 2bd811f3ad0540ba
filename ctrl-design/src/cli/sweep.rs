//! `ctrl-design sweep` (work in progress).

use super::CliError;

/// Arguments of `ctrl-design sweep`.
#[derive(Debug, clap::Args)]
pub struct Args {}

/// Runs the subcommand.
pub fn run(_args: Args) -> Result<(), CliError> {
    Err(CliError::failure("`sweep` is not implemented yet"))
}
