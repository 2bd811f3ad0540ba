//! `ctrl-design simulate`: one nonlinear discrete run of a position loop, with its figures
//! and an optional SVG plot.

use super::{CliError, Format};
use ctrl_design::analysis::SettlingBand;
use ctrl_design::sim::{
    self, AxisDesign, AxisKind, AxisQuantization, Command, DerivativeForm, Disturbance,
    Feedforward, FirmwareLoop, FirmwareUnits, IdealLoop, IdealStallGuard, LeadLoopDesign,
    LoopDesign, Metrics, SimConfig, SimError, Trace,
};
use ctrl_design::tune;
use ctrl_design::Plant;
use std::path::PathBuf;

/// Which arithmetic the loop runs in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Arithmetic {
    /// The `ctrl-core` fixed-point loop, as the firmware runs it.
    Fixed,
    /// The same loop in `f64` (no quantization of gains or signals).
    F64,
    /// Both, side by side (`simulate` only).
    Both,
}

/// Derivative form, as in `ctrl-core`'s PD loop.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum DerivativeArg {
    /// Differentiate the tracking error (the closed loop has the PD zero).
    OnError,
    /// Differentiate minus the measured position (no kick on a step).
    OnMeasurement,
}

/// Which axis of the two-wheel drive is simulated.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum AxisArg {
    /// Both wheels together (forward = (L + R) / 2).
    Forward,
    /// The wheels opposite (rotation = (R - L) / 2).
    Rotation,
}

