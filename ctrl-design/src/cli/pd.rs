//! `ctrl-design pd` (work in progress).

use super::CliError;

/// Arguments of `ctrl-design pd`.
#[derive(Debug, clap::Args)]
pub struct Args {}

/// Runs the subcommand.
pub fn run(_args: Args) -> Result<(), CliError> {
    Err(CliError::failure("`pd` is not implemented yet"))
}
