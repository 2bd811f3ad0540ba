//! The loop stepped through `ctrl-core`'s fixed-point arithmetic, and the one conversion
//! from an `f64` design in user units to `ctrl-core` constants in counts and ticks.
//!
//! # Conversion (user units -> counts and ticks)
//!
//! With `c` the distance of one encoder count (units) and `f` the loop rate (Hz), a speed
//! of `s` units/s is `s / (c f)` counts/tick and an acceleration of `a` units/s^2 is
//! `a / (c f^2)` counts/tick^2. So the gains become:
//!
//! | design (user units)              | `ctrl-core` constant                         |
//! | -------------------------------- | -------------------------------------------- |
//! | `kp` V/unit                      | `kp * c` V/count                             |
//! | `kd` V per unit/s                | `kd_per_tick = kd * c * f` V per count/tick  |
//! | speed feedforward `1/K` V per unit/s | `kv = c f / K` V per count/tick          |
//! | accel feedforward `T/K` V per unit/s^2 | `ka = T c f^2 / K` V per count/tick^2  |
//! | bias V                           | `I16F16` volts                               |
//! | supply V                         | PD output limit, `I16F16` volts              |
//!
//! Each gain goes through [`Coeff::from_f64`], which picks the format that keeps its
//! precision; [`quantize_axis`] refuses a constant whose relative error would exceed the
//! caller's bound and reports every constant's error.

use super::{
    AxisDesign, Command, Controller, DerivativeForm, LeadLoopDesign, LoopDesign, LoopOutput,
    Measurement, Setpoint,
};
use ctrl_core::drive::{Axis, AxisState, Feedback};
use ctrl_core::encoder::{EncoderState, Encoders};
use ctrl_core::feedforward::Feedforward as CoreFeedforward;
use ctrl_core::lead::Lead;
use ctrl_core::mix::mix;
use ctrl_core::pd::{Derivative, Pd};
use ctrl_core::profile::Move;
use ctrl_core::stall::StallGuard;
use ctrl_core::supply::{Supply, SupplyState};
use ctrl_core::Coeff;
use fixed::types::{I16F16, I32F32};
use std::fmt;

/// Relative error [`FirmwareLoop::from_design`] accepts for any gain (0.1 %). `Coeff` holds
/// values in `2^-32 ..= 32767` within `2^-15` (0.003 %), so only gains far outside any
/// sensible range are refused.
pub const MAX_RELATIVE_ERROR: f64 = 1e-3;

/// Encoder and loop-rate scale of the conversion.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct FirmwareUnits {
    /// Distance of one encoder count, units (> 0).
    pub count_size: f64,
    /// Loop rate, Hz (> 0).
    pub rate_hz: f64,
}

/// One constant's conversion: the value wanted (in `ctrl-core` units), the value held, and
/// the relative error `|held - wanted| / |wanted|` (0 when wanted is 0).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Quantized {
    /// The exact value in firmware units.
    pub wanted: f64,
    /// The value the firmware constant holds.
    pub held: f64,
    /// Relative error.
    pub relative_error: f64,
}

/// The errors [`quantize_axis`] introduced, per constant (firmware units).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct QuantizationReport {
    /// `kp`, V/count.
    pub kp: Quantized,
    /// `kd_per_tick`, V per count/tick.
    pub kd_per_tick: Quantized,
    /// Speed feedforward `kv`, V per count/tick.
    pub kv: Quantized,
    /// Acceleration feedforward `ka`, V per count/tick^2.
    pub ka: Quantized,
    /// Friction bias, V.
    pub bias_volts: Quantized,
    /// PD output limit, V.
    pub limit_volts: Quantized,
}

impl QuantizationReport {
    /// The largest relative error of the gains (`kp`, `kd_per_tick`, `kv`, `ka`).
    pub fn worst_gain_error(&self) -> f64 {
        [self.kp, self.kd_per_tick, self.kv, self.ka]
            .iter()
            .map(|q| q.relative_error)
            .fold(0.0, f64::max)
    }
}

/// The `ctrl-core` constants of one axis and how closely they hold the design.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct QuantizedAxis {
    /// Feedforward (`Feedforward::NONE` when the design has none).
    pub feedforward: CoreFeedforward,
    /// PD loop.
    pub pd: Pd,
    /// Errors introduced.
    pub report: QuantizationReport,
}

