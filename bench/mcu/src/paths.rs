//! The measured ctrl-core paths: fixed point and the `f32` baseline of the same maths,
//! with the rover settings of [`crate::rover`].
//!
//! Every tick reads inputs that change from tick to tick (encoder counters that advance
//! like wheels following the moves, see [`Inputs::next_counts`]) and stores its output,
//! so nothing is folded away.
//! Both the N and the 2N run start from the same fresh state with both moves just started,
//! so the per-tick figure is the mean of ticks N+1 ..= 2N: both profiles accelerating, no
//! clamp or stall active (the common case of a running move).

use core::hint::black_box;

use ctrl_core::drive::{AxisState, DriveState};
use ctrl_core::encoder::EncoderState;
use ctrl_core::float;
use ctrl_core::lead::LeadState;
use ctrl_core::mix::mix;
use ctrl_core::pd::PdState;
use ctrl_core::profile::Profile;
use ctrl_core::stall::StallState;
use ctrl_core::supply::SupplyState;
use fixed::types::{I16F16, I32F32};

use crate::rover::*;
use crate::{Bench, Path};

/// Inputs that change every tick, standing in for sensor reads.
#[derive(Clone)]
pub struct Inputs {
    /// Raw left counter (advances like a wheel moving forward).
    left: u16,
    /// Raw right counter (mirrored encoder: counts down moving forward).
    right: u16,
    /// Tracking error fed to the single loops, counts (fixed and f32 copies).
    error: I16F16,
    error_f32: f32,
    /// Ticks so far.
    tick: u32,
}

impl Inputs {
    const fn new() -> Self {
        Inputs {
            left: 1000,
            right: 2000,
            error: I16F16::from_bits(3 << 14),
            error_f32: 0.75,
            tick: 0,
        }
    }
    /// Next error: a small ramp (0.75, 0.875, ... counts) that never clamps.
    #[inline(always)]
    pub fn next_error(&mut self) -> I16F16 {
        self.error = I16F16::from_bits(self.error.to_bits().wrapping_add(1 << 13));
        self.error
    }
    #[inline(always)]
    fn next_error_f32(&mut self) -> f32 {
        self.error_f32 += 0.125;
        self.error_f32
    }
    /// Encoder counters that roughly follow the start of both moves (the setpoints move
    /// about 2 counts in the first 16 ticks): the left wheel steps +1 on ticks 3, 11, ...,
    /// the mirrored right counter steps -1 (one count forward) on ticks 7, 15, ...; so the
    /// tracking errors stay around a count and no clamp engages.
    #[inline(always)]
    fn next_counts(&mut self) -> (u16, u16) {
        self.tick = self.tick.wrapping_add(1);
        self.left = self.left.wrapping_add((self.tick & 7 == 3) as u16);
        self.right = self.right.wrapping_sub((self.tick & 7 == 7) as u16);
        (self.left, self.right)
    }
}

/// State of every path.
#[derive(Clone)]
pub struct State {
    inputs: Inputs,
    pd: PdState,
    pd_f32: float::PdState,
    lead: LeadState,
    lead_f32: float::LeadState,
    profile: Profile,
    profile_f32: ProfileF32,
    drive: DriveState,
    drive_f32: float::DriveState,
    encoders: EncoderState,
    stall: StallState,
    supply: SupplyState,
    axis_pd: AxisState,
    axis_lead: AxisState,
    /// Position the single-axis paths pretend to measure (follows the setpoint loosely).
    measured: I32F32,
    /// Last outputs (stored every tick so the work is observable).
    out: [I16F16; 2],
    out_f32: [f32; 2],
    out_sp: I32F32,
    out_sp_f32: f32,
}

impl State {
    /// Next tracking error of the single-loop paths (see [`Inputs::next_error`]).
    #[inline(always)]
    pub fn next_error(&mut self) -> I16F16 {
        self.inputs.next_error()
    }

    /// Fresh state: loops at rest, both moves just started on every profile. Planning a
    /// move is slow on a Cortex-M0 (i128 arithmetic), so this is built once and cloned.
    pub fn fresh() -> Self {
        let mut s = State {
            inputs: Inputs::new(),
            pd: PdState::new(),
            pd_f32: float::PdState::new(),
            lead: LeadState::new(),
            lead_f32: float::LeadState::new(),
            profile: Profile::new(),
            profile_f32: ProfileF32::new(),
            drive: DriveState::new(),
            drive_f32: float::DriveState::new(LOW_VOLTS as f32),
            encoders: EncoderState::new(),
            stall: StallState::new(),
            supply: SupplyState::new(),
            axis_pd: AxisState::new(),
            axis_lead: AxisState::new(),
            measured: I32F32::ZERO,
            out: [I16F16::ZERO; 2],
            out_f32: [0.0; 2],
            out_sp: I32F32::ZERO,
            out_sp_f32: 0.0,
        };
        // A rejected move would leave a profile at rest; the paths still run and the
        // firmware reports it, so the figures cannot silently describe an idle profile.
        let ok = s.profile.start(FWD_MOVE).is_ok()
            & s.drive.forward_mut().start(FWD_MOVE).is_ok()
            & s.drive.rotation_mut().start(ROT_MOVE).is_ok()
            & s.drive_f32.forward.profile.start(FWD_MOVE).is_ok()
            & s.drive_f32.rotation.profile.start(ROT_MOVE).is_ok()
            & s.axis_pd.start(FWD_MOVE).is_ok()
            & s.axis_lead.start(ROT_MOVE).is_ok();
        if !ok {
            crate::report_setup_error("a bench move was rejected by Profile::start");
        }
        s.profile_f32.start(1364.2, 2.18268, 0.0130961);
        DRIVE.set_battery(&mut s.drive, fx(BATTERY));
        s.drive_f32.supply.set_battery(BATTERY as f32);
        SUPPLY.set_battery(&mut s.supply, fx(BATTERY));
        // The encoder's first reading only latches the counters; do it here so the
        // measured ticks are all ordinary ones (the drive paths latch on their tick 1).
        let (l, r) = s.inputs.next_counts();
        ENCODERS.update(&mut s.encoders, l, r);
        s
    }
}

