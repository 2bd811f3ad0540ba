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
#[derive(Debug, Clone)]
pub struct IdealLoop {
    design: LoopDesign,
    reference: Reference,
    rate_hz: f64,
    tick_s: f64,
    k: u64,
    prev_measured: f64,
    prev_error: f64,
}

impl IdealLoop {
    /// A loop at rest (measured position 0) about to run `command` at `rate_hz`.
    pub fn new(design: &LoopDesign, command: &Command, rate_hz: f64) -> Self {
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
        }
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
        let mut lp = IdealLoop::new(design, command, units.rate_hz);
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
                    position: sp.position.to_num::<f64>() * c,
                    speed: sp.speed.to_num::<f64>() * c * f,
                    accel: sp.accel.to_num::<f64>() * c * f * f,
                }
            }
        };
        self.k += 1;
        let e = sp.position - m.position;
        let d = match self.design.derivative {
            DerivativeForm::OnError => (e - self.prev_error) * self.rate_hz,
            DerivativeForm::OnMeasurement => (self.prev_measured - m.position) * self.rate_hz,
        };
        self.prev_error = e;
        self.prev_measured = m.position;
        let fb = self.design.kp * e + self.design.kd * d;
        let ff = match &self.design.feedforward {
            Some(f) => f.volts(&sp),
            None => 0.0,
        };
        LoopOutput {
            setpoint: sp,
            feedforward_volts: ff,
            feedback_volts: fb,
            command_volts: ff + fb,
        }
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