impl QuantizedAxis {
    /// The `ctrl-core` axis with the given stall guard.
    pub const fn axis(&self, stall: StallGuard) -> Axis {
        Axis::new(self.feedforward, Feedback::Pd(self.pd), stall)
    }
}

/// A design constant that cannot be held, or a scale outside its range.
#[derive(Debug, Clone, PartialEq)]
pub struct QuantizeError {
    /// The constant (`kp`, `kd_per_tick`, `kv`, `ka`, `bias_volts`, `limit_volts`,
    /// `count_size`, `rate_hz`, `distance`, `cruise_speed`, `accel`).
    pub constant: &'static str,
    /// The value in firmware units (counts, ticks, volts).
    pub value: f64,
    /// What is valid.
    pub valid: String,
}

impl fmt::Display for QuantizeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{} = {:e} (firmware units) cannot be held: valid is {}",
            self.constant, self.value, self.valid
        )
    }
}

impl std::error::Error for QuantizeError {}

fn coeff(name: &'static str, x: f64, max_rel: f64) -> Result<(Coeff, Quantized), QuantizeError> {
    let err = |valid: String| QuantizeError {
        constant: name,
        value: x,
        valid,
    };
    let (c, rel) = Coeff::from_f64(x).map_err(|e| {
        err(format!(
            "a finite value of magnitude 2^-48 ..< 32767.5 ({e})"
        ))
    })?;
    if rel > max_rel {
        return Err(err(format!(
            "a value held within a relative error of {max_rel:e} (this one: {rel:e}; \
             magnitudes 2^-32 ..= 32767 are held within 2^-15)"
        )));
    }
    Ok((
        c,
        Quantized {
            wanted: x,
            held: c.to_f64(),
            relative_error: rel,
        },
    ))
}

fn volts(name: &'static str, x: f64) -> Result<(I16F16, Quantized), QuantizeError> {
    let v = I16F16::checked_from_num(x)
        .filter(|_| x.is_finite())
        .ok_or_else(|| QuantizeError {
            constant: name,
            value: x,
            valid: "finite volts in -32768 ..< 32768".to_string(),
        })?;
    let held: f64 = v.to_num();
    Ok((
        v,
        Quantized {
            wanted: x,
            held,
            relative_error: if x == 0.0 {
                0.0
            } else {
                ((held - x) / x).abs()
            },
        },
    ))
}

fn check_units(u: &FirmwareUnits) -> Result<(), QuantizeError> {
    for (constant, v) in [("count_size", u.count_size), ("rate_hz", u.rate_hz)] {
        if !(v.is_finite() && v > 0.0) {
            return Err(QuantizeError {
                constant,
                value: v,
                valid: "finite and > 0".to_string(),
            });
        }
    }
    Ok(())
}

/// Converts an `f64` design (user units) into `ctrl-core` constants (counts, ticks) for
/// an encoder of `units.count_size` at `units.rate_hz`, with the PD output limited to
/// `limit_volts`; refuses any gain held worse than `max_relative_error`.
///
/// This is the one conversion both the simulation and constant emission use (table in the
/// module docs).
///
/// ```
/// use ctrl_design::sim::{quantize_axis, FirmwareUnits, LoopDesign, DerivativeForm, Feedforward};
/// use ctrl_design::Plant;
/// let plant = Plant::new(180.0, 0.09, 0.7).unwrap();
/// let design = LoopDesign { kp: 0.12, kd: 0.004, derivative: DerivativeForm::OnError,
///     feedforward: Some(Feedforward::for_plant(&plant)) };
/// let units = FirmwareUnits { count_size: 0.36652, rate_hz: 500.0 };
/// let q = quantize_axis(&design, &units, 6.4, 1e-3).unwrap();
/// // kd_per_tick = 0.004 * 0.36652 * 500 = 0.73304 V per count/tick
/// assert!((q.report.kd_per_tick.held - 0.73304).abs() < 0.73304 * 3.1e-5);
/// assert!(q.report.worst_gain_error() < 3.1e-5);
/// ```
pub fn quantize_axis(
    design: &LoopDesign,
    units: &FirmwareUnits,
    limit_volts: f64,
    max_relative_error: f64,
) -> Result<QuantizedAxis, QuantizeError> {
    check_units(units)?;
    let (c, f) = (units.count_size, units.rate_hz);
    let (kp, kp_q) = coeff("kp", design.kp * c, max_relative_error)?;
    let (kd, kd_q) = coeff("kd_per_tick", design.kd * c * f, max_relative_error)?;
    let ff = quantize_feedforward(design.feedforward, units, max_relative_error)?;
    let (limit, limit_q) = volts("limit_volts", limit_volts)?;
    let derivative = match design.derivative {
        DerivativeForm::OnError => Derivative::OnError,
        DerivativeForm::OnMeasurement => Derivative::OnMeasurement,
    };
    Ok(QuantizedAxis {
        feedforward: ff.core,
        pd: Pd::new(kp, kd, derivative, limit),
        report: QuantizationReport {
            kp: kp_q,
            kd_per_tick: kd_q,
            kv: ff.kv,
            ka: ff.ka,
            bias_volts: ff.bias_volts,
            limit_volts: limit_q,
        },
    })
}

