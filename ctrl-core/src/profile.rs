//! Trapezoidal motion profiles that land exactly.
//!
//! A [`Move`] is a distance, a cruise speed, an end speed and an acceleration, in encoder
//! counts and ticks (counts, counts/tick, counts/tick²), all [`I32F32`]. [`Profile::start`]
//! plans it from the current setpoint (position *and* speed), and [`Profile::step`] yields
//! one [`Setpoint`] (position, speed, acceleration) per tick.
//!
//! # The discrete model
//!
//! All arithmetic is on the raw bits of [`I32F32`] (one LSB = 2⁻³² count), so it is exact
//! integer arithmetic. `v[k]` is the setpoint speed at tick `k`, `v[0]` the speed when the
//! move starts and `v[K] = end speed` when it ends, `K` ticks later. The position is
//! advanced by the trapezoid rule, `p[k] = p[k-1] + (v[k-1] + v[k]) / 2`, kept internally
//! as a doubled value (an `i64`) so the halving never loses anything; the reported position is the
//! doubled value halved and rounded toward zero (at most ½ LSB from the exact trapezoid
//! sum, equal to the target at the end of the move, and mirror-symmetric about 0). So `p`
//! and `v` describe the same instant.
//!
//! # The plan (made once in [`Profile::start`])
//!
//! Work in the move's direction (`w = ±v`), with start speed `w0`, end speed `ve`,
//! acceleration `a` and cruise speed `vc`. For a move of `K` ticks, every speed sequence
//! that changes by at most `a` per tick and starts at `w0` and ends at `ve` lies between
//!
//! ```text
//! L[k] = max(w0 - k a, ve - (K-k) a)   (slowest: brake at once, speed up into ve last)
//! U[k] = min(w0 + k a, ve + (K-k) a)   (fastest: speed up at once, brake into ve last)
//! ```
//!
//! The profile is `w[k] = clamp(c, L[k], U[k])` for one integer "cruise level" `c`. Because
//! `L` and `U` each move by at most `a` per tick, so does the clamp: the acceleration limit
//! holds **exactly**. With `c = vc` this is the fastest profile of all (it is the upper
//! envelope), with a ramp at full acceleration, a tick with whatever speed change is left
//! over where the ramp meets the cruise level, the cruise, and the same at the end; when
//! the ramps meet before reaching `c` it is the triangular profile.
//!
//! `start` then
//!
//! 1. picks the smallest `K` for which `c = vc` covers the distance (a search over `K`
//!    from the continuous closed-form time as first guess, stepping out and bisecting,
//!    with the interior sum `S_K(c) = Σ w[k]` in closed form: the clamp is affine in `k`
//!    between at most six break points, so each piece is an arithmetic series);
//! 2. finds the largest `c ≤ vc` with `S_K(c) ≤ M`, where `M = distance − (w0 + ve)/2` is
//!    what the interior ticks must cover (the trapezoid rule gives the two end speeds half
//!    weight; the doubled target is moved by one if needed so that `M` is a whole number
//!    of LSB, on the side that still rounds to the target), by Newton steps on the
//!    piecewise linear `S_K`, guarded by bisection;
//! 3. puts the remainder `R = M − S_K(c)` (fewer LSB than the number of ticks that
//!    sit on the cruise level) as `+1 LSB` on the first `R` of those ticks. They are at
//!    `c + 1 ≤ vc`, and moving a cruise tick by one LSB keeps every speed change within `a`
//!    (it is one LSB against another cruise tick, and towards a ramp tick it closes a gap
//!    the ramp already had).
//!
//! The clamp of these lines is piecewise affine in `k`: it is affine between the six break
//! points where one comparison inside it flips (a line against `c`, or the two lines of
//! `L` or of `U` against each other), the two ends of the `+1 LSB` ticks and the last tick.
//! So `start` also lists the plan as at most ten pieces `{ticks, first speed, speed change
//! per tick}` (adjacent pieces that continue each other are merged: a trapezoid is two to
//! five pieces). Per tick, [`Profile::step`] only counts down the running piece, adds its
//! speed change to the speed (or takes the next piece's first speed) and adds the speed to
//! the position: no multiplication, no division, no search. A unit test runs it against
//! the former per-tick form (four lines advanced by `a` every tick, two `max`/`min` and a
//! clamp, `i128` position) over random chains of moves, retargets, stops and holds: bit
//! for bit the same.
//!
//! Before it accepts a plan, `start` also checks on the pieces that the doubled position
//! stays inside the `i64` range on every tick: within a piece it is a parabola in the tick
//! number (`P1 + 2 f t + δ t²`), so its extremes are at the piece's ends or next to the
//! vertex. A unit test checks this against walking the per-tick plan in `i128`.
//!
//! If no `K` works with `c ≥ 0` (the setpoint is too fast to stop within the distance, or
//! the new target is behind it, including a zero distance while moving) and the end speed
//! is zero, the plan allows `c` down to `−vc`: the profile brakes at full acceleration,
//! reverses, cruises back at most at `vc` and stops exactly at the target. With a non-zero
//! end speed such a move is refused with [`Error::OutOfRange`] (the end speed cannot be
//! reached within the distance).
//!
//! # Guarantees and error bounds
//!
//! For every accepted move (given an `accel` of at least 1 LSB):
//!
//! * **Exact arrival:** after the last tick the position is the start position plus the
//!   distance, bit for bit, and the speed is the end speed (in the direction of the
//!   distance). Positions therefore never drift over any number of moves.
//! * **Acceleration:** `|v[k] − v[k−1]| ≤ accel` on every tick (no LSB over), also across a
//!   retarget (the new plan starts from the current speed).
//! * **Speed:** `|v[k]| ≤ cruise_speed` on every tick, except while a start speed above
//!   the cruise speed is being shed (then `|v|` falls by `accel` per tick).
//! * **Monotone:** when start and end speed are not against the direction of the move and
//!   no reversal is needed, the speed never changes sign, so the position is monotone.
//! * **Time:** for a move with `0 ≤ w0 ≤ vc`, `0 ≤ ve ≤ vc` and no reversal, let `T` be the
//!   continuous closed-form time (ramps `|vc − w0|/a` and `|vc − ve|/a` plus cruise, or the
//!   triangular form with peak `v_p = √(a d + (w0² + ve²)/2)`). Then
//!   `T ≤ K < T + 1 + (a/4 + ½ LSB) / v_top`, with `v_top = min(vc, v_p)`. The `a/4` is the
//!   area the sampled ramps lose at their corners (at most `a φ(1−φ)` for corners falling
//!   at fraction `φ` of a tick), and the ½ LSB is the parity adjustment of the doubled
//!   position. For the demo rover's forward axis (`a ≈ 0.013`, `vc ≈ 2.18` counts/tick)
//!   that is `K < T + 1.0015`.
//! * **Position rounding:** within a move the reported position is the exact trapezoid
//!   sum rounded toward zero to an LSB (≤ ½ LSB off).
//! * **Range:** every setpoint of an accepted move lies strictly inside ±2³⁰ counts
//!   ([`POSITION_LIMIT`]; `start` refuses a move that would leave it on any tick, also by
//!   overshooting while it brakes), so the position never saturates during a move.
//! * **Speed and acceleration range:** every [`Setpoint`] any `Profile` returns (moves,
//!   retargets, coasting, [`Profile::stop`], [`Profile::hold`]) has `|speed| < 2¹⁵`
//!   counts/tick and `|accel| < 2¹⁵` counts/tick², i.e. both are within `I16F16` range, so
//!   narrowing them is `(bits >> 16) as i32` with no saturation
//!   ([`Setpoint::speed_i16f16`]). By induction: `start` refuses `cruise_speed` and
//!   `accel` of 2¹⁵ or more; a plan's speeds lie between its start speed (the previous
//!   setpoint's, below 2¹⁵ by induction), its end speed and its level (`|c| ≤ cruise`), as
//!   `min(max(c, L), U)` with `L ≤ max(w0, ve)` and `U ≥ min(w0, ve)` shows; its speed
//!   changes are at most `accel`; braking only lowers `|speed|` by at most the last move's
//!   accel; coasting keeps the speed; a hold sets speed and accel to 0.
//! * **Mirror image:** a move of `−d` from speed `−u` at position `−p` gives exactly the
//!   negated setpoints of the move of `d` from `u` at `p` (the position saturation below
//!   is the one exception: it is −2³⁰ counts at the bottom and 2³⁰ − 2⁻³² at the top).
//!
//! # Overflow policy
//!
//! The planner works in `i128` and refuses (with [`Error::OutOfRange`], leaving the
//! profile unchanged) a target not strictly inside ±2³⁰ counts ([`POSITION_LIMIT`]), a
//! plan whose setpoint would leave that range on the way, a `cruise_speed` or `accel` of
//! 2¹⁵ or more ([`SPEED_LIMIT`], [`ACCEL_LIMIT`]) and a plan longer than [`MAX_TICKS`]
//! (`u32::MAX` ticks, so the per-tick counters are `u32`).
//!
//! Per tick the state is 64 bits or less: the doubled position is an `i64`, speed and
//! acceleration `i64` (always below 2¹⁵ counts/tick in magnitude, so their additions
//! cannot overflow), the piece counter a `u32`. Inside a piece of an accepted plan the
//! doubled position provably stays in the `i64` range (checked by `start`), so it is a
//! plain add there. Coasting (after a move with a non-zero end speed) and braking
//! ([`Profile::stop`]) can carry the position past the range; there the doubled position
//! **saturates** (never wraps) at the `i64` range, so the reported position stops at
//! −2³⁰ counts or 2³⁰ − 2⁻³² counts while the speed keeps its value (the setpoint is then
//! no longer consistent, and a `start` from there refuses every move, since any plan
//! would first carry on past the range: [`Profile::hold`] first). [`Profile::at`] saturates a position outside the
//! range the same way. At the demo rover's 0.367 mm per count, 2³⁰ counts is about 390 km.
//!
//! # Cost
//!
//! `step` inside a piece (the common tick) is one `u32` count-down, one `i64` addition for
//! the speed, one for the doubled position and its halving: **43 instructions per tick on
//! a Cortex-M0 (thumbv6m) and 26 on a Cortex-M4F (thumbv7em)**, instruction counts (not
//! cycles) under QEMU, measured by `bench/mcu/run.sh` (path `profile_fixed`, the demo
//! forward move accelerating; it was 200 / 112 with an `i128` position and 613 / 395 with
//! the per-tick envelopes). That short path is inlined at the call site; the first tick of
//! each piece, the tick after a plan, coasting and braking go through an out-of-line
//! `step_edge` (212 bytes on thumbv6m, 218 on thumbv7em; no calls, so no division and no
//! multiplication). `start` evaluates the closed-form
//! sum a handful of times, each with six `i128` divisions: about 6 times for a move whose
//! first guess of `K` (the closed-form time) is right, as for the demo moves, and up to
//! about 30 for short triangular moves and for retargets that must reverse. The first guess
//! only saves work; the search gives the same `K` from any guess. On a core without a
//! divider (thumbv6m) each division is a software routine, so call `start` from the main
//! loop rather than from the tick interrupt if the tick budget is tight. The planner has
//! no panic paths (its divisions and products go through checked helpers).

