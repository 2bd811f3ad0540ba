//! Settings of the measured drive: the constants of the invented greenhouse-bench rover (see `/work/notes` /
//! DEVELOPERS.md), converted by hand to counts and ticks at 500 Hz:
//!
//! * count = pi * 42 mm / 360 = 0.366519 mm; rotation counts = heading rad * 70 mm / count
//!   = 190.986 counts/rad (wheel-arc counts, half the track width).
//! * forward: K = 180 mm/s/V = 491.11 counts/s/V, T = 0.09 s, bias 0.7 V:
//!   kv = 500 / K = 1.01811 V per count/tick, ka = T 500² / K = 45.815 V per count/tick².
//! * rotation: K = 2.6 rad/s/V = 496.56 counts/s/V, T = 0.07 s, bias 0.8 V:
//!   kv = 1.00693, ka = 35.243.
//! * moves: forward 500 mm = 1364.2 counts at 400 mm/s = 2.18268 counts/tick, 1200 mm/s² =
//!   0.0130961 counts/tick²; rotation a quarter turn = 300.0 counts at 4 rad/s = 1.52789
//!   counts/tick, 15 rad/s² = 0.0114592 counts/tick².
//! * feedback gains are plausible picks for the bench only (they set which branches run,
//!   not the instruction count): PD kp = 0.3 V/count, kd = 6 V per count/tick on the forward
//!   axis; a lead b0 = 4, b1 = -3.6 V/count, a1 = -0.5 on the rotation axis.
//!
#![allow(dead_code)] // each build (counting, size) uses part of these

use ctrl_core::drive::{Axis, Feedback, TwoAxisDrive};
use ctrl_core::encoder::Encoders;
use ctrl_core::feedforward::Feedforward;
use ctrl_core::float;
use ctrl_core::lead::Lead;
use ctrl_core::pd::{Derivative, Pd};
use ctrl_core::profile::Move;
use ctrl_core::stall::StallGuard;
use ctrl_core::supply::Supply;
use ctrl_core::Coeff;
use fixed::types::{I16F16, I32F32};

/// A [`Coeff`] from a value, at compile time (a bad constant fails the build, not the tick).
pub const fn c(x: f64) -> Coeff {
    match Coeff::from_f64(x) {
        Ok((k, _)) => k,
        Err(_) => panic!("constant out of Coeff range"),
    }
}

pub const fn fx(x: f64) -> I16F16 {
    I16F16::from_bits((x * 65536.0) as i32)
}

pub const fn fx64(x: f64) -> I32F32 {
    I32F32::from_bits((x * 4294967296.0) as i64)
}

// --- rover constants (counts, ticks, volts) ---
pub const KV_F: f64 = 1.01811;
pub const KA_F: f64 = 45.815;
pub const BIAS_F: f64 = 0.7;
pub const KV_R: f64 = 1.00693;
pub const KA_R: f64 = 35.243;
pub const BIAS_R: f64 = 0.8;
pub const KP: f64 = 0.3;
pub const KD: f64 = 6.0;
pub const B0: f64 = 4.0;
pub const B1: f64 = -3.6;
pub const A1: f64 = -0.5;
pub const MAX_VOLTS: f64 = 8.4;
pub const LOW_VOLTS: f64 = 6.4;
pub const BATTERY: f64 = 7.8;
pub const STALL_COUNTS: f64 = 80.0;
pub const STALL_TICKS: u16 = 250;

pub const FWD_MOVE: Move = Move::new(fx64(1364.2), fx64(2.18268), I32F32::ZERO, fx64(0.0130961));
pub const ROT_MOVE: Move = Move::new(fx64(300.0), fx64(1.52789), I32F32::ZERO, fx64(0.0114592));

pub const PD: Pd = Pd::new(c(KP), c(KD), Derivative::OnError, fx(MAX_VOLTS));
pub const LEAD: Lead = Lead::new(c(B0), c(B1), c(A1), fx(MAX_VOLTS));
pub const STALL: StallGuard = StallGuard::new(fx(STALL_COUNTS), STALL_TICKS);

pub const ENCODERS: Encoders = Encoders::new(false, true);
pub const FF_FWD: Feedforward = Feedforward::new(c(KV_F), c(KA_F), fx(BIAS_F));
pub const FF_ROT: Feedforward = Feedforward::new(c(KV_R), c(KA_R), fx(BIAS_R));
pub const AXIS_FWD: Axis = Axis::new(FF_FWD, Feedback::Pd(PD), STALL);
pub const AXIS_ROT: Axis = Axis::new(FF_ROT, Feedback::Lead(LEAD), STALL);
pub const SUPPLY: Supply = Supply::new(fx(LOW_VOLTS));

pub static DRIVE: TwoAxisDrive =
    TwoAxisDrive::new(ENCODERS, AXIS_FWD, AXIS_ROT, SUPPLY, fx(MAX_VOLTS));

pub const PD_F32: float::Pd =
    float::Pd::new(KP as f32, KD as f32, Derivative::OnError, MAX_VOLTS as f32);
pub const LEAD_F32: float::Lead =
    float::Lead::new(B0 as f32, B1 as f32, A1 as f32, MAX_VOLTS as f32);

pub static DRIVE_F32: float::TwoAxisDrive = float::TwoAxisDrive::new(
    ENCODERS,
    float::Axis::new(
        float::Feedforward::new(KV_F as f32, KA_F as f32, BIAS_F as f32),
        float::Feedback::Pd(PD_F32),
        STALL,
    ),
    float::Axis::new(
        float::Feedforward::new(KV_R as f32, KA_R as f32, BIAS_R as f32),
        float::Feedback::Lead(LEAD_F32),
        STALL,
    ),
    MAX_VOLTS as f32,
);