/// Plant, loop and command flags shared by `simulate` and `sweep`.
#[derive(Debug, Clone, clap::Args)]
pub struct SimArgs {
    /// Plant gain K, units/s per volt (> 0).
    #[arg(long, allow_negative_numbers = true, value_name = "K")]
    pub plant_gain: f64,
    /// Plant time constant T, s (> 0).
    #[arg(long, allow_negative_numbers = true, value_name = "T")]
    pub time_constant: f64,
    /// Friction bias, V (>= 0).
    #[arg(
        long,
        allow_negative_numbers = true,
        value_name = "VOLTS",
        default_value_t = 0.0
    )]
    pub bias: f64,
    /// Proportional gain, V per unit of position error (> 0); with --kd, instead of
    /// --damping/--settling-time.
    #[arg(long, allow_negative_numbers = true, requires = "kd", conflicts_with_all = ["damping", "settling_time", "crossover", "lead_b0"])]
    pub kp: Option<f64>,
    /// Phase-lead loop instead of the PD: crossover frequency, rad/s (> 0), with
    /// --phase-margin (tune::design_lead, discretised by Tustin pre-warped at the crossover
    /// for --rate).
    #[arg(long, allow_negative_numbers = true, value_name = "RAD_S", requires = "phase_margin", conflicts_with_all = ["damping", "settling_time", "lead_b0"])]
    pub crossover: Option<f64>,
    /// Phase margin for the lead design, degrees (0 < margin < 90).
    #[arg(
        long,
        allow_negative_numbers = true,
        value_name = "DEG",
        requires = "crossover"
    )]
    pub phase_margin: Option<f64>,
    /// Phase-lead loop with explicit coefficients `u[k] = b0 e[k] + b1 e[k-1] - a1 u[k-1]`:
    /// b0, V per unit (finite, non-zero); needs --lead-b1 and --lead-a1.
    #[arg(long, allow_negative_numbers = true, value_name = "V_PER_UNIT", requires_all = ["lead_b1", "lead_a1"], conflicts_with_all = ["damping", "settling_time"])]
    pub lead_b0: Option<f64>,
    /// Lead coefficient b1, V per unit (finite).
    #[arg(
        long,
        allow_negative_numbers = true,
        value_name = "V_PER_UNIT",
        requires = "lead_b0"
    )]
    pub lead_b1: Option<f64>,
    /// Lead coefficient a1, dimensionless (|a1| < 1).
    #[arg(long, allow_negative_numbers = true, requires = "lead_b0")]
    pub lead_a1: Option<f64>,
    /// Stall guard of the fixed-point loop: trips when |tracking error| exceeds this many
    /// units (> 0) for --stall-time; the duties are then 0 for the rest of the run.
    #[arg(
        long,
        allow_negative_numbers = true,
        value_name = "UNITS",
        requires = "stall_time"
    )]
    pub stall_limit: Option<f64>,
    /// How long the error must stay beyond --stall-limit, s (1 ..= 65535 ticks).
    #[arg(
        long,
        allow_negative_numbers = true,
        value_name = "S",
        requires = "stall_limit"
    )]
    pub stall_time: Option<f64>,
    /// Derivative gain, V per unit/s (>= 0).
    #[arg(long, allow_negative_numbers = true, requires = "kp")]
    pub kd: Option<f64>,
    /// Damping ratio for a PD designed by pole placement (with --settling-time).
    #[arg(long, allow_negative_numbers = true, requires = "settling_time")]
    pub damping: Option<f64>,
    /// Settling time for the pole-placement design, s (to the --band).
    #[arg(
        long,
        value_name = "S",
        allow_negative_numbers = true,
        requires = "damping"
    )]
    pub settling_time: Option<f64>,
    /// Axis of the two-wheel drive the firmware loop runs on.
    #[arg(long, value_enum, default_value = "forward")]
    pub axis: AxisArg,
    /// What the derivative term differentiates.
    #[arg(long, value_enum, default_value = "on-error")]
    pub derivative: DerivativeArg,
    /// Loop rate, Hz (> 0).
    #[arg(
        long,
        allow_negative_numbers = true,
        value_name = "HZ",
        default_value_t = 500.0
    )]
    pub rate: f64,
    /// Encoder counts per unit (> 0); without it (or --count-size) the position is read
    /// exactly.
    #[arg(
        long,
        allow_negative_numbers = true,
        value_name = "N",
        conflicts_with = "count_size"
    )]
    pub counts_per_unit: Option<f64>,
    /// Distance of one encoder count, units (> 0).
    #[arg(long, allow_negative_numbers = true, value_name = "UNITS")]
    pub count_size: Option<f64>,
    /// Supply voltage, V (> 0); the command is clipped at it. Without it: no limit
    /// (f64 arithmetic only).
    #[arg(long, allow_negative_numbers = true, value_name = "VOLTS")]
    pub supply: Option<f64>,
    /// Computation delay, ticks (0 ..= 16).
    #[arg(long, value_name = "TICKS", default_value_t = 0)]
    pub delay_ticks: u32,
    /// Run on feedback alone (no speed, acceleration or bias feedforward).
    #[arg(long)]
    pub no_feedforward: bool,
    /// Constant load, as the drive voltage that balances it (V, finite; negative opposes
    /// forward motion).
    #[arg(long, value_name = "VOLTS", allow_negative_numbers = true)]
    pub disturbance: Option<f64>,
    /// When the load starts, s (>= 0).
    #[arg(
        long,
        allow_negative_numbers = true,
        value_name = "S",
        default_value_t = 0.0
    )]
    pub disturbance_at: f64,
    /// A setpoint step of this distance, units (non-zero).
    #[arg(long, value_name = "UNITS", allow_negative_numbers = true, conflicts_with_all = ["distance", "cruise_speed", "accel"])]
    pub step: Option<f64>,
    /// A trapezoidal move of this distance, units (non-zero); needs --cruise-speed and --accel.
    #[arg(long, value_name = "UNITS", allow_negative_numbers = true, requires_all = ["cruise_speed", "accel"])]
    pub distance: Option<f64>,
    /// Cruise speed of the move, units/s (> 0).
    #[arg(long, allow_negative_numbers = true, value_name = "UNITS_PER_S")]
    pub cruise_speed: Option<f64>,
    /// Acceleration of the move, units/s^2 (> 0).
    #[arg(long, allow_negative_numbers = true, value_name = "UNITS_PER_S2")]
    pub accel: Option<f64>,
    /// Simulated time, s (default: the move's duration + 1 s).
    #[arg(long, allow_negative_numbers = true, value_name = "S")]
    pub duration: Option<f64>,
    /// Settling band, percent of the distance (0 < band < 100).
    #[arg(
        long,
        allow_negative_numbers = true,
        value_name = "PERCENT",
        default_value_t = 2.0
    )]
    pub band: f64,
}

/// Arguments of `ctrl-design simulate`.
#[derive(Debug, clap::Args)]
pub struct Args {
    #[command(flatten)]
    sim: SimArgs,
    /// Arithmetic of the loop.
    #[arg(long, value_enum, default_value = "fixed")]
    arithmetic: Arithmetic,
    /// Output format.
    #[arg(long, value_enum, default_value = "text")]
    format: Format,
    /// Write an SVG plot of the run (position, speed, voltage split) to this file.
    #[arg(long, value_name = "FILE.svg")]
    plot: Option<PathBuf>,
    /// Name of the distance unit, for the plot's labels.
    #[arg(long, default_value = "units")]
    unit: String,
}