struct QuantizedFeedforward {
    core: CoreFeedforward,
    kv: Quantized,
    ka: Quantized,
    bias_volts: Quantized,
}

fn quantize_feedforward(
    ff: Option<super::Feedforward>,
    units: &FirmwareUnits,
    max_relative_error: f64,
) -> Result<QuantizedFeedforward, QuantizeError> {
    let (c, f) = (units.count_size, units.rate_hz);
    let ff = ff.unwrap_or(super::Feedforward {
        volts_per_speed: 0.0,
        volts_per_accel: 0.0,
        bias_volts: 0.0,
    });
    let (kv, kv_q) = coeff("kv", ff.volts_per_speed * c * f, max_relative_error)?;
    let (ka, ka_q) = coeff("ka", ff.volts_per_accel * c * f * f, max_relative_error)?;
    let (bias, bias_q) = volts("bias_volts", ff.bias_volts)?;
    Ok(QuantizedFeedforward {
        core: CoreFeedforward::new(kv, ka, bias),
        kv: kv_q,
        ka: ka_q,
        bias_volts: bias_q,
    })
}

/// The errors [`quantize_lead`] introduced, per constant (firmware units).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct LeadQuantizationReport {
    /// `b0`, V/count.
    pub b0: Quantized,
    /// `b1`, V/count.
    pub b1: Quantized,
    /// `a1`, dimensionless.
    pub a1: Quantized,
    /// Speed feedforward `kv`, V per count/tick.
    pub kv: Quantized,
    /// Acceleration feedforward `ka`, V per count/tick^2.
    pub ka: Quantized,
    /// Friction bias, V.
    pub bias_volts: Quantized,
    /// Lead output limit, V.
    pub limit_volts: Quantized,
}

impl LeadQuantizationReport {
    /// The largest relative error of the gains (`b0`, `b1`, `a1`, `kv`, `ka`).
    pub fn worst_gain_error(&self) -> f64 {
        [self.b0, self.b1, self.a1, self.kv, self.ka]
            .iter()
            .map(|q| q.relative_error)
            .fold(0.0, f64::max)
    }
}

/// The `ctrl-core` constants of one lead axis and how closely they hold the design.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct QuantizedLead {
    /// Feedforward (`Feedforward::NONE` when the design has none).
    pub feedforward: CoreFeedforward,
    /// Lead loop.
    pub lead: Lead,
    /// Errors introduced.
    pub report: LeadQuantizationReport,
}

impl QuantizedLead {
    /// The `ctrl-core` axis with the given stall guard.
    pub const fn axis(&self, stall: StallGuard) -> Axis {
        Axis::new(self.feedforward, Feedback::Lead(self.lead), stall)
    }
}

