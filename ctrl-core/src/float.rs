//! The same loops in `f32`, for parts with an FPU and as the benchmark baseline.
//!
//! Units and sign conventions are those of the fixed-point types (counts, ticks, volts,
//! duty in `[-1, 1]`); gains are plain `f32` with the same meaning as the corresponding
//! [`Coeff`](crate::Coeff). Clamp policy: outputs are limited to their clamp, and a NaN
//! anywhere becomes 0 at the clamp (a NaN never reaches a duty). The profile, encoders,
//! stall guard and telemetry are shared with the fixed-point path: positions stay integers
//! (no drift) and only the tracking error (narrowed to `I16F16` first) is converted to
//! `f32`.

use fixed::types::{I16F16, I32F32};

use crate::clamp::narrow;
use crate::encoder::{EncoderState, Encoders};
use crate::pd::Derivative;
use crate::profile::Profile;
use crate::stall::{StallGuard, StallState};

/// `x` limited to `±lim` (`lim >= 0`); NaN becomes 0.
///
/// ```
/// use ctrl_core::float::clamp_sym;
/// assert_eq!(clamp_sym(3.0, 2.0), 2.0);
/// assert_eq!(clamp_sym(f32::NAN, 2.0), 0.0);
/// ```
#[inline]
pub fn clamp_sym(x: f32, lim: f32) -> f32 {
    if x > lim {
        lim
    } else if x < -lim {
        -lim
    } else if !x.is_nan() {
        x
    } else {
        0.0
    }
}

/// `I16F16` to `f32` (exact for |x| < 256, else rounded to 24 bits).
///
/// ```
/// use ctrl_core::float::to_f32;
/// assert_eq!(to_f32(fixed::types::I16F16::lit("-1.5")), -1.5);
/// ```
#[inline]
pub fn to_f32(x: I16F16) -> f32 {
    x.to_bits() as f32 * (1.0 / 65536.0)
}

/// `I32F32` narrowed to `I16F16` (saturating) then to `f32`.
///
/// ```
/// use ctrl_core::float::narrow_to_f32;
/// assert_eq!(narrow_to_f32(fixed::types::I32F32::lit("2.25")), 2.25);
/// ```
#[inline]
pub fn narrow_to_f32(x: I32F32) -> f32 {
    to_f32(narrow(x))
}

/// PD position loop in `f32`; see [`crate::pd::Pd`].
///
/// ```
/// use ctrl_core::{float::{Pd, PdState}, pd::Derivative};
/// let pd = Pd::new(0.5, 2.0, Derivative::OnError, 6.0);
/// let mut st = PdState::new();
/// // Hand check: 0.5 * 1 + 2 * (1 - 0) = 2.5 V.
/// assert_eq!(pd.update(&mut st, 1.0, 0.0), 2.5);
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Pd {
    /// Volts per count.
    pub kp: f32,
    /// Volts per (count/tick).
    pub kd_per_tick: f32,
    /// Derivative source.
    pub derivative: Derivative,
    /// Output clamp magnitude, volts.
    pub limit_volts: f32,
}

/// State of a [`Pd`]: previous error.
///
/// ```
/// use ctrl_core::float::PdState;
/// assert_eq!(PdState::new(), PdState::default());
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PdState {
    prev_error: f32,
}

impl PdState {
    /// Fresh state.
    ///
    /// ```
    /// let _st = ctrl_core::float::PdState::new();
    /// ```
    pub const fn new() -> PdState {
        PdState { prev_error: 0.0 }
    }
}

impl Pd {
    /// A PD loop (`limit_volts` used as a magnitude).
    ///
    /// ```
    /// use ctrl_core::{float::Pd, pd::Derivative};
    /// const PD: Pd = Pd::new(1.0, 0.0, Derivative::OnMeasurement, -3.0);
    /// assert_eq!(PD.limit_volts, 3.0);
    /// ```
    pub const fn new(kp: f32, kd_per_tick: f32, derivative: Derivative, limit_volts: f32) -> Pd {
        Pd {
            kp,
            kd_per_tick,
            derivative,
            limit_volts: if limit_volts < 0.0 {
                -limit_volts
            } else {
                limit_volts
            },
        }
    }

