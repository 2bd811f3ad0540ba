//! Host timing of the two-axis tick (fixed-point and `f32`); see docs/core.md.
fn main() {}