/// Converts a lead design (user units) into `ctrl-core` constants: `b0`, `b1` from volts
/// per unit to volts per count (`* count_size`), `a1` unchanged (dimensionless; the
/// coefficients already belong to `units.rate_hz`), the feedforward as in
/// [`quantize_axis`], the lead output limited to `limit_volts`. Refuses any gain held worse
/// than `max_relative_error`, and an `a1` with `|a1| >= 1` (an unstable or marginal
/// controller pole).
///
/// ```
/// use ctrl_design::sim::{quantize_lead, FirmwareUnits, LeadLoopDesign};
/// let design = LeadLoopDesign { b0: 0.8, b1: -0.77, a1: -0.9, feedforward: None };
/// let units = FirmwareUnits { count_size: 0.36652, rate_hz: 500.0 };
/// let q = quantize_lead(&design, &units, 6.4, 1e-3).unwrap();
/// assert!((q.report.b0.held - 0.8 * 0.36652).abs() < 0.8 * 0.36652 * 3.1e-5);
/// assert!((q.report.a1.held + 0.9).abs() < 0.9 * 3.1e-5);
/// ```
pub fn quantize_lead(
    design: &LeadLoopDesign,
    units: &FirmwareUnits,
    limit_volts: f64,
    max_relative_error: f64,
) -> Result<QuantizedLead, QuantizeError> {
    check_units(units)?;
    let c = units.count_size;
    if design.a1.is_nan() || design.a1.abs() >= 1.0 {
        return Err(QuantizeError {
            constant: "a1",
            value: design.a1,
            valid: "|a1| < 1 (a stable controller pole)".to_string(),
        });
    }
    let (b0, b0_q) = coeff("b0", design.b0 * c, max_relative_error)?;
    let (b1, b1_q) = coeff("b1", design.b1 * c, max_relative_error)?;
    let (a1, a1_q) = coeff("a1", design.a1, max_relative_error)?;
    let ff = quantize_feedforward(design.feedforward, units, max_relative_error)?;
    let (limit, limit_q) = volts("limit_volts", limit_volts)?;
    Ok(QuantizedLead {
        feedforward: ff.core,
        lead: Lead::new(b0, b1, a1, limit),
        report: LeadQuantizationReport {
            b0: b0_q,
            b1: b1_q,
            a1: a1_q,
            kv: ff.kv,
            ka: ff.ka,
            bias_volts: ff.bias_volts,
            limit_volts: limit_q,
        },
    })
}

/// The quantization report of either loop form (JSON: the report's fields, no tag).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
#[serde(untagged)]
pub enum AxisQuantization {
    /// A PD axis ([`quantize_axis`]).
    Pd(QuantizationReport),
    /// A lead axis ([`quantize_lead`]).
    Lead(LeadQuantizationReport),
}

impl AxisQuantization {
    /// The largest relative error of the gains.
    pub fn worst_gain_error(&self) -> f64 {
        match self {
            AxisQuantization::Pd(r) => r.worst_gain_error(),
            AxisQuantization::Lead(r) => r.worst_gain_error(),
        }
    }
}

/// [`quantize_axis`] or [`quantize_lead`] by the design's form: the `ctrl-core` axis with
/// the stall guard off, and the report.
pub fn quantize_design(
    design: &AxisDesign,
    units: &FirmwareUnits,
    limit_volts: f64,
    max_relative_error: f64,
) -> Result<(Axis, AxisQuantization), QuantizeError> {
    Ok(match design {
        AxisDesign::Pd(d) => {
            let q = quantize_axis(d, units, limit_volts, max_relative_error)?;
            (q.axis(StallGuard::OFF), AxisQuantization::Pd(q.report))
        }
        AxisDesign::Lead(d) => {
            let q = quantize_lead(d, units, limit_volts, max_relative_error)?;
            (q.axis(StallGuard::OFF), AxisQuantization::Lead(q.report))
        }
    })
}

/// A stall guard in user units: it trips when |tracking error| exceeds `limit` (units,
/// positive) for `time_s` seconds (rounded to whole ticks, 1 ..= 65535), converted to
/// counts (`limit / count_size`, `I16F16`) and ticks.
///
/// ```
/// use ctrl_design::sim::{stall_guard, FirmwareUnits};
/// let units = FirmwareUnits { count_size: 0.5, rate_hz: 500.0 };
/// let g = stall_guard(20.0, 0.1, &units).unwrap();
/// assert_eq!((g.limit().to_num::<f64>(), g.ticks()), (40.0, 50));
/// ```
pub fn stall_guard(
    limit: f64,
    time_s: f64,
    units: &FirmwareUnits,
) -> Result<StallGuard, QuantizeError> {
    check_units(units)?;
    let counts = limit / units.count_size;
    if !(limit > 0.0 && counts.is_finite() && counts < 32767.0) {
        return Err(QuantizeError {
            constant: "stall_limit",
            value: counts,
            valid: "> 0 and < 32767 counts".to_string(),
        });
    }
    let ticks = (time_s * units.rate_hz).round();
    if !(ticks.is_finite() && (1.0..=65535.0).contains(&ticks)) {
        return Err(QuantizeError {
            constant: "stall_time",
            value: ticks,
            valid: "1 ..= 65535 ticks".to_string(),
        });
    }
    Ok(StallGuard::new(I16F16::from_num(counts), ticks as u16))
}