    /// One tick; see [`crate::pd::Pd::update`].
    ///
    /// ```
    /// use ctrl_core::{float::{Pd, PdState}, pd::Derivative};
    /// let pd = Pd::new(1.0, 3.0, Derivative::OnMeasurement, 12.0);
    /// assert_eq!(pd.update(&mut PdState::new(), 2.0, 0.5), 0.5);
    /// ```
    #[inline]
    pub fn update(&self, state: &mut PdState, error: f32, measured_speed: f32) -> f32 {
        let d = match self.derivative {
            Derivative::OnError => error - state.prev_error,
            Derivative::OnMeasurement => -measured_speed,
        };
        state.prev_error = error;
        clamp_sym(self.kp * error + self.kd_per_tick * d, self.limit_volts)
    }
}

/// Phase-lead loop in `f32`; see [`crate::lead::Lead`].
///
/// ```
/// use ctrl_core::float::{Lead, LeadState};
/// let lead = Lead::new(3.0, -2.0, -0.5, 10.0);
/// let mut st = LeadState::new();
/// // Same hand check as the fixed-point type: 3, 2.5, 2.25.
/// assert_eq!(lead.update(&mut st, 1.0), 3.0);
/// assert_eq!(lead.update(&mut st, 1.0), 2.5);
/// assert_eq!(lead.update(&mut st, 1.0), 2.25);
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Lead {
    /// `b0`, volts per count.
    pub b0: f32,
    /// `b1`, volts per count.
    pub b1: f32,
    /// `a1`, dimensionless.
    pub a1: f32,
    /// Output clamp magnitude, volts.
    pub limit_volts: f32,
}

/// State of a [`Lead`]: previous error and clamped output.
///
/// ```
/// use ctrl_core::float::LeadState;
/// assert_eq!(LeadState::new(), LeadState::default());
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LeadState {
    prev_error: f32,
    prev_output: f32,
}

impl LeadState {
    /// Fresh state.
    ///
    /// ```
    /// let _st = ctrl_core::float::LeadState::new();
    /// ```
    pub const fn new() -> LeadState {
        LeadState {
            prev_error: 0.0,
            prev_output: 0.0,
        }
    }
}

impl Lead {
    /// A lead loop (`limit_volts` used as a magnitude).
    ///
    /// ```
    /// const L: ctrl_core::float::Lead = ctrl_core::float::Lead::new(1.0, 0.0, 0.0, 6.0);
    /// assert_eq!(L.b0, 1.0);
    /// ```
    pub const fn new(b0: f32, b1: f32, a1: f32, limit_volts: f32) -> Lead {
        Lead {
            b0,
            b1,
            a1,
            limit_volts: if limit_volts < 0.0 {
                -limit_volts
            } else {
                limit_volts
            },
        }
    }

    /// One tick; see [`crate::lead::Lead::update`].
    ///
    /// ```
    /// use ctrl_core::float::{Lead, LeadState};
    /// assert_eq!(Lead::new(100.0, 0.0, 0.0, 6.0).update(&mut LeadState::new(), 1.0), 6.0);
    /// ```
    #[inline]
    pub fn update(&self, state: &mut LeadState, error: f32) -> f32 {
        let u = clamp_sym(
            self.b0 * error + self.b1 * state.prev_error - self.a1 * state.prev_output,
            self.limit_volts,
        );
        state.prev_error = error;
        state.prev_output = u;
        u
    }
}

/// PI speed loop in `f32` with the same conditional-integration anti-windup as
/// [`crate::pi::Pi`].
///
/// ```
/// use ctrl_core::float::{Pi, PiState};
/// let pi = Pi::new(2.0, 0.25, 3.0);
/// let mut st = PiState::new();
/// for want in [2.25, 2.5, 2.75, 3.0, 3.0] {
///     assert_eq!(pi.update(&mut st, 1.0), want);
/// }
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Pi {
    /// Volts per (count/tick).
    pub kp: f32,
    /// Volts per (count/tick) per tick.
    pub ki_per_tick: f32,
    /// Output and integral clamp magnitude, volts.
    pub limit_volts: f32,
}

/// State of a [`Pi`]: the integral, volts.
///
/// ```
/// use ctrl_core::float::PiState;
/// assert_eq!(PiState::new().integral(), 0.0);
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PiState {
    integral: f32,
}

