//! Prototypes that test suggestions for ctrl-core with numbers (bench-only code; ctrl-core
//! itself is not changed here).
//!
//! **Profile step in `i64`.** `ctrl_core::profile::Plan::advance` keeps its four speed
//! envelopes, the acceleration and the cruise level in `i128` with saturating adds, and
//! `Profile::step` adds to an `i128` doubled position. Speeds are `I32F32` bits (`i64`),
//! and the envelopes only ever enter `clamp(level, max(lower), min(upper))`: saturating the
//! envelopes at the `i64` range cannot change that result while `level` is an `i64`
//! (an upper envelope saturated at `i64::MAX` is still `>= level`, a lower one at
//! `i64::MIN` still `<= level`). So the same sequence comes out of `i64` arithmetic. The
//! firmware checks that over a whole move before the measured runs (`proto check`).
//!
//! `profile_i128` is a transcription of the ctrl-core step (to show the transcription
//! costs what ctrl-core's does), `profile_i64` the same with `i64` envelopes, and
//! `profile_i64_pos` also keeps the doubled position in an `i64` with a saturating add
//! (range +-2^30 counts instead of +-2^31, about +-390 km of the rover's wheel).
//! `profile_segments` ([`PlanSegments`]) goes further: the speed sequence is piecewise
//! linear, so start() can list its few segments and the tick only counts and adds.

use ctrl_core::encoder::EncoderState;
use ctrl_core::lead::LeadState;
use ctrl_core::mix::mix;
use ctrl_core::pd::PdState;
use ctrl_core::stall::StallState;
use ctrl_core::supply::SupplyState;
use fixed::types::I16F16;

use crate::rover::*;
use crate::{Bench, Path};

macro_rules! plan {
    ($name:ident, $env:ty, $pos:ty) => {
        /// Envelope plan (see the module docs) with envelopes in
        #[doc = stringify!($env)]
        /// and doubled position in
        #[doc = stringify!($pos)]
        #[derive(Clone)]
        pub struct $name {
            tick: u64,
            ticks: u64,
            accel: $env,
            entry_up: $env,
            entry_down: $env,
            exit_up: $env,
            exit_down: $env,
            level: $env,
            bump_from: u64,
            bump_to: u64,
            negative: bool,
            coasting: bool,
            speed: i64,
            accel_out: i64,
            pos2: $pos,
        }

        impl $name {
            /// A rest-to-rest plan of `ticks` ticks at acceleration `a` and cruise `level`
            /// (all in `I32F32` bits).
            pub fn new(a: i64, level: i64, ticks: u64) -> Self {
                let span = (a as i128 * ticks as i128) as $env;
                $name {
                    tick: 0,
                    ticks,
                    accel: a as $env,
                    entry_up: 0,
                    entry_down: 0,
                    exit_up: span,
                    exit_down: -span,
                    level: level as $env,
                    bump_from: 0,
                    bump_to: 0,
                    negative: false,
                    coasting: false,
                    speed: 0,
                    accel_out: 0,
                    pos2: 0,
                }
            }

            #[inline(always)]
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
                let w = sat_i64(level.max(lower).min(upper) as i128);
                if self.negative {
                    w.saturating_neg()
                } else {
                    w
                }
            }

            /// One tick; returns (position, speed, accel) in `I32F32` bits.
            #[inline(never)]
            pub fn step(&mut self) -> (i64, i64, i64) {
                let prev = self.speed;
                let next = if self.coasting {
                    prev
                } else {
                    let v = self.advance();
                    if self.tick >= self.ticks {
                        self.coasting = true;
                    }
                    v
                };
                self.pos2 = self
                    .pos2
                    .saturating_add(<$pos>::from(prev) + <$pos>::from(next));
                self.accel_out = next.saturating_sub(prev);
                self.speed = next;
                (sat_i64((self.pos2 / 2) as i128), self.speed, self.accel_out)
            }
        }
    };
}

plan!(PlanI128, i128, i128);
plan!(PlanI64, i64, i128);
plan!(PlanI64Pos, i64, i64);

const fn sat_i64(x: i128) -> i64 {
    if x > i64::MAX as i128 {
        i64::MAX
    } else if x < i64::MIN as i128 {
        i64::MIN
    } else {
        x as i64
    }
}

/// Most speed-slope segments a [`PlanSegments`] holds.
const SEGMENTS: usize = 8;