use fixed::types::{I16F16, I32F32};

use crate::Error;

/// Longest plan that [`Profile::start`] accepts, in ticks: `u32::MAX` (2³² − 1, about
/// 99 days at 500 Hz), so that the per-tick counters are 32-bit.
///
/// ```
/// assert_eq!(ctrl_core::profile::MAX_TICKS, u32::MAX as u64);
/// ```
pub const MAX_TICKS: u64 = u32::MAX as u64;

/// Bound on target positions, counts (exclusive): [`Profile::start`] refuses a move whose
/// target is not strictly inside `±POSITION_LIMIT` = ±2³⁰ counts, or whose setpoint would
/// leave that range on the way (a retarget that overshoots while braking). The doubled
/// position is an `i64`, so reported positions cover about ±2³⁰ counts (module docs,
/// overflow policy).
///
/// ```
/// use ctrl_core::profile::POSITION_LIMIT;
/// assert_eq!(POSITION_LIMIT, fixed::types::I32F32::from_num(1 << 30));
/// ```
pub const POSITION_LIMIT: I32F32 = I32F32::from_bits(1 << 62);

/// Bound on a move's cruise speed, counts/tick (exclusive): [`Profile::start`] refuses
/// `cruise_speed ≥ 2¹⁵`. Every [`Setpoint::speed`] is then strictly inside `±SPEED_LIMIT`.
///
/// ```
/// use ctrl_core::profile::SPEED_LIMIT;
/// assert_eq!(SPEED_LIMIT, fixed::types::I32F32::from_num(1 << 15));
/// ```
pub const SPEED_LIMIT: I32F32 = I32F32::from_bits(1 << 47);

/// Bound on a move's acceleration, counts/tick² (exclusive): [`Profile::start`] refuses
/// `accel ≥ 2¹⁵`. Every [`Setpoint::accel`] is then strictly inside `±ACCEL_LIMIT`.
///
/// ```
/// use ctrl_core::profile::ACCEL_LIMIT;
/// assert_eq!(ACCEL_LIMIT, fixed::types::I32F32::from_num(1 << 15));
/// ```
pub const ACCEL_LIMIT: I32F32 = I32F32::from_bits(1 << 47);

/// One move: distance, cruise speed, end speed and acceleration.
///
/// * `distance`: counts, relative to the setpoint position when the move starts; any sign,
///   or zero (come to rest here). The target must lie strictly inside ±2³⁰ counts
///   ([`POSITION_LIMIT`]).
/// * `cruise_speed`: counts/tick, magnitude, must be `> 0` and `< 2¹⁵` ([`SPEED_LIMIT`]).
/// * `end_speed`: counts/tick, magnitude in the direction of `distance`, `0 ≤ end_speed ≤
///   cruise_speed`; must be zero for a zero distance.
/// * `accel`: counts/tick², magnitude, must be `> 0` and `< 2¹⁵` ([`ACCEL_LIMIT`]).
///
/// The values are checked by [`Profile::start`], so a `Move` can be a `const`.
///
/// ```
/// use ctrl_core::profile::Move;
/// use fixed::types::I32F32;
///
/// // 1000 counts forward, cruise 2 counts/tick, stop at the end, 0.01 counts/tick².
/// const FORWARD: Move = Move::new(
///     I32F32::lit("1000"),
///     I32F32::lit("2"),
///     I32F32::ZERO,
///     I32F32::lit("0.01"),
/// );
/// assert_eq!(FORWARD.distance(), I32F32::from_num(1000));
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Move {
    distance: I32F32,
    cruise_speed: I32F32,
    end_speed: I32F32,
    accel: I32F32,
}

impl Move {
    /// A move; see the type's docs for units and valid ranges.
    ///
    /// ```
    /// use ctrl_core::profile::Move;
    /// use fixed::types::I32F32;
    ///
    /// let back = Move::new(I32F32::from_num(-250), I32F32::ONE, I32F32::ZERO, I32F32::lit("0.02"));
    /// assert_eq!(back.distance(), I32F32::from_num(-250));
    /// ```
    pub const fn new(
        distance: I32F32,
        cruise_speed: I32F32,
        end_speed: I32F32,
        accel: I32F32,
    ) -> Move {
        Move {
            distance,
            cruise_speed,
            end_speed,
            accel,
        }
    }

    /// Distance in counts (relative to the setpoint position at [`Profile::start`]).
    ///
    /// ```
    /// # use ctrl_core::profile::Move;
    /// # use fixed::types::I32F32;
    /// let m = Move::new(I32F32::from_num(5), I32F32::ONE, I32F32::ZERO, I32F32::ONE);
    /// assert_eq!(m.distance(), I32F32::from_num(5));
    /// ```
    pub const fn distance(&self) -> I32F32 {
        self.distance
    }

    /// Cruise speed in counts/tick (magnitude).
    ///
    /// ```
    /// # use ctrl_core::profile::Move;
    /// # use fixed::types::I32F32;
    /// let m = Move::new(I32F32::from_num(5), I32F32::ONE, I32F32::ZERO, I32F32::ONE);
    /// assert_eq!(m.cruise_speed(), I32F32::ONE);
    /// ```
    pub const fn cruise_speed(&self) -> I32F32 {
        self.cruise_speed
    }

    /// End speed in counts/tick (magnitude, in the direction of the distance).
    ///
    /// ```
    /// # use ctrl_core::profile::Move;
    /// # use fixed::types::I32F32;
    /// let m = Move::new(I32F32::from_num(5), I32F32::ONE, I32F32::lit("0.5"), I32F32::ONE);
    /// assert_eq!(m.end_speed(), I32F32::lit("0.5"));
    /// ```
    pub const fn end_speed(&self) -> I32F32 {
        self.end_speed
    }

    /// Acceleration in counts/tick² (magnitude), used for speeding up and slowing down.
    ///
    /// ```
    /// # use ctrl_core::profile::Move;
    /// # use fixed::types::I32F32;
    /// let m = Move::new(I32F32::from_num(5), I32F32::ONE, I32F32::ZERO, I32F32::lit("0.25"));
    /// assert_eq!(m.accel(), I32F32::lit("0.25"));
    /// ```
    pub const fn accel(&self) -> I32F32 {
        self.accel
    }
}

