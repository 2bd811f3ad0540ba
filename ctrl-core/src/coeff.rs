//! [`Coeff`]: the scaled-integer gain type used by every fixed-point loop.
//!
//! A coefficient is `mantissa * 2^-shift` with a 16-bit signed mantissa
//! (|mantissa| <= 32767) and `shift` in `0..=47`, so it spans about
//! `7.1e-15 ..= 32767` in magnitude. The host design crate picks the shift per constant
//! with [`Coeff::from_f64`], which keeps the relative error of any value in
//! `2^-32 ..= 32767` below `2^-15` (about 0.003 %).
//!
//! The multiply [`Coeff::saturating_mul`] takes an [`I16F16`] signal and returns an
//! [`I16F16`]. It needs only two 32-bit multiplies (no 64-bit multiply, no division), which
//! keeps it cheap on a Cortex-M0.

use fixed::types::I16F16;

use crate::Error;

/// Largest allowed mantissa magnitude (the range is symmetric: `-32767..=32767`).
pub const MANTISSA_MAX: i32 = 32767;
/// Largest allowed shift; the value is `mantissa * 2^-shift`.
pub const SHIFT_MAX: u32 = 47;

/// A gain or other coefficient: `mantissa * 2^-shift`, mantissa in `-32767..=32767`,
/// shift in `0..=47`.
///
/// Units are those of the parameter that holds it (for example volts per count).
///
/// # Error bound of the multiply
///
/// [`saturating_mul`](Coeff::saturating_mul) returns the exact product rounded to the
/// nearest [`I16F16`] LSB (`2^-16`), ties toward +infinity, so the error is at most
/// **0.5 LSB** (`7.6e-6`), unless the exact product lies outside the `I16F16` range, in which
/// case it saturates to `I16F16::MIN` / `I16F16::MAX`.
///
/// ```
/// use ctrl_core::Coeff;
/// use fixed::types::I16F16;
///
/// // 0.75 = 3 * 2^-2
/// const K: Coeff = Coeff::from_bits(3, 2);
/// assert_eq!(K.to_f64(), 0.75);
/// assert_eq!(K.saturating_mul(I16F16::from_num(2)), I16F16::from_num(1.5));
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Coeff {
    mantissa: i16,
    shift: u8,
}

impl Default for Coeff {
    /// The zero coefficient.
    fn default() -> Self {
        Coeff::ZERO
    }
}

impl Coeff {
    /// The coefficient 0.
    ///
    /// ```
    /// use ctrl_core::Coeff;
    /// assert_eq!(Coeff::ZERO.to_f64(), 0.0);
    /// ```
    pub const ZERO: Coeff = Coeff {
        mantissa: 0,
        shift: 0,
    };

    /// The coefficient 1 (`1 * 2^0`).
    ///
    /// ```
    /// use ctrl_core::Coeff;
    /// use fixed::types::I16F16;
    /// let x = I16F16::from_num(-3.25);
    /// assert_eq!(Coeff::ONE.saturating_mul(x), x);
    /// ```
    pub const ONE: Coeff = Coeff {
        mantissa: 1,
        shift: 0,
    };

    /// Builds `mantissa * 2^-shift`.
    ///
    /// # Panics
    ///
    /// If `|mantissa| > 32767` or `shift > 47`. In a `const` item this is a compile error,
    /// which is how generated constants use it; at run time prefer
    /// [`try_from_bits`](Coeff::try_from_bits).
    ///
    /// ```
    /// use ctrl_core::Coeff;
    /// const KP: Coeff = Coeff::from_bits(20971, 20); // 0.0200...
    /// assert!((KP.to_f64() - 0.02).abs() < 1e-6);
    /// ```
    ///
    /// An out-of-range shift is refused at compile time:
    ///
    /// ```compile_fail
    /// use ctrl_core::Coeff;
    /// const BAD: Coeff = Coeff::from_bits(1, 48);
    /// ```
    ///
    /// and so is an out-of-range mantissa:
    ///
    /// ```compile_fail
    /// use ctrl_core::Coeff;
    /// const BAD: Coeff = Coeff::from_bits(-32768, 0);
    /// ```
    pub const fn from_bits(mantissa: i32, shift: u32) -> Coeff {
        assert!(shift <= SHIFT_MAX, "Coeff shift must be in 0..=47");
        assert!(
            mantissa >= -MANTISSA_MAX && mantissa <= MANTISSA_MAX,
            "Coeff mantissa must be in -32767..=32767"
        );
        Coeff {
            mantissa: mantissa as i16,
            shift: shift as u8,
        }
    }

