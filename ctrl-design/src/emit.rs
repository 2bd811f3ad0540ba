//! Design file in, checked firmware constants out.
//!
//! [`emit`] reads a [design file](crate::design_file), identifies each axis' plant from its
//! logs when the file names logs, designs the position loop (PD by pole placement or phase
//! lead), runs every design check, converts the design into the firmware's units (encoder
//! counts and ticks, see `DEVELOPERS.md`), quantizes each constant into the fixed-point
//! format that holds it and writes Rust source of typed `const` items built with
//! `ctrl-core`'s `const fn` constructors.
//!
//! It refuses to emit when a check fails or a constant would pick up more than 0.1 % of
//! relative error in fixed point. The output is deterministic: the same design file and logs
//! give the same bytes (no time stamps, no absolute paths).
//!
//! A firmware `build.rs` calls [`build_script`]:
//!
//! ```no_run
//! // build.rs
//! ctrl_design::emit::build_script("../greenhouse-rover/rover.toml");
//! ```
//!
//! and the firmware includes the result with
//! `include!(concat!(env!("OUT_DIR"), "/constants.rs"));`.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use crate::analysis::{self, DerivativeOn, LeadCoeffs, ResponseReport, SettlingBand};
use crate::design_file::{
    Axis, AxisDesign, DesignError, DesignErrors, DesignFile, LoopTarget, PlantSource,
};
use crate::identify::{self, Identification, Log};
use crate::sim;
use crate::tune;
use crate::Plant;
use ctrl_core::drive::Feedback;

/// Largest relative quantization error any emitted constant may have, percent.
pub const QUANTIZATION_LIMIT_PCT: f64 = 0.1;

/// The position-loop gains of one axis, in the axis' user units (mm or rad, seconds).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Gains {
    /// PD: `u = kp e + kd de/dt`.
    Pd {
        /// V per unit.
        kp: f64,
        /// V per unit/s.
        kd: f64,
        /// Natural frequency the gains place, rad/s.
        natural_frequency_rad_s: f64,
    },
    /// Lead `Kc (T1 s + 1) / (alpha T1 s + 1)` and its Tustin coefficients.
    Lead {
        /// V per unit.
        kc: f64,
        /// Pole/zero ratio, in (0, 1).
        alpha: f64,
        /// Zero time constant, s.
        t1: f64,
        /// Phase lead supplied at the crossover, degrees.
        lead_deg: f64,
        /// Discrete coefficients (V per unit; `a1` dimensionless).
        coeffs: LeadCoeffs,
    },
}

/// One design check and how it came out.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Check {
    /// The axis it is about (`None`: the whole design).
    pub axis: Option<&'static str>,
    /// Short name (`kd_not_negative`, `discrete_stable`, ...).
    pub name: &'static str,
    /// The quantity checked.
    pub value: f64,
    /// Its limit.
    pub limit: f64,
    /// Unit of both.
    pub unit: &'static str,
    /// Whether it passed.
    pub passed: bool,
    /// A failed check with `warning` set does not stop the emitter.
    pub warning: bool,
    /// What the check says, in words (including the fix when it failed).
    pub detail: String,
}

/// The design of one axis in user units, with its analysis.
#[derive(Debug, Clone)]
pub struct AxisReport {
    /// Which axis.
    pub axis: Axis,
    /// The plant used.
    pub plant: Plant,
    /// The identification, when the plant came from logs.
    pub identification: Option<Identification>,
    /// The logs it came from (same order as `identification.per_log`).
    pub logs: Vec<Log>,
    /// Position-loop gains.
    pub gains: Gains,
    /// Continuous and discrete response (derivative on error for PD).
    pub response: ResponseReport,
    /// Peak voltage of a full-speed move (feedforward), V.
    pub peak_move_volts: f64,
    /// Counts per user unit.
    pub counts_per_unit: f64,
}

/// A constant as emitted: the design value, its fixed-point form and the error.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Constant {
    /// Name, for example `forward.kp`.
    pub name: String,
    /// Fixed-point type (`Coeff`, `I16F16`, `I32F32`, `u16`, `u32`).
    pub format: &'static str,
    /// The exact design value in firmware units.
    pub value: f64,
    /// The value the bits stand for.
    pub quantized: f64,
    /// `|quantized - value| / |value|` (0 for 0).
    pub rel_err: f64,
    /// Firmware unit (`V/count`, ...).
    pub unit: &'static str,
    /// The same value in user units, in words.
    pub user_value: String,
    /// The Rust expression.
    pub expr: String,
    /// Design-file key it derives from (for errors).
    pub key: String,
}

/// Everything one emission produced.
#[derive(Debug, Clone)]
pub struct Emission {
    /// The design file.
    pub design: DesignFile,
    /// Forward and rotation.
    pub axes: Vec<AxisReport>,
    /// Every check, passed or not.
    pub checks: Vec<Check>,
    /// Every constant.
    pub constants: Vec<Constant>,
    /// Warnings (identification warnings, failed warning-level checks).
    pub warnings: Vec<String>,
    /// The generated Rust source.
    pub source: String,
    /// Every file read (design file, log directories and logs).
    pub inputs: Vec<PathBuf>,
}

/// Why nothing was emitted: the errors (each with file, line, key and valid range) and the
/// files read before stopping (a build script still watches them).
#[derive(Debug, Clone)]
pub struct EmitFailure {
    /// The errors, at least one.
    pub errors: Vec<DesignError>,
    /// Files read so far.
    pub inputs: Vec<PathBuf>,
    /// Checks run so far (passed and failed).
    pub checks: Vec<Check>,
}

impl std::fmt::Display for EmitFailure {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}", DesignErrors(self.errors.clone()))
    }
}

impl std::error::Error for EmitFailure {}

