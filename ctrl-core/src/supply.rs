//! Supply compensation: volts to PWM duty using the measured battery voltage.

use core::num::NonZeroU32;

use fixed::types::I16F16;

use crate::clamp::clamp_sym;
use crate::Coeff;

/// Supply compensation settings: the low-supply threshold.
///
/// The per-tick path ([`SupplyState::duty`]) multiplies by a stored reciprocal of the
/// battery voltage; the reciprocal is recomputed (one 32-bit integer division, not per
/// tick) only in [`Supply::set_battery`] when a new reading arrives.
///
/// Until the first reading, and for a reading `<= 0` or below `2^-14` V (a failed
/// measurement), the reciprocal is zero, so every duty is zero: the drive stays off rather
/// than guess.
///
/// ```
/// use ctrl_core::supply::{Supply, SupplyState};
/// use fixed::types::I16F16;
///
/// static SUPPLY: Supply = Supply::new(I16F16::lit("6.4"));
/// let mut st = SupplyState::new();
/// assert_eq!(st.duty(I16F16::lit("3")), I16F16::ZERO); // no reading yet
/// SUPPLY.set_battery(&mut st, I16F16::lit("8"));
/// // Hand check: 3 V / 8 V = 0.375 (reciprocal error < 1e-4 relative).
/// let d = st.duty(I16F16::lit("3"));
/// assert!((d - I16F16::lit("0.375")).abs() < I16F16::lit("0.0001"));
/// assert!(!st.is_low());
/// SUPPLY.set_battery(&mut st, I16F16::lit("6.0"));
/// assert!(st.is_low());
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Supply {
    low_volts: I16F16,
}

/// Measured battery voltage, its reciprocal and the low-supply flag.
///
/// ```
/// use ctrl_core::supply::SupplyState;
/// let st = SupplyState::new();
/// assert!(st.is_low());
/// assert_eq!(st.battery_volts(), fixed::types::I16F16::ZERO);
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SupplyState {
    battery_volts: I16F16,
    reciprocal: Coeff,
    /// For a reciprocal shift `s > 16` (every reading above about 4 V): `2^(s-17)` and
    /// `s - 16`, the rounding addend and final shift of the multiply, so the two per-tick
    /// duty multiplies do not rederive them; `wide_shift == 0` selects the general multiply.
    wide_add: i32,
    wide_shift: u32,
    low: bool,
}

impl Default for SupplyState {
    fn default() -> Self {
        SupplyState::new()
    }
}

impl SupplyState {
    /// No reading yet: battery 0 V, duty always 0, low flag set.
    ///
    /// ```
    /// use ctrl_core::supply::SupplyState;
    /// static ST: SupplyState = SupplyState::new();
    /// assert!(ST.is_low());
    /// ```
    pub const fn new() -> SupplyState {
        SupplyState {
            battery_volts: I16F16::ZERO,
            reciprocal: Coeff::ZERO,
            wide_add: 0,
            wide_shift: 0,
            low: true,
        }
    }

    /// The last battery reading, volts (0 before the first).
    ///
    /// ```
    /// use ctrl_core::supply::{Supply, SupplyState};
    /// use fixed::types::I16F16;
    /// let mut st = SupplyState::new();
    /// Supply::new(I16F16::lit("6")).set_battery(&mut st, I16F16::lit("7.5"));
    /// assert_eq!(st.battery_volts(), I16F16::lit("7.5"));
    /// ```
    pub const fn battery_volts(&self) -> I16F16 {
        self.battery_volts
    }

    /// `true` when the last reading was below the threshold (or there was none).
    ///
    /// ```
    /// use ctrl_core::supply::{Supply, SupplyState};
    /// use fixed::types::I16F16;
    /// let mut st = SupplyState::new();
    /// Supply::new(I16F16::lit("6.4")).set_battery(&mut st, I16F16::lit("6.3"));
    /// assert!(st.is_low());
    /// ```
    pub const fn is_low(&self) -> bool {
        self.low
    }