    /// Like [`from_bits`](Coeff::from_bits) but returns [`Error::OutOfRange`] instead of
    /// panicking.
    ///
    /// ```
    /// use ctrl_core::{Coeff, Error};
    /// assert!(Coeff::try_from_bits(100, 47).is_ok());
    /// assert_eq!(Coeff::try_from_bits(100, 48), Err(Error::OutOfRange));
    /// assert_eq!(Coeff::try_from_bits(40000, 0), Err(Error::OutOfRange));
    /// ```
    pub const fn try_from_bits(mantissa: i32, shift: u32) -> Result<Coeff, Error> {
        if shift > SHIFT_MAX || mantissa < -MANTISSA_MAX || mantissa > MANTISSA_MAX {
            Err(Error::OutOfRange)
        } else {
            Ok(Coeff {
                mantissa: mantissa as i16,
                shift: shift as u8,
            })
        }
    }

    /// The mantissa (`-32767..=32767`).
    ///
    /// ```
    /// use ctrl_core::Coeff;
    /// assert_eq!(Coeff::from_bits(-5, 3).mantissa(), -5);
    /// ```
    pub const fn mantissa(self) -> i32 {
        self.mantissa as i32
    }

    /// The shift (`0..=47`); the value is `mantissa * 2^-shift`.
    ///
    /// ```
    /// use ctrl_core::Coeff;
    /// assert_eq!(Coeff::from_bits(-5, 3).shift(), 3);
    /// ```
    pub const fn shift(self) -> u32 {
        self.shift as u32
    }

    /// The exact value as `f64` (every `Coeff` is exactly representable).
    ///
    /// ```
    /// use ctrl_core::Coeff;
    /// assert_eq!(Coeff::from_bits(-5, 3).to_f64(), -0.625);
    /// ```
    pub const fn to_f64(self) -> f64 {
        self.mantissa as f64 * pow2_neg(self.shift as u32)
    }

    /// The nearest `Coeff` to `x` with the largest shift whose mantissa still fits, and the
    /// relative error `|c - x| / |x|` it introduces (0 for `x == 0`).
    ///
    /// The mantissa is `x * 2^shift` rounded half away from zero (done by hand, so this is a
    /// `const fn` using only core `f64` arithmetic). For `2^-32 <= |x| <= 32767` the relative
    /// error is below `2^-15`; for smaller `|x|` the mantissa has fewer significant bits and the
    /// returned error says how much was lost.
    ///
    /// # Errors
    ///
    /// [`Error::NonFinite`] for NaN or infinity; [`Error::OutOfRange`] if `|x| >= 32767.5` or
    /// if `x` is nonzero but rounds to zero even at shift 47 (`|x| < 2^-48`).
    ///
    /// ```
    /// use ctrl_core::Coeff;
    /// let (c, rel) = Coeff::from_f64(1e-4).unwrap();
    /// assert!(rel < 3.1e-5);
    /// assert!((c.to_f64() - 1e-4).abs() <= 1e-4 * rel * 1.000001);
    /// assert!(Coeff::from_f64(40000.0).is_err());
    /// assert!(Coeff::from_f64(f64::NAN).is_err());
    /// ```
    pub const fn from_f64(x: f64) -> Result<(Coeff, f64), Error> {
        if !x.is_finite() {
            return Err(Error::NonFinite);
        }
        if x == 0.0 {
            return Ok((Coeff::ZERO, 0.0));
        }
        let mut shift = SHIFT_MAX as i32;
        while shift >= 0 {
            let y = x * pow2_pos(shift as u32);
            // Only values that can round into -32767..=32767 are considered, so the cast
            // below is exact.
            if y > -32767.5 && y < 32767.5 {
                let m = round_half_away(y);
                if m == 0 {
                    // Only reachable at shift 47: the value is too small to hold.
                    return Err(Error::OutOfRange);
                }
                let c = Coeff {
                    mantissa: m as i16,
                    shift: shift as u8,
                };
                let d = c.to_f64() - x;
                let rel = abs_f64(d) / abs_f64(x);
                return Ok((c, rel));
            }
            shift -= 1;
        }
        Err(Error::OutOfRange)
    }