/// Reads, identifies, designs, checks, quantizes and renders `design_path`.
pub fn emit(design_path: &Path) -> Result<Emission, EmitFailure> {
    let design = DesignFile::load(design_path).map_err(|e| EmitFailure {
        errors: e.0,
        inputs: vec![design_path.to_path_buf()],
        checks: Vec::new(),
    })?;
    let inputs = design.inputs();
    let fail = |errors: Vec<DesignError>, checks: Vec<Check>| EmitFailure {
        errors,
        inputs: inputs.clone(),
        checks,
    };

    let mut errors = Vec::new();
    let mut warnings = Vec::new();
    let mut checks = Vec::new();
    let mut axes = Vec::new();
    for axis in Axis::BOTH {
        match design_axis(&design, design.axis(axis), &mut checks, &mut warnings) {
            Ok(r) => axes.push(r),
            Err(mut e) => errors.append(&mut e),
        }
    }
    if !errors.is_empty() {
        return Err(fail(errors, checks));
    }
    for c in &checks {
        if !c.passed && !c.warning {
            let key = check_key(&design, c);
            errors.push(design.error(&key, c.detail.clone(), Some(check_valid(c))));
        } else if !c.passed {
            warnings.push(format!(
                "{}{}: {}",
                c.axis.map(|a| format!("{a}: ")).unwrap_or_default(),
                c.name,
                c.detail
            ));
        }
    }
    if !errors.is_empty() {
        return Err(fail(errors, checks));
    }

    let constants = match constants(&design, &axes) {
        Ok(c) => c,
        Err(e) => return Err(fail(e, checks)),
    };
    let limit = design.checks.max_quantization_error_pct / 100.0;
    for c in &constants {
        if c.rel_err > limit {
            errors.push(design.error(
                &c.key,
                format!(
                    "constant {} = {} {} would be stored as {} ({}): relative error {:.4} % is above the limit",
                    c.name,
                    sig(c.value),
                    c.unit,
                    sig(c.quantized),
                    c.format,
                    c.rel_err * 100.0
                ),
                Some(format!(
                    "quantization error at most {} % (checks.max_quantization_error_pct)",
                    design.checks.max_quantization_error_pct
                )),
            ));
        }
    }
    if !errors.is_empty() {
        return Err(fail(errors, checks));
    }
    let source = render(&design, &axes, &checks, &constants);
    Ok(Emission {
        design,
        axes,
        checks,
        constants,
        warnings,
        source,
        inputs,
    })
}

/// The valid range of a check, in words.
fn check_valid(c: &Check) -> String {
    match c.name {
        "discrete_stable" => "every closed-loop pole magnitude below 1".to_string(),
        "rate_ratio" => format!(
            "a loop rate at least {}x the closed-loop bandwidth",
            sig(c.limit)
        ),
        "stall_guard_ticks" => "1 to 65535 ticks".to_string(),
        "stall_guard_margin" => format!(
            "max_tracking_error above {} (the peak tracking error of a full-speed move)",
            sig(c.value)
        ),
        _ => format!(
            "{} {} {}",
            c.name.replace('_', " "),
            if c.limit >= 0.0 {
                "at most"
            } else {
                "at least"
            },
            format_args!("{} {}", sig(c.limit), c.unit)
        ),
    }
}

/// The design-file key a failed check points at.
fn check_key(design: &DesignFile, c: &Check) -> String {
    let axis = c.axis.unwrap_or("drive");
    let loop_key = |name: &str| format!("{axis}.loop.{name}");
    let target = |a: &str| {
        let ax = if a == "forward" {
            Axis::Forward
        } else {
            Axis::Rotation
        };
        design.axis(ax).target
    };
    match c.name {
        "kd_not_negative" => loop_key("settling_time_s"),
        "lead_feasible" => loop_key("phase_margin_deg"),
        "overshoot" => match c.axis.map(target) {
            Some(LoopTarget::Lead { .. }) => loop_key("phase_margin_deg"),
            _ => loop_key("damping"),
        },
        "discrete_stable" | "rate_ratio" => match c.axis.map(target) {
            Some(LoopTarget::Lead { .. }) => loop_key("crossover_rad_s"),
            _ => loop_key("settling_time_s"),
        },
        "peak_move_volts" => format!("{axis}.move.accel"),
        "derivative_chatter" => match c.axis.map(target) {
            Some(LoopTarget::Lead { .. }) => loop_key("crossover_rad_s"),
            _ => loop_key("settling_time_s"),
        },
        "stall_guard_ticks" => format!("{axis}.stall_guard.max_time_s"),
        "stall_guard_margin" => format!("{axis}.stall_guard.max_tracking_error"),
        _ => format!("{axis}.loop"),
    }
}

fn identify_axis(
    design: &DesignFile,
    a: &AxisDesign,
) -> Result<(Plant, Option<Identification>, Vec<Log>), Vec<DesignError>> {
    match &a.plant {
        PlantSource::Given(p) => Ok((*p, None, Vec::new())),
        PlantSource::Logs {
            files,
            position_column,
            ..
        } => {
            let key = format!("{}.plant.logs", a.axis.name());
            let columns = identify::Columns {
                position: position_column.clone(),
                ..identify::Columns::default()
            };
            let mut logs = Vec::new();
            let mut errors = Vec::new();
            for f in files {
                match Log::from_file(f, &columns) {
                    Ok(l) => logs.push(l),
                    Err(e) => errors.push(design.error(
                        &key,
                        format!("log {}: {e}", f.display()),
                        Some("a CSV log with columns time_s, volts and position".into()),
                    )),
                }
            }
            if !errors.is_empty() {
                return Err(errors);
            }
            let opts = identify::Options {
                unit: a.axis.unit().to_string(),
                ..identify::Options::default()
            };
            let id = identify::identify(&logs, &opts).map_err(|e| {
                vec![design.error(
                    &key,
                    format!("cannot identify the plant: {e}"),
                    Some("step logs that reach steady speed, at several voltages".into()),
                )]
            })?;
            Ok((id.plant, Some(id), logs))
        }
    }
}

/// A refusal from [`crate::tune`] as a design-file error at the key its field comes from.
fn tune_error(design: &DesignFile, axis: &str, e: &tune::DesignError) -> DesignError {
    let (field, value, reason, valid) = match e {
        tune::DesignError::OutOfRange {
            field,
            value,
            valid,
        } => (*field, *value, "out of range".to_string(), valid.clone()),
        tune::DesignError::Infeasible {
            field,
            value,
            reason,
            valid,
        } => (*field, *value, reason.clone(), valid.clone()),
    };
    let key = match field {
        "gain" | "time_constant_s" | "bias_volts" => format!("{axis}.plant.{field}"),
        "rate_hz" => "drive.loop_rate_hz".to_string(),
        f => format!("{axis}.loop.{f}"),
    };
    design.error(
        &key,
        format!("the value {} cannot be met: {reason}", sig(value)),
        Some(valid),
    )
}

/// A check on one axis, recorded in `checks`.
struct Checker<'a> {
    axis: &'static str,
    checks: &'a mut Vec<Check>,
}

impl Checker<'_> {
    #[allow(clippy::too_many_arguments)]
    fn record(
        &mut self,
        name: &'static str,
        value: f64,
        limit: f64,
        unit: &'static str,
        passed: bool,
        warning: bool,
        detail: String,
    ) {
        self.checks.push(Check {
            axis: Some(self.axis),
            name,
            value,
            limit,
            unit,
            passed,
            warning,
            detail,
        });
    }
}

