//! The crate's one error type.

use core::fmt;

/// Why a constructor or a command was refused. Small and `Copy`, so it can be returned
/// from the tick path without cost.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Error {
    /// A floating-point input was NaN or infinite.
    NonFinite,
    /// An input was outside its documented range.
    OutOfRange,
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Error::NonFinite => f.write_str("value is NaN or infinite"),
            Error::OutOfRange => f.write_str("value is outside its documented range"),
        }
    }
}

impl core::error::Error for Error {}