/// The same speed sequence as the envelope plan, precomputed at start as segments of
/// constant per-tick speed change (the clamp of linear envelopes is piecewise linear, so a
/// move has a handful of them: ramp up, the one-tick level bump, cruise, ramp down). The
/// tick then only compares a tick counter and adds.
#[derive(Clone)]
pub struct PlanSegments {
    /// (first tick of the segment, speed change per tick in it), ticks counted from 1.
    seg: [(u32, i64); SEGMENTS],
    next: usize,
    slope: i64,
    tick: u32,
    speed: i64,
    accel_out: i64,
    pos2: i64,
}

impl PlanSegments {
    /// Builds the segments by running the `i64` envelope plan once (start-time cost only).
    pub fn new(a: i64, level: i64, ticks: u64) -> Self {
        let mut p = PlanI64Pos::new(a, level, ticks);
        let mut seg = [(u32::MAX, 0i64); SEGMENTS];
        let mut n = 0;
        let mut last = 0i64;
        let mut prev_slope = i64::MIN;
        let mut k = 1u32;
        while (k as u64) <= ticks + 1 && n < SEGMENTS {
            let (_, v, _) = p.step();
            let slope = v - last;
            if slope != prev_slope {
                seg[n] = (k, slope);
                n += 1;
                prev_slope = slope;
            }
            last = v;
            k += 1;
        }
        PlanSegments {
            seg,
            next: 0,
            slope: 0,
            tick: 0,
            speed: 0,
            accel_out: 0,
            pos2: 0,
        }
    }

    /// One tick; returns (position, speed, accel) in `I32F32` bits.
    #[inline(never)]
    pub fn step(&mut self) -> (i64, i64, i64) {
        self.tick = self.tick.wrapping_add(1);
        let (from, slope) = self.seg[self.next & (SEGMENTS - 1)];
        if self.tick == from {
            self.slope = slope;
            self.next += 1;
        }
        let prev = self.speed;
        let next = prev.wrapping_add(self.slope);
        self.pos2 = self.pos2.saturating_add(prev + next);
        self.accel_out = self.slope;
        self.speed = next;
        (self.pos2 / 2, next, self.slope)
    }
}

/// **Lead with its coefficients folded in.** `Lead::update` is too large for LLVM to inline
/// at every call site, so it runs with the coefficients loaded from memory and takes the
/// run-time branches of `Coeff::saturating_mul` on their shifts. This is the same
/// difference equation (`u = clamp(b0 e + b1 e1 - a1 u1)`, ctrl-core's `Coeff` multiply and
/// saturating adds) written inline with the coefficients as constants, so the shifts are
/// compile-time constants and the branches fold away.
#[derive(Clone)]
pub struct FoldedLeadState {
    e1: I16F16,
    u1: I16F16,
}

const LEAD_C: [ctrl_core::Coeff; 3] = LEAD.coefficients();
const LEAD_LIM: I16F16 = LEAD.limit_volts();

#[inline(always)]
fn folded_lead(st: &mut FoldedLeadState, e: I16F16) -> I16F16 {
    let u = LEAD_C[0]
        .saturating_mul(e)
        .saturating_add(LEAD_C[1].saturating_mul(st.e1))
        .saturating_sub(LEAD_C[2].saturating_mul(st.u1));
    let u = if u > LEAD_LIM {
        LEAD_LIM
    } else if u < -LEAD_LIM {
        -LEAD_LIM
    } else {
        u
    };
    st.e1 = e;
    st.u1 = u;
    u
}

/// **`Coeff` multiply through one 32x32->64 multiply** (for cores that have `smull`, such as
/// the Cortex-M4): `sat_i32((m * x + 2^(s-1)) >> s)`, the same rounding as
/// `Coeff::saturating_mul` (round half up) and the same saturation. On a Cortex-M0 the
/// 64-bit multiply is a library call, so this is for M3/M4/M7 only.
#[inline(always)]
fn mul_wide(k: ctrl_core::Coeff, x: I16F16) -> I16F16 {
    let s = k.shift();
    let p = k.mantissa() as i64 * x.to_bits() as i64;
    // s = 0 has no rounding term: (1 << s) >> 1 = 0.
    let r = (p + ((1i64 << s) >> 1)) >> s;
    I16F16::from_bits(if r > i32::MAX as i64 {
        i32::MAX
    } else if r < i32::MIN as i64 {
        i32::MIN
    } else {
        r as i32
    })
}

