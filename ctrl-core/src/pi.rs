//! PI speed loop with anti-windup.

use fixed::types::I16F16;

use crate::clamp::{abs_sat, clamp_sym};
use crate::Coeff;

/// PI speed loop: `u = clamp(kp * e + I, ±limit_volts)`, `I += ki_per_tick * e`.
///
/// * `e`: speed error (setpoint - measured) in counts/tick, [`I16F16`].
/// * `kp`: volts per (count/tick). `ki_per_tick`: volts per (count/tick) per tick, that is
///   the continuous integral gain divided by the loop rate (done once on the host).
///
/// Anti-windup, by conditional integration (clamping):
/// 1. the candidate integral `I + ki_per_tick * e` is saturated and then clamped to
///    `±limit_volts` (the integral alone can never ask for more than the clamp);
/// 2. if the unclamped output `kp * e + I_candidate` is beyond `+limit_volts` and the
///    integration step is positive (it would push further out), the step is discarded and
///    `I` keeps its old value; the same for the negative side. Otherwise `I` takes the
///    candidate.
///
/// Overflow policy: every product and sum saturates at the `I16F16` range; the output is
/// clamped to `±|limit_volts|`. Quantization: each product is rounded to 0.5 LSB, so without
/// saturation the integral drifts from an exact `f64` model by at most 0.5 LSB per tick and
/// the output after `n` ticks is within `0.5 (n + 1)` LSB (`2^-16` V).
///
/// ```
/// use ctrl_core::{Coeff, pi::{Pi, PiState}};
/// use fixed::types::I16F16;
///
/// let pi = Pi::new(Coeff::from_bits(2, 0), Coeff::from_bits(1, 2), I16F16::lit("3"));
/// let mut st = PiState::new();
/// let e = I16F16::ONE;
/// // Hand check (kp = 2, ki = 0.25, limit 3):
/// // tick 1: I = 0.25, u = 2 + 0.25 = 2.25
/// // tick 2: I = 0.5,  u = 2.5
/// // tick 3: I = 0.75, u = 2.75
/// // tick 4: I = 1.0,  u = 3.0 (exactly at the limit: accepted)
/// // tick 5: candidate I = 1.25 gives 3.25 > 3 with a positive step: I stays 1.0, u = 3
/// for want in [2.25, 2.5, 2.75, 3.0, 3.0] {
///     assert_eq!(pi.update(&mut st, e), I16F16::from_num(want));
/// }
/// assert_eq!(st.integral(), I16F16::ONE);
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Pi {
    kp: Coeff,
    ki_per_tick: Coeff,
    limit_volts: I16F16,
}

/// State of a [`Pi`] loop: the integral, volts, always within `±limit_volts`.
///
/// ```
/// use ctrl_core::pi::PiState;
/// assert_eq!(PiState::new(), PiState::default());
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PiState {
    integral: I16F16,
}

impl PiState {
    /// Fresh state (integral 0).
    ///
    /// ```
    /// use ctrl_core::pi::PiState;
    /// let _st = PiState::new();
    /// ```
    pub const fn new() -> PiState {
        PiState {
            integral: I16F16::ZERO,
        }
    }

    /// The integral term, volts.
    ///
    /// ```
    /// use ctrl_core::pi::PiState;
    /// assert_eq!(PiState::new().integral(), fixed::types::I16F16::ZERO);
    /// ```
    pub const fn integral(&self) -> I16F16 {
        self.integral
    }

    /// Presets the integral (for a bumpless start); it is clamped by the next update.
    ///
    /// ```
    /// use ctrl_core::pi::PiState;
    /// use fixed::types::I16F16;
    /// let mut st = PiState::new();
    /// st.set_integral(I16F16::ONE);
    /// assert_eq!(st.integral(), I16F16::ONE);
    /// ```
    pub fn set_integral(&mut self, volts: I16F16) {
        self.integral = volts;
    }
}

impl Pi {
    /// A PI loop; `limit_volts` is used as a magnitude.
    ///
    /// ```
    /// use ctrl_core::{Coeff, pi::Pi};
    /// use fixed::types::I16F16;
    /// static PI: Pi = Pi::new(Coeff::ONE, Coeff::from_bits(1, 4), I16F16::lit("6"));
    /// assert_eq!(PI.limit_volts(), I16F16::lit("6"));
    /// ```
    pub const fn new(kp: Coeff, ki_per_tick: Coeff, limit_volts: I16F16) -> Pi {
        Pi {
            kp,
            ki_per_tick,
            limit_volts: abs_sat(limit_volts),
        }
    }

    /// The gains `[kp, ki_per_tick]`.
    ///
    /// ```
    /// use ctrl_core::{Coeff, pi::Pi};
    /// use fixed::types::I16F16;
    /// let pi = Pi::new(Coeff::ONE, Coeff::ZERO, I16F16::ONE);
    /// assert_eq!(pi.gains(), [Coeff::ONE, Coeff::ZERO]);
    /// ```
    pub const fn gains(&self) -> [Coeff; 2] {
        [self.kp, self.ki_per_tick]
    }

    /// Output clamp magnitude, volts.
    ///
    /// ```
    /// use ctrl_core::{Coeff, pi::Pi};
    /// use fixed::types::I16F16;
    /// assert_eq!(Pi::new(Coeff::ONE, Coeff::ZERO, I16F16::ONE).limit_volts(), I16F16::ONE);
    /// ```
    pub const fn limit_volts(&self) -> I16F16 {
        self.limit_volts
    }

    /// One tick with speed error `error` (counts/tick); returns volts in `±limit_volts`.
    ///
    /// ```
    /// use ctrl_core::{Coeff, pi::{Pi, PiState}};
    /// use fixed::types::I16F16;
    /// let pi = Pi::new(Coeff::ZERO, Coeff::ONE, I16F16::lit("2"));
    /// let mut st = PiState::new();
    /// for _ in 0..10 {
    ///     pi.update(&mut st, I16F16::ONE);
    /// }
    /// // The integral stops at the clamp instead of winding up to 10.
    /// assert_eq!(st.integral(), I16F16::lit("2"));
    /// // So one tick of negative error brings the output down at once.
    /// assert_eq!(pi.update(&mut st, -I16F16::ONE), I16F16::ONE);
    /// ```
    #[inline]
    pub fn update(&self, state: &mut PiState, error: I16F16) -> I16F16 {
        let step = self.ki_per_tick.saturating_mul(error);
        let candidate = clamp_sym(state.integral.saturating_add(step), self.limit_volts);
        let raw = self.kp.saturating_mul(error).saturating_add(candidate);
        let lim = self.limit_volts;
        let winding_up = (raw.to_bits() > lim.to_bits() && step.to_bits() > 0)
            || (raw.to_bits() < -lim.to_bits() && step.to_bits() < 0);
        if !winding_up {
            state.integral = candidate;
        } else {
            // Keep the old integral, but inside the (possibly changed) clamp.
            state.integral = clamp_sym(state.integral, lim);
        }
        clamp_sym(raw, lim)
    }
}