fn design_axis(
    design: &DesignFile,
    a: &AxisDesign,
    checks: &mut Vec<Check>,
    warnings: &mut Vec<String>,
) -> Result<AxisReport, Vec<DesignError>> {
    let name = a.axis.name();
    let unit = a.axis.unit();
    let (plant, identification, logs) = identify_axis(design, a)?;
    if let Some(id) = &identification {
        for w in &id.warnings {
            warnings.push(format!("{name}: identification: {w}"));
        }
    }
    let rate = design.drive.loop_rate_hz;
    let cpu = design.drive.counts_per_unit(a.axis);
    let count_size = 1.0 / cpu;
    let low = design.supply.lowest_volts;
    let mut ck = Checker { axis: name, checks };

    let (gains, response) = match a.target {
        LoopTarget::Pd {
            damping,
            settling_time_s,
            band_pct,
        } => {
            let band = SettlingBand::percent(band_pct).unwrap_or_default();
            let d = match tune::design_pd(&plant, damping, settling_time_s, band) {
                Ok(d) => d,
                Err(e) => {
                    let err = tune_error(design, name, &e);
                    ck.record(
                        "kd_not_negative",
                        settling_time_s,
                        2.0 * band.factor() * plant.time_constant_s,
                        "s",
                        false,
                        false,
                        err.message.clone(),
                    );
                    return Err(vec![err]);
                }
            };
            ck.record(
                "kd_not_negative",
                d.kd,
                0.0,
                "V per unit/s",
                true,
                false,
                format!(
                    "Kd = {} V per {unit}/s (settling time {settling_time_s} s, longest for this plant {} s)",
                    sig(d.kd),
                    sig(d.longest_settling_time_s)
                ),
            );
            let response =
                analysis::report_pd(&plant, d.kp, d.kd, Some(rate), band, DerivativeOn::Error);
            (
                Gains::Pd {
                    kp: d.kp,
                    kd: d.kd,
                    natural_frequency_rad_s: d.natural_frequency,
                },
                response,
            )
        }
        LoopTarget::Lead {
            crossover_rad_s: wc,
            phase_margin_deg: pm,
        } => {
            let d =
                tune::design_lead(&plant, wc, pm).and_then(|d| d.discretize(rate).map(|c| (d, c)));
            let (d, coeffs) = match d {
                Ok(x) => x,
                Err(e) => {
                    let err = tune_error(design, name, &e);
                    ck.record(
                        "lead_feasible",
                        pm,
                        tune::MAX_LEAD_DEG,
                        "deg",
                        false,
                        false,
                        err.message.clone(),
                    );
                    return Err(vec![err]);
                }
            };
            ck.record(
                "lead_feasible",
                d.lead_deg,
                tune::MAX_LEAD_DEG,
                "deg",
                true,
                false,
                format!(
                    "needs {} deg of lead at {wc} rad/s (one stage gives up to {} deg)",
                    sig(d.lead_deg),
                    tune::MAX_LEAD_DEG
                ),
            );
            for w in &d.warnings {
                warnings.push(format!("{name}: {w}"));
            }
            let response = analysis::report_lead(
                &plant,
                d.kc,
                d.alpha,
                d.t1,
                Some(rate),
                Some(wc),
                SettlingBand::TWO_PERCENT,
            );
            (
                Gains::Lead {
                    kc: d.kc,
                    alpha: d.alpha,
                    t1: d.t1,
                    lead_deg: d.lead_deg,
                    coeffs,
                },
                response,
            )
        }
    };

    // The discrete loop with one tick of computation delay is what the firmware runs.
    let delayed = response
        .discrete_delayed
        .clone()
        .unwrap_or_else(|| response.continuous.clone());
    let mag = delayed.max_pole_magnitude.unwrap_or(f64::NAN);
    let stable = delayed.stable && mag < 1.0;
    ck.record(
        "discrete_stable",
        mag,
        1.0,
        "pole magnitude",
        stable,
        false,
        if stable {
            format!(
                "largest closed-loop pole magnitude {} (with one tick of delay)",
                sig(mag)
            )
        } else {
            format!(
                "the discrete loop with one tick of delay is unstable (largest pole magnitude {}); slow the loop down or raise the loop rate",
                sig(mag)
            )
        },
    );
    let overshoot = delayed.overshoot_pct.unwrap_or(0.0);
    let max_os = design.checks.max_overshoot_pct;
    let ok = stable && overshoot <= max_os;
    ck.record(
        "overshoot",
        overshoot,
        max_os,
        "%",
        ok,
        false,
        if ok {
            format!(
                "{} % overshoot (discrete, one tick of delay)",
                sig(overshoot)
            )
        } else {
            format!(
                "the discrete loop overshoots {} % (limit checks.max_overshoot_pct = {max_os} %); raise the damping",
                sig(overshoot)
            )
        },
    );

    // Loop rate against closed-loop bandwidth, and the voltage step of one encoder count.
    let bw = response.continuous.bandwidth_rad_s.unwrap_or(f64::NAN);
    let bw_hz = bw / (2.0 * std::f64::consts::PI);
    let (ratio, step_volts, suggestion) = match gains {
        Gains::Pd { kp, kd, .. } => {
            let input = tune::LoopCheckInput {
                bandwidth_rad_s: bw,
                rate_hz: rate,
                cruise_speed: a.moves.cruise_speed,
                count_size,
                kp,
                kd,
                supply_min_volts: low,
                crossover_rad_s: response.continuous.gain_crossover_rad_s,
            };
            match tune::check_rate_and_encoder(&input) {
                Ok(c) => {
                    let suggestion = match c.suggested_filter {
                        Some(f) => format!(
                            "filter the derivative: kind = \"lead\" near Kc = {} V/{unit}, alpha = {}, T1 = {} s (filter time constant {} s) steps {} V per count",
                            sig(f.kc),
                            sig(f.alpha),
                            sig(f.t1),
                            sig(f.time_constant_s),
                            sig(f.step_volts)
                        ),
                        None => "use kind = \"lead\" (a derivative with a low-pass), lengthen the settling time, or use a finer encoder".to_string(),
                    };
                    (c.rate_per_bandwidth, c.derivative_step_volts, suggestion)
                }
                Err(e) => return Err(vec![tune_error(design, name, &e)]),
            }
        }
        Gains::Lead { coeffs, .. } => (
            rate / bw_hz,
            coeffs.b0.abs() * count_size,
            "lower the crossover or use a finer encoder".to_string(),
        ),
    };
    let min_ratio = design.checks.min_rate_ratio;
    let ok = ratio >= min_ratio;
    ck.record(
        "rate_ratio",
        ratio,
        min_ratio,
        "x bandwidth",
        ok,
        false,
        if ok {
            format!(
                "loop rate {rate} Hz is {}x the closed-loop bandwidth {} Hz",
                sig(ratio),
                sig(bw_hz)
            )
        } else {
            format!(
                "loop rate {rate} Hz is only {}x the closed-loop bandwidth {} Hz (at least {min_ratio}x); raise drive.loop_rate_hz or slow the loop",
                sig(ratio),
                sig(bw_hz)
            )
        },
    );
    let share = design.checks.max_chatter_share;
    let limit = share * low;
    let ok = step_volts <= limit;
    ck.record(
        "derivative_chatter",
        step_volts,
        limit,
        "V per count",
        ok,
        false,
        if ok {
            format!(
                "one encoder count ({} {unit}) steps the voltage by {} V ({} % of the lowest supply)",
                sig(count_size),
                sig(step_volts),
                sig(100.0 * step_volts / low)
            )
        } else {
            format!(
                "one encoder count ({} {unit}) steps the voltage by {} V, more than {share} x {low} V = {} V (checks.max_chatter_share); {suggestion}",
                sig(count_size),
                sig(step_volts),
                sig(limit)
            )
        },
    );
    let cpt = a.moves.cruise_speed / rate / count_size;
    ck.record(
        "counts_per_tick",
        cpt,
        1.0,
        "counts/tick",
        cpt >= 1.0,
        true,
        format!(
            "at cruise the wheel moves {} counts per tick{}",
            sig(cpt),
            if cpt >= 1.0 {
                ""
            } else {
                ": the per-tick speed reading is coarser than the speed"
            }
        ),
    );

    // Peak feedforward voltage of a full-speed move against the lowest supply.
    let peak = tune::move_peak_volts(&plant, a.moves.cruise_speed, a.moves.accel);
    let ok = peak <= low;
    ck.record(
        "peak_move_volts",
        peak,
        low,
        "V",
        ok,
        false,
        if ok {
            format!(
                "a {} {unit}/s move at {} {unit}/s^2 needs {} V (lowest supply {low} V)",
                a.moves.cruise_speed,
                a.moves.accel,
                sig(peak)
            )
        } else {
            format!(
                "a {} {unit}/s move at {} {unit}/s^2 needs {} V = bias + speed/K + T accel/K, above the lowest supply {low} V; lower the cruise speed or acceleration",
                a.moves.cruise_speed,
                a.moves.accel,
                sig(peak)
            )
        },
    );

    // Stall guard: its time must fit the u16 tick counter.
    let ticks = (a.stall.max_time_s * rate).round();
    let ok = (1.0..=f64::from(u16::MAX)).contains(&ticks);
    ck.record(
        "stall_guard_ticks",
        ticks,
        f64::from(u16::MAX),
        "ticks",
        ok,
        false,
        if ok {
            format!("trips after {ticks} ticks over the limit")
        } else {
            format!(
                "max_time_s = {} s is {ticks} ticks at {rate} Hz; the guard counts 1 to 65535 ticks",
                a.stall.max_time_s
            )
        },
    );

    let report = AxisReport {
        axis: a.axis,
        plant,
        identification,
        logs,
        gains,
        response,
        peak_move_volts: peak,
        counts_per_unit: cpu,
    };

    // Stall guard against a normal move: a full-speed move through the firmware's
    // fixed-point loop, with one tick of delay at the lowest supply, must stay below the
    // guard's tracking-error limit, or the guard would trip on ordinary driving.
    let distance = check_move_distance(a);
    match simulate_move(design, &report, distance, low, 1) {
        Ok((m, _)) => {
            let limit = a.stall.max_tracking_error;
            let ok = m.max_tracking_error < limit;
            ck.record(
                "stall_guard_margin",
                m.max_tracking_error,
                limit,
                "unit",
                ok,
                false,
                if ok {
                    format!(
                        "a {} {unit} full-speed move tracks within {} {unit} (guard limit {limit} {unit})",
                        sig(distance),
                        sig(m.max_tracking_error)
                    )
                } else {
                    format!(
                        "a {} {unit} full-speed move (fixed point, one tick of delay, {low} V) lags by {} {unit}, over the guard's limit {limit} {unit}: the guard would trip on ordinary moves; raise max_tracking_error or stiffen the loop",
                        sig(distance),
                        sig(m.max_tracking_error)
                    )
                },
            );
        }
        Err(msg) => ck.record(
            "stall_guard_margin",
            f64::NAN,
            a.stall.max_tracking_error,
            "unit",
            false,
            true,
            format!("not simulated: {msg}"),
        ),
    }
    Ok(report)
}

