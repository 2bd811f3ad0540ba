//! The plant model of the trade: a brushed DC drive whose speed is first order.
//!
//! Speed `w` (units/s) answers the applied voltage `v` (volts) as
//!
//! ```text
//! T dw/dt + w = K * sign(v) * max(|v| - bias, 0)        (while the wheel turns)
//! ```
//!
//! with gain `K` (units/s per volt), time constant `T` (s) and friction bias
//! (volts needed before the wheel moves). Position is the integral of speed, in the
//! same distance unit as `K` (mm, rad, encoder counts: the caller's choice).

use std::fmt;

/// Constants of one axis' drive.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Plant {
    /// Steady speed per volt above the bias, units/s per volt. Finite, > 0.
    pub gain: f64,
    /// Time constant of the speed response, seconds. Finite, > 0.
    pub time_constant_s: f64,
    /// Static-friction bias, volts. Finite, >= 0.
    pub bias_volts: f64,
}

/// Why a set of plant constants was refused.
#[derive(Debug, Clone, PartialEq)]
pub enum PlantError {
    /// A field was NaN, infinite, or outside its range.
    OutOfRange {
        /// The field's name (`gain`, `time_constant_s`, `bias_volts`).
        field: &'static str,
        /// The value given.
        value: f64,
        /// The valid range, in words.
        valid: &'static str,
    },
}

impl fmt::Display for PlantError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            PlantError::OutOfRange {
                field,
                value,
                valid,
            } => write!(
                f,
                "plant {field} = {value} is out of range: valid is {valid}"
            ),
        }
    }
}

impl std::error::Error for PlantError {}

impl Plant {
    /// Checked constructor.
    ///
    /// ```
    /// use ctrl_design::Plant;
    /// // 250 units/s per volt above a 0.5 V bias: 4.5 V gives 250 * (4.5 - 0.5) = 1000.
    /// let p = Plant::new(250.0, 0.12, 0.5).unwrap();
    /// assert_eq!(p.steady_speed(4.5), 1000.0);
    /// assert_eq!(p.steady_speed(-4.5), -1000.0);
    /// assert_eq!(p.steady_speed(0.4), 0.0);
    /// assert!(Plant::new(-1.0, 0.1, 0.0).is_err());
    /// ```
    pub fn new(gain: f64, time_constant_s: f64, bias_volts: f64) -> Result<Self, PlantError> {
        let check = |field, value: f64, ok: bool, valid| {
            if value.is_finite() && ok {
                Ok(())
            } else {
                Err(PlantError::OutOfRange {
                    field,
                    value,
                    valid,
                })
            }
        };
        check(
            "gain",
            gain,
            gain > 0.0,
            "finite and > 0 (units/s per volt)",
        )?;
        check(
            "time_constant_s",
            time_constant_s,
            time_constant_s > 0.0,
            "finite and > 0 (seconds)",
        )?;
        check(
            "bias_volts",
            bias_volts,
            bias_volts >= 0.0,
            "finite and >= 0 (volts)",
        )?;
        Ok(Plant {
            gain,
            time_constant_s,
            bias_volts,
        })
    }

    /// Steady speed (units/s) reached under a constant `volts`:
    /// `K * sign(v) * max(|v| - bias, 0)`.
    pub fn steady_speed(&self, volts: f64) -> f64 {
        let excess = (volts.abs() - self.bias_volts).max(0.0);
        self.gain * excess * volts.signum()
    }
}
