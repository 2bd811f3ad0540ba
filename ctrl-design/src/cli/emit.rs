//! `ctrl-design emit`: check a design file and write typed constants for firmware, with an
//! optional set of plots and a short summary.

use std::path::{Path, PathBuf};

use super::{CliError, Format};
use ctrl_design::design_file::Axis;
use ctrl_design::emit::{self, sig, AxisReport, Emission, Gains};
use ctrl_design::sim;

/// Arguments of `ctrl-design emit`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The design file (TOML; keys in docs/emit.md).
    pub file: PathBuf,
    /// Where to write the generated Rust source.
    #[arg(short, long)]
    pub output: PathBuf,
    /// Also write plots here: the identification fit of each axis whose plant comes from
    /// logs, and a simulated move of each axis through the firmware's fixed-point loop.
    #[arg(long)]
    pub plot_dir: Option<PathBuf>,
    /// Do not write: exit 1 when the output file differs from what would be written
    /// (for CI: the committed constants are up to date).
    #[arg(long)]
    pub check: bool,
    /// Summary format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

/// A demo move per axis for the response plot: distance in the axis unit.
fn demo_distance(axis: Axis) -> f64 {
    match axis {
        Axis::Forward => 500.0,
        Axis::Rotation => std::f64::consts::FRAC_PI_2,
    }
}

/// A move of `r`'s axis at the lowest supply with one tick of delay (the plots and the
/// summary).
fn simulate_move(
    e: &Emission,
    r: &AxisReport,
    distance: f64,
    supply_volts: f64,
) -> Result<(sim::Metrics, sim::Trace), String> {
    emit::simulate_move(&e.design, r, distance, supply_volts, 1)
}

fn write_plots(e: &Emission, dir: &Path) -> Result<Vec<PathBuf>, CliError> {
    std::fs::create_dir_all(dir).map_err(|err| {
        CliError::failure(format!(
            "cannot create plot folder {}: {err}",
            dir.display()
        ))
    })?;
    let mut out = Vec::new();
    for r in &e.axes {
        let a = r.axis.name();
        if let Some(id) = &r.identification {
            let path = dir.join(format!("{a}_identification.svg"));
            ctrl_design::identify::plot_svg(&path, &r.logs, id).map_err(|err| {
                CliError::failure(format!("cannot write {}: {err}", path.display()))
            })?;
            out.push(path);
        }
        let distance = demo_distance(r.axis);
        match simulate_move(e, r, distance, e.design.supply.lowest_volts) {
            Ok((_, trace)) => {
                let path = dir.join(format!("{a}_move.svg"));
                let title = format!(
                    "{a}: {} {} move, firmware fixed-point loop, {} V supply",
                    sig(distance),
                    r.axis.unit(),
                    e.design.supply.lowest_volts
                );
                sim::plot_svg(&trace, r.axis.unit(), &title, &path).map_err(|err| {
                    CliError::failure(format!("cannot write {}: {err}", path.display()))
                })?;
                out.push(path);
            }
            Err(msg) => eprintln!("note: no move plot for {a}: {msg}"),
        }
    }
    Ok(out)
}

/// Runs the subcommand.
pub fn run(args: Args) -> Result<(), CliError> {
    let e = emit::emit(&args.file).map_err(|f| {
        let mut msg = format!(
            "the design {} does not pass its checks; nothing was written:",
            args.file.display()
        );
        for err in &f.errors {
            msg.push_str("\n  ");
            msg.push_str(&err.to_string());
        }
        CliError::bad_input(msg)
    })?;
    if args.check {
        let current = std::fs::read(&args.output).unwrap_or_default();
        if current != e.source.as_bytes() {
            return Err(CliError::failure(format!(
                "{} is not what {} generates; regenerate it with `ctrl-design emit {} -o {}`",
                args.output.display(),
                args.file.display(),
                args.file.display(),
                args.output.display()
            )));
        }
    } else {
        if let Some(parent) = args.output.parent().filter(|p| !p.as_os_str().is_empty()) {
            std::fs::create_dir_all(parent).map_err(|err| {
                CliError::failure(format!("cannot create {}: {err}", parent.display()))
            })?;
        }
        std::fs::write(&args.output, &e.source).map_err(|err| {
            CliError::failure(format!("cannot write {}: {err}", args.output.display()))
        })?;
    }
    let plots = match &args.plot_dir {
        Some(d) => write_plots(&e, d)?,
        None => Vec::new(),
    };
    match args.format {
        Format::Text => print!("{}", summary_text(&e, &args, &plots)),
        Format::Json => println!("{}", summary_json(&e, &args, &plots)),
    }
    Ok(())
}