/// A checked simulation request: the run's configuration and the loop design.
#[derive(Debug, Clone, Copy)]
pub struct Setup {
    /// The run.
    pub config: SimConfig,
    /// The loop, designed for `config.plant`.
    pub design: AxisDesign,
    /// The axis the firmware loop runs on.
    pub axis: AxisKind,
    /// Stall guard of the fixed-point loop (limit, units; time, s), if any.
    pub stall: Option<(f64, f64)>,
}

impl Setup {
    /// Encoder and rate scale for the fixed-point loop; refuses a run without a count size.
    pub fn units(&self) -> Result<FirmwareUnits, CliError> {
        match self.config.count_size {
            Some(count_size) => Ok(FirmwareUnits {
                count_size,
                rate_hz: self.config.rate_hz,
            }),
            None => Err(CliError::bad_input(
                "--count-size (or --counts-per-unit) is missing: the fixed-point loop reads \
                 whole encoder counts; valid is a finite count size > 0 (or use --arithmetic f64)",
            )),
        }
    }

    /// The supply for the fixed-point loop; refuses a run without one.
    pub fn supply(&self) -> Result<f64, CliError> {
        if self.config.supply_volts.is_finite() {
            Ok(self.config.supply_volts)
        } else {
            Err(CliError::bad_input(
                "--supply is missing: the fixed-point loop compensates for the supply; valid is \
                 finite volts > 0 (or use --arithmetic f64)",
            ))
        }
    }

    /// The fixed-point loop (with the stall guard, if any) and its quantization report.
    pub fn firmware_loop(&self) -> Result<(FirmwareLoop, AxisQuantization), CliError> {
        let units = self.units()?;
        let supply = self.supply()?;
        let (mut lp, report) = FirmwareLoop::from_axis_design(
            &self.design,
            self.axis,
            &units,
            supply,
            &self.config.command,
        )
        .map_err(|e| CliError::bad_input(format!("the design cannot run in fixed point: {e}")))?;
        if let Some((limit, time_s)) = self.stall {
            let guard = sim::stall_guard(limit, time_s, &units).map_err(|e| {
                CliError::bad_input(format!(
                    "--stall-limit / --stall-time cannot be held by the firmware guard: {e}"
                ))
            })?;
            lp.set_stall_guard(guard);
        }
        Ok((lp, report))
    }

    /// The `f64` loop; the lead form's output is limited to the supply like the firmware's.
    /// With `--stall-limit` it gets the stall guard too: the firmware guard's held limit and
    /// ticks when a count size is given (so both loops trip on the same errors), else the
    /// limit as given and `round(time * rate)` ticks.
    pub fn ideal_loop(&self) -> IdealLoop {
        let mut lp =
            IdealLoop::with_design(&self.design, &self.config.command, self.config.rate_hz);
        if self.config.supply_volts.is_finite() {
            lp.set_feedback_limit(self.config.supply_volts);
        }
        if let Some((limit, time_s)) = self.stall {
            let held = self.units().ok().and_then(|units| {
                sim::stall_guard(limit, time_s, &units)
                    .ok()
                    .map(|g| IdealStallGuard::from_firmware(&g, units.count_size))
            });
            let ticks = (time_s * self.config.rate_hz)
                .round()
                .clamp(1.0, f64::from(u32::MAX)) as u32;
            lp.set_stall_guard(held.unwrap_or_else(|| IdealStallGuard::new(limit, ticks)));
        }
        lp
    }
}

/// The flag that sets a [`SimConfig`] field, for error messages.
fn flag_of(field: &str) -> &'static str {
    match field {
        "gain" => "--plant-gain",
        "time_constant_s" => "--time-constant",
        "bias_volts" => "--bias",
        "rate_hz" => "--rate",
        "count_size" => "--count-size / --counts-per-unit",
        "supply_volts" => "--supply",
        "delay_ticks" => "--delay-ticks",
        "disturbance.volts" => "--disturbance",
        "disturbance.start_s" => "--disturbance-at",
        "distance" => "--step / --distance",
        "cruise_speed" => "--cruise-speed",
        "accel" => "--accel",
        "ticks" => "--duration",
        "band" => "--band",
        _ => "(input)",
    }
}

fn bad(flag: &str, value: f64, valid: &str) -> CliError {
    CliError::bad_input(format!(
        "{flag} = {value} is out of range: valid is {valid}"
    ))
}

