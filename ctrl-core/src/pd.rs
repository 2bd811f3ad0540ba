//! PD position loop.

use fixed::types::I16F16;

use crate::clamp::{abs_sat, clamp_sym};
use crate::Coeff;

/// What the derivative term differentiates.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Derivative {
    /// `d = e[k] - e[k-1]`: reacts to setpoint changes too (with feedforward carrying the
    /// setpoint speed, this damps the speed error).
    OnError,
    /// `d = -(measured speed)`: no kick when the setpoint jumps.
    OnMeasurement,
}

/// PD position loop: `u = clamp(kp * e + kd_per_tick * d, ±limit_volts)`.
///
/// * `e`: tracking error (setpoint - measured) in counts, [`I16F16`].
/// * `kp`: volts per count. `kd_per_tick`: volts per (count/tick), that is the continuous
///   derivative gain in V·s/count times the loop rate, so no division happens per tick.
/// * `d`: per [`Derivative`], in counts/tick.
///
/// Overflow policy: each product and the sum saturate at the `I16F16` range, then the
/// output is clamped to `±|limit_volts|`. Each product is rounded to 0.5 LSB
/// ([`Coeff::saturating_mul`]), so without saturation the output is within **1 LSB**
/// (`2^-16` V) of the exact `f64` result with the same coefficients.
///
/// ```
/// use ctrl_core::{Coeff, pd::{Derivative, Pd, PdState}};
/// use fixed::types::I16F16;
///
/// static LOOP: Pd = Pd::new(
///     Coeff::from_bits(1, 1),  // kp = 0.5 V/count
///     Coeff::from_bits(2, 0),  // kd_per_tick = 2 V per count/tick
///     Derivative::OnError,
///     I16F16::lit("6"),
/// );
/// let mut st = PdState::new();
/// // Hand check: e = 1, previous e = 0: u = 0.5 * 1 + 2 * (1 - 0) = 2.5 V.
/// let u = LOOP.update(&mut st, I16F16::from_num(1), I16F16::ZERO);
/// assert_eq!(u, I16F16::from_num(2.5));
/// // e = 20: 0.5 * 20 + 2 * 19 = 48 V, clamped to 6 V.
/// assert_eq!(LOOP.update(&mut st, I16F16::from_num(20), I16F16::ZERO), I16F16::from_num(6));
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Pd {
    kp: Coeff,
    kd_per_tick: Coeff,
    derivative: Derivative,
    limit_volts: I16F16,
}

/// State of a [`Pd`] loop: the previous error (used by [`Derivative::OnError`]).
///
/// ```
/// use ctrl_core::pd::PdState;
/// let st = PdState::new();
/// assert_eq!(st, PdState::default());
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PdState {
    prev_error: I16F16,
}

impl PdState {
    /// Fresh state (previous error 0).
    ///
    /// ```
    /// use ctrl_core::pd::PdState;
    /// let _st = PdState::new();
    /// ```
    pub const fn new() -> PdState {
        PdState {
            prev_error: I16F16::ZERO,
        }
    }

    /// Sets the stored previous error, so the next [`Pd::update`] with the same error has no
    /// derivative kick.
    ///
    /// ```
    /// use ctrl_core::{Coeff, pd::{Derivative, Pd, PdState}};
    /// use fixed::types::I16F16;
    /// let pd = Pd::new(Coeff::ZERO, Coeff::ONE, Derivative::OnError, I16F16::lit("10"));
    /// let mut st = PdState::new();
    /// st.reset(I16F16::from_num(3));
    /// assert_eq!(pd.update(&mut st, I16F16::from_num(3), I16F16::ZERO), I16F16::ZERO);
    /// ```
    pub fn reset(&mut self, error: I16F16) {
        self.prev_error = error;
    }
}

