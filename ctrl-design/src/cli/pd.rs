//! `ctrl-design pd`: PD position loop by pole placement (or, with `--overshoot`, the
//! gains that meet the targets in the actual discrete loop), with its actual response,
//! margins, feedforward and loop-rate/encoder checks.

use super::{to_value, CliError, Format, PlantArgs};
use ctrl_design::analysis::{self, DerivativeOn, LoopFigures, ResponseReport, SettlingBand};
use ctrl_design::tune::{self, DesignError};
use ctrl_design::Plant;
use std::fmt::Write as _;

/// Arguments of `ctrl-design pd`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The plant: gain, time constant, friction bias.
    #[command(flatten)]
    pub plant: PlantArgs,
    /// Damping ratio of the placed poles (pole-placement mode).
    #[arg(
        long,
        allow_negative_numbers = true,
        required_unless_present = "overshoot",
        conflicts_with = "overshoot"
    )]
    pub damping: Option<f64>,
    /// Target overshoot, percent: switches to target-meeting mode (needs --rate).
    #[arg(long, requires = "rate", allow_negative_numbers = true)]
    pub overshoot: Option<f64>,
    /// Settling time, seconds.
    #[arg(long, allow_negative_numbers = true)]
    pub settling_time: f64,
    /// Settling band, percent of the final value.
    #[arg(long, default_value_t = 2.0, allow_negative_numbers = true)]
    pub band: f64,
    /// Loop rate, Hz: adds the discrete blocks.
    #[arg(long, allow_negative_numbers = true)]
    pub rate: Option<f64>,
    /// Where the derivative is taken.
    #[arg(long, value_enum, default_value_t = Derivative::Error)]
    pub derivative: Derivative,
    /// Target-meeting mode: include one tick of computation delay.
    #[arg(long)]
    pub with_delay: bool,
    /// Encoder and supply flags of the loop checks.
    #[command(flatten)]
    pub checks: super::CheckArgs,
    /// Acceleration of the fastest move, units/s^2 (for the supply check).
    #[arg(long, allow_negative_numbers = true)]
    pub accel: Option<f64>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

/// Where the PD derivative is taken (CLI spelling).
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Derivative {
    /// Derivative of the tracking error (the PD zero).
    Error,
    /// Derivative of the measurement (no zero).
    Measurement,
}

impl From<Derivative> for DerivativeOn {
    fn from(d: Derivative) -> Self {
        match d {
            Derivative::Error => DerivativeOn::Error,
            Derivative::Measurement => DerivativeOn::Measurement,
        }
    }
}

/// The CLI flag for a library field name, for error messages.
pub(crate) fn flag_for(field: &str) -> &'static str {
    match field {
        "plant_gain" | "gain" => "--plant-gain",
        "time_constant_s" => "--time-constant",
        "bias_volts" => "--bias",
        "damping" => "--damping",
        "settling_time_s" => "--settling-time",
        "band_pct" => "--band",
        "rate_hz" => "--rate",
        "overshoot_pct" => "--overshoot",
        "crossover_rad_s" => "--crossover",
        "phase_margin_deg" => "--phase-margin",
        "bandwidth_rad_s" => "--bandwidth",
        "cruise_speed" => "--cruise-speed",
        "accel" => "--accel",
        "supply_min_volts" => "--supply-min",
        "count_size" => "--count-size",
        "distance" => "--distance",
        "start_speed" => "--start-speed",
        "end_speed" => "--end-speed",
        _ => "input",
    }
}

/// A refused design as a CLI error (exit 2) naming the flag.
pub(crate) fn design_error(e: DesignError) -> CliError {
    let field = match &e {
        DesignError::OutOfRange { field, .. } | DesignError::Infeasible { field, .. } => *field,
    };
    CliError::bad_input(format!("{}: {e}", flag_for(field)))
}

/// The plant from the common flags, or exit 2 naming the flag.
pub(crate) fn plant_from(gain: f64, t: f64, bias: f64) -> Result<Plant, CliError> {
    Plant::new(gain, t, bias).map_err(|e| {
        let ctrl_design::PlantError::OutOfRange { field, .. } = &e;
        CliError::bad_input(format!("{}: {e}", flag_for(field)))
    })
}

