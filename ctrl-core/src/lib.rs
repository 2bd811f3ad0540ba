#![doc = include_str!("../README.md")]
#![no_std]
#![forbid(unsafe_code)]
#![deny(missing_docs)]

mod clamp;
pub mod coeff;
pub mod drive;
pub mod encoder;
pub mod error;
pub mod feedforward;
pub mod float;
pub mod lead;
pub mod mix;
pub mod pd;
pub mod pi;
pub mod profile;
#[cfg(feature = "embedded-hal")]
pub mod pwm;
pub mod stall;
pub mod supply;
pub mod telemetry;

pub use coeff::Coeff;
pub use error::Error;
