//! Fixed-point control loops for small robot drives (`no_std`, no alloc, no panics).
#![no_std]
#![forbid(unsafe_code)]
#![deny(missing_docs)]

pub mod error;
pub mod profile;

pub use error::Error;
