//! `ctrl-design lead`: phase-lead position loop from crossover and phase margin, with
//! Tustin coefficients (pre-warped at the crossover) and the response report.

use super::pd::{
    band_from, design_error, emit, positive, print_json, report_table, report_warnings,
};
use super::{to_value, CliError, Format, PlantArgs};
use ctrl_design::{analysis, tune};
use std::fmt::Write as _;

/// Arguments of `ctrl-design lead`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The plant: gain, time constant, friction bias.
    #[command(flatten)]
    pub plant: PlantArgs,
    /// Loop crossover frequency, rad/s.
    #[arg(long, allow_negative_numbers = true)]
    pub crossover: f64,
    /// Phase margin at the crossover, degrees.
    #[arg(long, allow_negative_numbers = true)]
    pub phase_margin: f64,
    /// Settling band, percent of the final value.
    #[arg(long, default_value_t = 2.0, allow_negative_numbers = true)]
    pub band: f64,
    /// Loop rate, Hz: adds the coefficients and the discrete blocks.
    #[arg(long, allow_negative_numbers = true)]
    pub rate: Option<f64>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

/// Runs the subcommand.
pub fn run(args: Args) -> Result<(), CliError> {
    let plant = args.plant.plant()?;
    let band = band_from(args.band)?;
    positive("--rate", args.rate, "Hz")?;
    let d = tune::design_lead(&plant, args.crossover, args.phase_margin).map_err(design_error)?;
    let coeffs = match args.rate {
        Some(r) => Some(d.discretize(r).map_err(design_error)?),
        None => None,
    };
    let rep = analysis::report_lead(
        &plant,
        d.kc,
        d.alpha,
        d.t1,
        args.rate,
        Some(d.crossover_rad_s),
        band,
    );
    let mut warnings = d.warnings.clone();
    report_warnings(&rep, &mut warnings);
    if let (Some(r), Some(bw)) = (args.rate, rep.continuous.bandwidth_rad_s) {
        let ratio = r / (bw / (2.0 * std::f64::consts::PI));
        if ratio < tune::MIN_RATE_PER_BANDWIDTH {
            warnings.push(format!(
                "loop rate {r} Hz is only {ratio:.1} x the closed-loop bandwidth (common practice: at least {} x)",
                tune::MIN_RATE_PER_BANDWIDTH
            ));
        }
    }
    match args.format {
        Format::Json => {
            let mut out = serde_json::Map::new();
            if let serde_json::Value::Object(m) = to_value(&d) {
                out.extend(m);
            }
            out.insert("coefficients".into(), to_value(&coeffs));
            if let serde_json::Value::Object(m) = to_value(&rep) {
                out.extend(m);
            }
            out.insert("feedforward".into(), to_value(&tune::feedforward(&plant)));
            out.insert("warnings".into(), to_value(&warnings));
            print_json(&serde_json::Value::Object(out))
        }
        Format::Text => {
            let mut buf = String::new();
            let _ = writeln!(
                buf,
                "Lead position loop: crossover {} rad/s, phase margin {} deg",
                d.crossover_rad_s, d.phase_margin_deg
            );
            let _ = writeln!(
                buf,
                "  plant phase at crossover {:.3} deg, lead needed {:.3} deg (one-stage limit {} deg)",
                d.plant_phase_deg,
                d.lead_deg,
                tune::MAX_LEAD_DEG
            );
            let _ = writeln!(
                buf,
                "  C(s) = kc (t1 s + 1) / (alpha t1 s + 1): kc {:.6} V/unit, alpha {:.6}, t1 {:.6} s",
                d.kc, d.alpha, d.t1
            );
            if let Some(c) = &coeffs {
                let _ = writeln!(
                buf,
                    "  at {} Hz (Tustin, pre-warped at {} rad/s): u[k] = {:.8} e[k] + {:.8} e[k-1] - ({:.8}) u[k-1]",
                    c.rate_hz, d.crossover_rad_s, c.b0, c.b1, c.a1
                );
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
