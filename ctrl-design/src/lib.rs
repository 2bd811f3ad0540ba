//! Host-side design tools for `ctrl-core` loops: identify the drive from logs, design
//! gains from intuitive targets, check the design in discrete time, and emit typed,
//! checked constants for firmware.
//!
//! Every computation here runs in `f64`. The firmware side runs the fixed-point
//! arithmetic of `ctrl-core`; the simulation in [`sim`] steps that same arithmetic.

pub mod plant;

pub mod identify;

pub mod analysis;
pub mod tune;

pub mod sim;
pub mod sweep;

pub mod design_file;
pub mod emit;

pub use plant::{Plant, PlantError};