fn fixed32(constant: &'static str, x: f64, valid: &str) -> Result<I32F32, QuantizeError> {
    I32F32::checked_from_num(x)
        .filter(|_| x.is_finite())
        .ok_or_else(|| QuantizeError {
            constant,
            value: x,
            valid: valid.to_string(),
        })
}

/// A move in user units as a `ctrl-core` [`Move`] in counts and ticks (from rest to rest).
///
/// Refuses what the firmware's profile would refuse on range alone (its
/// `POSITION_LIMIT`, `SPEED_LIMIT` and `ACCEL_LIMIT`: distance within ±2^30 counts, cruise
/// speed below 2^15 counts/tick, acceleration below 2^15 counts/tick²), naming the limit in
/// the user's units, so a design never emits a move the MCU cannot start.
pub fn quantize_move(
    distance: f64,
    cruise_speed: f64,
    accel: f64,
    units: &FirmwareUnits,
) -> Result<Move, QuantizeError> {
    check_units(units)?;
    let (c, f) = (units.count_size, units.rate_hz);
    let within = |constant: &'static str, x: f64, limit: I32F32, unit: &str, per: f64| {
        let lim = limit.to_num::<f64>();
        if x.is_finite() && x.abs() < lim {
            fixed32(constant, x, "finite")
        } else {
            Err(QuantizeError {
                constant,
                value: x,
                valid: format!(
                    "magnitude below {lim} {unit} ({} in the design's units)",
                    lim * per
                ),
            })
        }
    };
    use ctrl_core::profile::{ACCEL_LIMIT, POSITION_LIMIT, SPEED_LIMIT};
    Ok(Move::new(
        within("distance", distance / c, POSITION_LIMIT, "counts", c)?,
        within(
            "cruise_speed",
            cruise_speed / (c * f),
            SPEED_LIMIT,
            "counts/tick",
            c * f,
        )?,
        I32F32::ZERO,
        within(
            "accel",
            accel / (c * f * f),
            ACCEL_LIMIT,
            "counts/tick²",
            c * f * f,
        )?,
    ))
}

/// Which axis of the two-wheel drive the simulated drive is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum AxisKind {
    /// Both wheels move together: forward = (L + R) / 2.
    Forward,
    /// The wheels move oppositely: rotation = (R - L) / 2.
    Rotation,
}

/// One axis of `ctrl-core`'s two-wheel drive, stepped with the encoder counts of the
/// simulated drive (the other axis at rest); the applied voltage is the axis' share of the
/// two wheel duties times the supply.
///
/// Each tick runs the firmware's own pieces in the order of
/// `ctrl_core::drive::TwoAxisDrive::tick`: the 16-bit encoder update (with its wrap), the
/// axis update (profile step, feedforward, PD, stall guard, here off), the wheel mix with the
/// limit `min(battery, max volts)`, and supply compensation through the stored reciprocal.
/// The axis at rest contributes exactly 0 V there, so it is not stepped; a test checks that
/// the duties equal `TwoAxisDrive::tick`'s bit for bit.
///
/// A step command is made the way firmware would see a sudden new target: the encoder's
/// reference reading is taken `distance` counts (rounded to whole counts) away, so the
/// profile at rest holds the target. So a step must be shorter than 32768 counts.
///
/// A loop is cheap to clone: a sweep builds one and clones it for every run.
#[derive(Debug, Clone)]
pub struct FirmwareLoop {
    encoders: Encoders,
    encoder_state: EncoderState,
    axis: Axis,
    state: AxisState,
    supply: SupplyState,
    limit_volts: I16F16,
    kind: AxisKind,
    count_size: f64,
    rate_hz: f64,
    supply_volts: f64,
    /// True position of the profile's origin, counts.
    origin_counts: i64,
}