/// Distance of the move the stall-guard check simulates: long enough to reach cruise speed
/// and hold it for half a second.
pub fn check_move_distance(a: &AxisDesign) -> f64 {
    a.moves.cruise_speed * a.moves.cruise_speed / a.moves.accel + 0.5 * a.moves.cruise_speed
}

/// One axis' loop in `ctrl-core` form, converted by the simulation's conversion
/// ([`sim::quantize_axis`] for PD, [`sim::quantize_lead`] for lead), with the output clamp at
/// the highest supply, and the errors it introduced.
struct QuantizedGains {
    feedforward: ctrl_core::feedforward::Feedforward,
    feedback: Feedback,
    /// `kp`, `kd_per_tick` (PD) or `b0`, `b1`, `a1` (lead).
    gains: Vec<sim::Quantized>,
    kv: sim::Quantized,
    ka: sim::Quantized,
    bias_volts: sim::Quantized,
}

fn quantize_gains(
    design: &DesignFile,
    r: &AxisReport,
) -> Result<QuantizedGains, sim::QuantizeError> {
    let units = sim::FirmwareUnits {
        count_size: 1.0 / r.counts_per_unit,
        rate_hz: design.drive.loop_rate_hz,
    };
    let ff = Some(sim::Feedforward::for_plant(&r.plant));
    let limit = design.supply.highest_volts;
    match r.gains {
        Gains::Pd { kp, kd, .. } => {
            let d = sim::LoopDesign {
                kp,
                kd,
                derivative: sim::DerivativeForm::OnError,
                feedforward: ff,
            };
            let q = sim::quantize_axis(&d, &units, limit, f64::INFINITY)?;
            Ok(QuantizedGains {
                feedforward: q.feedforward,
                feedback: Feedback::Pd(q.pd),
                gains: vec![q.report.kp, q.report.kd_per_tick],
                kv: q.report.kv,
                ka: q.report.ka,
                bias_volts: q.report.bias_volts,
            })
        }
        Gains::Lead { coeffs, .. } => {
            let d = sim::LeadLoopDesign::from_coeffs(&coeffs, ff);
            let q = sim::quantize_lead(&d, &units, limit, f64::INFINITY)?;
            Ok(QuantizedGains {
                feedforward: q.feedforward,
                feedback: Feedback::Lead(q.lead),
                gains: vec![q.report.b0, q.report.b1, q.report.a1],
                kv: q.report.kv,
                ka: q.report.ka,
                bias_volts: q.report.bias_volts,
            })
        }
    }
}

