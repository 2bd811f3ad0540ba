//! `ctrl-design identify` (work in progress).

use super::CliError;

/// Arguments of `ctrl-design identify`.
#[derive(Debug, clap::Args)]
pub struct Args {}

/// Runs the subcommand.
pub fn run(_args: Args) -> Result<(), CliError> {
    Err(CliError::failure("`identify` is not implemented yet"))
}