#[inline(never)]
fn pd_fixed(b: &mut Bench) {
    let s = &mut b.p;
    let e = s.inputs.next_error();
    s.out[0] = PD.update(&mut s.pd, e, I16F16::ZERO);
}

#[inline(never)]
fn pd_f32(b: &mut Bench) {
    let s = &mut b.p;
    let e = s.inputs.next_error_f32();
    s.out_f32[0] = PD_F32.update(&mut s.pd_f32, e, 0.0);
}

#[inline(never)]
fn lead_fixed(b: &mut Bench) {
    let s = &mut b.p;
    let e = s.inputs.next_error();
    s.out[0] = LEAD.update(&mut s.lead, e);
}

#[inline(never)]
fn lead_f32(b: &mut Bench) {
    let s = &mut b.p;
    let e = s.inputs.next_error_f32();
    s.out_f32[0] = LEAD_F32.update(&mut s.lead_f32, e);
}

#[inline(never)]
fn profile_fixed(b: &mut Bench) {
    let s = &mut b.p;
    let sp = s.profile.step();
    s.out_sp = sp.position;
    s.out[0] = I16F16::from_bits((sp.speed.to_bits() >> 16) as i32);
}

#[inline(never)]
fn profile_f32(b: &mut Bench) {
    let s = &mut b.p;
    let (pos, speed) = s.profile_f32.step();
    s.out_sp_f32 = pos;
    s.out_f32[0] = speed;
}

#[inline(never)]
fn drive_fixed(b: &mut Bench) {
    let s = &mut b.p;
    let (l, r) = s.inputs.next_counts();
    s.out = DRIVE.tick(&mut s.drive, l, r);
}

#[inline(never)]
fn drive_f32(b: &mut Bench) {
    let s = &mut b.p;
    let (l, r) = s.inputs.next_counts();
    s.out_f32 = DRIVE_F32.tick(&mut s.drive_f32, l, r);
}

// --- components of the fixed-point tick, one at a time (the breakdown) ---

#[inline(never)]
fn encoders_fixed(b: &mut Bench) {
    let s = &mut b.p;
    let (l, r) = s.inputs.next_counts();
    let d = ENCODERS.update(&mut s.encoders, l, r);
    s.out = [d.forward(), d.rotation()];
    s.out_sp = s.encoders.forward();
}

#[inline(never)]
fn feedforward_fixed(b: &mut Bench) {
    let s = &mut b.p;
    let e = s.inputs.next_error();
    // speed ~ 0.75.. counts/tick, accel = error / 64 ~ 0.012 counts/tick²
    s.out[0] = FF_FWD.volts(e, I16F16::from_bits(e.to_bits() >> 6));
}

#[inline(never)]
fn stall_fixed(b: &mut Bench) {
    let s = &mut b.p;
    let e = s.inputs.next_error();
    s.out[0] = I16F16::from_bits(STALL.update(&mut s.stall, e) as i32);
}

#[inline(never)]
fn mix_fixed(b: &mut Bench) {
    let s = &mut b.p;
    let e = s.inputs.next_error();
    let v = mix(e, I16F16::from_bits(e.to_bits() >> 1), fx(MAX_VOLTS));
    s.out = [v.left, v.right];
}

#[inline(never)]
fn duty_fixed(b: &mut Bench) {
    let s = &mut b.p;
    let e = s.inputs.next_error();
    s.out[0] = s.supply.duty(e);
}

#[inline(never)]
fn axis_pd_fixed(b: &mut Bench) {
    let s = &mut b.p;
    s.measured = s.measured.wrapping_add(I32F32::from_bits(2 << 32));
    s.out[0] = AXIS_FWD.update(&mut s.axis_pd, s.measured, I16F16::from_bits(2 << 16));
}

#[inline(never)]
fn axis_lead_fixed(b: &mut Bench) {
    let s = &mut b.p;
    s.measured = s.measured.wrapping_add(I32F32::from_bits(1 << 32));
    s.out[0] = AXIS_ROT.update(&mut s.axis_lead, s.measured, I16F16::from_bits(1 << 16));
}