/// One tick's setpoint.
///
/// * `position`: counts (absolute, in the profile's frame).
/// * `speed`: counts/tick at the same instant.
/// * `accel`: counts/tick², the speed change over the tick just ended
///   (`speed[k] − speed[k−1]`).
///
/// **Range:** every `Setpoint` that a [`Profile`] returns has `|speed| < 2¹⁵` counts/tick
/// ([`SPEED_LIMIT`]) and `|accel| < 2¹⁵` counts/tick² ([`ACCEL_LIMIT`]), so speed and accel
/// are within `I16F16` range: narrowing them is `(bits >> 16) as i32` with no saturation
/// ([`Setpoint::speed_i16f16`], [`Setpoint::accel_i16f16`]). Its `position` is within
/// `[−2³⁰, 2³⁰)` counts (module docs, overflow policy).
///
/// ```
/// use ctrl_core::profile::{Profile, Setpoint};
/// use fixed::types::I32F32;
///
/// let sp = Profile::new().setpoint();
/// assert_eq!(sp, Setpoint { position: I32F32::ZERO, speed: I32F32::ZERO, accel: I32F32::ZERO });
/// ```
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Setpoint {
    /// Setpoint position in counts.
    pub position: I32F32,
    /// Setpoint speed in counts/tick.
    pub speed: I32F32,
    /// Speed change over the last tick, counts/tick².
    pub accel: I32F32,
}

impl Setpoint {
    /// `speed` narrowed to `I16F16` (counts/tick): `(bits >> 16) as i32`, dropping the 16
    /// lowest fraction bits (rounds toward −∞, error < 2⁻¹⁶). No saturation is needed for a
    /// setpoint from a [`Profile`] (`|speed| < 2¹⁵`, see the type's docs), so this equals a
    /// saturating narrow there; for a hand-made `Setpoint` outside that range the high bits
    /// are dropped (it wraps).
    ///
    /// ```
    /// use ctrl_core::profile::{Move, Profile};
    /// use fixed::types::{I16F16, I32F32};
    ///
    /// let mut p = Profile::new();
    /// p.start(Move::new(I32F32::from_num(6), I32F32::from_num(2), I32F32::ZERO, I32F32::ONE))
    ///     .unwrap();
    /// assert_eq!(p.step().speed_i16f16(), I16F16::ONE);
    /// ```
    #[inline(always)]
    pub const fn speed_i16f16(&self) -> I16F16 {
        I16F16::from_bits((self.speed.to_bits() >> 16) as i32)
    }

    /// `accel` narrowed to `I16F16` (counts/tick²), like [`Setpoint::speed_i16f16`]:
    /// `(bits >> 16) as i32`, exact up to the dropped 16 fraction bits for a setpoint from
    /// a [`Profile`] (`|accel| < 2¹⁵`).
    ///
    /// ```
    /// use ctrl_core::profile::{Move, Profile};
    /// use fixed::types::{I16F16, I32F32};
    ///
    /// let mut p = Profile::new();
    /// p.start(Move::new(I32F32::from_num(-6), I32F32::from_num(2), I32F32::ZERO, I32F32::ONE))
    ///     .unwrap();
    /// assert_eq!(p.step().accel_i16f16(), I16F16::from_num(-1));
    /// ```
    #[inline(always)]
    pub const fn accel_i16f16(&self) -> I16F16 {
        I16F16::from_bits((self.accel.to_bits() >> 16) as i32)
    }
}

/// What [`Profile::step`] does next.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
enum Mode {
    /// No move running: keep the current speed (zero after a stop, a hold or a move that
    /// ends at rest).
    Coast,
    /// Running a plan.
    Plan,
    /// Braking to rest at `Profile::brake_accel`.
    Brake,
}

/// Most segments a plan holds: the interior is affine between at most nine break points
/// (the six of [`Shape::splits`], both ends of the `+1 LSB` ticks and the last tick), so
/// a plan never has more than ten pieces (merged pieces need fewer).
const SEGMENTS: usize = 10;

/// One affine piece of a plan's output speed: `ticks` ticks, the first at speed `first`,
/// each following one `delta` faster (all LSB, signed, as output).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
struct Segment {
    /// Speed on the first tick of the piece.
    first: i64,
    /// Speed change per tick after the first.
    delta: i64,
    /// Ticks in the piece (at least 1 in a used segment; a plan has at most
    /// [`MAX_TICKS`] ticks, so this fits).
    ticks: u32,
}

impl Segment {
    const NONE: Segment = Segment {
        first: 0,
        delta: 0,
        ticks: 0,
    };
}

/// A planned move as precomputed speed pieces (see the module docs): the speed sequence
/// `clamp(c, L[k], U[k])` (plus the `+1 LSB` ticks) is piecewise affine, so `start` lists
/// its pieces once and `step` only counts down and adds. Where `step` stands in it is
/// kept in [`Profile`] (`next`, `left`, `delta`), next to the rest of the per-tick state.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
struct Plan {
    /// The pieces, in order; `segments[..count]` are used.
    segments: [Segment; SEGMENTS],
    /// Number of used pieces.
    count: u8,
}

impl Plan {
    const IDLE: Plan = Plan {
        segments: [Segment::NONE; SEGMENTS],
        count: 0,
    };

    /// The plan for `shape` at level `level` with `+1 LSB` on ticks `bump_from..bump_to`,
    /// output with the sign of the move (`negative`). Start-time work only.
    fn build(shape: &Shape, level: i128, bump_from: i128, bump_to: i128, negative: bool) -> Plan {
        let n = shape.n;
        // Output speed at tick `k` (1 ..= n), exactly as the per-tick envelope plan gives it.
        let out = |k: i128| {
            let c = if k >= bump_from && k < bump_to {
                level + 1
            } else {
                level
            };
            let w = sat_i64(shape.value(k, c));
            if negative {
                w.saturating_neg()
            } else {
                w
            }
        };
        // Last ticks of the affine pieces: sorted break points inside 1 ..= n − 1, then n.
        let mut ends = [0i128; SEGMENTS];
        let [s0, s1, s2, s3, s4, s5] = shape.splits(level);
        let candidates = [s0, s1, s2, s3, s4, s5, bump_from - 1, bump_to - 1, n - 1];
        let mut used = 0;
        for e in candidates {
            if e >= 1 && e < n {
                if let Some(slot) = ends.get_mut(used) {
                    *slot = e;
                    used += 1;
                }
            }
        }
        if let Some(slot) = ends.get_mut(used) {
            *slot = n;
            used += 1;
        }
        let ends = ends.get_mut(..used).unwrap_or(&mut []);
        ends.sort_unstable();
        let mut plan = Plan::IDLE;
        let mut count = 0usize;
        let mut first_k = 1;
        for &end in ends.iter() {
            if end < first_k {
                continue; // a repeated break point
            }
            let ticks = end - first_k + 1;
            let first = out(first_k);
            let delta = if ticks > 1 {
                out(first_k + 1).wrapping_sub(first)
            } else {
                0
            };
            first_k = end + 1;
            // `n ≤ MAX_TICKS` (the search never goes further), so every piece fits.
            let ticks = u32::try_from(ticks).unwrap_or(u32::MAX);
            // Merge into the previous piece when this one continues it.
            if let Some(prev) = count.checked_sub(1).and_then(|i| plan.segments.get_mut(i)) {
                let step = if prev.ticks > 1 {
                    prev.delta
                } else {
                    first.wrapping_sub(prev.first)
                };
                let next = i128::from(prev.first)
                    + i128::from(prev.ticks).saturating_mul(i128::from(step));
                if next == i128::from(first) && (ticks == 1 || delta == step) {
                    prev.delta = step;
                    prev.ticks = prev.ticks.saturating_add(ticks);
                    continue;
                }
            }
            if let Some(slot) = plan.segments.get_mut(count) {
                *slot = Segment {
                    first,
                    delta,
                    ticks,
                };
                count += 1;
            }
        }
        plan.count = count as u8;
        plan
    }

    /// Whether the doubled position stays within the `i64` range on every tick of the
    /// plan when it starts from doubled position `pos2` and speed `speed` (LSB). Start-time
    /// work: per piece, the doubled position after its `t + 1`-th tick is
    /// `P1 + 2 f t + δ t²` (`f` its first speed, `δ` its speed change, `P1` the doubled
    /// position after its first tick), a parabola in `t`, so its extremes are at the
    /// piece's ends or at the whole ticks next to the vertex `t = −f/δ`.
    fn stays_in_range(&self, pos2: i128, speed: i128) -> bool {
        let inside = |p: i128| p >= i128::from(i64::MIN) && p <= i128::from(i64::MAX);
        let (mut p, mut s) = (pos2, speed);
        for seg in self.segments.iter().take(usize::from(self.count)) {
            let (f, d) = (i128::from(seg.first), i128::from(seg.delta));
            let last = i128::from(seg.ticks) - 1;
            let p1 = p + s + f;
            // |f|, |δ| < 2⁶⁴ and t < 2³²: no product comes near the i128 range.
            let at = |t: i128| {
                p1.saturating_add(mul(2 * f, t))
                    .saturating_add(mul(d, mul(t, t)))
            };
            let mut extremes = [0, last, 0, 0];
            if d != 0 {
                // floor(−f/δ), with a positive divisor.
                let vertex = if d > 0 {
                    floor_div(-f, d)
                } else {
                    floor_div(f, -d)
                };
                // (`max`/`min`, not `clamp`: that one has a panic path.)
                extremes[2] = vertex.max(0).min(last);
                extremes[3] = (vertex + 1).max(0).min(last);
            }
            if !extremes.iter().all(|&t| inside(at(t))) {
                return false;
            }
            p = at(last);
            s = f + mul(d, last);
        }
        true
    }

