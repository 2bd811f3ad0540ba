//! Wheel mix: forward and rotation volts to left and right wheel volts.

use fixed::types::I16F16;

use crate::clamp::{abs_sat, clamp_sym};

/// Left and right wheel voltages.
///
/// ```
/// use ctrl_core::mix::WheelVolts;
/// use fixed::types::I16F16;
/// let w = WheelVolts { left: I16F16::ONE, right: -I16F16::ONE };
/// assert_eq!(w.left, I16F16::ONE);
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct WheelVolts {
    /// Left wheel, volts.
    pub left: I16F16,
    /// Right wheel, volts.
    pub right: I16F16,
}

/// Mixes `forward` and `rotation` volts into wheel volts, `left = f - r`, `right = f + r`,
/// each within `±|limit_volts|` (normally the measured supply, or a lower motor rating).
///
/// Priority rule (keeps the robot steering): the rotation command is kept whole if it fits
/// (`|r| <= limit`, otherwise it is clamped to `±limit`), and the forward command is then
/// reduced to `±(limit - |r|)`. So when the sum saturates, the robot slows down along its
/// path instead of losing its turn; both wheels keep the commanded difference `2 r`.
///
/// Overflow policy: none possible; all results lie within `±limit`. No panic.
///
/// ```
/// use ctrl_core::mix::mix;
/// use fixed::types::I16F16;
/// let v = |x: f64| I16F16::from_num(x);
/// // Hand check, limit 8: f = 3, r = 1 -> left 2, right 4 (fits).
/// let w = mix(v(3.0), v(1.0), v(8.0));
/// assert_eq!((w.left, w.right), (v(2.0), v(4.0)));
/// // f = 7, r = 2: 9 > 8, so f is cut to 8 - 2 = 6 -> left 4, right 8; difference 2r = 4 kept.
/// let w = mix(v(7.0), v(2.0), v(8.0));
/// assert_eq!((w.left, w.right), (v(4.0), v(8.0)));
/// // r = -10 alone exceeds the limit: r -> -8, f -> 0.
/// let w = mix(v(5.0), v(-10.0), v(8.0));
/// assert_eq!((w.left, w.right), (v(8.0), v(-8.0)));
/// ```
#[inline(always)]
pub const fn mix(forward: I16F16, rotation: I16F16, limit_volts: I16F16) -> WheelVolts {
    let lim = abs_sat(limit_volts);
    let r = clamp_sym(rotation, lim);
    // lim >= |r| >= 0, so the difference is in 0..=lim: no overflow.
    let room = I16F16::from_bits(lim.to_bits() - abs_sat(r).to_bits());
    let f = clamp_sym(forward, room);
    // |f| + |r| <= lim <= I16F16::MAX: the sums cannot overflow.
    WheelVolts {
        left: I16F16::from_bits(f.to_bits() - r.to_bits()),
        right: I16F16::from_bits(f.to_bits() + r.to_bits()),
    }
}
