//! The measured ctrl-core paths (fixed point and the `f32` baseline).
use crate::Path;

/// State of every path.
pub struct State;

impl State {
    /// Fresh state.
    pub fn fresh() -> Self {
        State
    }
}

/// Measured paths, in run order.
pub static PATHS: &[Path] = &[];