/// The settling band from `--band`, or exit 2.
pub(crate) fn band_from(pct: f64) -> Result<SettlingBand, CliError> {
    SettlingBand::percent(pct).ok_or_else(|| {
        CliError::bad_input(format!(
            "--band: band = {pct} is out of range: valid is (0, 50) percent"
        ))
    })
}

/// Checks an optional positive flag.
pub(crate) fn positive(flag: &str, v: Option<f64>, unit: &str) -> Result<(), CliError> {
    match v {
        Some(x) if !(x.is_finite() && x > 0.0) => Err(CliError::bad_input(format!(
            "{flag}: {x} is out of range: valid is finite and > 0 ({unit})"
        ))),
        _ => Ok(()),
    }
}

/// Warnings drawn from a report: unstable discrete loops, phase eaten by the delay.
pub(crate) fn report_warnings(r: &ResponseReport, w: &mut Vec<String>) {
    for (name, b) in [
        ("discrete", &r.discrete),
        ("discrete with one tick of delay", &r.discrete_delayed),
    ] {
        if let Some(b) = b {
            if !b.stable {
                w.push(format!(
                    "the {name} loop is UNSTABLE (largest pole magnitude {:.4})",
                    b.max_pole_magnitude.unwrap_or(f64::NAN)
                ));
            } else if let Some(pm) = b.phase_margin_deg {
                if pm < 30.0 {
                    w.push(format!(
                        "the {name} loop has only {pm:.1} deg of phase margin (common practice: at least 30-45 deg, no source)"
                    ));
                }
            }
        }
    }
}

fn fmt_opt(v: Option<f64>) -> String {
    match v {
        Some(x) if x.abs() >= 1e4 || (x != 0.0 && x.abs() < 1e-3) => format!("{x:.4e}"),
        Some(x) => format!("{x:.4}"),
        None => "-".to_string(),
    }
}

/// Reads one figure of a block.
type Getter = fn(&LoopFigures) -> Option<f64>;

/// A readable table of the response blocks.
pub(crate) fn report_table(r: &ResponseReport) -> String {
    let mut cols: Vec<(&str, &LoopFigures)> = vec![("continuous", &r.continuous)];
    if let Some(d) = &r.discrete {
        cols.push(("discrete", d));
    }
    if let Some(d) = &r.discrete_delayed {
        cols.push(("delayed", d));
    }
    let rows: [(&str, Getter); 10] = [
        ("overshoot %", |f| f.overshoot_pct),
        ("peak time s", |f| f.peak_time_s),
        ("rise time 10-90 % s", |f| f.rise_time_s),
        ("settling time s", |f| f.settling_time_s),
        ("gain margin dB", |f| f.gain_margin_db),
        ("  at rad/s", |f| f.phase_crossover_rad_s),
        ("phase margin deg", |f| f.phase_margin_deg),
        ("  at rad/s", |f| f.gain_crossover_rad_s),
        ("bandwidth rad/s", |f| f.bandwidth_rad_s),
        ("max |pole|", |f| f.max_pole_magnitude),
    ];
    let mut s = format!("{:<22}", "");
    for (n, _) in &cols {
        s += &format!("{n:>14}");
    }
    s.push('\n');
    for (name, get) in rows {
        s += &format!("{name:<22}");
        for (_, f) in &cols {
            s += &format!("{:>14}", fmt_opt(get(f)));
        }
        s.push('\n');
    }
    s += &format!("{:<22}", "stable");
    for (_, f) in &cols {
        s += &format!("{:>14}", if f.stable { "yes" } else { "NO" });
    }
    s.push('\n');
    s += &format!(
        "(settling band {} %, '-' = none / infinite margin)\n",
        r.band_pct
    );
    s
}

/// Writes `s` to stdout; a closed pipe (`| head`) is not an error.
pub(crate) fn emit(s: &str) -> Result<(), CliError> {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    match out.write_all(s.as_bytes()).and_then(|_| out.flush()) {
        Ok(()) => Ok(()),
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        Err(e) => Err(CliError::failure(format!("cannot write to stdout: {e}"))),
    }
}

/// Prints one JSON object.
pub(crate) fn print_json(v: &serde_json::Value) -> Result<(), CliError> {
    let s = serde_json::to_string_pretty(v)
        .map_err(|e| CliError::failure(format!("cannot write JSON: {e}")))?;
    emit(&(s + "\n"))
}

