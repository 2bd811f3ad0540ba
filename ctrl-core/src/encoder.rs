//! Wheel encoders: 16-bit hardware counter wrap and the forward/rotation axes.

use fixed::types::{I16F16, I32F32};

/// Encoder settings: the counting direction of each wheel (a mirrored motor often counts
/// backwards on one side).
///
/// Positions are counted from the first reading. Wrap policy:
/// * the hardware counter is `u16` and wraps; each tick's change is
///   `raw.wrapping_sub(last) as i16`, correct as long as a wheel moves less than 32768
///   counts between two ticks (thousands of times faster than any small robot);
/// * wheel positions are `i32` counts accumulated with `wrapping_add` (about ±2.1e9 counts,
///   786 km with the demo's 0.367 mm counts); the axis sum and difference are `i32` with
///   `wrapping` arithmetic too, so the axes stay exact for |position| < 2^30 counts.
///
/// Axes: forward = (L + R) / 2, rotation = (R - L) / 2, in wheel-arc counts. They are kept as
/// the exact integers `L + R` and `R - L` (half-count units) and exposed as [`I32F32`] /
/// [`I16F16`], where the half count is exact.
///
/// ```
/// use ctrl_core::encoder::{EncoderState, Encoders};
/// use fixed::types::{I16F16, I32F32};
///
/// static ENC: Encoders = Encoders::new(false, true); // right wheel counts backwards
/// let mut st = EncoderState::new();
/// ENC.update(&mut st, 65530, 10); // first reading: the reference
/// // Left moves +10 across the wrap (65530 -> 4), right moves forward 7 (10 -> 3 raw).
/// let d = ENC.update(&mut st, 4, 3);
/// assert_eq!((d.left, d.right), (10, 7));
/// // Hand check: forward = (10 + 7) / 2 = 8.5, rotation = (7 - 10) / 2 = -1.5 counts.
/// assert_eq!(st.forward(), I32F32::from_num(8.5));
/// assert_eq!(st.rotation(), I32F32::from_num(-1.5));
/// assert_eq!(d.forward(), I16F16::from_num(8.5));
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Encoders {
    invert_left: bool,
    invert_right: bool,
}

/// Counts gained by each wheel in one tick (after the direction setting).
///
/// ```
/// use ctrl_core::encoder::WheelDeltas;
/// let d = WheelDeltas { left: 3, right: -1 };
/// assert_eq!(d.forward(), fixed::types::I16F16::from_num(1));
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct WheelDeltas {
    /// Left wheel counts this tick.
    pub left: i32,
    /// Right wheel counts this tick.
    pub right: i32,
}

impl WheelDeltas {
    /// Forward speed `(L + R) / 2` in counts/tick (exact).
    ///
    /// ```
    /// use ctrl_core::encoder::WheelDeltas;
    /// assert_eq!(WheelDeltas { left: 1, right: 2 }.forward(), fixed::types::I16F16::from_num(1.5));
    /// ```
    pub const fn forward(&self) -> I16F16 {
        half_counts(self.left + self.right)
    }

    /// Rotation speed `(R - L) / 2` in wheel-arc counts/tick (exact).
    ///
    /// ```
    /// use ctrl_core::encoder::WheelDeltas;
    /// assert_eq!(WheelDeltas { left: 1, right: 2 }.rotation(), fixed::types::I16F16::from_num(0.5));
    /// ```
    pub const fn rotation(&self) -> I16F16 {
        half_counts(self.right - self.left)
    }
}

/// `s / 2` as `I16F16` for `|s| <= 65536` (two wheel deltas of at most 32768 each);
/// `s = 65536` saturates to `I16F16::MAX`.
const fn half_counts(s: i32) -> I16F16 {
    if s > 65535 {
        I16F16::MAX
    } else if s < -65536 {
        I16F16::MIN
    } else {
        I16F16::from_bits(s << 15)
    }
}

/// Encoder positions: last raw readings, wheel positions and the axis sum/difference.
///
/// ```
/// use ctrl_core::encoder::EncoderState;
/// let st = EncoderState::new();
/// assert_eq!(st.left(), 0);
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct EncoderState {
    last_left: u16,
    last_right: u16,
    started: bool,
    left: i32,
    right: i32,
    sum: i32,
    diff: i32,
    last: WheelDeltas,
}

impl EncoderState {
    /// No reading yet; the first [`Encoders::update`] only records the reference.
    ///
    /// ```
    /// use ctrl_core::encoder::EncoderState;
    /// static ST: EncoderState = EncoderState::new();
    /// assert_eq!(ST.right(), 0);
    /// ```
    pub const fn new() -> EncoderState {
        EncoderState {
            last_left: 0,
            last_right: 0,
            started: false,
            left: 0,
            right: 0,
            sum: 0,
            diff: 0,
            last: WheelDeltas { left: 0, right: 0 },
        }
    }

