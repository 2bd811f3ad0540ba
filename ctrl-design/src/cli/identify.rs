//! `ctrl-design identify`: fit gain, time constant and bias from logged tests.

use std::path::PathBuf;

use ctrl_design::identify::{
    self, Columns, Identification, IdentifyError, Log, Mode, Options, SignalKind,
};

use super::{CliError, Format};

/// Method choice on the command line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, clap::ValueEnum)]
pub enum ModeArg {
    /// Step mode if every log is a single voltage step, else excitation mode.
    #[default]
    Auto,
    /// Per-step fits, then gain and bias from steady speeds, time constant pooled.
    Step,
    /// Discrete first-order model fitted over whole logs (any voltage history).
    Excitation,
}

/// Which recorded quantity to use when a log has both.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, clap::ValueEnum)]
pub enum SignalArg {
    /// Position column.
    #[default]
    Position,
    /// Speed column.
    Speed,
}

/// Arguments of `ctrl-design identify`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// CSV logs with a header row: time, volts, and position or speed.
    #[arg(required = true, value_name = "LOG.csv")]
    pub logs: Vec<PathBuf>,
    /// Name of the time column (seconds, strictly increasing).
    #[arg(long, default_value = "time_s", value_name = "NAME")]
    pub time_column: String,
    /// Name of the command voltage column (volts, held until the next row).
    #[arg(long, default_value = "volts", value_name = "NAME")]
    pub volts_column: String,
    /// Name of the position column (distance units).
    #[arg(long, default_value = "position", value_name = "NAME")]
    pub position_column: String,
    /// Name of the speed column (distance units per second).
    #[arg(long, default_value = "speed", value_name = "NAME")]
    pub speed_column: String,
    /// Which column to use when a log has both position and speed.
    #[arg(long, value_enum, default_value_t = SignalArg::Position)]
    pub prefer: SignalArg,
    /// Name of the distance unit, for the output (e.g. mm, rad, counts).
    #[arg(long, default_value = "unit", value_name = "NAME")]
    pub unit: String,
    /// Method.
    #[arg(long, value_enum, default_value_t = ModeArg::Auto)]
    pub mode: ModeArg,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    /// Also draw measured speed against the fitted model for every log into this SVG file.
    #[arg(long, value_name = "FILE.svg")]
    pub plot: Option<PathBuf>,
}

fn to_cli(e: IdentifyError) -> CliError {
    match e {
        IdentifyError::Read { .. } => CliError::bad_input(e.to_string()),
        _ => CliError::bad_input(e.to_string()),
    }
}

/// Runs the subcommand.
pub fn run(args: Args) -> Result<(), CliError> {
    let columns = Columns {
        time: args.time_column.clone(),
        volts: args.volts_column.clone(),
        position: args.position_column.clone(),
        speed: args.speed_column.clone(),
        prefer: match args.prefer {
            SignalArg::Position => SignalKind::Position,
            SignalArg::Speed => SignalKind::Speed,
        },
    };
    let logs: Vec<Log> = args
        .logs
        .iter()
        .map(|p| Log::from_file(p, &columns))
        .collect::<Result<_, _>>()
        .map_err(to_cli)?;
    let opts = Options {
        mode: match args.mode {
            ModeArg::Auto => Mode::Auto,
            ModeArg::Step => Mode::Step,
            ModeArg::Excitation => Mode::Excitation,
        },
        unit: args.unit.clone(),
    };
    let id = identify::identify(&logs, &opts).map_err(to_cli)?;
    if let Some(path) = &args.plot {
        identify::plot_svg(path, &logs, &id).map_err(CliError::failure)?;
    }
    match args.format {
        Format::Json => {
            let s = serde_json::to_string_pretty(&id)
                .map_err(|e| CliError::failure(format!("cannot write JSON: {e}")))?;
            println!("{s}");
        }
        Format::Text => print!("{}", text_report(&id)),
    }
    Ok(())
}

fn opt(v: Option<f64>, prec: usize) -> String {
    match v {
        Some(x) if x.is_finite() => format!("{x:.prec$}"),
        _ => "-".into(),
    }
}

fn pm(v: Option<f64>, prec: usize) -> String {
    match v {
        Some(x) if x.is_finite() => format!(" (spread {x:.prec$})"),
        _ => String::new(),
    }
}

/// The readable table printed by default.
pub fn text_report(id: &Identification) -> String {
    let u = &id.unit;
    let mut s = String::new();
    let mode = match id.mode {
        identify::FitMode::Step => "step tests",
        identify::FitMode::Excitation => "excitation (whole-log model fit)",
    };
    s += &format!(
        "plant identified from {} log(s), method: {mode}\n",
        id.per_log.len()
    );
    s += &format!(
        "  gain K           {:>12.5} {u}/s per V{}\n",
        id.plant.gain,
        pm(id.spread.gain, 5)
    );
    s += &format!(
        "  time constant T  {:>12.5} s{}\n",
        id.plant.time_constant_s,
        pm(id.spread.time_constant_s, 5)
    );
    s += &format!(
        "  bias             {:>12.4} V{}\n",
        id.plant.bias_volts,
        pm(id.spread.bias_volts, 4)
    );
    s += &format!("  R² (speed)       {:>12.5}\n", id.r_squared);
    s += &format!("  residual RMS     {:>12.4} {u}/s\n\n", id.residual_rms);
    s += &format!(
        "{:<32} {:>8} {:>8} {:>12} {:>9} {:>12} {:>9}\n",
        "log", "rows", "volts", "steady", "T s", "resid", "R²"
    );
    for l in &id.per_log {
        let name = std::path::Path::new(&l.name)
            .file_name()
            .map(|n| n.to_string_lossy().to_string())
            .unwrap_or_else(|| l.name.clone());
        s += &format!(
            "{:<32} {:>8} {:>8} {:>12} {:>9} {:>12} {:>9}\n",
            name,
            l.rows,
            opt(l.step_volts, 2),
            if l.moved {
                opt(l.steady_speed, 3)
            } else {
                "no motion".into()
            },
            opt(l.time_constant_s, 5),
            opt(Some(l.residual_rms), 4),
            opt(Some(l.r_squared), 5)
        );
    }
    s += &format!("(steady in {u}/s, resid = speed residual RMS in {u}/s)\n");
    if id.warnings.is_empty() {
        s += "\nno warnings\n";
    } else {
        s += "\nwarnings:\n";
        for w in &id.warnings {
            s += &format!("  - {w}\n");
        }
    }
    s
}