    /// Ticks left: `left` in the running piece, then all of the pieces from `next` on.
    const fn ticks_after(&self, next: u8, left: u32) -> u64 {
        let mut total = left as u64;
        let mut i = next as usize;
        while i < self.count as usize && i < SEGMENTS {
            total += self.segments[i].ticks as u64;
            i += 1;
        }
        total
    }
}

/// A trapezoidal motion profile: state plus the running plan.
///
/// Starts at rest at position 0 ([`Profile::new`]) or at a given position
/// ([`Profile::at`]). Each [`Profile::step`] advances one tick. A move is planned by
/// [`Profile::start`] from the current setpoint, so calling it during a move retargets
/// smoothly. [`Profile::hold`] freezes at once; [`Profile::stop`] brakes to rest.
///
/// After a move that ends at a non-zero end speed the setpoint keeps that speed (and the
/// position keeps moving) until the next `start`, `stop` or `hold`; [`Profile::is_done`]
/// is already `true` then, so the next move can be chained on the same tick.
///
/// Overflow policy: see the module docs (planner in `i128`, refuses what it cannot
/// represent; the reported position saturates).
///
/// ```
/// use ctrl_core::profile::{Move, Profile};
/// use fixed::types::I32F32;
///
/// let mut prof = Profile::new();
/// // Hand check: 6 counts at cruise 2 counts/tick and 1 count/tick² from rest.
/// // Speeds 0, 1, 2, 2, 1, 0; trapezoid steps 0.5 + 1.5 + 2 + 1.5 + 0.5 = 6 counts in 5 ticks,
/// // which is also the continuous time 6/2 + 2/1 = 5 ticks.
/// prof.start(Move::new(I32F32::from_num(6), I32F32::from_num(2), I32F32::ZERO, I32F32::ONE))
///     .unwrap();
/// let speeds: Vec<f64> = (0..5).map(|_| prof.step().speed.to_num()).collect();
/// assert_eq!(speeds, [1.0, 2.0, 2.0, 1.0, 0.0]);
/// assert!(prof.is_done());
/// assert_eq!(prof.setpoint().position, I32F32::from_num(6));
/// ```
// `repr(C)` only fixes the field order: the per-tick fields come first, so that on
// thumbv6m (load/store offsets of at most 124 bytes) they are all reached from one base
// register, and the pieces (240 bytes, read a few times per move) come last.
#[derive(Clone, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(C)]
pub struct Profile {
    /// Ticks left in the running piece after the last step. Non-zero only in
    /// `Mode::Plan`: then `step` only adds `delta` (the short path).
    left: u32,
    /// Next piece of the plan to start.
    next: u8,
    /// What `step` does when `left` is 0.
    mode: Mode,
    /// Doubled position, LSB (2⁻³² count) × 2; saturates at the `i64` range.
    pos2: i64,
    /// Setpoint speed, LSB/tick.
    speed: i64,
    /// Speed change per tick in the running piece, LSB/tick².
    delta: i64,
    /// Last speed change, LSB/tick².
    accel: i64,
    /// Deceleration for `stop`: the accel of the last started move, LSB/tick².
    brake_accel: i64,
    /// The running plan's pieces (meaningful in `Mode::Plan`).
    plan: Plan,
}

impl Default for Profile {
    /// Same as [`Profile::new`].
    ///
    /// ```
    /// use ctrl_core::profile::Profile;
    /// assert_eq!(Profile::default().setpoint(), Profile::new().setpoint());
    /// ```
    fn default() -> Profile {
        Profile::new()
    }
}

impl Profile {
    /// At rest at position 0, no move.
    ///
    /// ```
    /// use ctrl_core::profile::Profile;
    /// static _P: Profile = Profile::new(); // const, so it can live in a static
    /// let p = Profile::new();
    /// assert!(p.is_done());
    /// assert_eq!(p.setpoint().position, fixed::types::I32F32::ZERO);
    /// ```
    pub const fn new() -> Profile {
        Profile::at(I32F32::ZERO)
    }

    /// At rest at `position` (counts), no move. A position outside ±2³⁰ counts saturates
    /// to the range (module docs, overflow policy).
    ///
    /// ```
    /// use ctrl_core::profile::Profile;
    /// use fixed::types::I32F32;
    /// let p = Profile::at(I32F32::from_num(-40));
    /// assert_eq!(p.setpoint().position, I32F32::from_num(-40));
    /// ```
    pub const fn at(position: I32F32) -> Profile {
        Profile {
            pos2: position.to_bits().saturating_mul(2),
            speed: 0,
            delta: 0,
            accel: 0,
            left: 0,
            next: 0,
            mode: Mode::Coast,
            brake_accel: 0,
            plan: Plan::IDLE,
        }
    }

    /// Plans `mv` from the current setpoint position and speed and makes it the running
    /// move (retargeting if one is running: the speed carries on, with no step).
    ///
    /// # Errors
    ///
    /// [`Error::OutOfRange`] (and the profile is left unchanged) when `accel ≤ 0`,
    /// `cruise_speed ≤ 0`, `end_speed < 0`, `end_speed > cruise_speed`, `end_speed ≠ 0`
    /// with a zero distance, `cruise_speed ≥ 2¹⁵` counts/tick ([`SPEED_LIMIT`]),
    /// `accel ≥ 2¹⁵` counts/tick² ([`ACCEL_LIMIT`]), the target is not strictly inside
    /// ±2³⁰ counts ([`POSITION_LIMIT`]), the setpoint would leave that range on the way
    /// (overshooting while it brakes), the plan would be longer than [`MAX_TICKS`], or the
    /// end speed cannot be reached within the distance without reversing.
    ///
    /// ```
    /// use ctrl_core::{profile::{Move, Profile}, Error};
    /// use fixed::types::I32F32;
    ///
    /// let mut p = Profile::new();
    /// // 1 count is far too short to reach an end speed of 2 counts/tick at 0.01 counts/tick².
    /// let bad = Move::new(I32F32::ONE, I32F32::from_num(2), I32F32::from_num(2), I32F32::lit("0.01"));
    /// assert_eq!(p.start(bad), Err(Error::OutOfRange));
    /// let good = Move::new(I32F32::from_num(300), I32F32::from_num(2), I32F32::from_num(2), I32F32::lit("0.01"));
    /// assert_eq!(p.start(good), Ok(()));
    /// ```
    pub fn start(&mut self, mv: Move) -> Result<(), Error> {
        match self.prepare(mv)? {
            None => {
                // Already there and at rest: nothing to do.
                self.mode = Mode::Coast;
                self.left = 0;
                self.accel = 0;
            }
            Some((shape, found, negative)) => {
                let bump_from = i128::from(found.bump_from);
                let plan = Plan::build(
                    &shape,
                    found.level,
                    bump_from,
                    bump_from + i128::from(found.bump),
                    negative,
                );
                if !plan.stays_in_range(i128::from(self.pos2), i128::from(self.speed)) {
                    return Err(Error::OutOfRange);
                }
                self.plan = plan;
                self.mode = Mode::Plan;
                self.next = 0;
                self.left = 0;
            }
        }
        self.brake_accel = mv.accel.to_bits();
        Ok(())
    }

    /// The checks and the solution for [`Profile::start`], leaving `self` unchanged:
    /// `None` when already at the target and at rest, else the shape, the solved plan and
    /// whether the move runs in the negative direction.
    fn prepare(&self, mv: Move) -> Result<Option<(Shape, Solution, bool)>, Error> {
        let distance = i128::from(mv.distance.to_bits());
        let vc = i128::from(mv.cruise_speed.to_bits());
        let ve = i128::from(mv.end_speed.to_bits());
        let a = i128::from(mv.accel.to_bits());
        let rate = i128::from(SPEED_LIMIT.to_bits());
        if a <= 0 || vc <= 0 || ve < 0 || ve > vc || (distance == 0 && ve != 0) {
            return Err(Error::OutOfRange);
        }
        if vc >= rate || a >= i128::from(ACCEL_LIMIT.to_bits()) {
            return Err(Error::OutOfRange);
        }
        let pos2 = i128::from(self.pos2);
        let here = pos2 / 2; // the reported position (rounded toward zero)
        let target = here + distance;
        let limit = i128::from(POSITION_LIMIT.to_bits());
        if target <= -limit || target >= limit {
            return Err(Error::OutOfRange);
        }
        let u = i128::from(self.speed);
        if distance == 0 && u == 0 {
            return Ok(None);
        }
        let negative = distance < 0 || (distance == 0 && u < 0);
        let signed = |x: i128| if negative { -x } else { x };
        // Doubled end position: 2 target, or one off it when the parity of the interior
        // sum needs it, on the side that still rounds (toward zero) to the target.
        let parity = (pos2 + u + ve).rem_euclid(2);
        let half = match target.signum() {
            0 => signed(parity),
            s if s < 0 => -parity,
            _ => parity,
        };
        let q = signed(2 * target + half - pos2);
        let w0 = signed(u);
        let m = (q - w0 - ve) >> 1; // even by the choice of `half`
        let found = solve(w0, ve, vc, a, m, q >> 1)?;
        let shape = Shape {
            w0,
            ve,
            a,
            n: i128::from(found.ticks),
        };
        Ok(Some((shape, found, negative)))
    }