impl PiState {
    /// Fresh state.
    ///
    /// ```
    /// let _st = ctrl_core::float::PiState::new();
    /// ```
    pub const fn new() -> PiState {
        PiState { integral: 0.0 }
    }

    /// The integral term, volts.
    ///
    /// ```
    /// assert_eq!(ctrl_core::float::PiState::new().integral(), 0.0);
    /// ```
    pub const fn integral(&self) -> f32 {
        self.integral
    }
}

impl Pi {
    /// A PI loop (`limit_volts` used as a magnitude).
    ///
    /// ```
    /// const PI: ctrl_core::float::Pi = ctrl_core::float::Pi::new(1.0, 0.1, 6.0);
    /// assert_eq!(PI.ki_per_tick, 0.1);
    /// ```
    pub const fn new(kp: f32, ki_per_tick: f32, limit_volts: f32) -> Pi {
        Pi {
            kp,
            ki_per_tick,
            limit_volts: if limit_volts < 0.0 {
                -limit_volts
            } else {
                limit_volts
            },
        }
    }

    /// One tick; see [`crate::pi::Pi::update`].
    ///
    /// ```
    /// use ctrl_core::float::{Pi, PiState};
    /// let pi = Pi::new(0.0, 1.0, 2.0);
    /// let mut st = PiState::new();
    /// for _ in 0..10 { pi.update(&mut st, 1.0); }
    /// assert_eq!(st.integral(), 2.0);
    /// ```
    #[inline]
    pub fn update(&self, state: &mut PiState, error: f32) -> f32 {
        let lim = self.limit_volts;
        let step = self.ki_per_tick * error;
        let candidate = clamp_sym(state.integral + step, lim);
        let raw = self.kp * error + candidate;
        let winding_up = (raw > lim && step > 0.0) || (raw < -lim && step < 0.0);
        state.integral = if winding_up {
            clamp_sym(state.integral, lim)
        } else {
            candidate
        };
        clamp_sym(raw, lim)
    }
}

/// Feedforward in `f32`; see [`crate::feedforward::Feedforward`] (no bias at zero speed).
///
/// ```
/// use ctrl_core::float::Feedforward;
/// let ff = Feedforward::new(1.0, 40.0, 0.75);
/// assert!((ff.volts(2.0, 0.0125) - 3.25).abs() < 1e-6);
/// assert_eq!(ff.volts(0.0, 0.0), 0.0);
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Feedforward {
    /// Volts per (count/tick).
    pub kv: f32,
    /// Volts per (count/tick²).
    pub ka: f32,
    /// Friction bias magnitude, volts.
    pub bias_volts: f32,
}

impl Feedforward {
    /// A feedforward (`bias_volts` used as a magnitude).
    ///
    /// ```
    /// const FF: ctrl_core::float::Feedforward = ctrl_core::float::Feedforward::new(1.0, 0.0, -0.7);
    /// assert_eq!(FF.bias_volts, 0.7);
    /// ```
    pub const fn new(kv: f32, ka: f32, bias_volts: f32) -> Feedforward {
        Feedforward {
            kv,
            ka,
            bias_volts: if bias_volts < 0.0 {
                -bias_volts
            } else {
                bias_volts
            },
        }
    }

    /// Feedforward volts for a setpoint speed (counts/tick) and accel (counts/tick²).
    ///
    /// ```
    /// let ff = ctrl_core::float::Feedforward::new(1.0, 0.0, 0.75);
    /// assert_eq!(ff.volts(-1.0, 0.0), -1.75);
    /// ```
    #[inline]
    pub fn volts(&self, speed: f32, accel: f32) -> f32 {
        let bias = if speed > 0.0 {
            self.bias_volts
        } else if speed < 0.0 {
            -self.bias_volts
        } else {
            0.0
        };
        self.kv * speed + self.ka * accel + bias
    }
}

/// Supply compensation in `f32`; see [`crate::supply::Supply`]. The reciprocal is computed
/// (one division) in [`set_battery`](SupplyState::set_battery) only.
///
/// ```
/// use ctrl_core::float::SupplyState;
/// let mut st = SupplyState::new(6.4);
/// assert_eq!(st.duty(3.0), 0.0); // no reading yet
/// st.set_battery(8.0);
/// assert_eq!(st.duty(3.0), 0.375);
/// assert!(!st.is_low());
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SupplyState {
    low_volts: f32,
    battery_volts: f32,
    reciprocal: f32,
    low: bool,
}

