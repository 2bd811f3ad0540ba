//! Stall guard: a latched fault when the tracking error stays too large.

use fixed::types::I16F16;

use crate::clamp::abs_sat;

/// Stall guard settings: `|tracking error| > limit` for `ticks` consecutive ticks latches a
/// fault (a blocked wheel, a hair wound round an axle). The drive forces its output to zero
/// while the fault is latched, until [`StallState::clear`].
///
/// Policy: the counter saturates (never wraps); one tick with `|error| <= limit` resets it
/// to zero; `ticks == 0` is treated as 1 (trip on the first tick over the limit).
///
/// ```
/// use ctrl_core::stall::{StallGuard, StallState};
/// use fixed::types::I16F16;
///
/// static GUARD: StallGuard = StallGuard::new(I16F16::lit("50"), 3);
/// let mut st = StallState::new();
/// let big = I16F16::lit("60");
/// assert!(!GUARD.update(&mut st, big));
/// assert!(!GUARD.update(&mut st, big));
/// assert!(GUARD.update(&mut st, big)); // third consecutive tick: tripped
/// assert!(GUARD.update(&mut st, I16F16::ZERO)); // latched
/// st.clear();
/// assert!(!st.is_tripped());
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct StallGuard {
    limit: I16F16,
    ticks: u16,
}

/// Stall guard state: consecutive ticks over the limit and the latched fault.
///
/// ```
/// use ctrl_core::stall::StallState;
/// assert!(!StallState::new().is_tripped());
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct StallState {
    over: u16,
    tripped: bool,
}

impl StallState {
    /// No fault, counter zero.
    ///
    /// ```
    /// use ctrl_core::stall::StallState;
    /// let _st = StallState::new();
    /// ```
    pub const fn new() -> StallState {
        StallState {
            over: 0,
            tripped: false,
        }
    }

    /// `true` while the fault is latched.
    ///
    /// ```
    /// use ctrl_core::stall::StallState;
    /// assert!(!StallState::new().is_tripped());
    /// ```
    pub const fn is_tripped(&self) -> bool {
        self.tripped
    }

    /// Consecutive ticks over the limit so far (saturating).
    ///
    /// ```
    /// use ctrl_core::stall::StallState;
    /// assert_eq!(StallState::new().ticks_over(), 0);
    /// ```
    pub const fn ticks_over(&self) -> u16 {
        self.over
    }

    /// Clears the fault and the counter.
    ///
    /// ```
    /// use ctrl_core::stall::{StallGuard, StallState};
    /// use fixed::types::I16F16;
    /// let g = StallGuard::new(I16F16::ONE, 1);
    /// let mut st = StallState::new();
    /// g.update(&mut st, I16F16::lit("2"));
    /// st.clear();
    /// assert_eq!((st.is_tripped(), st.ticks_over()), (false, 0));
    /// ```
    pub fn clear(&mut self) {
        *self = StallState::new();
    }
}

impl StallGuard {
    /// Settings: error limit in counts (used as a magnitude) and the number of consecutive
    /// ticks over it that trips the guard.
    ///
    /// ```
    /// use ctrl_core::stall::StallGuard;
    /// use fixed::types::I16F16;
    /// const G: StallGuard = StallGuard::new(I16F16::lit("40"), 250);
    /// assert_eq!(G.ticks(), 250);
    /// ```
    pub const fn new(limit: I16F16, ticks: u16) -> StallGuard {
        StallGuard {
            limit: abs_sat(limit),
            ticks: if ticks == 0 { 1 } else { ticks },
        }
    }

    /// A guard that never trips (limit `I16F16::MAX`; an error cannot exceed it).
    ///
    /// ```
    /// use ctrl_core::stall::{StallGuard, StallState};
    /// use fixed::types::I16F16;
    /// let mut st = StallState::new();
    /// assert!(!StallGuard::OFF.update(&mut st, I16F16::MIN));
    /// ```
    pub const OFF: StallGuard = StallGuard {
        limit: I16F16::MAX,
        ticks: u16::MAX,
    };

    /// Error limit, counts.
    ///
    /// ```
    /// use ctrl_core::stall::StallGuard;
    /// use fixed::types::I16F16;
    /// assert_eq!(StallGuard::new(I16F16::lit("-3"), 5).limit(), I16F16::lit("3"));
    /// ```
    pub const fn limit(&self) -> I16F16 {
        self.limit
    }

    /// Consecutive ticks over the limit that trip the guard (`>= 1`).
    ///
    /// ```
    /// use ctrl_core::stall::StallGuard;
    /// use fixed::types::I16F16;
    /// assert_eq!(StallGuard::new(I16F16::ONE, 0).ticks(), 1);
    /// ```
    pub const fn ticks(&self) -> u16 {
        self.ticks
    }

    /// One tick with the tracking error (counts); returns `true` while the fault is latched.
    ///
    /// ```
    /// use ctrl_core::stall::{StallGuard, StallState};
    /// use fixed::types::I16F16;
    /// let g = StallGuard::new(I16F16::lit("10"), 2);
    /// let mut st = StallState::new();
    /// assert!(!g.update(&mut st, I16F16::lit("-11")));
    /// assert!(!g.update(&mut st, I16F16::lit("5"))); // resets the count
    /// assert!(!g.update(&mut st, I16F16::lit("11")));
    /// assert!(g.update(&mut st, I16F16::lit("11")));
    /// ```
    #[inline(always)]
    pub fn update(&self, state: &mut StallState, error: I16F16) -> bool {
        if abs_sat(error) > self.limit {
            state.over = state.over.saturating_add(1);
        } else {
            state.over = 0;
        }
        if state.over >= self.ticks {
            state.tripped = true;
        }
        state.tripped
    }
}
