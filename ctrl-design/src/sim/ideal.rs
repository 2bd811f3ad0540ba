//! The `f64` loop: the firmware's loop form with no arithmetic quantization, and the
//! sampled trapezoidal move it follows.

use super::firmware::{quantize_move, FirmwareUnits, QuantizeError};
use super::{Command, Controller, LoopOutput, Measurement, Setpoint};
use crate::Plant;

/// Feedforward constants in plant units: `v_ff = speed * per_speed + accel * per_accel +
/// bias * sign(speed)`.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Feedforward {
    /// Volts per unit/s of setpoint speed (`1 / K`).
    pub volts_per_speed: f64,
    /// Volts per unit/s^2 of setpoint acceleration (`T / K`).
    pub volts_per_accel: f64,
    /// Friction bias added in the direction of the setpoint speed, volts.
    pub bias_volts: f64,
}

impl Feedforward {
    /// The feedforward that inverts `plant`: `1/K`, `T/K` and its bias.
    pub fn for_plant(plant: &Plant) -> Self {
        Feedforward {
            volts_per_speed: 1.0 / plant.gain,
            volts_per_accel: plant.time_constant_s / plant.gain,
            bias_volts: plant.bias_volts,
        }
    }

    /// Feedforward voltage for a setpoint (plant units).
    #[inline]
    pub fn volts(&self, sp: &Setpoint) -> f64 {
        let dir = if sp.speed > 0.0 {
            1.0
        } else if sp.speed < 0.0 {
            -1.0
        } else {
            0.0
        };
        sp.speed * self.volts_per_speed + sp.accel * self.volts_per_accel + self.bias_volts * dir
    }
}

/// What the derivative term differentiates (the same two forms as `ctrl-core`'s PD loop).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum DerivativeForm {
    /// The tracking error's backward difference `(e[k] - e[k-1]) * rate`, with `e[-1] = 0`
    /// (a step setpoint kicks the first tick: the closed loop has the PD zero).
    OnError,
    /// Minus the measured speed `-(m[k] - m[k-1]) * rate`: no kick, no zero.
    OnMeasurement,
}

/// A PD position loop with optional feedforward, as designed (plant units, `f64`).
///
/// Each tick: `e = sp.position - measured`, `d` per [`DerivativeForm`],
/// `v = kp * e + kd * d + feedforward(sp)`.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct LoopDesign {
    /// Proportional gain, volts per unit of position error.
    pub kp: f64,
    /// Derivative gain, volts per unit/s of speed error.
    pub kd: f64,
    /// What the derivative term differentiates.
    pub derivative: DerivativeForm,
    /// Feedforward, or `None` to run on feedback alone.
    pub feedforward: Option<Feedforward>,
}

/// A phase-lead position loop with optional feedforward, as designed (plant units, `f64`):
/// the discrete law `u[k] = b0 e[k] + b1 e[k-1] - a1 u[k-1]` (`e[-1] = u[-1] = 0`),
/// `v = u + feedforward(sp)`, the same law as `ctrl-core`'s `Lead`.
///
/// The coefficients are those of `C(z) = (b0 + b1 z^-1) / (1 + a1 z^-1)`, usually the
/// pre-warped Tustin map of a continuous lead ([`LeadLoopDesign::from_coeffs`] with
/// [`crate::tune::LeadDesign::discretize`]); they hold for one loop rate only.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct LeadLoopDesign {
    /// Weight of the present tracking error, volts per unit.
    pub b0: f64,
    /// Weight of the previous tracking error, volts per unit.
    pub b1: f64,
    /// Weight of the previous output (dimensionless; enters with a minus sign; `|a1| < 1`
    /// for a stable controller).
    pub a1: f64,
    /// Feedforward, or `None` to run on feedback alone.
    pub feedforward: Option<Feedforward>,
}

impl LeadLoopDesign {
    /// The loop with discretised lead coefficients (V per unit) and optional feedforward.
    pub fn from_coeffs(
        coeffs: &crate::analysis::LeadCoeffs,
        feedforward: Option<Feedforward>,
    ) -> Self {
        LeadLoopDesign {
            b0: coeffs.b0,
            b1: coeffs.b1,
            a1: coeffs.a1,
            feedforward,
        }
    }
}