    /// Advances one tick and returns the new setpoint. Adds and compares only; never
    /// panics. Inside a piece (most ticks) it only counts down and adds (inlined); the
    /// rest goes through an out-of-line path.
    ///
    /// ```
    /// use ctrl_core::profile::{Move, Profile};
    /// use fixed::types::I32F32;
    ///
    /// let mut p = Profile::new();
    /// p.start(Move::new(I32F32::from_num(6), I32F32::from_num(2), I32F32::ZERO, I32F32::ONE)).unwrap();
    /// let sp = p.step();
    /// // First tick: speed 0 -> 1, position 0 + (0 + 1)/2 = 0.5, accel 1.
    /// assert_eq!((sp.position, sp.speed, sp.accel),
    ///            (I32F32::lit("0.5"), I32F32::ONE, I32F32::ONE));
    /// ```
    #[inline]
    pub fn step(&mut self) -> Setpoint {
        let prev = self.speed;
        if self.left != 0 {
            // Inside a piece (the common tick): count down, add the piece's speed change.
            self.left -= 1;
            let next = prev.wrapping_add(self.delta);
            // `start` checked that this plan keeps the doubled position inside `i64` on
            // every tick, so this add never wraps (it is the exact sum).
            self.pos2 = self.pos2.wrapping_add(prev.wrapping_add(next));
            self.accel = self.delta;
            self.speed = next;
        } else {
            self.step_edge(prev);
        }
        self.setpoint()
    }

    /// [`Profile::step`] when no piece is running on: the first tick of a piece, the tick
    /// after a plan's last one, coasting and braking.
    #[inline(never)]
    fn step_edge(&mut self, prev: i64) {
        let next = match self.mode {
            Mode::Coast => prev,
            Mode::Plan => match self.plan.segments.get(usize::from(self.next)) {
                Some(seg) if self.next < self.plan.count => {
                    self.next += 1;
                    self.left = seg.ticks.saturating_sub(1);
                    self.delta = seg.delta;
                    seg.first
                }
                _ => {
                    // The plan ended on the last tick (`is_done` was already true).
                    self.mode = Mode::Coast;
                    prev
                }
            },
            Mode::Brake => {
                let a = self.brake_accel;
                if prev > a {
                    prev - a
                } else if prev < -a {
                    prev + a
                } else {
                    self.mode = Mode::Coast;
                    0
                }
            }
        };
        self.pos2 = self.pos2.saturating_add(prev.wrapping_add(next));
        self.accel = next.wrapping_sub(prev);
        self.speed = next;
    }

    /// Emergency hold: freezes the setpoint at its current position with speed 0 and drops
    /// the running move. The speed steps to zero at once (this is the one place where the
    /// acceleration limit is not kept).
    ///
    /// ```
    /// use ctrl_core::profile::{Move, Profile};
    /// use fixed::types::I32F32;
    ///
    /// let mut p = Profile::new();
    /// p.start(Move::new(I32F32::from_num(100), I32F32::ONE, I32F32::ZERO, I32F32::lit("0.1"))).unwrap();
    /// for _ in 0..20 { p.step(); }
    /// p.hold();
    /// let here = p.setpoint().position;
    /// assert_eq!(p.step().position, here);
    /// assert_eq!(p.setpoint().speed, I32F32::ZERO);
    /// assert!(p.is_done());
    /// ```
    pub const fn hold(&mut self) {
        self.mode = Mode::Coast;
        self.left = 0;
        self.speed = 0;
        self.accel = 0;
    }

    /// Brakes to rest at the acceleration of the last started move (the speed falls by
    /// that much per tick, the last tick takes what is left), then holds. The position
    /// ends wherever braking takes it. With no move started yet it holds at once.
    ///
    /// ```
    /// use ctrl_core::profile::{Move, Profile};
    /// use fixed::types::I32F32;
    ///
    /// let mut p = Profile::new();
    /// p.start(Move::new(I32F32::from_num(1000), I32F32::ONE, I32F32::ZERO, I32F32::lit("0.25"))).unwrap();
    /// for _ in 0..10 { p.step(); } // up at 0.25 per tick: cruising at 1 after 4 ticks
    /// p.stop();
    /// let speeds: Vec<f64> = (0..4).map(|_| p.step().speed.to_num()).collect();
    /// assert_eq!(speeds, [0.75, 0.5, 0.25, 0.0]);
    /// assert!(p.is_done());
    /// ```
    pub const fn stop(&mut self) {
        if self.speed == 0 || self.brake_accel <= 0 {
            self.hold();
        } else {
            self.mode = Mode::Brake;
            self.left = 0;
        }
    }

    /// `true` when no move is running (finished, held, stopped at rest, or never started).
    /// While braking after [`Profile::stop`] it is `false` until the speed is zero.
    ///
    /// ```
    /// use ctrl_core::profile::{Move, Profile};
    /// use fixed::types::I32F32;
    ///
    /// let mut p = Profile::new();
    /// assert!(p.is_done());
    /// p.start(Move::new(I32F32::ONE, I32F32::ONE, I32F32::ZERO, I32F32::ONE)).unwrap();
    /// assert!(!p.is_done());
    /// while !p.is_done() { p.step(); }
    /// assert_eq!(p.setpoint().position, I32F32::ONE);
    /// ```
    pub const fn is_done(&self) -> bool {
        match self.mode {
            Mode::Coast => true,
            // The last piece ran out on the last tick; the next step coasts.
            Mode::Plan => self.left == 0 && self.next >= self.plan.count,
            Mode::Brake => false,
        }
    }

    /// Ticks left in the running move (0 when none is running; while braking after
    /// [`Profile::stop`], also 0).
    ///
    /// ```
    /// use ctrl_core::profile::{Move, Profile};
    /// use fixed::types::I32F32;
    ///
    /// let mut p = Profile::new();
    /// p.start(Move::new(I32F32::from_num(6), I32F32::from_num(2), I32F32::ZERO, I32F32::ONE)).unwrap();
    /// assert_eq!(p.ticks_left(), 5);
    /// p.step();
    /// assert_eq!(p.ticks_left(), 4);
    /// ```
    pub const fn ticks_left(&self) -> u64 {
        match self.mode {
            Mode::Plan => self.plan.ticks_after(self.next, self.left),
            Mode::Coast | Mode::Brake => 0,
        }
    }

    /// The current setpoint (what the last [`Profile::step`] returned, or the start state).
    ///
    /// ```
    /// use ctrl_core::profile::Profile;
    /// use fixed::types::I32F32;
    /// assert_eq!(Profile::at(I32F32::from_num(3)).setpoint().position, I32F32::from_num(3));
    /// ```
    pub const fn setpoint(&self) -> Setpoint {
        Setpoint {
            position: I32F32::from_bits(self.pos2 / 2),
            speed: I32F32::from_bits(self.speed),
            accel: I32F32::from_bits(self.accel),
        }
    }
}

/// `i128` to `i64`, saturating.
const fn sat_i64(x: i128) -> i64 {
    if x > i64::MAX as i128 {
        i64::MAX
    } else if x < i64::MIN as i128 {
        i64::MIN
    } else {
        x as i64
    }
}

/// `floor(x / d)` for `d > 0` (callers guarantee it; 0 otherwise, never a panic). The
/// one place the planner divides, kept out of line so the `i128` division code exists once.
#[inline(never)]
fn floor_div(x: i128, d: i128) -> i128 {
    x.checked_div_euclid(d).unwrap_or(0)
}

/// `x y`, saturating (the planner's products provably fit; this is the safety net). Out of
/// line for code size on cores without a 64-bit multiplier.
#[inline(never)]
fn mul(x: i128, y: i128) -> i128 {
    x.saturating_mul(y)
}

/// `x y`, `None` on overflow; out of line like [`mul`].
#[inline(never)]
fn mul_checked(x: i128, y: i128) -> Option<i128> {
    x.checked_mul(y)
}

/// `ceil(x / d)` for `d > 0`.
fn ceil_div(x: i128, d: i128) -> i128 {
    -floor_div(-x, d)
}

/// The family of `K`-tick speed sequences `w[k] = clamp(c, L[k], U[k])` (module docs),
/// in the move's direction, all in LSB.
struct Shape {
    w0: i128,
    ve: i128,
    a: i128,
    /// `K`.
    n: i128,
}

impl Shape {
    /// `w[k]` for level `c`.
    fn value(&self, k: i128, c: i128) -> i128 {
        let ka = mul(k, self.a);
        let ra = mul(self.n - k, self.a);
        let lower = (self.w0 - ka).max(self.ve - ra);
        let upper = (self.w0 + ka).min(self.ve + ra);
        c.max(lower).min(upper)
    }