impl SupplyState {
    /// No reading yet (duty 0, low flag set), with the low-supply threshold in volts.
    ///
    /// ```
    /// assert!(ctrl_core::float::SupplyState::new(6.4).is_low());
    /// ```
    pub const fn new(low_volts: f32) -> SupplyState {
        SupplyState {
            low_volts,
            battery_volts: 0.0,
            reciprocal: 0.0,
            low: true,
        }
    }

    /// Takes a battery reading; a reading that is not a positive finite number gives duty 0.
    ///
    /// ```
    /// let mut st = ctrl_core::float::SupplyState::new(6.4);
    /// st.set_battery(f32::NAN);
    /// assert_eq!(st.duty(1.0), 0.0);
    /// ```
    pub fn set_battery(&mut self, volts: f32) {
        self.battery_volts = volts;
        let ok = volts > 1.0 / 16384.0 && volts < f32::INFINITY;
        self.reciprocal = if ok { 1.0 / volts } else { 0.0 };
        self.low = !ok || volts < self.low_volts;
    }

    /// Last battery reading, volts.
    ///
    /// ```
    /// let mut st = ctrl_core::float::SupplyState::new(6.4);
    /// st.set_battery(7.0);
    /// assert_eq!(st.battery_volts(), 7.0);
    /// ```
    pub const fn battery_volts(&self) -> f32 {
        self.battery_volts
    }

    /// Low-supply flag.
    ///
    /// ```
    /// let mut st = ctrl_core::float::SupplyState::new(6.4);
    /// st.set_battery(6.0);
    /// assert!(st.is_low());
    /// ```
    pub const fn is_low(&self) -> bool {
        self.low
    }

    /// Duty for `volts`, clamped to `[-1, 1]`.
    ///
    /// ```
    /// let mut st = ctrl_core::float::SupplyState::new(6.4);
    /// st.set_battery(8.0);
    /// assert_eq!(st.duty(-20.0), -1.0);
    /// ```
    #[inline]
    pub fn duty(&self, volts: f32) -> f32 {
        clamp_sym(volts * self.reciprocal, 1.0)
    }
}

/// Wheel mix in `f32` with the rotation-priority rule of [`crate::mix::mix`]; returns
/// `[left, right]`.
///
/// ```
/// use ctrl_core::float::mix;
/// assert_eq!(mix(7.0, 2.0, 8.0), [4.0, 8.0]);
/// ```
#[inline]
pub fn mix(forward: f32, rotation: f32, limit_volts: f32) -> [f32; 2] {
    let lim = abs_f32(clamp_sym(limit_volts, f32::MAX));
    let r = clamp_sym(rotation, lim);
    let room = lim - abs_f32(r);
    let f = clamp_sym(forward, room);
    [f - r, f + r]
}

/// `|x|` without `std`.
#[inline]
fn abs_f32(x: f32) -> f32 {
    if x < 0.0 {
        -x
    } else {
        x
    }
}

/// The `f32` feedback law of one axis.
///
/// ```
/// use ctrl_core::{float::{Feedback, Pd}, pd::Derivative};
/// let fb = Feedback::Pd(Pd::new(1.0, 0.0, Derivative::OnError, 6.0));
/// assert!(matches!(fb, Feedback::Pd(_)));
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Feedback {
    /// PD position loop.
    Pd(Pd),
    /// Phase-lead position loop.
    Lead(Lead),
}

/// One `f32` axis: feedforward, feedback, stall guard; see [`crate::drive::Axis`].
///
/// ```
/// use ctrl_core::{float::{Axis, AxisState, Feedback, Feedforward, Pd}, pd::Derivative, stall::StallGuard};
/// use fixed::types::{I16F16, I32F32};
/// let a = Axis::new(Feedforward::new(0.0, 0.0, 0.0),
///     Feedback::Pd(Pd::new(0.5, 0.0, Derivative::OnError, 6.0)), StallGuard::OFF);
/// let mut st = AxisState::new();
/// assert_eq!(a.update(&mut st, I32F32::from_num(-4), 0.0), 2.0);
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Axis {
    /// Feedforward.
    pub feedforward: Feedforward,
    /// Feedback law.
    pub feedback: Feedback,
    /// Stall guard (shared with the fixed-point path).
    pub stall: StallGuard,
}