    /// Left wheel position, counts since the first reading.
    ///
    /// ```
    /// use ctrl_core::encoder::{EncoderState, Encoders};
    /// let mut st = EncoderState::new();
    /// let enc = Encoders::new(false, false);
    /// enc.update(&mut st, 100, 0);
    /// enc.update(&mut st, 90, 0);
    /// assert_eq!(st.left(), -10);
    /// ```
    pub const fn left(&self) -> i32 {
        self.left
    }

    /// Right wheel position, counts since the first reading.
    ///
    /// ```
    /// use ctrl_core::encoder::{EncoderState, Encoders};
    /// let mut st = EncoderState::new();
    /// let enc = Encoders::new(false, false);
    /// enc.update(&mut st, 0, 65535);
    /// enc.update(&mut st, 0, 1);
    /// assert_eq!(st.right(), 2);
    /// ```
    pub const fn right(&self) -> i32 {
        self.right
    }

    /// Forward axis position `(L + R) / 2`, counts (exact to the half count).
    ///
    /// ```
    /// use ctrl_core::encoder::{EncoderState, Encoders};
    /// let mut st = EncoderState::new();
    /// let enc = Encoders::new(false, false);
    /// enc.update(&mut st, 0, 0);
    /// enc.update(&mut st, 1, 0);
    /// assert_eq!(st.forward(), fixed::types::I32F32::from_num(0.5));
    /// ```
    pub const fn forward(&self) -> I32F32 {
        I32F32::from_bits((self.sum as i64) << 31)
    }

    /// Rotation axis position `(R - L) / 2`, wheel-arc counts (exact to the half count).
    /// Heading in radians is `rotation * count_size * 2 / track_width`.
    ///
    /// ```
    /// use ctrl_core::encoder::{EncoderState, Encoders};
    /// let mut st = EncoderState::new();
    /// let enc = Encoders::new(false, false);
    /// enc.update(&mut st, 0, 0);
    /// enc.update(&mut st, 0, 3);
    /// assert_eq!(st.rotation(), fixed::types::I32F32::from_num(1.5));
    /// ```
    pub const fn rotation(&self) -> I32F32 {
        I32F32::from_bits((self.diff as i64) << 31)
    }

    /// The wheel changes of the last update.
    ///
    /// ```
    /// use ctrl_core::encoder::{EncoderState, Encoders};
    /// let mut st = EncoderState::new();
    /// let enc = Encoders::new(false, false);
    /// enc.update(&mut st, 0, 0);
    /// enc.update(&mut st, 2, 4);
    /// assert_eq!(st.last_deltas().right, 4);
    /// ```
    pub const fn last_deltas(&self) -> WheelDeltas {
        self.last
    }
}

impl Encoders {
    /// Settings; `true` inverts that wheel's count direction.
    ///
    /// ```
    /// use ctrl_core::encoder::Encoders;
    /// const ENC: Encoders = Encoders::new(false, true);
    /// assert_eq!(ENC.inverted(), [false, true]);
    /// ```
    pub const fn new(invert_left: bool, invert_right: bool) -> Encoders {
        Encoders {
            invert_left,
            invert_right,
        }
    }

    /// `[left, right]` inversion flags.
    ///
    /// ```
    /// use ctrl_core::encoder::Encoders;
    /// assert_eq!(Encoders::new(true, false).inverted(), [true, false]);
    /// ```
    pub const fn inverted(&self) -> [bool; 2] {
        [self.invert_left, self.invert_right]
    }

    /// Takes the raw 16-bit counter values of one tick and returns each wheel's change. The
    /// first call after [`EncoderState::new`] only records the reference and returns zero.
    ///
    /// ```
    /// use ctrl_core::encoder::{EncoderState, Encoders};
    /// let mut st = EncoderState::new();
    /// let enc = Encoders::new(false, false);
    /// assert_eq!(enc.update(&mut st, 5000, 7).left, 0);
    /// assert_eq!(enc.update(&mut st, 4990, 7).left, -10);
    /// ```
    #[inline(always)]
    pub fn update(&self, state: &mut EncoderState, left_raw: u16, right_raw: u16) -> WheelDeltas {
        if !state.started {
            state.started = true;
            state.last_left = left_raw;
            state.last_right = right_raw;
            state.last = WheelDeltas::default();
            return state.last;
        }
        let mut dl = left_raw.wrapping_sub(state.last_left) as i16 as i32;
        let mut dr = right_raw.wrapping_sub(state.last_right) as i16 as i32;
        state.last_left = left_raw;
        state.last_right = right_raw;
        if self.invert_left {
            dl = -dl; // |dl| <= 32768: no overflow in i32
        }
        if self.invert_right {
            dr = -dr;
        }
        state.left = state.left.wrapping_add(dl);
        state.right = state.right.wrapping_add(dr);
        state.sum = state.sum.wrapping_add(dl + dr);
        state.diff = state.diff.wrapping_add(dr - dl);
        state.last = WheelDeltas {
            left: dl,
            right: dr,
        };
        state.last
    }
}