/// Either loop form the firmware runs: the PD ([`LoopDesign`]) or the phase lead
/// ([`LeadLoopDesign`]).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(tag = "form", rename_all = "snake_case")]
pub enum AxisDesign {
    /// PD on error or on measurement.
    Pd(LoopDesign),
    /// Discrete phase lead.
    Lead(LeadLoopDesign),
}

impl AxisDesign {
    /// The feedforward of either form.
    pub fn feedforward(&self) -> Option<Feedforward> {
        match self {
            AxisDesign::Pd(d) => d.feedforward,
            AxisDesign::Lead(d) => d.feedforward,
        }
    }
}

impl From<LoopDesign> for AxisDesign {
    fn from(d: LoopDesign) -> Self {
        AxisDesign::Pd(d)
    }
}

impl From<LeadLoopDesign> for AxisDesign {
    fn from(d: LeadLoopDesign) -> Self {
        AxisDesign::Lead(d)
    }
}

/// The `f64` twin of `ctrl_core::stall::StallGuard`, in user units: `|tracking error| >
/// limit` for `ticks` consecutive ticks latches a fault and the loop's command is 0 from that
/// tick on; one tick with `|error| <= limit` resets the count; `ticks == 0` is treated as 1.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct IdealStallGuard {
    limit: f64,
    ticks: u32,
}

impl IdealStallGuard {
    /// A guard that never trips.
    pub const OFF: IdealStallGuard = IdealStallGuard {
        limit: f64::INFINITY,
        ticks: u32::MAX,
    };

    /// Limit in units (used as a magnitude) and consecutive ticks over it.
    pub fn new(limit_units: f64, ticks: u32) -> Self {
        IdealStallGuard {
            limit: limit_units.abs(),
            ticks: ticks.max(1),
        }
    }

    /// The same guard as a firmware one (its held limit in counts times `count_size`, its
    /// ticks), so both loops trip on the same errors.
    pub fn from_firmware(guard: &ctrl_core::stall::StallGuard, count_size: f64) -> Self {
        IdealStallGuard::new(
            guard.limit().to_num::<f64>() * count_size,
            u32::from(guard.ticks()),
        )
    }
}

/// The trapezoidal (or triangular) move of `distance` from rest to rest, sampled exactly.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MoveF64 {
    dir: f64,
    accel: f64,
    peak_speed: f64,
    accel_time_s: f64,
    cruise_time_s: f64,
    distance_abs: f64,
}

impl MoveF64 {
    /// A move of `distance` (signed, units) with `cruise_speed` (> 0, units/s) and `accel`
    /// (> 0, units/s^2). Triangular when the distance is too short to reach cruise speed.
    pub fn new(distance: f64, cruise_speed: f64, accel: f64) -> Self {
        let d = distance.abs();
        let peak_speed = cruise_speed.min((accel * d).sqrt());
        let accel_time_s = peak_speed / accel;
        let cruise_time_s = if peak_speed > 0.0 {
            ((d - peak_speed * peak_speed / accel) / peak_speed).max(0.0)
        } else {
            0.0
        };
        MoveF64 {
            dir: distance.signum(),
            accel,
            peak_speed,
            accel_time_s,
            cruise_time_s,
            distance_abs: d,
        }
    }

    /// Total duration, s.
    pub fn total_time_s(&self) -> f64 {
        2.0 * self.accel_time_s + self.cruise_time_s
    }

    /// Peak speed reached, units/s (>= 0).
    pub fn peak_speed(&self) -> f64 {
        self.peak_speed
    }

    /// The setpoint at time `t` s after the start.
    pub fn at(&self, t: f64) -> Setpoint {
        let (ta, tc, a, vp) = (
            self.accel_time_s,
            self.cruise_time_s,
            self.accel,
            self.peak_speed,
        );
        let (p, v, acc) = if t <= 0.0 {
            (0.0, 0.0, 0.0)
        } else if t < ta {
            (0.5 * a * t * t, a * t, a)
        } else if t < ta + tc {
            (0.5 * a * ta * ta + vp * (t - ta), vp, 0.0)
        } else if t < 2.0 * ta + tc {
            let r = 2.0 * ta + tc - t;
            (self.distance_abs - 0.5 * a * r * r, a * r, -a)
        } else {
            (self.distance_abs, 0.0, 0.0)
        };
        Setpoint {
            position: p * self.dir,
            speed: v * self.dir,
            accel: acc * self.dir,
        }
    }
}

