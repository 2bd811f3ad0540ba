//! Per-axis feedforward: speed, acceleration and friction-bias terms.

use fixed::types::I16F16;

use crate::Coeff;

/// Feedforward `u = kv * speed + ka * accel + bias * sign(speed)` in volts.
///
/// * `speed`: setpoint speed in counts/tick; `accel`: setpoint acceleration in
///   counts/tick² (both [`I16F16`]; the drive narrows the profile's `I32F32` values, which
///   loses at most one `I16F16` LSB).
/// * `kv`: volts per (count/tick) (for a first-order plant with gain `K` counts/s per volt:
///   `loop_rate / K`). `ka`: volts per (count/tick²) (`T * loop_rate² / K` for time constant
///   `T`). Tiny user-unit values such as 1e-4 V per mm/s² become large numbers here, well
///   inside [`Coeff`]'s range.
/// * `bias_volts`: static-friction voltage, applied with the sign of the setpoint speed and
///   **not at all when the setpoint speed is exactly zero** (at rest, or the one tick at the
///   end of a decelerating move), so a robot at rest is not pushed against friction.
///
/// Overflow policy: products and sums saturate at the `I16F16` range (no clamp: the wheel
/// mix limits the voltage). Error: at most 1 LSB from the two rounded products.
///
/// ```
/// use ctrl_core::{Coeff, feedforward::Feedforward};
/// use fixed::types::I16F16;
///
/// let ff = Feedforward::new(Coeff::from_bits(1, 0), Coeff::from_bits(40, 0), I16F16::lit("0.75"));
/// // Hand check: 1 * 2 + 40 * 0.015625 + 0.75 = 3.375 V (all exact in binary).
/// let u = ff.volts(I16F16::from_num(2), I16F16::from_num(0.015625));
/// assert_eq!(u, I16F16::from_num(3.375));
/// // At rest: no bias.
/// assert_eq!(ff.volts(I16F16::ZERO, I16F16::ZERO), I16F16::ZERO);
/// // Moving backwards: bias negative. -1 * 1 + 0 - 0.75 = -1.75 V.
/// assert_eq!(ff.volts(I16F16::from_num(-1), I16F16::ZERO), I16F16::from_num(-1.75));
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Feedforward {
    kv: Coeff,
    ka: Coeff,
    bias_volts: I16F16,
}

impl Feedforward {
    /// No feedforward at all.
    ///
    /// ```
    /// use ctrl_core::feedforward::Feedforward;
    /// use fixed::types::I16F16;
    /// assert_eq!(Feedforward::NONE.volts(I16F16::ONE, I16F16::ONE), I16F16::ZERO);
    /// ```
    pub const NONE: Feedforward = Feedforward::new(Coeff::ZERO, Coeff::ZERO, I16F16::ZERO);

    /// A feedforward from its three constants (`bias_volts` is used as a magnitude).
    ///
    /// ```
    /// use ctrl_core::{Coeff, feedforward::Feedforward};
    /// use fixed::types::I16F16;
    /// const FF: Feedforward = Feedforward::new(Coeff::ONE, Coeff::ZERO, I16F16::lit("0.7"));
    /// assert_eq!(FF.bias_volts(), I16F16::lit("0.7"));
    /// ```
    pub const fn new(kv: Coeff, ka: Coeff, bias_volts: I16F16) -> Feedforward {
        Feedforward {
            kv,
            ka,
            bias_volts: crate::clamp::abs_sat(bias_volts),
        }
    }

    /// Speed gain, volts per (count/tick).
    ///
    /// ```
    /// use ctrl_core::{Coeff, feedforward::Feedforward};
    /// assert_eq!(Feedforward::NONE.kv(), Coeff::ZERO);
    /// ```
    pub const fn kv(&self) -> Coeff {
        self.kv
    }

    /// Acceleration gain, volts per (count/tick²).
    ///
    /// ```
    /// use ctrl_core::{Coeff, feedforward::Feedforward};
    /// assert_eq!(Feedforward::NONE.ka(), Coeff::ZERO);
    /// ```
    pub const fn ka(&self) -> Coeff {
        self.ka
    }

    /// Friction bias magnitude, volts.
    ///
    /// ```
    /// use ctrl_core::feedforward::Feedforward;
    /// assert_eq!(Feedforward::NONE.bias_volts(), fixed::types::I16F16::ZERO);
    /// ```
    pub const fn bias_volts(&self) -> I16F16 {
        self.bias_volts
    }

    /// The feedforward voltage for a setpoint speed (counts/tick) and acceleration
    /// (counts/tick²). Stateless.
    ///
    /// ```
    /// use ctrl_core::{Coeff, feedforward::Feedforward};
    /// use fixed::types::I16F16;
    /// let ff = Feedforward::new(Coeff::ZERO, Coeff::ZERO, I16F16::lit("0.5"));
    /// assert_eq!(ff.volts(I16F16::DELTA, I16F16::ZERO), I16F16::lit("0.5"));
    /// ```
    #[inline(always)]
    pub fn volts(&self, speed: I16F16, accel: I16F16) -> I16F16 {
        let bias = if speed.to_bits() > 0 {
            self.bias_volts
        } else if speed.to_bits() < 0 {
            I16F16::from_bits(-self.bias_volts.to_bits())
        } else {
            I16F16::ZERO
        };
        self.kv
            .saturating_mul(speed)
            .saturating_add(self.ka.saturating_mul(accel))
            .saturating_add(bias)
    }
}