    /// The stored reciprocal `1 / battery_volts` (per volt).
    ///
    /// ```
    /// use ctrl_core::supply::{Supply, SupplyState};
    /// use fixed::types::I16F16;
    /// let mut st = SupplyState::new();
    /// Supply::new(I16F16::lit("6")).set_battery(&mut st, I16F16::lit("8"));
    /// assert!((st.reciprocal().to_f64() - 0.125).abs() < 1e-5);
    /// ```
    pub const fn reciprocal(&self) -> Coeff {
        self.reciprocal
    }

    /// Duty for `volts`: `volts / battery`, clamped to `[-1, 1]` (`I16F16::ONE` = 100 %).
    /// One multiply, no division; never panics.
    ///
    /// Error: the reciprocal is within `1e-4` relative of `1 / battery`, plus 0.5 LSB from
    /// the multiply.
    ///
    /// ```
    /// use ctrl_core::supply::{Supply, SupplyState};
    /// use fixed::types::I16F16;
    /// let mut st = SupplyState::new();
    /// Supply::new(I16F16::lit("6")).set_battery(&mut st, I16F16::lit("8"));
    /// assert_eq!(st.duty(I16F16::lit("-20")), -I16F16::ONE);
    /// ```
    #[inline(always)]
    pub const fn duty(&self, volts: I16F16) -> I16F16 {
        let prod = if self.wide_shift != 0 {
            // The `s > 16` branch of `Coeff::saturating_mul` with its shift-derived constants
            // read from the state (same result bit for bit; `wide_shift` is in 1..=31).
            let m = self.reciprocal.mantissa();
            let xb = volts.to_bits();
            let p1 = m * (xb >> 16);
            let p0 = m * (xb & 0xFFFF);
            I16F16::from_bits((p1 + (p0 >> 16) + self.wide_add).wrapping_shr(self.wide_shift))
        } else {
            self.reciprocal.saturating_mul(volts)
        };
        clamp_sym(prod, I16F16::ONE)
    }
}

impl Supply {
    /// Settings with the low-supply threshold in volts.
    ///
    /// ```
    /// use ctrl_core::supply::Supply;
    /// use fixed::types::I16F16;
    /// const S: Supply = Supply::new(I16F16::lit("6.4"));
    /// assert_eq!(S.low_volts(), I16F16::lit("6.4"));
    /// ```
    pub const fn new(low_volts: I16F16) -> Supply {
        Supply { low_volts }
    }

    /// The low-supply threshold, volts.
    ///
    /// ```
    /// use ctrl_core::supply::Supply;
    /// use fixed::types::I16F16;
    /// assert_eq!(Supply::new(I16F16::ONE).low_volts(), I16F16::ONE);
    /// ```
    pub const fn low_volts(&self) -> I16F16 {
        self.low_volts
    }

    /// Takes a new battery reading (volts): stores it, recomputes the reciprocal and sets the
    /// low flag (`volts < low_volts`). Costs one 32-bit division; call it when the ADC has a
    /// new value, not necessarily every tick.
    ///
    /// ```
    /// use ctrl_core::supply::{Supply, SupplyState};
    /// use fixed::types::I16F16;
    /// let mut st = SupplyState::new();
    /// let s = Supply::new(I16F16::lit("6.4"));
    /// s.set_battery(&mut st, I16F16::lit("-1"));     // a failed reading
    /// assert_eq!(st.duty(I16F16::ONE), I16F16::ZERO); // drive off
    /// ```
    pub fn set_battery(&self, state: &mut SupplyState, volts: I16F16) {
        state.battery_volts = volts;
        state.reciprocal = reciprocal(volts);
        let s = state.reciprocal.shift();
        (state.wide_add, state.wide_shift) = if s > 16 {
            (1 << (s - 17), s - 16)
        } else {
            (0, 0)
        };
        state.low = volts < self.low_volts || state.reciprocal == Coeff::ZERO;
    }
}