/// 2^-32: an `I32F32`'s bits to its value (exact scaling; the bits' conversion to `f64`
/// rounds to nearest, ties to even, as `to_num::<f64>()` does).
const TWO_POW_M32: f64 = 1.0 / 4_294_967_296.0;

// One per run, read every tick: a box would add a pointer chase per tick to save bytes
// that do not matter here.
#[allow(clippy::large_enum_variant)]
#[derive(Debug, Clone)]
enum Reference {
    Step(f64),
    Move(MoveF64),
    /// `ctrl-core`'s profile (counts, ticks), scaled back to units: (profile, count size,
    /// rate).
    Core(ctrl_core::profile::Profile, f64, f64),
}

/// The `f64` loop ([`LoopDesign`]) running a [`Command`]: the reference against which the
/// fixed-point loop's quantization is judged.
///
/// Like `ctrl-core`'s profile, which advances one tick before it hands out a setpoint, tick
/// `k` follows the move's setpoint at time `(k + 1) / rate`.
///
/// The lead form's output is clamped at `±feedback_limit_volts` (no limit unless
/// [`IdealLoop::set_feedback_limit`] sets one) and the clamped value is what it remembers,
/// like `ctrl-core`'s `Lead`.
#[derive(Debug, Clone)]
pub struct IdealLoop {
    design: AxisDesign,
    reference: Reference,
    rate_hz: f64,
    tick_s: f64,
    k: u64,
    prev_measured: f64,
    prev_error: f64,
    prev_output: f64,
    feedback_limit_volts: f64,
    stall: IdealStallGuard,
    stall_over: u32,
    stall_tripped: bool,
}

impl IdealLoop {
    /// A PD loop at rest (measured position 0) about to run `command` at `rate_hz`.
    pub fn new(design: &LoopDesign, command: &Command, rate_hz: f64) -> Self {
        IdealLoop::with_design(&AxisDesign::Pd(*design), command, rate_hz)
    }

    /// Either loop form at rest (measured position 0) about to run `command` at `rate_hz`.
    pub fn with_design(design: &AxisDesign, command: &Command, rate_hz: f64) -> Self {
        let reference = match *command {
            Command::Step { distance } => Reference::Step(distance),
            Command::Move {
                distance,
                cruise_speed,
                accel,
            } => Reference::Move(MoveF64::new(distance, cruise_speed, accel)),
        };
        IdealLoop {
            design: *design,
            reference,
            rate_hz,
            tick_s: 1.0 / rate_hz,
            k: 0,
            prev_measured: 0.0,
            prev_error: 0.0,
            prev_output: 0.0,
            feedback_limit_volts: f64::INFINITY,
            stall: IdealStallGuard::OFF,
            stall_over: 0,
            stall_tripped: false,
        }
    }

    /// Sets the stall guard (off by default). Once it trips the command is 0 until the end
    /// of the run, as the firmware loop's duties are.
    pub fn set_stall_guard(&mut self, guard: IdealStallGuard) {
        self.stall = guard;
    }

    /// `true` once the stall guard has tripped (it latches).
    pub fn is_stalled(&self) -> bool {
        self.stall_tripped
    }

    /// Clamps the lead form's output at `±volts` (> 0; the firmware uses the supply), as
    /// `ctrl-core`'s `Lead` does. The PD form is not affected (its firmware output limit is
    /// reached only when the supply clips the command anyway).
    pub fn set_feedback_limit(&mut self, volts: f64) {
        self.feedback_limit_volts = volts.abs();
    }
}

impl IdealLoop {
    /// As [`IdealLoop::new`], but a move follows `ctrl-core`'s own profile (planned in
    /// whole ticks, in `I32F32` counts) scaled back to units, instead of the exact
    /// trapezoid. With it the f64 and fixed-point loops follow the same setpoints, so
    /// their difference is the arithmetic's quantization alone.
    pub fn on_firmware_profile(
        design: &LoopDesign,
        command: &Command,
        units: &FirmwareUnits,
    ) -> Result<Self, QuantizeError> {
        IdealLoop::with_design_on_firmware_profile(&AxisDesign::Pd(*design), command, units)
    }