/// Runs the subcommand.
pub fn run(args: Args) -> Result<(), CliError> {
    let plant = args.plant.plant()?;
    let band = band_from(args.band)?;
    positive("--rate", args.rate, "Hz")?;
    args.checks.validate()?;
    positive("--accel", args.accel, "units/s^2")?;
    let derivative: DerivativeOn = args.derivative.into();
    let mut warnings = Vec::new();

    let mut out = serde_json::Map::new();
    let (kp, kd);
    let mut text = String::new();
    if let Some(os) = args.overshoot {
        let rate = args.rate.unwrap_or(f64::NAN);
        let t = tune::meet_targets(
            &plant,
            os,
            args.settling_time,
            rate,
            band,
            args.with_delay,
            derivative,
        )
        .map_err(design_error)?;
        kp = t.kp;
        kd = t.kd;
        out.insert("mode".into(), "targets".into());
        out.insert("targets".into(), to_value(&t));
        text += &format!(
            "PD gains meeting {os} % overshoot and {} s settling in the discrete loop at {rate} Hz{}\n",
            args.settling_time,
            if args.with_delay { " with one tick of delay" } else { "" }
        );
        text += &format!(
            "  achieved: overshoot {} %, settling {} s (equivalent zeta {:.4}, wn {:.4} rad/s)\n",
            fmt_opt(t.achieved.overshoot_pct),
            fmt_opt(t.achieved.settling_time_s),
            t.equivalent_damping,
            t.equivalent_natural_frequency
        );
        if let (Some(pp), Some(f)) = (&t.pole_placement, &t.pole_placement_achieved) {
            text += &format!(
                "  pole placement (zeta {:.4} from the textbook overshoot) would give kp {:.6}, kd {:.6}: overshoot {} %, settling {} s\n",
                pp.damping,
                pp.kp,
                pp.kd,
                fmt_opt(f.overshoot_pct),
                fmt_opt(f.settling_time_s)
            );
        }
        out.insert(
            "natural_frequency".into(),
            t.equivalent_natural_frequency.into(),
        );
        out.insert("damping".into(), t.equivalent_damping.into());
    } else {
        let zeta = args.damping.unwrap_or(f64::NAN);
        let d = tune::design_pd(&plant, zeta, args.settling_time, band).map_err(design_error)?;
        kp = d.kp;
        kd = d.kd;
        out.insert("mode".into(), "pole_placement".into());
        if let serde_json::Value::Object(m) = to_value(&d) {
            out.extend(m);
        }
        text += &format!(
            "PD position loop by pole placement: zeta {zeta}, settling {} s to {} %\n  natural frequency {:.4} rad/s (longest settling time allowed {:.4} s)\n",
            args.settling_time, args.band, d.natural_frequency, d.longest_settling_time_s
        );
    }
    out.insert("kp".into(), kp.into());
    out.insert("kd".into(), kd.into());
    if let Some(r) = args.rate {
        out.insert("kd_per_tick".into(), (kd * r).into());
    }
    text += &format!("  kp {kp:.6} V/unit, kd {kd:.6} V/(unit/s)");
    if let Some(r) = args.rate {
        text += &format!(", kd per tick {:.6} V/(unit/tick) at {r} Hz", kd * r);
    }
    text.push('\n');

    let both = analysis::report_pd_both(&plant, kp, kd, args.rate, band);
    let (main, other) = match derivative {
        DerivativeOn::Error => (&both.derivative_on_error, &both.derivative_on_measurement),
        DerivativeOn::Measurement => (&both.derivative_on_measurement, &both.derivative_on_error),
    };
    let textbook = tune::second_order_overshoot_pct(
        (1.0 + plant.gain * kd) / (2.0 * (plant.gain * kp * plant.time_constant_s).sqrt()),
    );
    if let (DerivativeOn::Error, Some(os)) = (derivative, main.continuous.overshoot_pct) {
        if os > textbook + 0.5 {
            warnings.push(format!(
                "with the derivative on the error, the PD zero at {:.3} rad/s raises the overshoot to {os:.2} % (second-order formula without the zero: {textbook:.2} %); --derivative measurement avoids it",
                if kd > 0.0 { -kp / kd } else { f64::NEG_INFINITY }
            ));
        }
    }
    report_warnings(main, &mut warnings);
    out.insert("derivative".into(), to_value(&derivative));
    if let serde_json::Value::Object(m) = to_value(main) {
        out.extend(m);
    }
    out.insert(
        "other_form".into(),
        serde_json::json!({ "derivative": to_value(&match derivative {
            DerivativeOn::Error => DerivativeOn::Measurement,
            DerivativeOn::Measurement => DerivativeOn::Error,
        }), "report": to_value(other) }),
    );
    let ff = tune::feedforward(&plant);
    out.insert("feedforward".into(), to_value(&ff));
    text += &format!(
        "  feedforward: kv {:.6} V/(unit/s), ka {:.6} V/(unit/s^2), bias {} V\n",
        ff.kv, ff.ka, ff.bias
    );
    if let (Some(c), Some(a), Some(s)) =
        (args.checks.cruise_speed, args.accel, args.checks.supply_min)
    {
        let mv = tune::check_move_voltage(&plant, c, a, s).map_err(design_error)?;
        text += &format!(
            "  move at {c} units/s, {a} units/s^2 needs {:.3} V of {s} V ({:.3} V left for feedback)\n",
            mv.peak_volts, mv.headroom_volts
        );
        out.insert("move_voltage".into(), to_value(&mv));
    }
    if let (Some(rate), Some(bw)) = (args.rate, main.continuous.bandwidth_rad_s) {
        let input = tune::LoopCheckInput {
            bandwidth_rad_s: bw,
            rate_hz: rate,
            cruise_speed: args.checks.cruise_speed.unwrap_or(0.0),
            count_size: args.checks.count_size.unwrap_or(f64::NAN),
            kp,
            kd,
            supply_min_volts: args.checks.supply_min.unwrap_or(f64::NAN),
            crossover_rad_s: main.continuous.gain_crossover_rad_s,
        };
        if args.checks.count_size.is_some() && args.checks.supply_min.is_some() && kp > 0.0 {
            let c = tune::check_rate_and_encoder(&input).map_err(design_error)?;
            warnings.extend(c.warnings.iter().cloned());
            text += &format!(
                "  loop rate / bandwidth {:.1}; {:.4} units ({:.2} counts) per tick at cruise; one count moves the derivative by {:.4} V ({:.1} % of supply)\n",
                c.rate_per_bandwidth,
                c.distance_per_tick,
                c.counts_per_tick,
                c.derivative_step_volts,
                c.derivative_step_share * 100.0
            );
            if let Some(f) = &c.suggested_filter {
                text += &format!(
                    "  suggested derivative filter: tau {:.6} s = lead kc {:.6}, alpha {:.4}, t1 {:.6} s (step per count {:.4} V, phase cost at crossover {} deg)\n",
                    f.time_constant_s,
                    f.kc,
                    f.alpha,
                    f.t1,
                    f.step_volts,
                    fmt_opt(f.phase_cost_deg)
                );
            }
            out.insert("checks".into(), to_value(&c));
        } else {
            let ratio = rate / (bw / (2.0 * std::f64::consts::PI));
            if ratio < tune::MIN_RATE_PER_BANDWIDTH {
                warnings.push(format!(
                    "loop rate {rate} Hz is only {ratio:.1} x the closed-loop bandwidth (common practice: at least {} x)",
                    tune::MIN_RATE_PER_BANDWIDTH
                ));
            }
        }
    }
    out.insert("warnings".into(), to_value(&warnings));
    match args.format {
        Format::Json => print_json(&serde_json::Value::Object(out)),
        Format::Text => {
            let mut buf = String::new();
            let _ = write!(buf, "{text}");
            let _ = writeln!(
                buf,
                "\nResponse (derivative on {}):",
                match derivative {
                    DerivativeOn::Error => "error, with the PD zero",
                    DerivativeOn::Measurement => "measurement, no zero",
                }
            );
            let _ = write!(buf, "{}", report_table(main));
            let _ = writeln!(
                buf,
                "\nOther form (derivative on {}):",
                match derivative {
                    DerivativeOn::Error => "measurement",
                    DerivativeOn::Measurement => "error",
                }
            );
            let _ = write!(buf, "{}", report_table(other));
            for w in &warnings {
                let _ = writeln!(buf, "warning: {w}");
            }
            emit(&buf)
        }
    }
}