impl FirmwareLoop {
    /// A loop at rest running `command` with `axis` on `kind`, fed from a supply of
    /// `supply_volts` (finite, > 0), which is also the drive's largest voltage.
    pub fn new(
        axis: &QuantizedAxis,
        kind: AxisKind,
        units: &FirmwareUnits,
        supply_volts: f64,
        command: &Command,
    ) -> Result<Self, QuantizeError> {
        FirmwareLoop::with_axis(
            axis.axis(StallGuard::OFF),
            kind,
            units,
            supply_volts,
            command,
        )
    }

    /// As [`FirmwareLoop::new`] for any `ctrl-core` axis (PD or lead feedback, and its
    /// stall guard as given).
    pub fn with_axis(
        axis: Axis,
        kind: AxisKind,
        units: &FirmwareUnits,
        supply_volts: f64,
        command: &Command,
    ) -> Result<Self, QuantizeError> {
        check_units(units)?;
        let (battery, _) = volts("supply_volts", supply_volts)?;
        if !supply_volts.is_finite() || supply_volts <= 0.0 {
            return Err(QuantizeError {
                constant: "supply_volts",
                value: supply_volts,
                valid: "finite and > 0 (volts)".to_string(),
            });
        }
        let mut supply = SupplyState::new();
        Supply::new(I16F16::ZERO).set_battery(&mut supply, battery);
        let mut lp = FirmwareLoop {
            encoders: Encoders::new(false, false),
            encoder_state: EncoderState::new(),
            axis,
            state: AxisState::new(),
            supply,
            // TwoAxisDrive limits the mix to min(battery, max volts); both are the supply.
            limit_volts: battery,
            kind,
            count_size: units.count_size,
            rate_hz: units.rate_hz,
            supply_volts,
            origin_counts: 0,
        };
        match *command {
            Command::Step { distance } => {
                let d = (distance / units.count_size).round();
                if d.is_nan() || d.abs() >= 32768.0 {
                    return Err(QuantizeError {
                        constant: "distance",
                        value: d,
                        valid: "a step shorter than 32768 counts".to_string(),
                    });
                }
                lp.origin_counts = d as i64;
                // The reference reading: the encoder frame's zero is the target.
                lp.read(lp.origin_counts);
            }
            Command::Move {
                distance,
                cruise_speed,
                accel,
            } => {
                let mv = quantize_move(distance, cruise_speed, accel, units)?;
                lp.state.start(mv).map_err(|e| QuantizeError {
                    constant: "move",
                    value: distance,
                    valid: format!("a move the profile accepts ({e})"),
                })?;
            }
        }
        Ok(lp)
    }

    /// The axis' constants (as built by [`QuantizedAxis::axis`] with the stall guard off,
    /// unless given otherwise).
    pub fn axis(&self) -> &Axis {
        &self.axis
    }

    /// Replaces the axis' stall guard (off by default; see [`stall_guard`] for one in user
    /// units). Once it trips, both wheel duties are 0, as in `TwoAxisDrive::tick`, until
    /// the end of the run.
    pub fn set_stall_guard(&mut self, guard: StallGuard) {
        self.axis = Axis::new(self.axis.feedforward(), self.axis.feedback(), guard);
    }

    /// `true` once the stall guard has tripped (it latches).
    pub fn is_stalled(&self) -> bool {
        self.state.is_stalled()
    }

    /// One firmware tick with the encoders at `counts` (axis position); returns the wheel
    /// duties `[left, right]`.
    #[inline(always)]
    pub fn read(&mut self, counts: i64) -> [I16F16; 2] {
        let raw = counts as u16; // the hardware counter keeps the low 16 bits
        let (l, r) = match self.kind {
            AxisKind::Forward => (raw, raw),
            AxisKind::Rotation => (raw.wrapping_neg(), raw),
        };
        let d = self.encoders.update(&mut self.encoder_state, l, r);
        match self.kind {
            AxisKind::Forward => {
                let v =
                    self.axis
                        .update(&mut self.state, self.encoder_state.forward(), d.forward());
                if self.state.is_stalled() {
                    return [I16F16::ZERO; 2];
                }
                let w = mix(v, I16F16::ZERO, self.limit_volts);
                // left == right here, so one duty serves both wheels.
                let duty = self.supply.duty(w.left);
                [duty, duty]
            }
            AxisKind::Rotation => {
                let v =
                    self.axis
                        .update(&mut self.state, self.encoder_state.rotation(), d.rotation());
                if self.state.is_stalled() {
                    return [I16F16::ZERO; 2];
                }
                let w = mix(I16F16::ZERO, v, self.limit_volts);
                [self.supply.duty(w.left), self.supply.duty(w.right)]
            }
        }
    }

