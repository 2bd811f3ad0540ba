//! Saturating helpers shared by the loops (crate-internal).

use fixed::types::{I16F16, I32F32};

/// `x` limited to `-lim..=lim` (`lim >= 0` assumed; callers store magnitudes). No panic,
/// unlike `Ord::clamp` with crossed bounds.
#[inline(always)]
pub(crate) const fn clamp_sym(x: I16F16, lim: I16F16) -> I16F16 {
    let (xb, lb) = (x.to_bits(), lim.to_bits());
    if xb > lb {
        lim
    } else if xb < -lb {
        I16F16::from_bits(-lb)
    } else {
        x
    }
}

/// `|x|` saturated (`|I16F16::MIN|` becomes `I16F16::MAX`).
#[inline(always)]
pub(crate) const fn abs_sat(x: I16F16) -> I16F16 {
    I16F16::from_bits(x.to_bits().saturating_abs())
}

/// `I32F32` narrowed to `I16F16`: the 16 lowest fraction bits are dropped (rounds toward
/// -infinity, error < 1 LSB of `I16F16`) and values outside the `I16F16` range saturate.
#[inline(always)]
pub(crate) const fn narrow(x: I32F32) -> I16F16 {
    // Done on the two 32-bit halves (a 32-bit core has no 64-bit compare): `x >> 16` fits
    // in i32 exactly when the high word's top 17 bits are all copies of its sign bit.
    let bits = x.to_bits();
    let hi = (bits >> 32) as i32;
    let lo = bits as u32;
    if (hi >> 15) != (hi >> 31) {
        if hi < 0 {
            I16F16::MIN
        } else {
            I16F16::MAX
        }
    } else {
        I16F16::from_bits((hi << 16) | (lo >> 16) as i32)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clamp_and_narrow() {
        let l = I16F16::from_num(2);
        assert_eq!(clamp_sym(I16F16::from_num(3), l), l);
        assert_eq!(clamp_sym(I16F16::from_num(-3), l), -l);
        assert_eq!(clamp_sym(I16F16::from_num(1.5), l), I16F16::from_num(1.5));
        assert_eq!(abs_sat(I16F16::MIN), I16F16::MAX);
        assert_eq!(narrow(I32F32::from_num(40000)), I16F16::MAX);
        assert_eq!(narrow(I32F32::from_num(-40000)), I16F16::MIN);
        assert_eq!(narrow(I32F32::from_num(-1.5)), I16F16::from_num(-1.5));
        // -2^-32 floors to -1 LSB of I16F16.
        assert_eq!(
            narrow(I32F32::DELTA.wrapping_neg()),
            I16F16::DELTA.wrapping_neg()
        );
    }
}