/// Simulates one move of `report`'s axis from rest through `ctrl-core`'s fixed-point drive
/// (the loop the firmware runs, built by the same conversion as the emitted constants) against the exact drive model ([`sim::Drive`]), fed from `supply_volts`,
/// with `delay_ticks` of computation delay, for the move's time plus 0.6 s.
pub fn simulate_move(
    design: &DesignFile,
    report: &AxisReport,
    distance: f64,
    supply_volts: f64,
    delay_ticks: u32,
) -> Result<(sim::Metrics, sim::Trace), String> {
    let ad = design.axis(report.axis);
    let rate = design.drive.loop_rate_hz;
    let units = sim::FirmwareUnits {
        count_size: 1.0 / report.counts_per_unit,
        rate_hz: rate,
    };
    let command = sim::Command::Move {
        distance,
        cruise_speed: ad.moves.cruise_speed,
        accel: ad.moves.accel,
    };
    let q = quantize_gains(design, report).map_err(|e| e.to_string())?;
    let axis =
        ctrl_core::drive::Axis::new(q.feedforward, q.feedback, ctrl_core::stall::StallGuard::OFF);
    let kind = match report.axis {
        Axis::Forward => sim::AxisKind::Forward,
        Axis::Rotation => sim::AxisKind::Rotation,
    };
    let mut lp = sim::FirmwareLoop::with_axis(axis, kind, &units, supply_volts, &command)
        .map_err(|e| e.to_string())?;
    let ticks = ((command.duration_s() + 0.6) * rate).ceil() as u32;
    let cfg = sim::SimConfig {
        plant: report.plant,
        rate_hz: rate,
        count_size: Some(units.count_size),
        supply_volts,
        delay_ticks,
        disturbance: None,
        command,
        ticks,
        band: 0.02,
    };
    cfg.check().map_err(|e| e.to_string())?;
    Ok(sim::simulate_traced(&cfg, &mut lp))
}

// ---------------------------------------------------------------------------------------
// Quantization

/// The Rust expression of a `Coeff`.
fn coeff_expr(c: ctrl_core::Coeff) -> String {
    format!(
        "::ctrl_core::Coeff::from_bits({}, {})",
        c.mantissa(),
        c.shift()
    )
}

/// `x` as a `Coeff`: expression, stored value and relative error.
fn q_coeff(x: f64) -> Result<(String, f64, f64), String> {
    let (c, rel) = ctrl_core::Coeff::from_f64(x).map_err(|e| format!("{e}"))?;
    Ok((coeff_expr(c), c.to_f64(), rel))
}

/// `x` in a signed fixed-point format with `frac` fraction bits and `bits` total bits.
fn q_fixed(x: f64, frac: u32, bits: u32, ty: &str) -> Result<(String, f64, f64), String> {
    let scale = (frac as f64).exp2();
    let raw = (x * scale).round();
    let max = ((bits - 1) as f64).exp2();
    if !raw.is_finite() || raw >= max || raw < -max {
        return Err(format!("{} does not fit {ty}", sig(x)));
    }
    let q = raw / scale;
    let rel = if x == 0.0 { 0.0 } else { ((q - x) / x).abs() };
    Ok((
        format!("::fixed::types::{ty}::from_bits({})", raw as i64),
        q,
        rel,
    ))
}

fn q_int(x: f64, max: f64, ty: &str) -> Result<(String, f64, f64), String> {
    let r = x.round();
    if !(0.0..=max).contains(&r) {
        return Err(format!("{} does not fit {ty}", sig(x)));
    }
    let rel = if x == 0.0 { 0.0 } else { ((r - x) / x).abs() };
    Ok((format!("{}", r as u64), r, rel))
}

struct Builder<'a> {
    design: &'a DesignFile,
    out: Vec<Constant>,
    errors: Vec<DesignError>,
}

impl Builder<'_> {
    /// A constant converted elsewhere ([`sim::quantize_axis`]).
    #[allow(clippy::too_many_arguments)]
    fn held(
        &mut self,
        name: String,
        format: &'static str,
        q: sim::Quantized,
        expr: String,
        unit: &'static str,
        user_value: String,
        key: &str,
    ) {
        self.out.push(Constant {
            name,
            format,
            value: q.wanted,
            quantized: q.held,
            rel_err: q.relative_error,
            unit,
            user_value,
            expr,
            key: key.to_string(),
        });
    }

    #[allow(clippy::too_many_arguments)]
    fn add(
        &mut self,
        name: String,
        format: &'static str,
        value: f64,
        unit: &'static str,
        user_value: String,
        key: &str,
    ) -> String {
        let r = match format {
            "Coeff" => q_coeff(value),
            "I16F16" => q_fixed(value, 16, 32, "I16F16"),
            "I32F32" => q_fixed(value, 32, 64, "I32F32"),
            "u16" => q_int(value, f64::from(u16::MAX), "u16"),
            "u32" => q_int(value, f64::from(u32::MAX), "u32"),
            _ => Err(format!("unknown format {format}")),
        };
        match r {
            Ok((expr, quantized, rel_err)) => {
                self.out.push(Constant {
                    name,
                    format,
                    value,
                    quantized,
                    rel_err,
                    unit,
                    user_value,
                    expr: expr.clone(),
                    key: key.to_string(),
                });
                expr
            }
            Err(e) => {
                self.errors.push(self.design.error(
                    key,
                    format!(
                        "constant {name} = {} {unit} cannot be stored: {e}",
                        sig(value)
                    ),
                    Some(format!("a value the {format} format holds")),
                ));
                "0".to_string()
            }
        }
    }
}

