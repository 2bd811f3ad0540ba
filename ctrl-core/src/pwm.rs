//! Duty output to `embedded-hal` 1.0 PWM channels (feature `embedded-hal`).
//!
//! Two common H-bridge wirings are covered:
//! * [`set_duty_with_direction`]: one PWM channel for the magnitude and a direction pin
//!   (high = forward, that is duty >= 0);
//! * [`set_duty_two_channel`]: two PWM inputs (IN1/IN2 style): a positive duty goes to the
//!   `forward` channel and a negative one to `reverse`; the idle channel is set to zero
//!   **first**, so both inputs are never driven at once.
//!
//! The magnitude is `round(|duty| * max_duty_cycle())` ([`duty_to_counts`]), computed in
//! `u32` (no overflow: `65536 * 65535 + 32768 < 2^32`).

use embedded_hal::digital::OutputPin;
use embedded_hal::pwm::SetDutyCycle;
use fixed::types::I16F16;

use crate::clamp::{abs_sat, clamp_sym};

/// Which of the two outputs failed.
///
/// ```
/// use ctrl_core::pwm::OutputError;
/// let e: OutputError<u8, ()> = OutputError::First(3);
/// assert_eq!(e, OutputError::First(3));
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum OutputError<A, B> {
    /// The PWM channel (or the forward channel).
    First(A),
    /// The direction pin (or the reverse channel).
    Second(B),
}

/// `round(|duty| * max)` with `|duty|` clamped to 1, as PWM compare counts.
///
/// ```
/// use ctrl_core::pwm::duty_to_counts;
/// use fixed::types::I16F16;
/// // Hand check: 0.25 * 1000 = 250; -1.5 is clamped to 1 -> 1000.
/// assert_eq!(duty_to_counts(I16F16::lit("0.25"), 1000), 250);
/// assert_eq!(duty_to_counts(I16F16::lit("-1.5"), 1000), 1000);
/// ```
pub fn duty_to_counts(duty: I16F16, max: u16) -> u16 {
    let mag = abs_sat(clamp_sym(duty, I16F16::ONE)).to_bits() as u32; // 0..=65536
    let counts = (mag * max as u32 + (1 << 15)) >> 16; // <= max
    if counts > max as u32 {
        max
    } else {
        counts as u16
    }
}

/// Writes `duty` (in `[-1, 1]`) as a magnitude on `pwm` and the sign on `direction`
/// (high for `duty >= 0`). The direction is set first.
///
/// # Errors
///
/// The first driver error, tagged with its source.
///
/// ```
/// use core::convert::Infallible;
/// use ctrl_core::pwm::set_duty_with_direction;
/// use embedded_hal::{digital::{ErrorType as PinErrorType, OutputPin}, pwm::{ErrorType, SetDutyCycle}};
/// use fixed::types::I16F16;
///
/// struct Pwm(u16);
/// impl ErrorType for Pwm { type Error = Infallible; }
/// impl SetDutyCycle for Pwm {
///     fn max_duty_cycle(&self) -> u16 { 400 }
///     fn set_duty_cycle(&mut self, d: u16) -> Result<(), Infallible> { self.0 = d; Ok(()) }
/// }
/// struct Pin(bool);
/// impl PinErrorType for Pin { type Error = Infallible; }
/// impl OutputPin for Pin {
///     fn set_low(&mut self) -> Result<(), Infallible> { self.0 = false; Ok(()) }
///     fn set_high(&mut self) -> Result<(), Infallible> { self.0 = true; Ok(()) }
/// }
///
/// let (mut pwm, mut dir) = (Pwm(0), Pin(true));
/// set_duty_with_direction(&mut pwm, &mut dir, I16F16::lit("-0.5")).unwrap();
/// assert_eq!((pwm.0, dir.0), (200, false));
/// ```
pub fn set_duty_with_direction<P: SetDutyCycle, D: OutputPin>(
    pwm: &mut P,
    direction: &mut D,
    duty: I16F16,
) -> Result<(), OutputError<P::Error, D::Error>> {
    let counts = duty_to_counts(duty, pwm.max_duty_cycle());
    if duty.to_bits() >= 0 {
        direction.set_high()
    } else {
        direction.set_low()
    }
    .map_err(OutputError::Second)?;
    pwm.set_duty_cycle(counts).map_err(OutputError::First)
}

/// Writes `duty` (in `[-1, 1]`) to a two-input bridge: `forward` carries a positive duty,
/// `reverse` a negative one; the idle input is zeroed before the active one is set.
///
/// # Errors
///
/// The first driver error, tagged with its source.
///
/// ```
/// use core::convert::Infallible;
/// use ctrl_core::pwm::set_duty_two_channel;
/// use embedded_hal::pwm::{ErrorType, SetDutyCycle};
/// use fixed::types::I16F16;
///
/// struct Pwm(u16);
/// impl ErrorType for Pwm { type Error = Infallible; }
/// impl SetDutyCycle for Pwm {
///     fn max_duty_cycle(&self) -> u16 { 1000 }
///     fn set_duty_cycle(&mut self, d: u16) -> Result<(), Infallible> { self.0 = d; Ok(()) }
/// }
///
/// let (mut a, mut b) = (Pwm(0), Pwm(77));
/// set_duty_two_channel(&mut a, &mut b, I16F16::lit("0.75")).unwrap();
/// assert_eq!((a.0, b.0), (750, 0));
/// ```
pub fn set_duty_two_channel<A: SetDutyCycle, B: SetDutyCycle>(
    forward: &mut A,
    reverse: &mut B,
    duty: I16F16,
) -> Result<(), OutputError<A::Error, B::Error>> {
    if duty.to_bits() >= 0 {
        reverse.set_duty_cycle(0).map_err(OutputError::Second)?;
        let counts = duty_to_counts(duty, forward.max_duty_cycle());
        forward.set_duty_cycle(counts).map_err(OutputError::First)
    } else {
        forward.set_duty_cycle(0).map_err(OutputError::First)?;
        let counts = duty_to_counts(duty, reverse.max_duty_cycle());
        reverse.set_duty_cycle(counts).map_err(OutputError::Second)
    }
}