/// Feedforward `kv v + ka a + bias sign(v)` with [`mul_wide`] (coefficients from memory, as
/// in ctrl-core's `Feedforward::volts` when it is not inlined).
#[inline(never)]
fn ff_wide(ff: &ctrl_core::feedforward::Feedforward, v: I16F16, a: I16F16) -> I16F16 {
    let bias = if v > I16F16::ZERO {
        ff.bias_volts()
    } else if v < I16F16::ZERO {
        -ff.bias_volts()
    } else {
        I16F16::ZERO
    };
    mul_wide(ff.kv(), v)
        .saturating_add(mul_wide(ff.ka(), a))
        .saturating_add(bias)
}

/// ctrl-core's `Feedforward::volts` with the coefficients from memory (not inlined).
#[inline(never)]
fn ff_core(ff: &ctrl_core::feedforward::Feedforward, v: I16F16, a: I16F16) -> I16F16 {
    ff.volts(v, a)
}

/// **Lean two-axis tick**: the same components as `TwoAxisDrive::tick` (ctrl-core's own
/// encoders, feedforward, PD, lead, stall guard, mix and supply compensation, with the
/// bench's rover settings), but the profile is [`PlanSegments`] and the axis glue narrows
/// speed and acceleration with a shift (they are in `I16F16` range by construction of a
/// validated move) and the tracking error with one saturating narrow. No telemetry
/// sample is stored. This is what the tick costs once the profile and glue are cheap.
#[derive(Clone)]
pub struct LeanDrive {
    encoders: EncoderState,
    fwd: PlanSegments,
    rot: PlanSegments,
    pd: PdState,
    lead: LeadState,
    folded: FoldedLeadState,
    stall_f: StallState,
    stall_r: StallState,
    supply: SupplyState,
    left: u16,
    right: u16,
    tick: u32,
    out: [I16F16; 2],
}

/// `I32F32` bits to `I16F16`, saturating: one compare of the high word.
#[inline(always)]
fn narrow_sat(x: i64) -> I16F16 {
    let hi = (x >> 32) as i32;
    if hi > 0x7FFF {
        I16F16::MAX
    } else if hi < -0x8000 {
        I16F16::MIN
    } else {
        I16F16::from_bits((x >> 16) as i32)
    }
}

impl LeanDrive {
    fn fresh() -> Self {
        let (a, v, t) = forward_plan_args();
        let ra = ROT_MOVE.accel().to_bits();
        let rv = ROT_MOVE.cruise_speed().to_bits();
        let rt = (ROT_MOVE.distance().to_bits() / rv + rv / ra + 1) as u64;
        let mut d = LeanDrive {
            encoders: EncoderState::new(),
            fwd: PlanSegments::new(a, v, t),
            rot: PlanSegments::new(ra, rv, rt),
            pd: PdState::new(),
            lead: LeadState::new(),
            folded: FoldedLeadState {
                e1: I16F16::ZERO,
                u1: I16F16::ZERO,
            },
            stall_f: StallState::new(),
            stall_r: StallState::new(),
            supply: SupplyState::new(),
            left: 1000,
            right: 2000,
            tick: 0,
            out: [I16F16::ZERO; 2],
        };
        SUPPLY.set_battery(&mut d.supply, fx(BATTERY));
        d
    }

    /// One tick (same inputs as the `drive_fixed` path); `FOLD` picks the folded lead.
    #[inline(always)]
    fn tick<const FOLD: bool>(&mut self) {
        self.tick = self.tick.wrapping_add(1);
        self.left = self.left.wrapping_add((self.tick & 7 == 3) as u16);
        self.right = self.right.wrapping_sub((self.tick & 7 == 7) as u16);
        let d = ENCODERS.update(&mut self.encoders, self.left, self.right);
        // forward axis
        let (pos, speed, accel) = self.fwd.step();
        let e = narrow_sat(pos.wrapping_sub(self.encoders.forward().to_bits()));
        let ff = FF_FWD.volts(
            I16F16::from_bits((speed >> 16) as i32),
            I16F16::from_bits((accel >> 16) as i32),
        );
        let fv = ff.saturating_add(PD.update(&mut self.pd, e, d.forward()));
        let stall_f = STALL.update(&mut self.stall_f, e);
        // rotation axis
        let (pos, speed, accel) = self.rot.step();
        let e = narrow_sat(pos.wrapping_sub(self.encoders.rotation().to_bits()));
        let ff = FF_ROT.volts(
            I16F16::from_bits((speed >> 16) as i32),
            I16F16::from_bits((accel >> 16) as i32),
        );
        let fb = if FOLD {
            folded_lead(&mut self.folded, e)
        } else {
            LEAD.update(&mut self.lead, e)
        };
        let rv = ff.saturating_add(fb);
        let stall_r = STALL.update(&mut self.stall_r, e);
        // mix, supply, stall
        let battery = self.supply.battery_volts();
        let limit = if battery < fx(MAX_VOLTS) {
            battery
        } else {
            fx(MAX_VOLTS)
        };
        let v = mix(fv, rv, limit);
        self.out = if stall_f | stall_r {
            [I16F16::ZERO; 2]
        } else {
            [self.supply.duty(v.left), self.supply.duty(v.right)]
        };
    }
}