/// Every constant the firmware gets, in firmware units.
fn constants(design: &DesignFile, axes: &[AxisReport]) -> Result<Vec<Constant>, Vec<DesignError>> {
    let mut b = Builder {
        design,
        out: Vec::new(),
        errors: Vec::new(),
    };
    let rate = design.drive.loop_rate_hz;
    b.add(
        "loop_rate_hz".into(),
        "u32",
        rate,
        "Hz",
        format!("{rate} Hz"),
        "drive.loop_rate_hz",
    );
    b.add(
        "counts_per_mm".into(),
        "I32F32",
        design.drive.counts_per_mm(),
        "count/mm",
        format!(
            "{} counts per {} mm wheel revolution",
            design.drive.encoder_counts_per_rev, design.drive.wheel_diameter_mm
        ),
        "drive.encoder_counts_per_rev",
    );
    b.add(
        "counts_per_rad".into(),
        "I32F32",
        design.drive.counts_per_rad(),
        "count/rad",
        format!("track width {} mm", design.drive.track_width_mm),
        "drive.track_width_mm",
    );
    for (key, v) in [
        ("supply.lowest_volts", design.supply.lowest_volts),
        ("supply.highest_volts", design.supply.highest_volts),
    ] {
        b.add(
            key.replace('.', "_"),
            "I16F16",
            v,
            "V",
            format!("{v} V"),
            key,
        );
    }
    for r in axes {
        let a = r.axis.name();
        let u = r.axis.unit();
        let cpu = r.counts_per_unit;
        let ad = design.axis(r.axis);
        let loop_key = format!("{a}.loop");
        let p = r.plant;
        let pk = format!("{a}.plant");
        // Gains and feedforward through the simulation's conversion, so the simulated
        // firmware loop and the emitted constants cannot disagree.
        match quantize_gains(design, r) {
            Ok(q) => {
                match (&q.feedback, r.gains) {
                    (Feedback::Pd(pd), Gains::Pd { kp, kd, .. }) => {
                        b.held(
                            format!("{a}.kp"),
                            "Coeff",
                            q.gains[0],
                            coeff_expr(pd.kp()),
                            "V/count",
                            format!("{} V/{u}", sig(kp)),
                            &loop_key,
                        );
                        b.held(
                            format!("{a}.kd_per_tick"),
                            "Coeff",
                            q.gains[1],
                            coeff_expr(pd.kd_per_tick()),
                            "V per count/tick",
                            format!("Kd {} V per {u}/s, times {rate} Hz", sig(kd)),
                            &loop_key,
                        );
                    }
                    (Feedback::Lead(lead), Gains::Lead { coeffs, .. }) => {
                        let [c0, c1, ca] = lead.coefficients();
                        let user = [
                            format!("{} V/{u}", sig(coeffs.b0)),
                            format!("{} V/{u}", sig(coeffs.b1)),
                            sig(coeffs.a1),
                        ];
                        for (i, (name, c, unit)) in [
                            ("lead_b0", c0, "V/count"),
                            ("lead_b1", c1, "V/count"),
                            ("lead_a1", ca, "1"),
                        ]
                        .into_iter()
                        .enumerate()
                        {
                            b.held(
                                format!("{a}.{name}"),
                                "Coeff",
                                q.gains[i],
                                coeff_expr(c),
                                unit,
                                user[i].clone(),
                                &loop_key,
                            );
                        }
                    }
                    _ => unreachable!("quantize_gains keeps the loop form"),
                }
                b.held(
                    format!("{a}.kv"),
                    "Coeff",
                    q.kv,
                    coeff_expr(q.feedforward.kv()),
                    "V per count/tick",
                    format!("1/K = {} V per {u}/s", sig(1.0 / p.gain)),
                    &pk,
                );
                b.held(
                    format!("{a}.ka"),
                    "Coeff",
                    q.ka,
                    coeff_expr(q.feedforward.ka()),
                    "V per count/tick^2",
                    format!("T/K = {} V per {u}/s^2", sig(p.time_constant_s / p.gain)),
                    &pk,
                );
                b.held(
                    format!("{a}.bias_volts"),
                    "I16F16",
                    q.bias_volts,
                    format!(
                        "::fixed::types::I16F16::from_bits({})",
                        q.feedforward.bias_volts().to_bits()
                    ),
                    "V",
                    format!("{} V", sig(p.bias_volts)),
                    &pk,
                );
            }
            Err(e) => b.errors.push(design.error(
                &loop_key,
                format!("cannot convert the {a} design to firmware units: {e}"),
                None,
            )),
        }
        b.add(
            format!("{a}.stall_limit"),
            "I16F16",
            ad.stall.max_tracking_error * cpu,
            "count",
            format!("{} {u}", ad.stall.max_tracking_error),
            &format!("{a}.stall_guard.max_tracking_error"),
        );
        b.add(
            format!("{a}.stall_ticks"),
            "u16",
            ad.stall.max_time_s * rate,
            "tick",
            format!("{} s", ad.stall.max_time_s),
            &format!("{a}.stall_guard.max_time_s"),
        );
        b.add(
            format!("{a}.cruise_speed"),
            "I32F32",
            ad.moves.cruise_speed * cpu / rate,
            "count/tick",
            format!("{} {u}/s", ad.moves.cruise_speed),
            &format!("{a}.move.cruise_speed"),
        );
        b.add(
            format!("{a}.accel"),
            "I32F32",
            ad.moves.accel * cpu / (rate * rate),
            "count/tick^2",
            format!("{} {u}/s^2", ad.moves.accel),
            &format!("{a}.move.accel"),
        );
        // The plant in firmware units, for on-target simulation and monitoring.
        let t_ticks = p.time_constant_s * rate;
        let decay = (-1.0 / t_ticks).exp();
        b.add(
            format!("{a}.plant_gain"),
            "Coeff",
            p.gain * cpu / rate,
            "count/tick per V",
            format!("K = {} {u}/s per V", sig(p.gain)),
            &pk,
        );
        b.add(
            format!("{a}.plant_decay"),
            "Coeff",
            decay,
            "1",
            format!("exp(-tick / T), T = {} s", sig(p.time_constant_s)),
            &pk,
        );
        b.add(
            format!("{a}.plant_lag_ticks"),
            "Coeff",
            t_ticks * (1.0 - decay),
            "tick",
            format!(
                "T (1 - exp(-tick / T)) = {} s",
                sig(p.time_constant_s * (1.0 - decay))
            ),
            &pk,
        );
    }
    if b.errors.is_empty() {
        Ok(b.out)
    } else {
        Err(b.errors)
    }
}

// ---------------------------------------------------------------------------------------
// Rendering

/// `x` with 6 significant digits, without exponent for ordinary magnitudes.
pub fn sig(x: f64) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let mag = x.abs().log10().floor() as i32;
    if !(-5..=6).contains(&mag) {
        return format!("{x:.5e}");
    }
    let decimals = (5 - mag).max(0) as usize;
    let s = format!("{x:.decimals$}");
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

