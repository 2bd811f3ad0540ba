//! `ctrl-design`: identify, design, check and emit motor-control constants.

use clap::{Parser, Subcommand};

mod cli;

/// Identify a small robot's drive, design its loops, check them and emit constants.
#[derive(Debug, Parser)]
#[command(name = "ctrl-design", version, about)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Fit gain, time constant and friction bias from logged tests.
    Identify(cli::identify::Args),
    /// PD position loop by pole placement, with its actual response and margins.
    Pd(cli::pd::Args),
    /// Phase-lead position loop from crossover and phase margin.
    Lead(cli::lead::Args),
    /// PI speed loop from bandwidth and damping.
    Pi(cli::pi::Args),
    /// Shape and timing of one trapezoidal move.
    Profile(cli::profile::Args),
    /// Nonlinear discrete simulation of the loop as the firmware runs it.
    Simulate(cli::simulate::Args),
    /// The simulation over a spread of plant constants; worst case of each metric.
    Sweep(cli::sweep::Args),
    /// Check a design file and write typed constants for firmware.
    Emit(cli::emit::Args),
}

fn main() {
    let cli = Cli::parse();
    let result = match cli.command {
        Command::Identify(a) => cli::identify::run(a),
        Command::Pd(a) => cli::pd::run(a),
        Command::Lead(a) => cli::lead::run(a),
        Command::Pi(a) => cli::pi::run(a),
        Command::Profile(a) => cli::profile::run(a),
        Command::Simulate(a) => cli::simulate::run(a),
        Command::Sweep(a) => cli::sweep::run(a),
        Command::Emit(a) => cli::emit::run(a),
    };
    if let Err(e) = result {
        eprintln!("error: {e}");
        std::process::exit(e.code);
    }
}
