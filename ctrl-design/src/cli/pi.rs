//! `ctrl-design pi`: PI speed loop from closed-loop bandwidth and damping.

use super::pd::{
    band_from, design_error, emit, positive, print_json, report_table, report_warnings,
};
use super::{to_value, CliError, Format, PlantArgs};
use ctrl_design::{analysis, tune};
use std::fmt::Write as _;

/// Arguments of `ctrl-design pi`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The plant: gain, time constant, friction bias.
    #[command(flatten)]
    pub plant: PlantArgs,
    /// Closed-loop -3 dB bandwidth of the speed loop, rad/s.
    #[arg(long, allow_negative_numbers = true)]
    pub bandwidth: f64,
    /// Damping ratio of the closed-loop poles.
    #[arg(long, default_value_t = 0.8, allow_negative_numbers = true)]
    pub damping: f64,
    /// Settling band, percent of the final value.
    #[arg(long, default_value_t = 2.0, allow_negative_numbers = true)]
    pub band: f64,
    /// Loop rate, Hz: adds the per-tick gain and the discrete blocks.
    #[arg(long, allow_negative_numbers = true)]
    pub rate: Option<f64>,
    /// Encoder and supply flags of the loop checks.
    #[command(flatten)]
    pub checks: super::CheckArgs,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

/// Runs the subcommand.
pub fn run(args: Args) -> Result<(), CliError> {
    let plant = args.plant.plant()?;
    let band = band_from(args.band)?;
    positive("--rate", args.rate, "Hz")?;
    args.checks.validate()?;
    let d = tune::design_pi(&plant, args.bandwidth, args.damping).map_err(design_error)?;
    let rep = analysis::report_pi(&plant, d.kp, d.ki, args.rate, band);
    let mut warnings = Vec::new();
    report_warnings(&rep, &mut warnings);
    let bw = rep.continuous.bandwidth_rad_s.unwrap_or(d.bandwidth_rad_s);
    let checks = match (args.rate, args.checks.count_size, args.checks.supply_min) {
        (Some(rate_hz), Some(count_size), Some(supply_min_volts)) => {
            // The firmware reads the speed as counts per tick: one count per tick is the
            // speed quantum `count_size * rate`, and kp + ki_per_tick is the first tick's
            // weight on it.
            let c = tune::check_section_rate_and_encoder(&tune::SectionCheckInput {
                bandwidth_rad_s: bw,
                rate_hz,
                cruise_speed: args.checks.cruise_speed.unwrap_or(0.0),
                count_size,
                measured: tune::Measured::Speed,
                section: d.section(rate_hz),
                supply_min_volts,
            })
            .map_err(design_error)?;
            warnings.extend(c.warnings.iter().cloned());
            Some(c)
        }
        (Some(rate_hz), _, _) => {
            let r = tune::check_loop_rate(bw, rate_hz).map_err(design_error)?;
            warnings.extend(r.warning);
            None
        }
        _ => None,
    };
    match args.format {
        Format::Json => {
            let mut out = serde_json::Map::new();
            if let serde_json::Value::Object(m) = to_value(&d) {
                out.extend(m);
            }
            if let Some(r) = args.rate {
                out.insert("ki_per_tick".into(), d.ki_per_tick(r).into());
            }
            if let serde_json::Value::Object(m) = to_value(&rep) {
                out.extend(m);
            }
            out.insert("feedforward".into(), to_value(&tune::feedforward(&plant)));
            if let Some(c) = &checks {
                out.insert("checks".into(), to_value(c));
            }
            out.insert("warnings".into(), to_value(&warnings));
            print_json(&serde_json::Value::Object(out))
        }
        Format::Text => {
            let mut buf = String::new();
            let _ = writeln!(
                buf,
                "PI speed loop: bandwidth {} rad/s, damping {}",
                d.bandwidth_rad_s, d.damping
            );
            let _ = writeln!(
                buf,
                "  kp {:.6} V/(unit/s), ki {:.6} V/(unit/s)/s, natural frequency {:.4} rad/s",
                d.kp, d.ki, d.natural_frequency
            );
            if let Some(r) = args.rate {
                let _ = writeln!(buf, "  ki per tick {:.8} at {r} Hz", d.ki_per_tick(r));
            }
            if let Some(c) = &checks {
                let _ = write!(buf, "{}", super::lead::check_line(c));
            }
            let _ = writeln!(buf);
            let _ = write!(buf, "{}", report_table(&rep));
            for w in &warnings {
                let _ = writeln!(buf, "warning: {w}");
            }
            emit(&buf)
        }
    }
}