/// `1 / v` as a [`Coeff`], relative error below `1e-4` (`< 2^-14`); zero for `v < 2^-14` V.
///
/// With `vb = v.to_bits() > 0` and `lz` its leading zeros, `vh = (vb << lz) >> 16` lies in
/// `[2^15, 2^16)` and `vb ≈ vh * 2^(16 - lz)` (truncation: relative error < `2^-15`). Then
/// `1 / v = 2^16 / vb ≈ 2^lz / vh = round(2^30 / vh) * 2^-(30 - lz)`, and `round(2^30 / vh)`
/// is in `(2^14, 2^15]` (rounding error < `2^-15` relative). A mantissa of exactly `2^15`
/// (`vh = 2^15`) is written as `2^14` with one shift less.
fn reciprocal(v: I16F16) -> Coeff {
    let vb = v.to_bits();
    if vb <= 0 {
        return Coeff::ZERO;
    }
    let vb = vb as u32;
    let lz = vb.leading_zeros(); // 1..=31 because 0 < vb < 2^31
    let vh = (vb << lz) >> 16;
    let Some(den) = NonZeroU32::new(vh) else {
        return Coeff::ZERO; // unreachable: vh >= 2^15
    };
    let m = ((1u32 << 30) + (vh >> 1)) / den;
    let (m, shift) = if m >= 1 << 15 {
        (m >> 1, 30i32 - lz as i32 - 1)
    } else {
        (m, 30i32 - lz as i32)
    };
    if shift < 0 {
        // v < 2^-14 V: 1 / v does not fit; treat as no reading.
        return Coeff::ZERO;
    }
    match Coeff::try_from_bits(m as i32, shift as u32) {
        Ok(c) => c,
        Err(_) => Coeff::ZERO,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reciprocal_relative_error_over_range() {
        // From 2^-12 V to 30000 V in small geometric steps, plus exact powers of two.
        let mut v = 1.0 / 4096.0;
        while v < 30000.0 {
            let c = reciprocal(I16F16::from_num(v));
            let vq = I16F16::from_num(v).to_num::<f64>();
            let rel = (c.to_f64() * vq - 1.0).abs();
            assert!(rel < 1e-4, "v={v} rel={rel}");
            v *= 1.0137;
        }
        for e in -12..14 {
            let v = 2f64.powi(e);
            let c = reciprocal(I16F16::from_num(v));
            assert_eq!(c.to_f64(), 1.0 / v, "exact power of two {v}");
        }
        assert_eq!(reciprocal(I16F16::ZERO), Coeff::ZERO);
        assert_eq!(reciprocal(I16F16::MIN), Coeff::ZERO);
    }

    /// The duty fast path against the exact product in `i128` (round half up of
    /// `mantissa * volts / 2^shift`, saturated, then clamped to `[-1, 1]`), over batteries
    /// from 0.5 V to 40 V (both multiply branches) and volts across the whole `I16F16` range.
    #[test]
    fn duty_is_the_exact_rounded_product() {
        let mut checked = 0;
        let mut b = 0.5f64;
        while b < 40.0 {
            let mut st = SupplyState::new();
            Supply::new(I16F16::ZERO).set_battery(&mut st, I16F16::from_num(b));
            let c = st.reciprocal();
            let mut xb: i64 = i32::MIN as i64;
            while xb <= i32::MAX as i64 {
                for x in [xb, xb + 1, -xb - 1, 0x7FFF, -0x8000, 0x1_0000] {
                    let x = x.clamp(i32::MIN as i64, i32::MAX as i64) as i32;
                    let prod = c.mantissa() as i128 * x as i128;
                    let s = c.shift();
                    let r = if s == 0 {
                        prod
                    } else {
                        (prod + (1i128 << (s - 1))) >> s
                    };
                    let want = r.clamp(-65536, 65536) as i32;
                    assert_eq!(
                        st.duty(I16F16::from_bits(x)).to_bits(),
                        want,
                        "battery {b} V, volts bits {x}"
                    );
                    checked += 1;
                }
                xb += 7_777_777;
            }
            b *= 1.071;
        }
        assert!(checked > 10_000);
    }
}