/// State of an `f32` [`Axis`].
///
/// ```
/// let st = ctrl_core::float::AxisState::new();
/// assert!(!st.is_stalled());
/// ```
#[derive(Clone, Debug, PartialEq)]
pub struct AxisState {
    /// The profile (the fixed-point one: integer positions).
    pub profile: Profile,
    pd: PdState,
    lead: LeadState,
    stall: StallState,
}

impl Default for AxisState {
    fn default() -> Self {
        AxisState::new()
    }
}

impl AxisState {
    /// At rest at 0.
    ///
    /// ```
    /// let _st = ctrl_core::float::AxisState::new();
    /// ```
    pub const fn new() -> AxisState {
        AxisState {
            profile: Profile::new(),
            pd: PdState::new(),
            lead: LeadState::new(),
            stall: StallState::new(),
        }
    }

    /// `true` while the stall guard is latched.
    ///
    /// ```
    /// assert!(!ctrl_core::float::AxisState::new().is_stalled());
    /// ```
    pub const fn is_stalled(&self) -> bool {
        self.stall.is_tripped()
    }

    /// Clears a stall fault (the caller restarts the profile).
    ///
    /// ```
    /// let mut st = ctrl_core::float::AxisState::new();
    /// st.clear_fault();
    /// ```
    pub fn clear_fault(&mut self) {
        self.stall.clear();
        self.pd = PdState::new();
        self.lead = LeadState::new();
    }
}

impl Axis {
    /// An axis from its parts.
    ///
    /// ```
    /// use ctrl_core::{float::{Axis, Feedback, Feedforward, Lead}, stall::StallGuard};
    /// const A: Axis = Axis::new(Feedforward::new(1.0, 0.0, 0.7),
    ///     Feedback::Lead(Lead::new(1.0, 0.0, 0.0, 6.0)), StallGuard::OFF);
    /// assert_eq!(A.feedforward.kv, 1.0);
    /// ```
    pub const fn new(feedforward: Feedforward, feedback: Feedback, stall: StallGuard) -> Axis {
        Axis {
            feedforward,
            feedback,
            stall,
        }
    }

    /// One tick; `measured` in counts, `measured_speed` in counts/tick. Returns volts.
    ///
    /// ```
    /// use ctrl_core::{float::{Axis, AxisState, Feedback, Feedforward, Lead}, stall::StallGuard};
    /// use fixed::types::{I16F16, I32F32};
    /// let a = Axis::new(Feedforward::new(0.0, 0.0, 0.0),
    ///     Feedback::Lead(Lead::new(2.0, 0.0, 0.0, 6.0)), StallGuard::new(I16F16::ONE, 1));
    /// let mut st = AxisState::new();
    /// assert_eq!(a.update(&mut st, I32F32::from_num(1.5), 0.0), -3.0);
    /// assert!(st.is_stalled());
    /// ```
    #[inline]
    pub fn update(&self, state: &mut AxisState, measured: I32F32, measured_speed: f32) -> f32 {
        let sp = state.profile.step();
        let error_fx = narrow(sp.position.saturating_sub(measured));
        self.stall.update(&mut state.stall, error_fx);
        let error = to_f32(error_fx);
        let ff = self
            .feedforward
            .volts(narrow_to_f32(sp.speed), narrow_to_f32(sp.accel));
        let fb = match &self.feedback {
            Feedback::Pd(pd) => pd.update(&mut state.pd, error, measured_speed),
            Feedback::Lead(lead) => lead.update(&mut state.lead, error),
        };
        ff + fb
    }
}

