//! Command-line front end: one file per subcommand, each with `Args` and `run`.

use std::fmt;

pub mod emit;
pub mod identify;
pub mod lead;
pub mod pd;
pub mod pi;
pub mod profile;
pub mod simulate;
pub mod sweep;

/// Exit status for a request the tool refuses (bad input, infeasible design).
pub const EXIT_BAD_INPUT: i32 = 2;
/// Exit status for a failure of the tool or the environment (an unwritable file).
pub const EXIT_FAILURE: i32 = 1;

/// An error a subcommand reports: printed to stderr, then the process exits with `code`.
#[derive(Debug)]
pub struct CliError {
    /// Process exit status.
    pub code: i32,
    /// What went wrong, where, and the valid range.
    pub message: String,
}

impl CliError {
    /// A refused input (exit status 2).
    pub fn bad_input(message: impl Into<String>) -> Self {
        CliError {
            code: EXIT_BAD_INPUT,
            message: message.into(),
        }
    }
    /// A failure that is not the input's fault (exit status 1).
    pub fn failure(message: impl Into<String>) -> Self {
        CliError {
            code: EXIT_FAILURE,
            message: message.into(),
        }
    }
}

impl fmt::Display for CliError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

/// Output format shared by every subcommand.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, clap::ValueEnum)]
pub enum Format {
    /// A readable table.
    #[default]
    Text,
    /// One JSON object on stdout.
    Json,
}

/// The plant flags shared by `pd`, `lead` and `pi`.
#[derive(Debug, Clone, clap::Args)]
pub struct PlantArgs {
    /// Plant gain K, units/s per volt.
    #[arg(long, allow_negative_numbers = true)]
    pub plant_gain: f64,
    /// Plant time constant T, seconds.
    #[arg(long, allow_negative_numbers = true)]
    pub time_constant: f64,
    /// Friction bias, volts (for the feedforward output).
    #[arg(long, default_value_t = 0.0, allow_negative_numbers = true)]
    pub bias: f64,
}

impl PlantArgs {
    /// The checked plant, or exit 2 naming the flag and its valid range.
    pub fn plant(&self) -> Result<ctrl_design::Plant, CliError> {
        pd::plant_from(self.plant_gain, self.time_constant, self.bias)
    }
}

/// The encoder and supply flags of the loop checks, shared by `pd`, `lead` and `pi`.
#[derive(Debug, Clone, clap::Args)]
pub struct CheckArgs {
    /// Encoder count size, units (for the encoder check; needs --rate and --supply-min).
    #[arg(long, allow_negative_numbers = true)]
    pub count_size: Option<f64>,
    /// Cruise speed of the fastest move, units/s (for the counts-per-tick check; in `pd`
    /// with --accel also the move-voltage check).
    #[arg(long, allow_negative_numbers = true)]
    pub cruise_speed: Option<f64>,
    /// Lowest supply voltage, V (for the encoder-step check; in `pd` also the move-voltage
    /// check).
    #[arg(long, allow_negative_numbers = true)]
    pub supply_min: Option<f64>,
}

impl CheckArgs {
    /// Each given flag is finite and > 0, or exit 2 naming it.
    pub fn validate(&self) -> Result<(), CliError> {
        pd::positive("--count-size", self.count_size, "units")?;
        pd::positive("--cruise-speed", self.cruise_speed, "units/s")?;
        pd::positive("--supply-min", self.supply_min, "V")
    }
}

/// A serializable value as JSON (`null` if it cannot be represented).
pub fn to_value<T: serde::Serialize>(v: &T) -> serde_json::Value {
    serde_json::to_value(v).unwrap_or(serde_json::Value::Null)
}