    /// [`quantize_axis`] with [`MAX_RELATIVE_ERROR`] and the supply as the PD limit, then
    /// [`FirmwareLoop::new`]; returns the loop and the quantization report.
    pub fn from_design(
        design: &LoopDesign,
        kind: AxisKind,
        units: &FirmwareUnits,
        supply_volts: f64,
        command: &Command,
    ) -> Result<(Self, QuantizationReport), QuantizeError> {
        let q = quantize_axis(design, units, supply_volts, MAX_RELATIVE_ERROR)?;
        Ok((
            FirmwareLoop::new(&q, kind, units, supply_volts, command)?,
            q.report,
        ))
    }

    /// [`quantize_design`] (either loop form) with [`MAX_RELATIVE_ERROR`] and the supply as
    /// the feedback limit, then [`FirmwareLoop::with_axis`] (stall guard off).
    pub fn from_axis_design(
        design: &AxisDesign,
        kind: AxisKind,
        units: &FirmwareUnits,
        supply_volts: f64,
        command: &Command,
    ) -> Result<(Self, AxisQuantization), QuantizeError> {
        let (axis, report) = quantize_design(design, units, supply_volts, MAX_RELATIVE_ERROR)?;
        Ok((
            FirmwareLoop::with_axis(axis, kind, units, supply_volts, command)?,
            report,
        ))
    }
}

impl Controller for FirmwareLoop {
    #[inline]
    fn stalled(&self) -> bool {
        self.state.is_stalled()
    }

    #[inline(always)]
    fn tick(&mut self, m: &Measurement) -> LoopOutput {
        let duty = self.read(m.counts);
        let axis = self.state.sample();
        let share = match self.kind {
            AxisKind::Forward => 2.0 * f64_of_i16f16(duty[0]),
            AxisKind::Rotation => f64_of_i16f16(duty[1]) - f64_of_i16f16(duty[0]),
        };
        let c = self.count_size;
        let sp_counts = f64_of_i32f32(axis.setpoint);
        let accel = f64_of_i32f32(self.state.profile().setpoint().accel);
        LoopOutput {
            setpoint: Setpoint {
                position: (sp_counts + self.origin_counts as f64) * c,
                speed: f64_of_i16f16(axis.speed) * c * self.rate_hz,
                accel: accel * c * self.rate_hz * self.rate_hz,
            },
            feedforward_volts: f64_of_i16f16(axis.feedforward),
            feedback_volts: f64_of_i16f16(axis.feedback),
            command_volts: 0.5 * share * self.supply_volts,
        }
    }
}

/// `x.to_num::<f64>()` in one integer-to-float conversion and an exact scaling (the
/// `fixed` crate's generic conversion builds the float bit by bit; this is the same value:
/// every `i32` is exact in `f64`).
#[inline(always)]
fn f64_of_i16f16(x: I16F16) -> f64 {
    f64::from(x.to_bits()) * (1.0 / 65536.0)
}

/// `x.to_num::<f64>()` the fast way: the `i64` bits rounded to the nearest `f64` (ties to
/// even, as `fixed` rounds) and scaled exactly by 2^-32.
#[inline(always)]
fn f64_of_i32f32(x: I32F32) -> f64 {
    x.to_bits() as f64 * (1.0 / 4_294_967_296.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fast_conversions_equal_the_fixed_crates() {
        let mut x: u64 = 0x9e37_79b9_7f4a_7c15;
        for _ in 0..100_000 {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            let a = I16F16::from_bits(x as i32);
            let b = I32F32::from_bits(x as i64);
            assert_eq!(f64_of_i16f16(a), a.to_num::<f64>());
            assert_eq!(f64_of_i32f32(b), b.to_num::<f64>());
        }
        for b in [i64::MIN, i64::MAX, -1, 1, (1 << 53) + 1, -(1 << 60) - 3] {
            let v = I32F32::from_bits(b);
            assert_eq!(f64_of_i32f32(v), v.to_num::<f64>(), "{b}");
        }
    }
}
