//! `ctrl-design lead` (work in progress).

use super::CliError;

/// Arguments of `ctrl-design lead`.
#[derive(Debug, clap::Args)]
pub struct Args {}

/// Runs the subcommand.
pub fn run(_args: Args) -> Result<(), CliError> {
    Err(CliError::failure("`lead` is not implemented yet"))
}