/// What every error-fed part pays before its own work: reading the next input and storing
/// the output. Subtract it from a `part_*` figure for the part's own instructions.
#[inline(never)]
fn input_only(b: &mut Bench) {
    let s = &mut b.p;
    s.out[0] = s.inputs.next_error();
}

/// The encoder part's input: reading the next two counters and storing them.
#[inline(never)]
fn counts_only(b: &mut Bench) {
    let s = &mut b.p;
    let (l, r) = s.inputs.next_counts();
    s.out = [I16F16::from_bits(l as i32), I16F16::from_bits(r as i32)];
}

/// One `Coeff` multiply with a coefficient below 0.5 (shift above 16: no saturation branch).
#[inline(never)]
fn mul_small(b: &mut Bench) {
    let s = &mut b.p;
    let e = s.inputs.next_error();
    const K: ctrl_core::Coeff = c(0.3);
    s.out[0] = K.saturating_mul(e);
}

/// One `Coeff` multiply with a coefficient of 3.7 (shift at most 16: the product can leave
/// `I16F16`, so it carries the saturation test).
#[inline(never)]
fn mul_large(b: &mut Bench) {
    let s = &mut b.p;
    let e = s.inputs.next_error();
    const K: ctrl_core::Coeff = c(3.7);
    s.out[0] = K.saturating_mul(e);
}

/// Measured paths, in run order.
pub static PATHS: &[Path] = &[
    Path {
        name: "pd_fixed",
        tick: pd_fixed,
    },
    Path {
        name: "pd_f32",
        tick: pd_f32,
    },
    Path {
        name: "lead_fixed",
        tick: lead_fixed,
    },
    Path {
        name: "lead_f32",
        tick: lead_f32,
    },
    Path {
        name: "profile_fixed",
        tick: profile_fixed,
    },
    Path {
        name: "profile_f32",
        tick: profile_f32,
    },
    Path {
        name: "drive_fixed",
        tick: drive_fixed,
    },
    Path {
        name: "drive_f32",
        tick: drive_f32,
    },
    Path {
        name: "part_input",
        tick: input_only,
    },
    Path {
        name: "part_counts",
        tick: counts_only,
    },
    Path {
        name: "part_mul_small",
        tick: mul_small,
    },
    Path {
        name: "part_mul_large",
        tick: mul_large,
    },
    Path {
        name: "part_encoders",
        tick: encoders_fixed,
    },
    Path {
        name: "part_feedforward",
        tick: feedforward_fixed,
    },
    Path {
        name: "part_stall",
        tick: stall_fixed,
    },
    Path {
        name: "part_mix",
        tick: mix_fixed,
    },
    Path {
        name: "part_duty",
        tick: duty_fixed,
    },
    Path {
        name: "part_axis_pd",
        tick: axis_pd_fixed,
    },
    Path {
        name: "part_axis_lead",
        tick: axis_lead_fixed,
    },
];

/// The f32 baseline of [`Profile::step`]'s maths, kept in the bench because ctrl-core's
/// `float` path shares the fixed-point profile. Same structure as the fixed-point plan:
/// entry and exit speed envelopes advanced by the acceleration each tick, the cruise
/// level clamped between them, position advanced by the mean of old and new speed.
#[derive(Clone)]
pub struct ProfileF32 {
    tick: u32,
    ticks: u32,
    accel: f32,
    entry_up: f32,
    entry_down: f32,
    exit_up: f32,
    exit_down: f32,
    level: f32,
    speed: f32,
    position: f32,
}

impl ProfileF32 {
    const fn new() -> Self {
        ProfileF32 {
            tick: 0,
            ticks: 0,
            accel: 0.0,
            entry_up: 0.0,
            entry_down: 0.0,
            exit_up: 0.0,
            exit_down: 0.0,
            level: 0.0,
            speed: 0.0,
            position: 0.0,
        }
    }

    /// Plans a rest-to-rest move (outside the measured window; divides).
    fn start(&mut self, distance: f32, cruise: f32, accel: f32) {
        let ramp = cruise / accel;
        let ticks = (distance / cruise + ramp) as u32;
        self.tick = 0;
        self.ticks = ticks;
        self.accel = accel;
        self.entry_up = 0.0;
        self.entry_down = 0.0;
        self.exit_up = accel * ticks as f32;
        self.exit_down = -accel * ticks as f32;
        self.level = cruise;
    }

    /// One tick: returns (position, speed).
    #[inline]
    fn step(&mut self) -> (f32, f32) {
        let prev = self.speed;
        let next = if self.tick < self.ticks {
            self.tick += 1;
            let a = self.accel;
            self.entry_up += a;
            self.entry_down -= a;
            self.exit_up -= a;
            self.exit_down += a;
            let lower = self.entry_down.max(self.exit_down);
            let upper = self.entry_up.min(self.exit_up);
            self.level.max(lower).min(upper)
        } else {
            0.0
        };
        self.position += 0.5 * (prev + next);
        self.speed = next;
        (self.position, self.speed)
    }
}