impl Pd {
    /// A PD loop. `limit_volts` is used as a magnitude (its sign is ignored).
    ///
    /// ```
    /// use ctrl_core::{Coeff, pd::{Derivative, Pd}};
    /// use fixed::types::I16F16;
    /// const PD: Pd = Pd::new(Coeff::ONE, Coeff::ZERO, Derivative::OnMeasurement, I16F16::lit("-5"));
    /// assert_eq!(PD.limit_volts(), I16F16::lit("5"));
    /// ```
    pub const fn new(
        kp: Coeff,
        kd_per_tick: Coeff,
        derivative: Derivative,
        limit_volts: I16F16,
    ) -> Pd {
        Pd {
            kp,
            kd_per_tick,
            derivative,
            limit_volts: abs_sat(limit_volts),
        }
    }

    /// Proportional gain, volts per count.
    ///
    /// ```
    /// use ctrl_core::{Coeff, pd::{Derivative, Pd}};
    /// use fixed::types::I16F16;
    /// let pd = Pd::new(Coeff::ONE, Coeff::ZERO, Derivative::OnError, I16F16::ONE);
    /// assert_eq!(pd.kp(), Coeff::ONE);
    /// ```
    pub const fn kp(&self) -> Coeff {
        self.kp
    }

    /// Derivative gain, volts per (count/tick).
    ///
    /// ```
    /// use ctrl_core::{Coeff, pd::{Derivative, Pd}};
    /// use fixed::types::I16F16;
    /// let pd = Pd::new(Coeff::ONE, Coeff::ZERO, Derivative::OnError, I16F16::ONE);
    /// assert_eq!(pd.kd_per_tick(), Coeff::ZERO);
    /// ```
    pub const fn kd_per_tick(&self) -> Coeff {
        self.kd_per_tick
    }

    /// Derivative source.
    ///
    /// ```
    /// use ctrl_core::{Coeff, pd::{Derivative, Pd}};
    /// use fixed::types::I16F16;
    /// let pd = Pd::new(Coeff::ONE, Coeff::ZERO, Derivative::OnError, I16F16::ONE);
    /// assert_eq!(pd.derivative(), Derivative::OnError);
    /// ```
    pub const fn derivative(&self) -> Derivative {
        self.derivative
    }

    /// Output clamp magnitude, volts.
    ///
    /// ```
    /// use ctrl_core::{Coeff, pd::{Derivative, Pd}};
    /// use fixed::types::I16F16;
    /// let pd = Pd::new(Coeff::ONE, Coeff::ZERO, Derivative::OnError, I16F16::ONE);
    /// assert_eq!(pd.limit_volts(), I16F16::ONE);
    /// ```
    pub const fn limit_volts(&self) -> I16F16 {
        self.limit_volts
    }

    /// One tick: `error` in counts (setpoint - measured), `measured_speed` in counts/tick
    /// (used only by [`Derivative::OnMeasurement`]). Returns volts in `±limit_volts`.
    ///
    /// ```
    /// use ctrl_core::{Coeff, pd::{Derivative, Pd, PdState}};
    /// use fixed::types::I16F16;
    /// let pd = Pd::new(Coeff::ONE, Coeff::from_bits(3, 0), Derivative::OnMeasurement, I16F16::lit("12"));
    /// let mut st = PdState::new();
    /// // Hand check: 1 * 2 + 3 * -(0.5) = 0.5 V.
    /// let u = pd.update(&mut st, I16F16::from_num(2), I16F16::from_num(0.5));
    /// assert_eq!(u, I16F16::from_num(0.5));
    /// ```
    #[inline(always)]
    pub fn update(&self, state: &mut PdState, error: I16F16, measured_speed: I16F16) -> I16F16 {
        let d = match self.derivative {
            Derivative::OnError => error.saturating_sub(state.prev_error),
            Derivative::OnMeasurement => measured_speed.saturating_neg(),
        };
        state.prev_error = error;
        let u = self
            .kp
            .saturating_mul(error)
            .saturating_add(self.kd_per_tick.saturating_mul(d));
        clamp_sym(u, self.limit_volts)
    }
}
