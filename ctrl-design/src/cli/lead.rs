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
    let checks = match (&coeffs, rep.continuous.bandwidth_rad_s) {
        (Some(c), Some(bw)) => loop_checks(c, bw, &args, &mut warnings)?,
        _ => None,
    };
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
            if let Some(c) = &checks {
                let _ = write!(buf, "{}", check_line(c));
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

/// The loop-rate check, and with `--count-size` and `--supply-min` the encoder checks of the
/// discrete lead (`tune::check_section_rate_and_encoder`, the same limits as `pd`'s); their
/// warnings go to `warnings`.
fn loop_checks(
    coeffs: &tune::LeadCoeffs,
    bandwidth_rad_s: f64,
    args: &Args,
    warnings: &mut Vec<String>,
) -> Result<Option<tune::SectionCheck>, CliError> {
    match (args.checks.count_size, args.checks.supply_min) {
        (Some(count_size), Some(supply_min_volts)) => {
            let c = tune::check_section_rate_and_encoder(&tune::SectionCheckInput {
                bandwidth_rad_s,
                rate_hz: coeffs.rate_hz,
                cruise_speed: args.checks.cruise_speed.unwrap_or(0.0),
                count_size,
                measured: tune::Measured::Position,
                section: tune::FirstOrderSection::from_lead(coeffs),
                supply_min_volts,
            })
            .map_err(design_error)?;
            warnings.extend(c.warnings.iter().cloned());
            Ok(Some(c))
        }
        _ => {
            let r = tune::check_loop_rate(bandwidth_rad_s, coeffs.rate_hz).map_err(design_error)?;
            warnings.extend(r.warning);
            Ok(None)
        }
    }
}

/// One text line of the encoder checks (`lead` and `pi`).
pub(crate) fn check_line(c: &tune::SectionCheck) -> String {
    let s = &c.count_step;
    let what = match c.measured {
        tune::Measured::Position => "one count".to_string(),
        tune::Measured::Speed => format!("one count per tick ({:.4} units/s)", s.quantum),
    };
    format!(
        "  loop rate / bandwidth {:.1}; {:.4} units ({:.2} counts) per tick at cruise; {what} moves the output by {:.4} V on the first tick ({:.1} % of supply, limit {:.0} %), {:.4} V tick to tick when the reading toggles\n",
        c.rate_per_bandwidth,
        c.distance_per_tick,
        c.counts_per_tick,
        s.step_volts,
        s.step_share * 100.0,
        tune::MAX_DERIVATIVE_STEP_SHARE * 100.0,
        s.toggle_volts
    )
}