    /// `Σ_{k=1}^{K-1} w[k]`: affine in `k` between the floors of six break points, so
    /// each piece is an arithmetic series summed from its end values.
    fn sum(&self, c: i128) -> i128 {
        let last = self.n - 1;
        if last < 1 {
            return 0;
        }
        let mut splits = self.splits(c);
        splits.sort_unstable();
        let mut first = 1;
        let mut total = 0;
        for f in splits {
            if f >= first && f < last {
                total += self.piece(first, f, c);
                first = f + 1;
            }
        }
        total + self.piece(first, last, c)
    }

    /// The break points for level `c` (unsorted): `w[k]` is affine in `k` on each run of
    /// ticks between them, a run ending at a break point `f` (tick `f` is the last of one
    /// run, `f + 1` the first of the next). Each is where one comparison inside the clamp
    /// (a line against `c`, or the two lines of `L` or of `U` against each other) flips.
    fn splits(&self, c: i128) -> [i128; 6] {
        let a = self.a;
        let na = mul(self.n, a);
        [
            floor_div(self.w0 - c, a),
            floor_div(c - self.w0, a),
            floor_div(na - self.ve + c, a),
            floor_div(na + self.ve - c, a),
            floor_div(self.w0 - self.ve + na, 2 * a),
            floor_div(self.ve - self.w0 + na, 2 * a),
        ]
    }

    /// Sum of `w[k]` for `k` in `first..=last`, where it is affine in `k`.
    fn piece(&self, first: i128, last: i128, c: i128) -> i128 {
        // count * (w_first + w_last) is even for an integer arithmetic series.
        mul(last - first + 1, self.value(first, c) + self.value(last, c)) >> 1
    }

    /// The interior ticks at the level: `{k : L[k] ≤ c < U[k]}` is `first..=last`
    /// (empty when `first > last`). Moving `c` by one LSB moves exactly these.
    fn at_level(&self, c: i128) -> (i128, i128) {
        let a = self.a;
        let na = mul(self.n, a);
        let first = 1
            .max(ceil_div(self.w0 - c, a))
            .max(floor_div(c - self.w0, a) + 1);
        let last = (self.n - 1)
            .min(floor_div(c - self.ve + na, a))
            .min(ceil_div(self.ve - c + na, a) - 1);
        (first, last)
    }

    /// Highest interior `U[k]` (where the two rising lines meet); `sum(c)` is the same
    /// for every `c` at or above it. `None` without interior ticks.
    fn peak(&self) -> Option<i128> {
        if self.n < 2 {
            return None;
        }
        let meet = floor_div(self.ve - self.w0 + mul(self.n, self.a), 2 * self.a);
        let upper = |k: i128| {
            let k = k.max(1).min(self.n - 1);
            (self.w0 + mul(k, self.a)).min(self.ve + mul(self.n - k, self.a))
        };
        Some(upper(meet).max(upper(meet + 1)))
    }

    /// Lowest interior `L[k]` (where the two falling lines meet); `sum(c)` is the same for
    /// every `c` at or below it. `None` without interior ticks.
    fn valley(&self) -> Option<i128> {
        if self.n < 2 {
            return None;
        }
        let meet = floor_div(self.w0 - self.ve + mul(self.n, self.a), 2 * self.a);
        let lower = |k: i128| {
            let k = k.max(1).min(self.n - 1);
            (self.w0 - mul(k, self.a)).max(self.ve - mul(self.n - k, self.a))
        };
        Some(lower(meet).min(lower(meet + 1)))
    }

    /// Number of ticks at the level (the slope of `sum` just above `c`).
    fn slope(&self, c: i128) -> i128 {
        let (first, last) = self.at_level(c);
        (last - first + 1).max(0)
    }
}

/// A solved plan.
struct Solution {
    ticks: u64,
    level: i128,
    bump_from: u64,
    bump: u64,
}