    /// [`IdealLoop::on_firmware_profile`] for either loop form.
    pub fn with_design_on_firmware_profile(
        design: &AxisDesign,
        command: &Command,
        units: &FirmwareUnits,
    ) -> Result<Self, QuantizeError> {
        let mut lp = IdealLoop::with_design(design, command, units.rate_hz);
        if let Command::Move {
            distance,
            cruise_speed,
            accel,
        } = *command
        {
            let mv = quantize_move(distance, cruise_speed, accel, units)?;
            let mut profile = ctrl_core::profile::Profile::new();
            profile.start(mv).map_err(|e| QuantizeError {
                constant: "move",
                value: distance,
                valid: format!("a move the profile accepts ({e})"),
            })?;
            lp.reference = Reference::Core(profile, units.count_size, units.rate_hz);
        }
        Ok(lp)
    }
}

impl Controller for IdealLoop {
    #[inline]
    fn tick(&mut self, m: &Measurement) -> LoopOutput {
        let sp = match &mut self.reference {
            Reference::Step(d) => Setpoint {
                position: *d,
                speed: 0.0,
                accel: 0.0,
            },
            Reference::Move(mv) => mv.at((self.k + 1) as f64 * self.tick_s),
            Reference::Core(profile, c, f) => {
                let (c, f) = (*c, *f);
                let sp = profile.step();
                Setpoint {
                    position: sp.position.to_bits() as f64 * TWO_POW_M32 * c,
                    speed: sp.speed.to_bits() as f64 * TWO_POW_M32 * c * f,
                    accel: sp.accel.to_bits() as f64 * TWO_POW_M32 * c * f * f,
                }
            }
        };
        self.k += 1;
        let e = sp.position - m.position;
        let (fb, feedforward) = match &self.design {
            AxisDesign::Pd(pd) => {
                let d = match pd.derivative {
                    DerivativeForm::OnError => (e - self.prev_error) * self.rate_hz,
                    DerivativeForm::OnMeasurement => {
                        (self.prev_measured - m.position) * self.rate_hz
                    }
                };
                (pd.kp * e + pd.kd * d, &pd.feedforward)
            }
            AxisDesign::Lead(lead) => {
                let lim = self.feedback_limit_volts;
                let u = (lead.b0 * e + lead.b1 * self.prev_error - lead.a1 * self.prev_output)
                    .max(-lim)
                    .min(lim);
                self.prev_output = u;
                (u, &lead.feedforward)
            }
        };
        self.prev_error = e;
        self.prev_measured = m.position;
        if e.abs() > self.stall.limit {
            self.stall_over = self.stall_over.saturating_add(1);
        } else {
            self.stall_over = 0;
        }
        if self.stall_over >= self.stall.ticks {
            self.stall_tripped = true;
        }
        let ff = match feedforward {
            Some(f) => f.volts(&sp),
            None => 0.0,
        };
        LoopOutput {
            setpoint: sp,
            feedforward_volts: ff,
            feedback_volts: fb,
            command_volts: if self.stall_tripped { 0.0 } else { ff + fb },
        }
    }

    #[inline]
    fn stalled(&self) -> bool {
        self.stall_tripped
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Trapezoid kinematics (constant-acceleration formulas, from memory): with the rover's
    // 400 mm at 400 mm/s and 1200 mm/s^2, accel time 1/3 s, cruise 2/3 s, total 4/3 s.
    #[test]
    fn trapezoid_times_and_midpoint() {
        let m = MoveF64::new(400.0, 400.0, 1200.0);
        assert!((m.total_time_s() - 4.0 / 3.0).abs() < 1e-12);
        let mid = m.at(m.total_time_s() / 2.0);
        assert!((mid.position - 200.0).abs() < 1e-9);
        assert_eq!(mid.speed, 400.0);
        let end = m.at(2.0);
        assert_eq!((end.position, end.speed), (400.0, 0.0));
    }

    #[test]
    fn short_move_is_a_triangle() {
        let m = MoveF64::new(-30.0, 400.0, 1200.0);
        let vp = (1200.0f64 * 30.0).sqrt();
        assert!((m.peak_speed() - vp).abs() < 1e-12);
        let half = m.at(m.total_time_s() / 2.0);
        assert!((half.position + 15.0).abs() < 1e-9);
    }
}