/// The `f32` two-axis drive; same pipeline as [`crate::drive::TwoAxisDrive`].
///
/// ```
/// use ctrl_core::{encoder::Encoders, float::{Axis, DriveState, Feedback, Feedforward, Pd, TwoAxisDrive},
///     pd::Derivative, stall::StallGuard};
/// let axis = Axis::new(Feedforward::new(0.0, 0.0, 0.0),
///     Feedback::Pd(Pd::new(1.0, 0.0, Derivative::OnError, 8.0)), StallGuard::OFF);
/// let d = TwoAxisDrive::new(Encoders::new(false, false), axis, axis, 8.0);
/// let mut st = DriveState::new(6.4);
/// st.supply.set_battery(8.0);
/// d.tick(&mut st, 0, 0);
/// assert_eq!(d.tick(&mut st, 2, 65534), [-0.25, 0.25]);
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TwoAxisDrive {
    /// Encoder directions.
    pub encoders: Encoders,
    /// Forward axis.
    pub forward: Axis,
    /// Rotation axis.
    pub rotation: Axis,
    /// Wheel voltage cap, volts.
    pub max_volts: f32,
}

/// State of the `f32` drive.
///
/// ```
/// let st = ctrl_core::float::DriveState::new(6.4);
/// assert!(st.supply.is_low());
/// ```
#[derive(Clone, Debug, PartialEq)]
pub struct DriveState {
    /// Encoder positions.
    pub encoders: EncoderState,
    /// Forward axis.
    pub forward: AxisState,
    /// Rotation axis.
    pub rotation: AxisState,
    /// Supply reading.
    pub supply: SupplyState,
}

impl DriveState {
    /// At rest, no battery reading; `low_volts` is the low-supply threshold.
    ///
    /// ```
    /// let _st = ctrl_core::float::DriveState::new(6.4);
    /// ```
    pub const fn new(low_volts: f32) -> DriveState {
        DriveState {
            encoders: EncoderState::new(),
            forward: AxisState::new(),
            rotation: AxisState::new(),
            supply: SupplyState::new(low_volts),
        }
    }
}

impl TwoAxisDrive {
    /// The drive from its parts.
    ///
    /// ```
    /// use ctrl_core::{encoder::Encoders, float::{Axis, Feedback, Feedforward, Lead, TwoAxisDrive}, stall::StallGuard};
    /// let axis = Axis::new(Feedforward::new(0.0, 0.0, 0.0), Feedback::Lead(Lead::new(1.0, 0.0, 0.0, 6.0)), StallGuard::OFF);
    /// const fn make(a: Axis) -> TwoAxisDrive { TwoAxisDrive::new(Encoders::new(false, true), a, a, 6.0) }
    /// assert_eq!(make(axis).max_volts, 6.0);
    /// ```
    pub const fn new(encoders: Encoders, forward: Axis, rotation: Axis, max_volts: f32) -> Self {
        TwoAxisDrive {
            encoders,
            forward,
            rotation,
            max_volts: if max_volts < 0.0 {
                -max_volts
            } else {
                max_volts
            },
        }
    }

    /// One tick from raw encoder counters; returns duty `[left, right]` in `[-1, 1]`, zero
    /// while either stall guard is latched.
    ///
    /// ```
    /// use ctrl_core::{encoder::Encoders, float::{Axis, DriveState, Feedback, Feedforward, Pd, TwoAxisDrive},
    ///     pd::Derivative, stall::StallGuard};
    /// let axis = Axis::new(Feedforward::new(0.0, 0.0, 0.0),
    ///     Feedback::Pd(Pd::new(1.0, 0.0, Derivative::OnError, 8.0)), StallGuard::OFF);
    /// let d = TwoAxisDrive::new(Encoders::new(false, false), axis, axis, 8.0);
    /// let mut st = DriveState::new(6.4);
    /// assert_eq!(d.tick(&mut st, 0, 0), [0.0, 0.0]); // no battery reading yet
    /// ```
    #[inline]
    pub fn tick(&self, state: &mut DriveState, left_raw: u16, right_raw: u16) -> [f32; 2] {
        let d = self
            .encoders
            .update(&mut state.encoders, left_raw, right_raw);
        let fv = self.forward.update(
            &mut state.forward,
            state.encoders.forward(),
            to_f32(d.forward()),
        );
        let rv = self.rotation.update(
            &mut state.rotation,
            state.encoders.rotation(),
            to_f32(d.rotation()),
        );
        let battery = state.supply.battery_volts();
        let limit = if battery < self.max_volts {
            battery
        } else {
            self.max_volts
        };
        let [l, r] = mix(fv, rv, limit);
        if state.forward.is_stalled() || state.rotation.is_stalled() {
            [0.0, 0.0]
        } else {
            [state.supply.duty(l), state.supply.duty(r)]
        }
    }
}