/// A [`SimError`] as a refused input naming the flag.
pub fn sim_error(e: SimError) -> CliError {
    let valid = if e.field == "band" {
        "0 < band < 100 (percent of the distance)"
    } else {
        e.valid
    };
    let value = if e.field == "band" {
        e.value * 100.0
    } else {
        e.value
    };
    bad(flag_of(e.field), value, valid)
}

impl SimArgs {
    /// Checks the flags and builds the run and the loop.
    pub fn setup(&self) -> Result<Setup, CliError> {
        let plant = Plant::new(self.plant_gain, self.time_constant, self.bias).map_err(
            |ctrl_design::PlantError::OutOfRange {
                 field,
                 value,
                 valid,
             }| { bad(flag_of(field), value, valid) },
        )?;
        let feedforward = (!self.no_feedforward).then(|| Feedforward::for_plant(&plant));
        let design = if let (Some(wc), Some(pm)) = (self.crossover, self.phase_margin) {
            let lead = tune::design_lead(&plant, wc, pm).map_err(|e| {
                CliError::bad_input(format!(
                    "--crossover / --phase-margin: lead design refused: {e}"
                ))
            })?;
            let coeffs = lead.discretize(self.rate).map_err(|e| {
                CliError::bad_input(format!(
                    "--rate / --crossover: lead discretisation refused: {e}"
                ))
            })?;
            AxisDesign::Lead(LeadLoopDesign::from_coeffs(&coeffs, feedforward))
        } else if let (Some(b0), Some(b1), Some(a1)) = (self.lead_b0, self.lead_b1, self.lead_a1) {
            if !(b0.is_finite() && b0 != 0.0) {
                return Err(bad("--lead-b0", b0, "finite and non-zero (V per unit)"));
            }
            if !b1.is_finite() {
                return Err(bad("--lead-b1", b1, "finite (V per unit)"));
            }
            if !(a1.is_finite() && a1.abs() < 1.0) {
                return Err(bad(
                    "--lead-a1",
                    a1,
                    "-1 < a1 < 1 (a stable controller pole)",
                ));
            }
            AxisDesign::Lead(LeadLoopDesign {
                b0,
                b1,
                a1,
                feedforward,
            })
        } else {
            let (kp, kd) = match (self.kp, self.kd, self.damping, self.settling_time) {
                (Some(kp), Some(kd), _, _) => (kp, kd),
                (_, _, Some(zeta), Some(ts)) => {
                    let band = SettlingBand::percent(self.band).ok_or_else(|| {
                        bad(
                            "--band",
                            self.band,
                            "0 < band < 50 (percent) for a pole-placement design",
                        )
                    })?;
                    let pd = tune::design_pd(&plant, zeta, ts, band)
                        .map_err(|e| CliError::bad_input(format!("pole placement refused: {e}")))?;
                    (pd.kp, pd.kd)
                }
                _ => {
                    return Err(CliError::bad_input(
                        "give the loop: --kp and --kd, --damping and --settling-time, \
                         --crossover and --phase-margin, or --lead-b0, --lead-b1 and --lead-a1",
                    ))
                }
            };
            if !(kp.is_finite() && kp > 0.0) {
                return Err(bad("--kp", kp, "finite and > 0 (V per unit)"));
            }
            if !(kd.is_finite() && kd >= 0.0) {
                return Err(bad("--kd", kd, "finite and >= 0 (V per unit/s)"));
            }
            AxisDesign::Pd(LoopDesign {
                kp,
                kd,
                derivative: match self.derivative {
                    DerivativeArg::OnError => DerivativeForm::OnError,
                    DerivativeArg::OnMeasurement => DerivativeForm::OnMeasurement,
                },
                feedforward,
            })
        };
        let stall = match (self.stall_limit, self.stall_time) {
            (Some(l), Some(t)) => {
                if !(l.is_finite() && l > 0.0) {
                    return Err(bad("--stall-limit", l, "finite and > 0 (units)"));
                }
                if !(t.is_finite() && t > 0.0) {
                    return Err(bad("--stall-time", t, "finite and > 0 (seconds)"));
                }
                Some((l, t))
            }
            _ => None,
        };
        let count_size = match (self.counts_per_unit, self.count_size) {
            (Some(n), _) => {
                if !(n.is_finite() && n > 0.0) {
                    return Err(bad(
                        "--counts-per-unit",
                        n,
                        "finite and > 0 (counts per unit)",
                    ));
                }
                Some(1.0 / n)
            }
            (None, c) => c,
        };
        let command = match (self.step, self.distance) {
            (Some(d), _) => Command::Step { distance: d },
            (None, Some(d)) => Command::Move {
                distance: d,
                cruise_speed: self.cruise_speed.unwrap_or(f64::NAN),
                accel: self.accel.unwrap_or(f64::NAN),
            },
            (None, None) => return Err(CliError::bad_input(
                "give a command: --step DISTANCE, or --distance with --cruise-speed and --accel",
            )),
        };
        let disturbance = self.disturbance.map(|v| Disturbance {
            volts: v,
            start_s: self.disturbance_at,
        });
        if let Some(d) = self.duration {
            if !(d.is_finite() && d > 0.0 && d * self.rate <= f64::from(u32::MAX)) {
                return Err(bad(
                    "--duration",
                    d,
                    "finite, > 0 and at most 2^32 - 1 ticks (seconds)",
                ));
            }
        }
        let mut config = SimConfig {
            plant,
            rate_hz: self.rate,
            count_size,
            supply_volts: self.supply.unwrap_or(f64::INFINITY),
            delay_ticks: self.delay_ticks,
            disturbance,
            command,
            ticks: 1,
            band: self.band / 100.0,
        };
        if let Some(s) = self.supply {
            if !(s.is_finite() && s > 0.0) {
                return Err(bad("--supply", s, "finite and > 0 (volts)"));
            }
        }
        config.check().map_err(sim_error)?;
        let duration = self.duration.unwrap_or_else(|| command.duration_s() + 1.0);
        let ticks = (duration * self.rate).round();
        if !(ticks >= 1.0 && ticks <= f64::from(u32::MAX)) {
            return Err(CliError::bad_input(format!(
                "--duration = {duration} s at --rate = {} Hz is {ticks:e} ticks{}: valid is \
                 1 ..= 4294967295 ticks (change --duration or --rate)",
                self.rate,
                if self.duration.is_none() {
                    " (the default: the move's time + 1 s)"
                } else {
                    ""
                }
            )));
        }
        config.ticks = ticks as u32;
        let axis = match self.axis {
            AxisArg::Forward => AxisKind::Forward,
            AxisArg::Rotation => AxisKind::Rotation,
        };
        Ok(Setup {
            config,
            design,
            axis,
            stall,
        })
    }
}

