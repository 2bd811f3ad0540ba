//! `ctrl-design profile`: shape and timing of one move (trapezoid or triangle).

use super::pd::{design_error, emit, plant_from, positive, print_json};
use super::{CliError, Format};
use ctrl_design::tune;
use std::fmt::Write as _;

/// Arguments of `ctrl-design profile`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Move distance, units (> 0).
    #[arg(long, allow_negative_numbers = true)]
    pub distance: f64,
    /// Cruise speed, units/s.
    #[arg(long, allow_negative_numbers = true)]
    pub cruise_speed: f64,
    /// Acceleration (and deceleration), units/s^2.
    #[arg(long, allow_negative_numbers = true)]
    pub accel: f64,
    /// Speed at the start, units/s.
    #[arg(long, default_value_t = 0.0, allow_negative_numbers = true)]
    pub start_speed: f64,
    /// Speed at the end, units/s.
    #[arg(long, default_value_t = 0.0, allow_negative_numbers = true)]
    pub end_speed: f64,
    /// Plant gain K (with --time-constant and --supply-min: checks the move's peak voltage).
    #[arg(long, requires_all = ["time_constant", "supply_min"], allow_negative_numbers = true)]
    pub plant_gain: Option<f64>,
    /// Plant time constant T, seconds.
    #[arg(long, allow_negative_numbers = true)]
    pub time_constant: Option<f64>,
    /// Friction bias, volts.
    #[arg(long, default_value_t = 0.0, allow_negative_numbers = true)]
    pub bias: f64,
    /// Lowest supply voltage, V.
    #[arg(long, allow_negative_numbers = true)]
    pub supply_min: Option<f64>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

/// Runs the subcommand.
pub fn run(args: Args) -> Result<(), CliError> {
    let p = tune::profile_shape(
        args.distance,
        args.cruise_speed,
        args.accel,
        args.start_speed,
        args.end_speed,
    )
    .map_err(design_error)?;
    let mv = match (args.plant_gain, args.time_constant, args.supply_min) {
        (Some(k), Some(t), Some(s)) => {
            positive("--supply-min", Some(s), "V")?;
            let plant = plant_from(k, t, args.bias)?;
            Some(
                tune::check_move_voltage(&plant, p.peak_speed, args.accel, s)
                    .map_err(design_error)?,
            )
        }
        _ => None,
    };
    match args.format {
        Format::Json => {
            let mut v = serde_json::to_value(p)
                .map_err(|e| CliError::failure(format!("cannot write JSON: {e}")))?;
            if let (serde_json::Value::Object(m), Some(mv)) = (&mut v, mv) {
                m.insert(
                    "move_voltage".into(),
                    serde_json::to_value(mv).unwrap_or(serde_json::Value::Null),
                );
            }
            print_json(&v)
        }
        Format::Text => {
            let mut buf = String::new();
            let _ = writeln!(
                buf,
                "move of {} units, cruise {} units/s, accel {} units/s^2, from {} to {} units/s",
                args.distance, args.cruise_speed, args.accel, args.start_speed, args.end_speed
            );
            let _ = writeln!(
                buf,
                "  shape          {}",
                match p.shape {
                    tune::Shape::Trapezoid => "trapezoid",
                    tune::Shape::Triangle => "triangle",
                }
            );
            let _ = writeln!(buf, "  peak speed     {:.6} units/s", p.peak_speed);
            let _ = writeln!(buf, "  time to peak   {:.6} s", p.time_to_peak_s);
            let _ = writeln!(buf, "  cruise time    {:.6} s", p.cruise_time_s);
            let _ = writeln!(buf, "  decel time     {:.6} s", p.decel_time_s);
            let _ = writeln!(buf, "  total time     {:.6} s", p.total_time_s);
            if let Some(mv) = mv {
                let _ = writeln!(
                    buf,
                    "  peak voltage   {:.4} V of {} V ({:.4} V left for feedback)",
                    mv.peak_volts, mv.supply_min_volts, mv.headroom_volts
                );
            }
            emit(&buf)
        }
    }
}