    /// `self * x`, rounded to the nearest `I16F16` LSB (ties toward +infinity), saturating at
    /// the `I16F16` range. Error at most 0.5 LSB (`2^-17`) when not saturated.
    ///
    /// Cost: on ARMv6-M / ARMv8-M Baseline (Cortex-M0/M0+/M23) two 32-bit multiplies,
    /// shifts and adds, with no call to a 64-bit multiply routine; elsewhere one
    /// 32 x 32 -> 64-bit multiply (`smull`/`smlal` on a Cortex-M3/M4) and a range test on
    /// the high word. Same result either way (chosen by `build.rs` from the target); no
    /// division, no panic.
    ///
    /// ```
    /// use ctrl_core::Coeff;
    /// use fixed::types::I16F16;
    /// // Hand check: 0.5 * 3.0 = 1.5; 3 * 2^-2 * (-1.0) = -0.75.
    /// assert_eq!(Coeff::from_bits(1, 1).saturating_mul(I16F16::from_num(3)), I16F16::from_num(1.5));
    /// assert_eq!(Coeff::from_bits(3, 2).saturating_mul(I16F16::from_num(-1)), I16F16::from_num(-0.75));
    /// // 1000 * 1000 does not fit in I16F16 (max 32767.99998): saturates.
    /// assert_eq!(Coeff::from_bits(1000, 0).saturating_mul(I16F16::from_num(1000)), I16F16::MAX);
    /// ```
    #[inline(always)]
    pub const fn saturating_mul(self, x: I16F16) -> I16F16 {
        I16F16::from_bits(mul_bits(
            self.mantissa as i32,
            self.shift as u32,
            x.to_bits(),
        ))
    }
}

/// `round_half_up(m * xb / 2^s)` saturated to `i32`, for `|m| <= 32767`, `s <= 47`: the
/// form for the target (see `build.rs`; both forms are unit-tested against each other).
#[inline(always)]
const fn mul_bits(m: i32, s: u32, xb: i32) -> i32 {
    #[cfg(ctrl_core_narrow_mul)]
    {
        mul_bits_narrow(m, s, xb)
    }
    #[cfg(not(ctrl_core_narrow_mul))]
    {
        mul_bits_wide(m, s, xb)
    }
}

/// [`mul_bits`] through one `i64` product, for cores with a 32 x 32 -> 64-bit multiply
/// (`smull` on ARMv7-M, any 64-bit host). `|m xb| < 2^46` and the rounding term is at
/// most `2^46`, so the sum cannot overflow `i64`. Whether the result fits `i32` is read
/// from the high word of the sum (one 32-bit shift and compare), and only for shifts below 16.
#[inline(always)]
#[cfg_attr(ctrl_core_narrow_mul, allow(dead_code))]
const fn mul_bits_wide(m: i32, s: u32, xb: i32) -> i32 {
    let p = m as i64 * xb as i64 + ((1i64 << s) >> 1);
    // p >> s fits in i32 exactly when p is in -2^(31+s) .. 2^(31+s). For s >= 16 it always
    // does (|p| < 2^46 + 2^(s-1), so |p >> s| <= 2^30 + 1); for 1 <= s <= 15 it is a test on
    // the high word alone: its bits from s - 1 up are all copies of the sign.
    let hi = (p >> 32) as i32;
    let fits = if s >= 16 {
        true
    } else if s == 0 {
        hi == (p as i32) >> 31
    } else {
        (hi >> (s - 1)) == (hi >> 31)
    };
    if fits {
        (p >> s) as i32
    } else if hi < 0 {
        i32::MIN
    } else {
        i32::MAX
    }
}

/// [`mul_bits`] from two 32-bit multiplies, for cores without a 64-bit product (ARMv6-M).
///
/// The 48-bit product `m * xb` is split as `p1 * 2^16 + p0` with `p1 = m * (xb >> 16)` and
/// `p0 = m * (xb & 0xFFFF)`; both fit in `i32` exactly because `|m| <= 32767`:
/// `|p1| <= 32767 * 32768 < 2^30`, `p0` in `[-32767 * 65535, 32767 * 65535]`.
#[inline(always)]
#[cfg_attr(not(ctrl_core_narrow_mul), allow(dead_code))]
const fn mul_bits_narrow(m: i32, s: u32, xb: i32) -> i32 {
    let p1 = m * (xb >> 16);
    let p0 = m * (xb & 0xFFFF);
    if s > 16 {
        // floor(prod / 2^16) = p1 + (p0 >> 16); adding 2^(s-17) before the final shift gives
        // round-half-up of prod / 2^s exactly. |p1 + (p0 >> 16)| < 2^30 and 2^(s-17) <= 2^30,
        // so the sum fits in i32 and the result cannot overflow.
        (p1 + (p0 >> 16) + (1 << (s - 17))) >> (s - 16)
    } else {
        // result = p1 * 2^k + low with k = 16 - s and low = floor((p0 + 2^(s-1)) / 2^s)
        // (p0 + 2^(s-1) <= 2147385345 + 32768 fits). Split low at bit k: the result is
        // q * 2^k + (low mod 2^k) with q = p1 + (low >> k) (|q| < 2^30 + 2^16, no overflow),
        // so it fits in i32 exactly when q does after the shift. (Testing p1 alone is wrong
        // near the limit: a low part of the other sign can bring the sum back in range.)
        let k = 16 - s;
        let half = (1i32 << s) >> 1;
        let low = (p0 + half) >> s;
        if k == 0 {
            return p1 + low; // |p1| < 2^30, |low| < 2^16
        }
        let q = p1 + (low >> k);
        // q fits after the shift when shifting it back gives q again; the result is then
        // q * 2^k + (low mod 2^k) = p1 * 2^k + low (a wrapping add that cannot wrap).
        if (q << k) >> k == q {
            (p1 << k).wrapping_add(low)
        } else if q < 0 {
            i32::MIN
        } else {
            i32::MAX
        }
    }
}