/// The prototype plans for the forward move of the bench.
#[derive(Clone)]
pub struct State {
    p128: PlanI128,
    p64: PlanI64,
    p64pos: PlanI64Pos,
    pseg: PlanSegments,
    lean: LeanDrive,
    out: (i64, i64, i64),
}

fn forward_plan_args() -> (i64, i64, u64) {
    let a = FWD_MOVE.accel().to_bits();
    let v = FWD_MOVE.cruise_speed().to_bits();
    let d = FWD_MOVE.distance().to_bits();
    // ticks = distance / cruise + cruise / accel (trapezoid), rounded up; outside the tick.
    let ticks = (d / v + v / a + 1) as u64;
    (a, v, ticks)
}

impl State {
    /// Fresh plans.
    pub fn fresh() -> Self {
        let (a, v, t) = forward_plan_args();
        State {
            p128: PlanI128::new(a, v, t),
            p64: PlanI64::new(a, v, t),
            p64pos: PlanI64Pos::new(a, v, t),
            pseg: PlanSegments::new(a, v, t),
            lean: LeanDrive::fresh(),
            out: (0, 0, 0),
        }
    }
}

/// Runs the three plans over the whole move and counts ticks where they differ.
pub fn check() -> u32 {
    let mut s = State::fresh();
    let mut differ = 0;
    let ticks = forward_plan_args().2 + 10;
    let mut i = 0;
    while i < ticks {
        let a = s.p128.step();
        let b = s.p64.step();
        let c = s.p64pos.step();
        let d = s.pseg.step();
        differ += (a != b) as u32 + (a != c) as u32 + (a != d) as u32;
        i += 1;
    }
    differ
}

#[inline(never)]
fn profile_i128(b: &mut Bench) {
    b.proto.out = b.proto.p128.step();
}

#[inline(never)]
fn profile_i64(b: &mut Bench) {
    b.proto.out = b.proto.p64.step();
}

#[inline(never)]
fn profile_i64_pos(b: &mut Bench) {
    b.proto.out = b.proto.p64pos.step();
}

#[inline(never)]
fn profile_segments(b: &mut Bench) {
    b.proto.out = b.proto.pseg.step();
}

#[inline(never)]
fn drive_lean(b: &mut Bench) {
    b.proto.lean.tick::<false>();
}

#[inline(never)]
fn drive_lean_folded(b: &mut Bench) {
    b.proto.lean.tick::<true>();
}

#[inline(never)]
fn lead_folded(b: &mut Bench) {
    let e = b.p.next_error();
    b.proto.out.0 = folded_lead(&mut b.proto.lean.folded, e).to_bits() as i64;
}

#[inline(never)]
fn feedforward_wide(b: &mut Bench) {
    let e = b.p.next_error();
    let ff = core::hint::black_box(&FF_FWD);
    b.proto.out.0 = ff_wide(ff, e, I16F16::from_bits(e.to_bits() >> 6)).to_bits() as i64;
}

#[inline(never)]
fn feedforward_mem(b: &mut Bench) {
    let e = b.p.next_error();
    let ff = core::hint::black_box(&FF_FWD);
    b.proto.out.0 = ff_core(ff, e, I16F16::from_bits(e.to_bits() >> 6)).to_bits() as i64;
}

/// Prototype paths.
pub static PATHS: &[Path] = &[
    Path {
        name: "proto_profile_i128",
        tick: profile_i128,
    },
    Path {
        name: "proto_profile_i64",
        tick: profile_i64,
    },
    Path {
        name: "proto_profile_i64_pos",
        tick: profile_i64_pos,
    },
    Path {
        name: "proto_profile_segments",
        tick: profile_segments,
    },
    Path {
        name: "proto_lead_folded",
        tick: lead_folded,
    },
    Path {
        name: "proto_ff_core_mem",
        tick: feedforward_mem,
    },
    Path {
        name: "proto_ff_wide_mem",
        tick: feedforward_wide,
    },
    Path {
        name: "proto_drive_lean",
        tick: drive_lean,
    },
    Path {
        name: "proto_drive_lean_folded",
        tick: drive_lean_folded,
    },
];