fn summary_text(e: &Emission, args: &Args, plots: &[PathBuf]) -> String {
    use std::fmt::Write as _;
    let mut s = String::new();
    let w = &mut s;
    let _ = writeln!(
        w,
        "design {}{}",
        args.file.display(),
        e.design
            .name
            .as_ref()
            .map(|n| format!(" ({n})"))
            .unwrap_or_default()
    );
    let _ = writeln!(
        w,
        "loop rate {} Hz, supply {} to {} V, {} counts per {} mm wheel turn",
        e.design.drive.loop_rate_hz,
        e.design.supply.lowest_volts,
        e.design.supply.highest_volts,
        e.design.drive.encoder_counts_per_rev,
        e.design.drive.wheel_diameter_mm
    );
    for r in &e.axes {
        let a = r.axis.name();
        let u = r.axis.unit();
        let p = r.plant;
        let _ = write!(
            w,
            "\n{a} ({u})\n  plant   K = {} {u}/s per V, T = {} s, bias = {} V",
            sig(p.gain),
            sig(p.time_constant_s),
            sig(p.bias_volts)
        );
        match &r.identification {
            Some(id) => {
                let _ = writeln!(
                    w,
                    "  (identified from {} logs, R^2 = {}, residual RMS {} {u}/s)",
                    id.per_log.len(),
                    sig(id.r_squared),
                    sig(id.residual_rms)
                );
            }
            None => {
                let _ = writeln!(w, "  (given)");
            }
        }
        match r.gains {
            Gains::Pd {
                kp,
                kd,
                natural_frequency_rad_s,
            } => {
                let _ = writeln!(
                    w,
                    "  PD      Kp = {} V/{u}, Kd = {} V per {u}/s, wn = {} rad/s",
                    sig(kp),
                    sig(kd),
                    sig(natural_frequency_rad_s)
                );
            }
            Gains::Lead {
                kc,
                alpha,
                t1,
                lead_deg,
                ..
            } => {
                let _ = writeln!(
                    w,
                    "  lead    Kc = {} V/{u}, alpha = {}, T1 = {} s, {} deg of lead",
                    sig(kc),
                    sig(alpha),
                    sig(t1),
                    sig(lead_deg)
                );
            }
        }
        if let Some(d) = &r.response.discrete_delayed {
            let opt = |x: Option<f64>| x.map(sig).unwrap_or_else(|| "-".into());
            let _ = writeln!(
                w,
                "  discrete, one tick delay: overshoot {} %, settling {} s, largest pole {}, phase margin {} deg",
                opt(d.overshoot_pct),
                opt(d.settling_time_s),
                opt(d.max_pole_magnitude),
                opt(d.phase_margin_deg)
            );
        }
        if let Ok((m, _)) = simulate_move(e, r, demo_distance(r.axis), e.design.supply.lowest_volts)
        {
            let _ = writeln!(
                w,
                "  simulated {} {u} move (fixed point, {} V): final error {} {u}, peak tracking error {} {u}, peak {} V",
                sig(demo_distance(r.axis)),
                e.design.supply.lowest_volts,
                sig(m.final_error),
                sig(m.max_tracking_error),
                sig(m.peak_volts)
            );
        }
    }
    let passed = e.checks.iter().filter(|c| c.passed).count();
    let _ = writeln!(
        w,
        "\nchecks: {passed} of {} passed, {} warnings",
        e.checks.len(),
        e.warnings.len()
    );
    for c in &e.checks {
        let _ = writeln!(
            w,
            "  {:<8} {:<19} {:<4} {}",
            c.axis.unwrap_or("design"),
            c.name,
            if c.passed { "ok" } else { "WARN" },
            c.detail
        );
    }
    for wmsg in &e.warnings {
        let _ = writeln!(w, "warning: {wmsg}");
    }
    let _ = writeln!(
        w,
        "\nquantization (relative error; limit {} %):",
        e.design.checks.max_quantization_error_pct
    );
    for c in &e.constants {
        let _ = writeln!(
            w,
            "  {:<26} {:<7} {:>12} {:<20} error {} %",
            c.name,
            c.format,
            sig(c.quantized),
            c.unit,
            sig(c.rel_err * 100.0)
        );
    }
    let _ = writeln!(w);
    if args.check {
        let _ = writeln!(w, "{} is up to date", args.output.display());
    } else {
        let _ = writeln!(
            w,
            "wrote {} ({} bytes)",
            args.output.display(),
            e.source.len()
        );
    }
    for p in plots {
        let _ = writeln!(w, "wrote {}", p.display());
    }
    s
}

fn summary_json(e: &Emission, args: &Args, plots: &[PathBuf]) -> String {
    let axes: Vec<serde_json::Value> = e
        .axes
        .iter()
        .map(|r| {
            serde_json::json!({
                "axis": r.axis.name(),
                "unit": r.axis.unit(),
                "plant": r.plant,
                "identified": r.identification.as_ref().map(|id| serde_json::json!({
                    "r_squared": id.r_squared,
                    "residual_rms": id.residual_rms,
                    "logs": id.per_log.iter().map(|l| l.name.clone()).collect::<Vec<_>>(),
                    "warnings": id.warnings,
                })),
                "gains": r.gains,
                "counts_per_unit": r.counts_per_unit,
                "peak_move_volts": r.peak_move_volts,
                "response": r.response,
            })
        })
        .collect();
    serde_json::json!({
        "design": args.file,
        "name": e.design.name,
        "axes": axes,
        "checks": e.checks,
        "warnings": e.warnings,
        "constants": e.constants,
        "output": args.output,
        "written": !args.check,
        "plots": plots,
    })
    .to_string()
}