/// Smallest `K ≥ from` (up to [`MAX_TICKS`]) for which `fits(K)`, assuming `fits` is
/// false then true along `K`. `hint` is a guess at or just below the answer (any value
/// gives the same answer; a good one saves evaluations).
fn first_fit(from: i128, hint: i128, fits: impl Fn(i128) -> bool) -> Result<i128, Error> {
    let max = i128::from(MAX_TICKS);
    if from > max {
        return Err(Error::OutOfRange);
    }
    let guess = hint.max(from).min(max);
    // Bracket: `lo` does not fit (or is `from - 1`), `hi` fits.
    let (mut lo, mut hi) = if fits(guess) {
        let mut hi = guess;
        let mut stride = 1;
        loop {
            if hi == from {
                return Ok(from);
            }
            let probe = (hi - stride).max(from);
            if !fits(probe) {
                break (probe, hi);
            }
            hi = probe;
            stride *= 2;
        }
    } else {
        let mut lo = guess;
        let mut stride = 1;
        let mut probes = 0;
        loop {
            let probe = (lo + stride).min(max);
            if fits(probe) {
                break (lo, probe);
            }
            if probe == max {
                return Err(Error::OutOfRange);
            }
            lo = probe;
            probes += 1;
            // The guess is usually one or two ticks short: step by one twice first.
            if probes >= 2 {
                stride *= 2;
            }
        }
    };
    while hi - lo > 1 {
        let mid = lo + ((hi - lo) >> 1);
        if fits(mid) {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    Ok(hi)
}

/// The continuous closed-form time (module docs), rounded down: a guess at or just below
/// the smallest `K`, for `0 ≤ w0 ≤ vc` and `d` (LSB) at least the ramp from `w0` to `ve`.
/// With trapezoid phases `T = ((vc − w0)² + (vc − ve)² + 2 a d) / (2 a vc)` (the three
/// phase times over one denominator). `None` outside that case or on overflow.
fn time_hint(w0: i128, ve: i128, vc: i128, a: i128, d: i128) -> Option<i128> {
    if w0 < 0 {
        // Moving away: brake to rest (`|w0|/a`, going `w0²/(2a)` further away), then the
        // whole way from rest.
        let w2 = mul_checked(w0, w0)?;
        let from_rest = time_hint(0, ve, vc, a, d.checked_add(floor_div(w2, 2 * a))?)?;
        return from_rest.checked_add(floor_div(-w0, a));
    }
    if w0 > vc || d < 0 {
        return None;
    }
    let vc2 = mul_checked(vc, vc)?;
    let ramps = floor_div(vc2 - mul(w0, w0) + vc2 - mul(ve, ve), 2 * a);
    if d >= ramps {
        let num = mul(vc - w0, vc - w0)
            .checked_add(mul(vc - ve, vc - ve))?
            .checked_add(mul_checked(mul_checked(a, d)?, 2)?)?;
        Some(floor_div(num, mul_checked(mul_checked(a, vc)?, 2)?))
    } else {
        let sq = mul_checked(a, d)?.checked_add((mul(w0, w0) >> 1) + (mul(ve, ve) >> 1))?;
        let vp = i128::try_from(u128::try_from(sq).ok()?.isqrt()).ok()?;
        Some(floor_div(2 * vp - w0 - ve, a))
    }
}

/// Plans the interior sum `m` (module docs): smallest `K`, then the level and the bump.
/// `d` is the distance (LSB, move direction), only used for the first guess of `K`.
fn solve(w0: i128, ve: i128, vc: i128, a: i128, m: i128, d: i128) -> Result<Solution, Error> {
    let shape = |n| Shape { w0, ve, a, n };
    let k_min = ceil_div((w0 - ve).abs(), a).max(1);
    // Brake through zero, then the way back as a move from rest: a first guess of K
    // for a reversal.
    let back = || {
        (w0 >= 0)
            .then(|| mul_checked(w0, w0))
            .flatten()
            .and_then(|w2| time_hint(0, 0, vc, a, floor_div(w2, 2 * a) - d))
            .map_or(0, |t| t + floor_div(w0, a))
    };
    let reverse = |from| -> Result<(i128, i128), Error> {
        Ok((first_fit(from, back(), |n| shape(n).sum(-vc) <= m)?, -vc))
    };
    // Even the slowest forward profile overshoots: a reversal (the forward search would
    // only find that out after a full search over K). Checked again below.
    let early = if ve == 0 && shape(k_min).sum(0) > m {
        reverse(k_min).ok().filter(|&(n, _)| shape(n).sum(vc) >= m)
    } else {
        None
    };
    let (n, floor) = match early {
        Some(found) => found,
        None => {
            let hint = time_hint(w0, ve, vc, a, d).unwrap_or(0);
            let n_up = first_fit(k_min, hint, |n| shape(n).sum(vc) >= m)?;
            if shape(n_up).sum(0) <= m {
                (n_up, 0)
            } else if ve > 0 {
                // Would need to reverse to arrive at a non-zero end speed.
                return Err(Error::OutOfRange);
            } else {
                reverse(n_up)?
            }
        }
    };
    let sh = shape(n);
    // Largest level c in [floor, vc] with sum(c) <= m; sum(floor) <= m <= sum(vc).
    // Above the peak of U nothing changes (triangular moves), so search below it.
    // Likewise below the valley of L (a reversal that never reaches -vc).
    let top = sh.peak().map_or(vc, |p| p.max(floor).min(vc));
    let floor = sh.valley().map_or(floor, |v| v.max(floor).min(top));
    let (mut lo, mut hi) = (floor, top);
    // A reversal cruises back near `-vc`: there, start with Newton from below.
    let mut s_lo = (floor < 0).then(|| sh.sum(floor));
    let mut s_hi = sh.sum(top);
    let mut newton = true;
    while s_hi > m && hi - lo > 1 {
        let width = hi - lo;
        let mut cand = lo + (width >> 1);
        if newton {
            match s_lo {
                // First step from the top (near the answer at the smallest K): the secant
                // of the last LSB below `hi`.
                None => {
                    let slope = sh.slope(hi - 1);
                    if slope > 0 {
                        cand = hi - ceil_div(s_hi - m, slope);
                    }
                }
                // Then Newton from below: `sum` is linear with this slope just above `lo`.
                Some(s) => {
                    let slope = sh.slope(lo);
                    if m - s < slope {
                        break; // sum(lo + 1) = s + slope > m: lo is the answer
                    }
                    if slope > 0 {
                        cand = lo + floor_div(m - s, slope);
                    }
                }
            }
        }
        if cand <= lo || cand >= hi {
            cand = lo + (width >> 1);
        }
        let s = sh.sum(cand);
        if s <= m {
            lo = cand;
            s_lo = Some(s);
        } else {
            hi = cand;
            s_hi = s;
        }
        newton = 2 * (hi - lo) <= width;
    }
    let (level, s_level) = if s_hi <= m {
        (hi, s_hi)
    } else {
        (lo, s_lo.unwrap_or_else(|| sh.sum(lo)))
    };
    let bump = m - s_level;
    let (bump_from, _) = sh.at_level(level);
    Ok(Solution {
        ticks: u64::try_from(n).map_err(|_| Error::OutOfRange)?,
        level,
        bump_from: u64::try_from(bump_from.max(0)).map_err(|_| Error::OutOfRange)?,
        bump: u64::try_from(bump).map_err(|_| Error::OutOfRange)?,
    })
}

#[cfg(test)]
mod tests {
    extern crate std;

    use super::*;
    use proptest::prelude::*;
    use std::format;

    /// Reference model: the per-tick envelope plan that `Profile::step` ran before the
    /// plans became precomputed pieces (kept verbatim, only renamed). Each tick adds `a` to
    /// the four lines `w0 ± k a`, `ve ± (K − k) a`, takes the two `max`/`min` and clamps
    /// the level (`+1 LSB` on the bump ticks).
    #[derive(Clone, Copy, Debug)]
    struct EnvelopePlan {
        negative: bool,
        tick: u64,
        ticks: u64,
        accel: i128,
        entry_up: i128,
        entry_down: i128,
        exit_up: i128,
        exit_down: i128,
        level: i128,
        bump_from: u64,
        bump_to: u64,
    }

    impl EnvelopePlan {
        fn advance(&mut self) -> i64 {
            self.tick = self.tick.saturating_add(1);
            let a = self.accel;
            self.entry_up = self.entry_up.saturating_add(a);
            self.entry_down = self.entry_down.saturating_sub(a);
            self.exit_up = self.exit_up.saturating_sub(a);
            self.exit_down = self.exit_down.saturating_add(a);
            let lower = self.entry_down.max(self.exit_down);
            let upper = self.entry_up.min(self.exit_up);
            let level = if self.tick >= self.bump_from && self.tick < self.bump_to {
                self.level.saturating_add(1)
            } else {
                self.level
            };
            let w = sat_i64(level.max(lower).min(upper));
            if self.negative {
                w.saturating_neg()
            } else {
                w
            }
        }
    }

    #[derive(Clone, Copy, Debug, PartialEq, Eq)]
    enum RefMode {
        Coast,
        Plan,
        Brake,
    }

    /// The doubled `i64` range, in `i128`.
    const POS2_MIN: i128 = i64::MIN as i128;
    const POS2_MAX: i128 = i64::MAX as i128;

    /// The per-tick envelope plan for a prepared move.
    fn envelope(shape: &Shape, found: &Solution, negative: bool) -> EnvelopePlan {
        let (n, a) = (shape.n, shape.a);
        EnvelopePlan {
            negative,
            tick: 0,
            ticks: found.ticks,
            accel: a,
            entry_up: shape.w0,
            entry_down: shape.w0,
            exit_up: shape.ve + mul(n, a),
            exit_down: shape.ve - mul(n, a),
            level: found.level,
            bump_from: found.bump_from,
            bump_to: found.bump_from + found.bump,
        }
    }

    /// Whether the doubled position leaves the `i64` range on some tick of `plan`, walked
    /// tick by tick in `i128` from `pos2` and `speed`.
    fn leaves_range(mut plan: EnvelopePlan, mut pos2: i128, mut speed: i128) -> bool {
        while plan.tick < plan.ticks {
            let v = i128::from(plan.advance());
            pos2 += speed + v;
            speed = v;
            if !(POS2_MIN..=POS2_MAX).contains(&pos2) {
                return true;
            }
        }
        false
    }

    /// Reference model of the whole profile with the old per-tick plan: the same state
    /// update as the old `Profile::step` (doubled position in `i128`, here saturated at
    /// the `i64` range after every tick as the new policy says; brake; coast). Planning
    /// goes through the shared `Profile::prepare` (unchanged by the rewrite of `step`);
    /// whether a prepared plan is accepted (the range check on the whole way, done on the
    /// pieces) is taken from `Profile::start` and checked here independently: an accepted
    /// plan's doubled position never leaves the `i64` range while it runs (asserted on every
    /// tick, before saturating), and a plan refused by that check does leave it when walked
    /// tick by tick (checked for plans of up to 200 000 ticks).
    #[derive(Clone, Debug)]
    struct Reference {
        pos2: i128,
        speed: i64,
        accel: i64,
        mode: RefMode,
        brake_accel: i64,
        plan: Option<EnvelopePlan>,
    }

    impl Reference {
        fn at(position: i64) -> Reference {
            Reference {
                pos2: (2 * i128::from(position)).clamp(POS2_MIN, POS2_MAX),
                speed: 0,
                accel: 0,
                mode: RefMode::Coast,
                brake_accel: 0,
                plan: None,
            }
        }

        fn start(&mut self, mv: Move) -> Result<(), Error> {
            let mut probe = Profile {
                pos2: i64::try_from(self.pos2).expect("the reference keeps pos2 in i64"),
                speed: self.speed,
                ..Profile::new()
            };
            let planned = probe.prepare(mv)?;
            if let Some((shape, found, negative)) = &planned {
                if probe.start(mv).is_err() {
                    let plan = envelope(shape, found, *negative);
                    if found.ticks <= 200_000 {
                        assert!(
                            leaves_range(plan, self.pos2, i128::from(self.speed)),
                            "refused {mv:?}, yet its plan stays in range"
                        );
                    }
                    return Err(Error::OutOfRange);
                }
            }
            self.brake_accel = sat_i64(i128::from(mv.accel.to_bits()));
            match planned {
                None => {
                    self.mode = RefMode::Coast;
                    self.accel = 0;
                }
                Some((shape, found, negative)) => {
                    self.plan = Some(envelope(&shape, &found, negative));
                    self.mode = RefMode::Plan;
                }
            }
            Ok(())
        }

        fn step(&mut self) -> Setpoint {
            let prev = self.speed;
            let planning = self.mode == RefMode::Plan;
            let next = match (self.mode, self.plan.as_mut()) {
                (RefMode::Plan, Some(plan)) => {
                    let v = plan.advance();
                    if plan.tick >= plan.ticks {
                        self.mode = RefMode::Coast;
                    }
                    v
                }
                (RefMode::Brake, _) => {
                    let a = self.brake_accel;
                    if prev > a {
                        prev - a
                    } else if prev < -a {
                        prev + a
                    } else {
                        self.mode = RefMode::Coast;
                        0
                    }
                }
                _ => prev,
            };
            let pos2 = self.pos2 + i128::from(prev) + i128::from(next);
            if planning {
                assert!(
                    (POS2_MIN..=POS2_MAX).contains(&pos2),
                    "an accepted plan left the range: doubled position {pos2}"
                );
            }
            self.pos2 = pos2.clamp(POS2_MIN, POS2_MAX);
            self.accel = next.saturating_sub(prev);
            self.speed = next;
            self.setpoint()
        }

        fn hold(&mut self) {
            self.mode = RefMode::Coast;
            self.speed = 0;
            self.accel = 0;
        }

        fn stop(&mut self) {
            if self.speed == 0 || self.brake_accel <= 0 {
                self.hold();
            } else {
                self.mode = RefMode::Brake;
            }
        }

        fn is_done(&self) -> bool {
            self.mode == RefMode::Coast
        }

        fn ticks_left(&self) -> u64 {
            match (self.mode, self.plan) {
                (RefMode::Plan, Some(p)) => p.ticks.saturating_sub(p.tick),
                _ => 0,
            }
        }

        fn setpoint(&self) -> Setpoint {
            Setpoint {
                position: I32F32::from_bits(sat_i64(self.pos2 / 2)),
                speed: I32F32::from_bits(self.speed),
                accel: I32F32::from_bits(self.accel),
            }
        }
    }

    #[derive(Clone, Debug)]
    enum Op {
        Start(i64, i64, i64, i64),
        Steps(u16),
        Finish,
        Stop,
        Hold,
    }

    /// LSB values of one scale: tiny integers (many one-tick pieces and ties), the demo
    /// rover's range, anything up to `wide` (the accepted range: 2⁶² LSB for distances,
    /// 2⁴⁷ for speeds and accelerations), or anything at all (mostly refused).
    fn scaled(lo: i64, hi: i64, wide: i64) -> BoxedStrategy<i64> {
        let from = if lo < 0 { -wide } else { lo };
        prop_oneof![
            3 => lo..hi,
            3 => (lo << 26)..(hi << 30),
            2 => from..wide,
            1 => any::<i64>(),
        ]
        .boxed()
    }

    /// Distances, speeds and accelerations of the chains.
    fn distance() -> BoxedStrategy<i64> {
        scaled(-60, 60, 1 << 62)
    }
    fn rate(lo: i64, hi: i64) -> BoxedStrategy<i64> {
        scaled(lo, hi, 1 << 47)
    }

    /// Start positions: as [`scaled`], or within 2³⁸ LSB (64 counts) of either end of the
    /// position range, where moves of the demo scale reach the range limit.
    fn position() -> BoxedStrategy<i64> {
        prop_oneof![
            3 => scaled(-1000, 1000, 1 << 62),
            1 => (0i64..1 << 38, any::<bool>())
                .prop_map(|(r, low)| if low { r - (1 << 62) } else { (1 << 62) - r }),
        ]
        .boxed()
    }

    fn op() -> impl Strategy<Value = Op> {
        prop_oneof![
            4 => (distance(), rate(1, 12), rate(0, 12), rate(1, 6))
                .prop_map(|(d, vc, ve, a)| Op::Start(d, vc, ve.min(vc).max(0), a)),
            2 => (distance(), rate(1, 12), Just(0i64), rate(1, 6))
                .prop_map(|(d, vc, ve, a)| Op::Start(d, vc, ve, a)),
            3 => (0u16..400).prop_map(Op::Steps),
            2 => Just(Op::Finish),
            1 => Just(Op::Stop),
            1 => Just(Op::Hold),
        ]
    }

    fn same(p: &Profile, r: &Reference, what: &str) {
        assert_eq!(p.setpoint(), r.setpoint(), "setpoint after {what}");
        assert_eq!(p.is_done(), r.is_done(), "is_done after {what}");
        assert_eq!(p.ticks_left(), r.ticks_left(), "ticks_left after {what}");
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(3000))]

        /// The precomputed pieces give, tick for tick, bit for bit, what the per-tick
        /// envelope plan gave: over chains of moves, retargets at any tick, stops and
        /// holds, from any start position.
        #[test]
        fn pieces_match_the_per_tick_envelope_plan(
            start in position(),
            ops in proptest::collection::vec(op(), 1..12),
        ) {
            let mut p = Profile::at(I32F32::from_bits(start));
            let mut r = Reference::at(start);
            for (i, op) in ops.iter().enumerate() {
                let what = format!("op {i} {op:?}");
                match *op {
                    Op::Start(d, vc, ve, a) => {
                        let m = Move::new(
                            I32F32::from_bits(d),
                            I32F32::from_bits(vc),
                            I32F32::from_bits(ve),
                            I32F32::from_bits(a),
                        );
                        prop_assert_eq!(p.start(m), r.start(m), "{}", what);
                    }
                    Op::Steps(n) => {
                        for _ in 0..n {
                            prop_assert_eq!(p.step(), r.step(), "{}", what);
                        }
                    }
                    Op::Finish => {
                        // Up to the end of the running move (bounded for huge plans).
                        let mut n = 0;
                        while !r.is_done() && n < 20_000 {
                            prop_assert_eq!(p.step(), r.step(), "{}", what);
                            n += 1;
                        }
                    }
                    Op::Stop => {
                        p.stop();
                        r.stop();
                    }
                    Op::Hold => {
                        p.hold();
                        r.hold();
                    }
                }
                same(&p, &r, &what);
            }
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(2000))]

        /// The range check of `start` (on the pieces, in closed form) against walking the
        /// per-tick envelope plan in `i128`: a move is accepted exactly when its doubled
        /// position stays in the `i64` range on every tick. Near either end of the range,
        /// moving towards it, with retargets that overshoot while they brake.
        #[test]
        fn range_check_matches_a_per_tick_walk(
            gap in 0i64..1 << 38,
            speed in 0i64..1 << 36,
            d in -(1i64 << 40)..1 << 40,
            vc in 1i64 << 30..1 << 37,
            fe in 0.0f64..=1.0,
            a in 1i64 << 24..1 << 34,
            low: bool,
        ) {
            let sign = if low { -1 } else { 1 };
            let ve = if d == 0 { 0 } else { (vc as f64 * fe) as i64 };
            let p = Profile {
                pos2: sign * (i64::MAX - 2 * gap),
                speed: sign * speed,
                ..Profile::new()
            };
            let m = Move::new(
                I32F32::from_bits(sign * d),
                I32F32::from_bits(vc),
                I32F32::from_bits(ve),
                I32F32::from_bits(a),
            );
            if let Ok(Some((shape, found, negative))) = p.prepare(m) {
                let plan = envelope(&shape, &found, negative);
                let walked = !leaves_range(plan, i128::from(p.pos2), i128::from(p.speed));
                let mut q = p.clone();
                let accepted = q.start(m).is_ok();
                prop_assert_eq!(accepted, walked);
                if accepted {
                    let target = p.setpoint().position + m.distance();
                    while !q.is_done() {
                        q.step();
                    }
                    prop_assert_eq!(q.setpoint().position, target);
                }
            }
        }
    }

    #[test]
    fn pieces_of_the_hand_checked_move() {
        // 6 counts at cruise 2, accel 1 from rest: speeds 1, 2, 2, 1, 0 on ticks 1..=5
        // (the hand check in the `Profile` docs) are two affine pieces: 1, 2 (+1 per
        // tick), then 2, 1, 0 (-1 per tick).
        let one = 1i64 << 32;
        let mut p = Profile::new();
        p.start(Move::new(
            I32F32::from_num(6),
            I32F32::from_num(2),
            I32F32::ZERO,
            I32F32::ONE,
        ))
        .unwrap();
        let used = &p.plan.segments[..usize::from(p.plan.count)];
        assert_eq!(
            used,
            [
                Segment {
                    ticks: 2,
                    first: one,
                    delta: one
                },
                Segment {
                    ticks: 3,
                    first: 2 * one,
                    delta: -one
                },
            ]
        );
    }

    #[test]
    fn first_fit_gives_the_same_answer_for_any_hint() {
        let max = i128::from(MAX_TICKS);
        for answer in [1i128, 2, 37, 1000, 1 << 31, max] {
            for hint in [0, 1, answer - 1, answer, answer + 1, answer * 3, 1 << 45] {
                assert_eq!(
                    first_fit(1, hint, |k| k >= answer),
                    Ok(answer),
                    "hint {hint}"
                );
            }
        }
        assert_eq!(first_fit(50, 10, |k| k >= 37), Ok(50));
        // One tick more than MAX_TICKS is never searched.
        assert_eq!(first_fit(1, 0, |k| k > max), Err(Error::OutOfRange));
        assert_eq!(first_fit(1, 5, |_| false), Err(Error::OutOfRange));
    }

    #[test]
    fn closed_form_sum_matches_a_plain_sum() {
        // Small shapes, every level: the piecewise closed form against summing w[k].
        for (w0, ve, a) in [(0, 0, 3), (5, 2, 3), (-7, 4, 2), (9, 9, 1), (2, 11, 4)] {
            let k_min = ceil_div(i128::abs(w0 - ve), a).max(1);
            for n in k_min..k_min + 12 {
                let sh = Shape { w0, ve, a, n };
                for c in -20..30 {
                    let plain: i128 = (1..n).map(|k| sh.value(k, c)).sum();
                    assert_eq!(sh.sum(c), plain, "w0 {w0} ve {ve} a {a} n {n} c {c}");
                    let at: i128 = (1..n)
                        .filter(|&k| sh.value(k, c + 1) - sh.value(k, c) == 1)
                        .count() as i128;
                    assert_eq!(sh.slope(c), at, "slope: w0 {w0} ve {ve} a {a} n {n} c {c}");
                    if let Some(p) = sh.peak() {
                        assert_eq!(sh.sum(c.max(p)), sh.sum(c.max(p) + 5));
                    }
                }
            }
        }
    }
}