fn find<'a>(constants: &'a [Constant], name: &str) -> &'a Constant {
    constants
        .iter()
        .find(|c| c.name == name)
        .unwrap_or_else(|| unreachable!("constant {name} was built"))
}

/// One argument line: expression and its comment.
fn arg(c: &Constant) -> String {
    format!(
        "{}, // {} = {} {} ({}); quantization error {} %",
        c.expr,
        c.name,
        sig(c.quantized),
        c.unit,
        c.user_value,
        sig(c.rel_err * 100.0)
    )
}

fn file_label(design: &DesignFile, p: &Path) -> String {
    let base = design.path.parent().unwrap_or(Path::new(""));
    p.strip_prefix(base)
        .unwrap_or(p)
        .to_string_lossy()
        .replace('\\', "/")
}

fn render(
    design: &DesignFile,
    axes: &[AxisReport],
    checks: &[Check],
    constants: &[Constant],
) -> String {
    let mut s = String::new();
    let file = design
        .path
        .file_name()
        .map(|f| f.to_string_lossy().into_owned())
        .unwrap_or_default();
    let w = &mut s;
    let _ = writeln!(
        w,
        "// Generated by ctrl-design {} (ctrl_design::emit) from the design file `{file}`.",
        env!("CARGO_PKG_VERSION")
    );
    let _ = writeln!(
        w,
        "// Do not edit: change the design file and rebuild (or run `ctrl-design emit {file}`)."
    );
    if let Some(n) = &design.name {
        let _ = writeln!(w, "// Design: {n}");
    }
    let _ = writeln!(
        w,
        "// Firmware units: distance in encoder counts, time in ticks (1 tick = 1/{} s).",
        sig(design.drive.loop_rate_hz)
    );
    let _ = writeln!(w, "//");
    for r in axes {
        let a = r.axis.name();
        let u = r.axis.unit();
        let p = r.plant;
        let _ = write!(
            w,
            "// {a} plant: K = {} {u}/s per V, T = {} s, bias = {} V",
            sig(p.gain),
            sig(p.time_constant_s),
            sig(p.bias_volts)
        );
        match &r.identification {
            Some(id) => {
                let files: Vec<String> = r
                    .logs
                    .iter()
                    .map(|l| file_label(design, Path::new(&l.name)))
                    .collect();
                let _ = writeln!(
                    w,
                    ", identified from {} logs (R^2 = {}): {}",
                    files.len(),
                    sig(id.r_squared),
                    files.join(", ")
                );
            }
            None => {
                let _ = writeln!(w, ", as given");
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
                    "// {a} loop: PD, Kp = {} V/{u}, Kd = {} V per {u}/s (wn = {} rad/s)",
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
                    "// {a} loop: lead, Kc = {} V/{u}, alpha = {}, T1 = {} s ({} deg of lead)",
                    sig(kc),
                    sig(alpha),
                    sig(t1),
                    sig(lead_deg)
                );
            }
        }
    }
    let _ = writeln!(w, "//");
    let _ = writeln!(w, "// Checks (all passed or warnings only):");
    for c in checks {
        let _ = writeln!(
            w,
            "//   {:<8} {:<20} {}: {}",
            c.axis.unwrap_or("design"),
            c.name,
            if c.passed { "ok" } else { "WARNING" },
            c.detail
        );
    }
    let worst = constants
        .iter()
        .max_by(|a, b| a.rel_err.total_cmp(&b.rel_err))
        .map(|c| format!("{} % ({})", sig(c.rel_err * 100.0), c.name))
        .unwrap_or_default();
    let _ = writeln!(
        w,
        "// Largest quantization error: {worst}; limit {} %.",
        design.checks.max_quantization_error_pct
    );
    let _ = writeln!(w);

    let simple = |w: &mut String, ident: &str, doc: &str, ty: &str, c: &Constant| {
        let _ = writeln!(w, "/// {doc}");
        let _ = writeln!(
            w,
            "pub const {ident}: {ty} = {}; // {} {} ({}); quantization error {} %",
            c.expr,
            sig(c.quantized),
            c.unit,
            c.user_value,
            sig(c.rel_err * 100.0)
        );
        let _ = writeln!(w);
    };
    simple(
        w,
        "LOOP_RATE_HZ",
        "Loop rate, ticks per second.",
        "u32",
        find(constants, "loop_rate_hz"),
    );
    simple(
        w,
        "COUNTS_PER_MM",
        "Wheel-arc encoder counts per mm of forward travel.",
        "::fixed::types::I32F32",
        find(constants, "counts_per_mm"),
    );
    simple(
        w,
        "COUNTS_PER_RAD",
        "Rotation-axis counts per radian of heading.",
        "::fixed::types::I32F32",
        find(constants, "counts_per_rad"),
    );
    simple(
        w,
        "SUPPLY_LOWEST_VOLTS",
        "Lowest battery voltage the design was checked at, V.",
        "::fixed::types::I16F16",
        find(constants, "supply_lowest_volts"),
    );
    simple(
        w,
        "SUPPLY_HIGHEST_VOLTS",
        "Highest battery voltage, V (also the wheel voltage cap of `DRIVE`).",
        "::fixed::types::I16F16",
        find(constants, "supply_highest_volts"),
    );

    for r in axes {
        let a = r.axis.name();
        let up = a.to_uppercase();
        let u = r.axis.unit();
        let _ = writeln!(w, "// ---- {a} axis ({u}) ----");
        let _ = writeln!(w);
        let _ = writeln!(w, "/// {a} axis: feedforward, feedback and stall guard.");
        let _ = writeln!(
            w,
            "pub const {up}_AXIS: ::ctrl_core::drive::Axis = ::ctrl_core::drive::Axis::new("
        );
        let _ = writeln!(w, "    ::ctrl_core::feedforward::Feedforward::new(");
        for n in ["kv", "ka", "bias_volts"] {
            let _ = writeln!(w, "        {}", arg(find(constants, &format!("{a}.{n}"))));
        }
        let _ = writeln!(w, "    ),");
        let high = find(constants, "supply_highest_volts");
        match r.gains {
            Gains::Pd { .. } => {
                let _ = writeln!(
                    w,
                    "    ::ctrl_core::drive::Feedback::Pd(::ctrl_core::pd::Pd::new("
                );
                for n in ["kp", "kd_per_tick"] {
                    let _ = writeln!(w, "        {}", arg(find(constants, &format!("{a}.{n}"))));
                }
                let _ = writeln!(w, "        ::ctrl_core::pd::Derivative::OnError,");
            }
            Gains::Lead { .. } => {
                let _ = writeln!(
                    w,
                    "    ::ctrl_core::drive::Feedback::Lead(::ctrl_core::lead::Lead::new("
                );
                for n in ["lead_b0", "lead_b1", "lead_a1"] {
                    let _ = writeln!(w, "        {}", arg(find(constants, &format!("{a}.{n}"))));
                }
            }
        }
        let _ = writeln!(
            w,
            "        {}, // output clamp = {} V (supply.highest_volts)",
            high.expr,
            sig(high.quantized)
        );
        let _ = writeln!(w, "    )),");
        let _ = writeln!(w, "    ::ctrl_core::stall::StallGuard::new(");
        for n in ["stall_limit", "stall_ticks"] {
            let _ = writeln!(w, "        {}", arg(find(constants, &format!("{a}.{n}"))));
        }
        let _ = writeln!(w, "    ),");
        let _ = writeln!(w, ");");
        let _ = writeln!(w);
        simple(
            w,
            &format!("{up}_CRUISE_SPEED"),
            &format!("{a} cruise speed of a move, counts/tick."),
            "::fixed::types::I32F32",
            find(constants, &format!("{a}.cruise_speed")),
        );
        simple(
            w,
            &format!("{up}_ACCEL"),
            &format!("{a} acceleration of a move, counts/tick^2."),
            "::fixed::types::I32F32",
            find(constants, &format!("{a}.accel")),
        );
        simple(
            w,
            &format!("{up}_PLANT_GAIN"),
            &format!("{a} plant gain, counts/tick per volt (for on-target simulation)."),
            "::ctrl_core::Coeff",
            find(constants, &format!("{a}.plant_gain")),
        );
        simple(
            w,
            &format!("{up}_PLANT_DECAY"),
            &format!("{a} plant speed decay over one tick, exp(-tick/T)."),
            "::ctrl_core::Coeff",
            find(constants, &format!("{a}.plant_decay")),
        );
        simple(
            w,
            &format!("{up}_PLANT_LAG_TICKS"),
            &format!("{a} plant position lag per tick, T (1 - exp(-tick/T)) in ticks."),
            "::ctrl_core::Coeff",
            find(constants, &format!("{a}.plant_lag_ticks")),
        );
    }
    let _ = writeln!(w, "// ---- the whole drive ----");
    let _ = writeln!(w);
    let _ = writeln!(
        w,
        "/// The two-axis drive: encoders ({}), both axes, supply compensation",
        match (
            design.drive.invert_left_encoder,
            design.drive.invert_right_encoder
        ) {
            (false, false) => "both counting forward",
            (true, false) => "left inverted",
            (false, true) => "right inverted",
            (true, true) => "both inverted",
        }
    );
    let _ = writeln!(w, "/// and the wheel voltage cap.");
    let low = find(constants, "supply_lowest_volts");
    let high = find(constants, "supply_highest_volts");
    let _ = writeln!(
        w,
        "pub const DRIVE: ::ctrl_core::drive::TwoAxisDrive = ::ctrl_core::drive::TwoAxisDrive::new("
    );
    let _ = writeln!(
        w,
        "    ::ctrl_core::encoder::Encoders::new({}, {}),",
        design.drive.invert_left_encoder, design.drive.invert_right_encoder
    );
    let _ = writeln!(w, "    FORWARD_AXIS,");
    let _ = writeln!(w, "    ROTATION_AXIS,");
    let _ = writeln!(
        w,
        "    ::ctrl_core::supply::Supply::new({}), // low-supply flag below {} V",
        low.expr,
        sig(low.quantized)
    );
    let _ = writeln!(
        w,
        "    {}, // wheel voltage cap {} V",
        high.expr,
        sig(high.quantized)
    );
    let _ = writeln!(w, ");");
    s
}