/// `2^-s` for `s <= 1022`, exactly, built from the bit pattern.
const fn pow2_neg(s: u32) -> f64 {
    f64::from_bits(((1023 - s) as u64) << 52)
}

/// `2^s` for `s <= 1023`, exactly.
const fn pow2_pos(s: u32) -> f64 {
    f64::from_bits(((1023 + s) as u64) << 52)
}

const fn abs_f64(x: f64) -> f64 {
    if x < 0.0 {
        -x
    } else {
        x
    }
}

/// Rounds `y` (|y| < 2^52) to the nearest integer, ties away from zero, without `f64::round`.
const fn round_half_away(y: f64) -> i64 {
    let t = y as i64; // truncates toward zero
    let frac = y - t as f64; // exact for |y| < 2^52
    if frac >= 0.5 {
        t + 1
    } else if frac <= -0.5 {
        t - 1
    } else {
        t
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Exact reference: round-half-up(m * xb / 2^s) in i128, saturated.
    fn reference(m: i32, s: u32, xb: i32) -> i32 {
        let prod = m as i128 * xb as i128;
        let r = if s == 0 {
            prod
        } else {
            (prod + (1i128 << (s - 1))) >> s
        };
        r.clamp(i32::MIN as i128, i32::MAX as i128) as i32
    }

    #[test]
    fn mul_matches_exact_reference_on_edges() {
        let ms = [0, 1, -1, 2, 3, 255, -256, 12345, -12345, 32767, -32767];
        let xs = [
            0,
            1,
            -1,
            0x7FFF,
            0x8000,
            0xFFFF,
            0x10000,
            -0x10000,
            i32::MAX,
            i32::MIN,
            i32::MAX - 1,
            i32::MIN + 1,
            123_456_789,
            -987_654_321,
        ];
        for &m in &ms {
            for s in 0..=SHIFT_MAX {
                for &x in &xs {
                    let want = reference(m, s, x);
                    assert_eq!(mul_bits_narrow(m, s, x), want, "narrow m={m} s={s} x={x}");
                    assert_eq!(mul_bits_wide(m, s, x), want, "wide m={m} s={s} x={x}");
                }
            }
        }
    }

    #[test]
    fn both_multiply_forms_match_the_reference_on_random_inputs() {
        // A fixed-seed 64-bit LCG (Knuth's MMIX constants), so the cases are the same on
        // every run; 300,000 cases spread over every shift.
        let mut z: u64 = 0x2545_F491_4F6C_DD1D;
        let mut next = || {
            z = z
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            (z >> 32) as u32
        };
        for _ in 0..300_000 {
            let m = (next() % 65535) as i32 - 32767;
            let s = next() % (SHIFT_MAX + 1);
            let x = next() as i32 >> (next() % 32);
            let want = reference(m, s, x);
            assert_eq!(mul_bits_narrow(m, s, x), want, "narrow m={m} s={s} x={x}");
            assert_eq!(mul_bits_wide(m, s, x), want, "wide m={m} s={s} x={x}");
        }
    }

    #[test]
    fn from_f64_hand_values() {
        // 0.75 = 24576 * 2^-15 is the largest-shift fit (24576 <= 32767, 49152 is not).
        let (c, rel) = Coeff::from_f64(0.75).unwrap();
        assert_eq!((c.mantissa(), c.shift(), rel), (24576, 15, 0.0));
        // 1e-4 * 2^28 = 26843.5456 -> 26844 (2^29 gives 53687 > 32767), shift 28.
        let (c, _) = Coeff::from_f64(1e-4).unwrap();
        assert_eq!((c.mantissa(), c.shift()), (26844, 28));
        // Ties away from zero: 2.5 * 2^-47 -> mantissa 3 at shift 47.
        let (c, _) = Coeff::from_f64(-2.5 / 140_737_488_355_328.0).unwrap();
        assert_eq!((c.mantissa(), c.shift()), (-3, 47));
        // 32767.4 fits at shift 0, 32767.5 does not.
        assert_eq!(Coeff::from_f64(32767.4).unwrap().0.mantissa(), 32767);
        assert_eq!(Coeff::from_f64(32767.5), Err(Error::OutOfRange));
        assert_eq!(Coeff::from_f64(1e-20), Err(Error::OutOfRange));
        assert_eq!(Coeff::from_f64(f64::INFINITY), Err(Error::NonFinite));
    }
}
