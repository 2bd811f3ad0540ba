//! Discrete first-order phase-lead loop.

use fixed::types::I16F16;

use crate::clamp::{abs_sat, clamp_sym};
use crate::Coeff;

/// Phase-lead loop `u[k] = clamp(b0 e[k] + b1 e[k-1] - a1 u[k-1], ±limit_volts)`.
///
/// This is the difference equation of `C(z) = (b0 + b1 z^-1) / (1 + a1 z^-1)`; the design
/// crate computes `b0`, `b1` (volts per count) and `a1` (dimensionless, `|a1| < 1` for a
/// stable lead) from a continuous lead, for example by the Tustin (bilinear) map. It is a
/// PD with a first-order low-pass on the derivative.
///
/// Overflow policy: products and sums saturate at the `I16F16` range, the output is clamped
/// to `±|limit_volts|`, and the **clamped** output is what is stored as `u[k-1]`, so the
/// state can never run away. Quantization: each tick adds at most 1.5 LSB (three products at
/// 0.5 LSB each); the error is fed back through `a1`, so against an exact `f64` model with
/// the same coefficients the output stays within `1.5 / (1 - |a1|)` LSB (`2^-16` V) while no
/// `I16F16` saturation occurs (clamping is 1-Lipschitz and does not add to this).
///
/// ```
/// use ctrl_core::{Coeff, lead::{Lead, LeadState}};
/// use fixed::types::I16F16;
///
/// // b0 = 3, b1 = -2, a1 = -0.5
/// let lead = Lead::new(Coeff::from_bits(3, 0), Coeff::from_bits(-2, 0), Coeff::from_bits(-1, 1), I16F16::lit("10"));
/// let mut st = LeadState::new();
/// // Hand check, unit step e = 1:
/// // u0 = 3*1 + (-2)*0 - (-0.5)*0 = 3
/// // u1 = 3*1 + (-2)*1 + 0.5*3    = 2.5
/// // u2 = 3 - 2 + 0.5*2.5         = 2.25
/// let e = I16F16::ONE;
/// assert_eq!(lead.update(&mut st, e), I16F16::from_num(3));
/// assert_eq!(lead.update(&mut st, e), I16F16::from_num(2.5));
/// assert_eq!(lead.update(&mut st, e), I16F16::from_num(2.25));
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Lead {
    b0: Coeff,
    b1: Coeff,
    a1: Coeff,
    limit_volts: I16F16,
}

/// State of a [`Lead`] loop: previous error and previous (clamped) output.
///
/// ```
/// use ctrl_core::lead::LeadState;
/// assert_eq!(LeadState::new(), LeadState::default());
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LeadState {
    prev_error: I16F16,
    prev_output: I16F16,
}

impl LeadState {
    /// Fresh state (zero history).
    ///
    /// ```
    /// use ctrl_core::lead::LeadState;
    /// let _st = LeadState::new();
    /// ```
    pub const fn new() -> LeadState {
        LeadState {
            prev_error: I16F16::ZERO,
            prev_output: I16F16::ZERO,
        }
    }

    /// Previous output `u[k-1]` in volts (already clamped).
    ///
    /// ```
    /// use ctrl_core::lead::LeadState;
    /// assert_eq!(LeadState::new().prev_output(), fixed::types::I16F16::ZERO);
    /// ```
    pub const fn prev_output(&self) -> I16F16 {
        self.prev_output
    }
}

impl Lead {
    /// A lead loop from its difference-equation coefficients; `limit_volts` is used as a
    /// magnitude.
    ///
    /// ```
    /// use ctrl_core::{Coeff, lead::Lead};
    /// use fixed::types::I16F16;
    /// const LEAD: Lead = Lead::new(Coeff::ONE, Coeff::ZERO, Coeff::ZERO, I16F16::lit("6"));
    /// assert_eq!(LEAD.limit_volts(), I16F16::lit("6"));
    /// ```
    pub const fn new(b0: Coeff, b1: Coeff, a1: Coeff, limit_volts: I16F16) -> Lead {
        Lead {
            b0,
            b1,
            a1,
            limit_volts: abs_sat(limit_volts),
        }
    }

    /// The coefficients `[b0, b1, a1]`.
    ///
    /// ```
    /// use ctrl_core::{Coeff, lead::Lead};
    /// use fixed::types::I16F16;
    /// let l = Lead::new(Coeff::ONE, Coeff::ZERO, Coeff::ZERO, I16F16::ONE);
    /// assert_eq!(l.coefficients(), [Coeff::ONE, Coeff::ZERO, Coeff::ZERO]);
    /// ```
    pub const fn coefficients(&self) -> [Coeff; 3] {
        [self.b0, self.b1, self.a1]
    }

    /// Output clamp magnitude, volts.
    ///
    /// ```
    /// use ctrl_core::{Coeff, lead::Lead};
    /// use fixed::types::I16F16;
    /// let l = Lead::new(Coeff::ONE, Coeff::ZERO, Coeff::ZERO, I16F16::ONE);
    /// assert_eq!(l.limit_volts(), I16F16::ONE);
    /// ```
    pub const fn limit_volts(&self) -> I16F16 {
        self.limit_volts
    }

    /// One tick with tracking error `error` (counts); returns volts in `±limit_volts`.
    ///
    /// ```
    /// use ctrl_core::{Coeff, lead::{Lead, LeadState}};
    /// use fixed::types::I16F16;
    /// let l = Lead::new(Coeff::from_bits(100, 0), Coeff::ZERO, Coeff::ZERO, I16F16::lit("6"));
    /// let mut st = LeadState::new();
    /// assert_eq!(l.update(&mut st, I16F16::ONE), I16F16::lit("6"));
    /// assert_eq!(st.prev_output(), I16F16::lit("6"));
    /// ```
    #[inline(always)]
    pub fn update(&self, state: &mut LeadState, error: I16F16) -> I16F16 {
        let u = self
            .b0
            .saturating_mul(error)
            .saturating_add(self.b1.saturating_mul(state.prev_error))
            .saturating_sub(self.a1.saturating_mul(state.prev_output));
        let u = clamp_sym(u, self.limit_volts);
        state.prev_error = error;
        state.prev_output = u;
        u
    }
}