// ---------------------------------------------------------------------------------------
// build.rs integration

/// For a firmware `build.rs`: emits `design_path` (relative to the crate's manifest folder,
/// where build scripts run) into `$OUT_DIR/constants.rs`.
///
/// Prints `cargo:rerun-if-changed=` for the design file, every log directory and every log,
/// even when the design fails, so fixing the file reruns the script. On failure it prints
/// each error (file, line, key, valid range) as a `cargo::error=` line and returns without
/// writing the file; cargo (1.84 or later) then fails the build with those messages and
/// nothing else (no panic, no backtrace).
pub fn build_script(design_path: impl AsRef<Path>) {
    let path = design_path.as_ref();
    let result = emit(path);
    let inputs = match &result {
        Ok(e) => e.inputs.clone(),
        Err(f) => f.inputs.clone(),
    };
    for p in &inputs {
        println!("cargo:rerun-if-changed={}", p.display());
    }
    match result {
        Ok(e) => {
            for wmsg in &e.warnings {
                println!("cargo::warning={}", one_line(wmsg));
            }
            let out = match std::env::var_os("OUT_DIR") {
                Some(d) => PathBuf::from(d),
                None => {
                    println!("cargo::error=ctrl_design::emit::build_script: OUT_DIR is not set (call it from build.rs)");
                    return;
                }
            };
            let file = out.join("constants.rs");
            if let Err(err) = std::fs::write(&file, &e.source) {
                println!("cargo::error=cannot write {}: {err}", file.display());
            }
        }
        Err(f) => {
            println!(
                "cargo::error=the design {} does not pass its checks; no constants were generated:",
                path.display()
            );
            for e in &f.errors {
                println!("cargo::error={}", one_line(&e.to_string()));
            }
        }
    }
}

fn one_line(s: &str) -> String {
    s.replace(['\n', '\r'], " ")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sig_keeps_six_digits() {
        assert_eq!(sig(0.1580247), "0.158025");
        assert_eq!(sig(500.0), "500");
        assert_eq!(sig(45.8), "45.8");
        assert_eq!(sig(-0.0104166), "-0.0104166");
        assert_eq!(sig(1.5e-9), "1.50000e-9");
    }

    #[test]
    fn fixed_quantization_reports_its_error() {
        let (expr, q, rel) = q_fixed(0.7, 16, 32, "I16F16").unwrap();
        // 0.7 * 65536 = 45875.2 -> 45875.
        assert_eq!(expr, "::fixed::types::I16F16::from_bits(45875)");
        assert_eq!(q, 45875.0 / 65536.0);
        assert!((rel - 0.2 / 45875.2).abs() < 1e-12);
        assert!(q_fixed(40000.0, 16, 32, "I16F16").is_err());
        assert!(q_int(70000.0, 65535.0, "u16").is_err());
    }
}