/// One arithmetic's result.
#[derive(Debug, serde::Serialize)]
struct Run {
    arithmetic: &'static str,
    metrics: Metrics,
}

#[derive(Debug, serde::Serialize)]
struct Report<'a> {
    config: &'a SimConfig,
    design: &'a AxisDesign,
    /// PD only: kd times the rate, V per unit/tick.
    kd_per_tick: Option<f64>,
    duration_s: f64,
    /// Firmware constants' quantization (fixed arithmetic only).
    quantization: Option<AxisQuantization>,
    runs: Vec<Run>,
}

fn fmt_opt(v: Option<f64>, scale: f64, unit: &str) -> String {
    match v {
        Some(x) => format!("{:.4} {unit}", x * scale),
        None => "never".to_string(),
    }
}

fn print_text(r: &Report<'_>) {
    let c = r.config;
    println!(
        "plant: K = {} units/s/V, T = {} s, bias = {} V",
        c.plant.gain, c.plant.time_constant_s, c.plant.bias_volts
    );
    let ff = if r.design.feedforward().is_some() {
        "on"
    } else {
        "off"
    };
    match r.design {
        AxisDesign::Pd(d) => println!(
            "loop: PD, kp = {} V/unit, kd = {} V/(unit/s) ({} V per unit/tick), {:?}, feedforward {ff}",
            d.kp,
            d.kd,
            d.kd * c.rate_hz,
            d.derivative,
        ),
        AxisDesign::Lead(d) => println!(
            "loop: lead u[k] = b0 e[k] + b1 e[k-1] - a1 u[k-1], b0 = {} V/unit, b1 = {} V/unit, \
             a1 = {}, feedforward {ff}",
            d.b0, d.b1, d.a1,
        ),
    }
    println!(
        "run: {} Hz, {} ticks ({} s), count size {}, supply {}, delay {} ticks",
        c.rate_hz,
        c.ticks,
        r.duration_s,
        c.count_size
            .map_or("exact".to_string(), |s| format!("{s} units")),
        if c.supply_volts.is_finite() {
            format!("{} V", c.supply_volts)
        } else {
            "unlimited".to_string()
        },
        c.delay_ticks
    );
    if let Some(q) = &r.quantization {
        println!("firmware constants (counts, ticks): held value, relative error");
        let list = match q {
            AxisQuantization::Pd(q) => vec![
                ("kp", q.kp),
                ("kd_per_tick", q.kd_per_tick),
                ("kv", q.kv),
                ("ka", q.ka),
                ("bias_volts", q.bias_volts),
                ("limit_volts", q.limit_volts),
            ],
            AxisQuantization::Lead(q) => vec![
                ("b0", q.b0),
                ("b1", q.b1),
                ("a1", q.a1),
                ("kv", q.kv),
                ("ka", q.ka),
                ("bias_volts", q.bias_volts),
                ("limit_volts", q.limit_volts),
            ],
        };
        for (name, c) in list {
            println!("  {name:<12} {:<14.8e} {:.2e}", c.held, c.relative_error);
        }
    }
    for run in &r.runs {
        let m = &run.metrics;
        println!("\n[{}]", run.arithmetic);
        println!("  overshoot            {:.4} %", m.overshoot_pct);
        println!("  peak time            {:.4} s", m.peak_time_s);
        println!(
            "  rise time (10-90 %)  {}",
            fmt_opt(m.rise_time_s, 1.0, "s")
        );
        println!(
            "  settling time        {}",
            fmt_opt(m.settling_time_s, 1.0, "s")
        );
        println!("  final error          {:.6} units", m.final_error);
        println!("  max tracking error   {:.6} units", m.max_tracking_error);
        println!("  peak voltage         {:.4} V", m.peak_volts);
        println!("  RMS voltage          {:.4} V", m.rms_volts);
        println!("  voltage variation    {:.4} V", m.voltage_total_variation);
        println!("  ticks at the supply  {}", m.saturated_ticks);
        if let Some(k) = m.stall_tick {
            println!(
                "  stall guard tripped  tick {k} ({:.4} s): duties 0 from then on",
                f64::from(k) / c.rate_hz
            );
        }
    }
}

/// Runs the subcommand.
pub fn run(args: Args) -> Result<(), CliError> {
    let setup = args.sim.setup()?;
    let Setup { config, design, .. } = setup;
    let wants = |a: Arithmetic| args.arithmetic == a || args.arithmetic == Arithmetic::Both;
    let mut runs = Vec::new();
    let mut trace: Option<Trace> = None;
    let mut quantization = None;
    let mut go = |name: &'static str, ctrl: &mut dyn FnMut(bool) -> (Metrics, Option<Trace>)| {
        let (m, t) = ctrl(args.plot.is_some() && trace.is_none());
        if trace.is_none() {
            trace = t;
        }
        runs.push(Run {
            arithmetic: name,
            metrics: m,
        });
    };
    if wants(Arithmetic::Fixed) {
        let (lp, report) = setup.firmware_loop()?;
        quantization = Some(report);
        let mut lp = Some(lp);
        go("fixed", &mut |traced| {
            let mut l = lp.take().expect("run once");
            if traced {
                let (m, t) = sim::simulate_traced(&config, &mut l);
                (m, Some(t))
            } else {
                (sim::simulate(&config, &mut l), None)
            }
        });
    }
    if wants(Arithmetic::F64) {
        go("f64", &mut |traced| {
            let mut l = setup.ideal_loop();
            if traced {
                let (m, t) = sim::simulate_traced(&config, &mut l);
                (m, Some(t))
            } else {
                (sim::simulate(&config, &mut l), None)
            }
        });
    }
    if let (Some(path), Some(t)) = (&args.plot, &trace) {
        let title = format!(
            "{} of {} {} ({} arithmetic)",
            match config.command {
                Command::Step { .. } => "step",
                Command::Move { .. } => "move",
            },
            config.command.distance(),
            args.unit,
            runs[0].arithmetic
        );
        sim::plot_svg(t, &args.unit, &title, path).map_err(|e| {
            CliError::failure(format!("cannot write the plot {}: {e}", path.display()))
        })?;
    }
    let report = Report {
        config: &config,
        design: &design,
        kd_per_tick: match design {
            AxisDesign::Pd(d) => Some(d.kd * config.rate_hz),
            AxisDesign::Lead(_) => None,
        },
        duration_s: f64::from(config.ticks) / config.rate_hz,
        quantization,
        runs,
    };
    match args.format {
        Format::Json => println!(
            "{}",
            serde_json::to_string(&report)
                .map_err(|e| CliError::failure(format!("cannot encode the report: {e}")))?
        ),
        Format::Text => print_text(&report),
    }
    Ok(())
}
