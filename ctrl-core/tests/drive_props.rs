//! Property tests of encoder wrap, wheel mix, stall guard (against a simulated plant) and the
//! telemetry ring.

use std::collections::VecDeque;

use ctrl_core::{
    drive::{Axis, DriveState, Feedback, TwoAxisDrive},
    encoder::{EncoderState, Encoders},
    feedforward::Feedforward,
    mix::mix,
    pd::{Derivative, Pd},
    profile::Move,
    stall::{StallGuard, StallState},
    supply::Supply,
    telemetry::Telemetry,
    Coeff,
};
use fixed::types::{I16F16, I32F32};
use proptest::prelude::*;

fn fx(x: I16F16) -> f64 {
    x.to_num::<f64>()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(500))]

    /// The counted position equals the true position for any walk whose per-tick step is
    /// below 32768 counts, however often the 16-bit counters wrap.
    #[test]
    fn encoder_wrap_never_jumps(
        start in (any::<u16>(), any::<u16>()),
        steps in prop::collection::vec((-32767i32..=32767, -32767i32..=32767), 1..400),
        inv in (any::<bool>(), any::<bool>()),
    ) {
        let enc = Encoders::new(inv.0, inv.1);
        let sign = |i: bool| if i { -1i64 } else { 1 };
        let mut st = EncoderState::new();
        let (mut l, mut r) = (start.0 as i64, start.1 as i64);
        enc.update(&mut st, l as u16, r as u16);
        let (l0, r0) = (l, r);
        for (dl, dr) in steps {
            l += dl as i64;
            r += dr as i64;
            let d = enc.update(&mut st, l.rem_euclid(65536) as u16, r.rem_euclid(65536) as u16);
            prop_assert_eq!(d.left as i64, sign(inv.0) * dl as i64);
            prop_assert_eq!(d.right as i64, sign(inv.1) * dr as i64);
            let (pl, pr) = (sign(inv.0) * (l - l0), sign(inv.1) * (r - r0));
            prop_assert_eq!(st.left() as i64, pl);
            prop_assert_eq!(st.right() as i64, pr);
            prop_assert_eq!(st.forward(), I32F32::from_num(pl + pr) / 2);
            prop_assert_eq!(st.rotation(), I32F32::from_num(pr - pl) / 2);
            prop_assert_eq!(fx(d.forward()), (d.left + d.right) as f64 / 2.0);
        }
    }

    /// Wheel volts never exceed the limit; rotation is kept whole when it fits and the
    /// forward part is only ever reduced, never reversed.
    #[test]
    fn mix_stays_within_limit_and_keeps_rotation(
        f in any::<i32>(), r in any::<i32>(), lim in any::<i32>(),
    ) {
        let (f, r, lim) = (I16F16::from_bits(f), I16F16::from_bits(r), I16F16::from_bits(lim));
        let w = mix(f, r, lim);
        let l = fx(lim).abs().min(fx(I16F16::MAX));
        prop_assert!(fx(w.left).abs() <= l && fx(w.right).abs() <= l);
        let f_out = (fx(w.left) + fx(w.right)) / 2.0;
        let r_out = (fx(w.right) - fx(w.left)) / 2.0;
        if fx(r).abs() <= l {
            prop_assert_eq!(r_out, fx(r), "rotation kept whole");
        } else {
            prop_assert_eq!(r_out, l * fx(r).signum());
        }
        prop_assert!(f_out.abs() <= fx(f).abs() && (f_out == 0.0 || f_out.signum() == fx(f).signum()));
        if fx(f).abs() + fx(r).abs() <= l {
            prop_assert_eq!(f_out, fx(f), "nothing cut when it fits");
        }
    }

    /// The guard trips exactly on the N-th consecutive tick over the limit, never earlier.
    #[test]
    fn stall_guard_counts_exactly(
        limit in 0.0f64..100.0, n in 1u16..50,
        errors in prop::collection::vec(-200.0f64..200.0, 1..300),
    ) {
        let g = StallGuard::new(I16F16::from_num(limit), n);
        let mut st = StallState::new();
        let mut run = 0u32;
        let mut tripped = false;
        for e in errors {
            let e = I16F16::from_num(e);
            run = if e.abs() > g.limit() { run + 1 } else { 0 };
            tripped |= run >= n as u32;
            prop_assert_eq!(g.update(&mut st, e), tripped);
        }
    }

    /// Drops are counted exactly and what is kept is the FIFO order of accepted samples.
    #[test]
    fn telemetry_counts_drops_exactly(ops in prop::collection::vec(any::<Option<u16>>(), 1..500)) {
        let mut ring: Telemetry<u16, 8> = Telemetry::new();
        let mut model: VecDeque<u16> = VecDeque::new();
        let mut dropped = 0u32;
        for op in ops {
            match op {
                Some(x) => {
                    let accepted = model.len() < 8;
                    if accepted { model.push_back(x) } else { dropped += 1 }
                    prop_assert_eq!(ring.push(x), accepted);
                }
                None => prop_assert_eq!(ring.pop(), model.pop_front()),
            }
            prop_assert_eq!(ring.dropped(), dropped);
            prop_assert_eq!(ring.len(), model.len());
        }
        let rest: Vec<u16> = ring.drain().collect();
        prop_assert_eq!(rest, Vec::from(model));
    }
}

/// The invented greenhouse-bench rover (COMMON.md), per wheel, in counts and ticks:
/// count size pi * 42 / 360 = 0.36652 mm, loop rate 500 Hz, so a wheel gain of
/// 180 mm/s per volt is 180 / 0.36652 / 500 = 0.98221 counts/tick per volt, the time
/// constant 0.09 s is 45 ticks and the friction bias 0.7 V.
struct Wheel {
    gain: f64,
    tau_ticks: f64,
    bias: f64,
    speed: f64,
    position: f64,
    blocked: bool,
}

impl Wheel {
    fn new(gain: f64, tau_ticks: f64, bias: f64, start: f64) -> Wheel {
        Wheel {
            gain,
            tau_ticks,
            bias,
            speed: 0.0,
            position: start,
            blocked: false,
        }
    }

    /// One tick of a first-order motor with Coulomb friction, exact for a held voltage
    /// (zero-order hold): `speed += (1 - exp(-1/tau)) (gain (V - bias sign) - speed)`.
    fn step(&mut self, volts: f64) {
        if self.blocked {
            self.speed = 0.0;
            return;
        }
        let drive = if self.speed.abs() < 1e-9 && volts.abs() <= self.bias {
            0.0 // stiction: at rest and below the bias nothing moves
        } else {
            let s = if self.speed.abs() > 1e-9 {
                self.speed.signum()
            } else {
                volts.signum()
            };
            volts - self.bias * s
        };
        let a = (-1.0 / self.tau_ticks).exp();
        let before = self.speed;
        self.speed = a * self.speed + (1.0 - a) * self.gain * drive;
        if before != 0.0 && before.signum() != self.speed.signum() && drive.abs() < self.bias {
            self.speed = 0.0; // friction stops the wheel instead of reversing it
        }
        self.position += 0.5 * (before + self.speed);
    }

    fn raw(&self) -> u16 {
        (self.position.floor() as i64).rem_euclid(65536) as u16
    }
}

const LIMIT_COUNTS: f64 = 40.0;
const STALL_TICKS: u16 = 50;

fn rover_drive() -> TwoAxisDrive {
    // Feedforward for a first-order plant V = (v + T a) / K + bias (the motor equation
    // T dv/dt + v = K (V - bias), e.g. Franklin, Powell & Emami-Naeini, "Feedback Control of
    // Dynamic Systems", DC motor example, from memory): kv = 1/K, ka = T/K.
    let k = 180.0 / (std::f64::consts::PI * 42.0 / 360.0) / 500.0;
    let c = |x: f64| Coeff::from_f64(x).unwrap().0;
    let ff = Feedforward::new(c(1.0 / k), c(45.0 / k), I16F16::from_num(0.7));
    // PD placing the closed-loop poles near wn = 0.05 rad/tick, zeta = 0.8 for the plant
    // K / (s (1 + T s)): K kp = T wn^2, 1 + K kd = 2 zeta wn T.
    let kp = 45.0 * 0.05f64.powi(2) / k;
    let kd = (2.0 * 0.8 * 0.05 * 45.0 - 1.0) / k;
    let pd = Pd::new(c(kp), c(kd), Derivative::OnError, I16F16::from_num(8.4));
    let guard = StallGuard::new(I16F16::from_num(LIMIT_COUNTS), STALL_TICKS);
    let axis = Axis::new(ff, Feedback::Pd(pd), guard);
    TwoAxisDrive::new(
        Encoders::new(false, false),
        axis,
        axis,
        Supply::new(I16F16::from_num(6.4)),
        I16F16::from_num(8.4),
    )
}

/// Runs a forward move and a turn at once on simulated wheels; returns per-tick
/// `(forward error, rotation error, stalled, duty)`.
fn run_rover(
    forward: Move,
    turn: Move,
    battery: f64,
    spread: (f64, f64),
    start: (u16, u16),
    block_left_at: Option<usize>,
    ticks: usize,
) -> Vec<(f64, f64, bool, [I16F16; 2])> {
    let drive = rover_drive();
    let mut st = DriveState::new();
    drive.set_battery(&mut st, I16F16::from_num(battery));
    let k = 180.0 / (std::f64::consts::PI * 42.0 / 360.0) / 500.0;
    let mut left = Wheel::new(k * spread.0, 45.0, 0.7, start.0 as f64);
    let mut right = Wheel::new(k * spread.1, 45.0, 0.7, start.1 as f64);
    st.forward_mut().start(forward).unwrap();
    st.rotation_mut().start(turn).unwrap();
    let mut out = Vec::with_capacity(ticks);
    for t in 0..ticks {
        if block_left_at == Some(t) {
            left.blocked = true;
        }
        let duty = drive.tick(&mut st, left.raw(), right.raw());
        let s = st.sample();
        out.push((fx(s.forward.error), fx(s.rotation.error), s.stalled, duty));
        left.step(fx(duty[0]) * battery);
        right.step(fx(duty[1]) * battery);
    }
    out
}

fn moves() -> impl Strategy<Value = (Move, Move)> {
    // Forward: up to 1.5 m (4093 counts), cruise up to 400 mm/s (2.18 counts/tick), accel up
    // to 1200 mm/s^2 (0.0131 counts/tick^2). Turn: up to 180 deg of heading = 220 mm of wheel
    // arc (600 counts), cruise up to 4 rad/s (1.53), accel up to 15 rad/s^2 (0.01146).
    (
        -4093.0f64..4093.0,
        0.3f64..2.18,
        0.002f64..0.0131,
        -600.0f64..600.0,
        0.2f64..1.53,
        0.002f64..0.01146,
    )
        .prop_map(|(d, v, a, rd, rv, ra)| {
            let n = |x: f64| I32F32::from_num(x);
            (
                Move::new(n(d), n(v), I32F32::ZERO, n(a)),
                Move::new(n(rd), n(rv), I32F32::ZERO, n(ra)),
            )
        })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(60))]

    /// A free rover with +-15 % gain spread per wheel and a battery anywhere in the pack's
    /// range finishes normal moves without the guard tripping.
    #[test]
    fn stall_guard_never_trips_on_free_wheels(
        (fwd, turn) in moves(), battery in 6.4f64..8.4,
        spread in (0.85f64..1.15, 0.85f64..1.15), start in (any::<u16>(), any::<u16>()),
    ) {
        let log = run_rover(fwd, turn, battery, spread, start, None, 2500);
        let worst = log.iter().map(|x| x.0.abs().max(x.1.abs())).fold(0.0, f64::max);
        prop_assert!(log.iter().all(|x| !x.2), "tripped; worst error {worst}");
        prop_assert!(worst < LIMIT_COUNTS);
    }

    /// A wheel blocked during a long move trips the guard exactly on the N-th consecutive
    /// tick over the limit, and from that tick on both duties are zero.
    #[test]
    fn stall_guard_trips_within_n_ticks_on_a_blocked_wheel(
        d in 1500.0f64..4093.0, v in 0.8f64..2.18, a in 0.005f64..0.0131,
        block_at in 0usize..200, battery in 6.4f64..8.4, start in (any::<u16>(), any::<u16>()),
    ) {
        let n = |x: f64| I32F32::from_num(x);
        let fwd = Move::new(n(d), n(v), I32F32::ZERO, n(a));
        let turn = Move::new(I32F32::ZERO, n(1.0), I32F32::ZERO, n(0.01));
        let log = run_rover(fwd, turn, battery, (1.0, 1.0), start, Some(block_at), 3000);
        let over = |x: &(f64, f64, bool, [I16F16; 2])| x.0.abs() > LIMIT_COUNTS || x.1.abs() > LIMIT_COUNTS;
        // First tick that ends a run of STALL_TICKS over-limit ticks on either axis.
        let mut run = (0u32, 0u32);
        let mut due = None;
        for (t, x) in log.iter().enumerate() {
            run.0 = if x.0.abs() > LIMIT_COUNTS { run.0 + 1 } else { 0 };
            run.1 = if x.1.abs() > LIMIT_COUNTS { run.1 + 1 } else { 0 };
            if run.0 >= STALL_TICKS as u32 || run.1 >= STALL_TICKS as u32 {
                due = Some(t);
                break;
            }
        }
        let first_over = log.iter().position(over);
        let due = due.expect("a blocked wheel must drive the error over the limit for N ticks");
        prop_assert_eq!(due, first_over.unwrap() + STALL_TICKS as usize - 1, "trips N ticks after the error first exceeds the limit");
        prop_assert!(log[..due].iter().all(|x| !x.2), "not before");
        prop_assert!(log[due..].iter().all(|x| x.2 && x.3 == [I16F16::ZERO; 2]), "latched, duty zero");
    }
}

/// After a stall is cleared the drive restarts where the robot stands: zero error and zero
/// duty at once, and the next move is measured from there (it ends `distance` counts past
/// the position where the fault was cleared, not past the old setpoint).
#[test]
fn clear_fault_restarts_where_the_robot_stands() {
    let drive = rover_drive();
    let mut st = DriveState::new();
    drive.set_battery(&mut st, I16F16::from_num(7.4));
    let k = 180.0 / (std::f64::consts::PI * 42.0 / 360.0) / 500.0;
    let mut left = Wheel::new(k, 45.0, 0.7, 0.0);
    let mut right = Wheel::new(k, 45.0, 0.7, 0.0);
    let n = |x: f64| I32F32::from_num(x);
    st.forward_mut()
        .start(Move::new(n(3000.0), n(2.0), I32F32::ZERO, n(0.01)))
        .unwrap();
    let mut ticks = 0;
    while !st.is_stalled() {
        if ticks == 100 {
            left.blocked = true;
            right.blocked = true;
        }
        let duty = drive.tick(&mut st, left.raw(), right.raw());
        left.step(fx(duty[0]) * 7.4);
        right.step(fx(duty[1]) * 7.4);
        ticks += 1;
        assert!(ticks < 2000, "a blocked rover must trip the guard");
    }
    let stood = st.encoders().forward();
    st.clear_fault();
    assert!(!st.is_stalled());
    let duty = drive.tick(&mut st, left.raw(), right.raw());
    assert_eq!(
        duty,
        [I16F16::ZERO; 2],
        "at rest where it stands: nothing to correct"
    );
    assert_eq!(st.sample().forward.error, I16F16::ZERO);
    assert_eq!(st.forward().profile().setpoint().position, stood);
    // Free the wheels and drive 200 counts on from there.
    left.blocked = false;
    right.blocked = false;
    st.forward_mut()
        .start(Move::new(n(200.0), n(2.0), I32F32::ZERO, n(0.01)))
        .unwrap();
    for _ in 0..1500 {
        let duty = drive.tick(&mut st, left.raw(), right.raw());
        left.step(fx(duty[0]) * 7.4);
        right.step(fx(duty[1]) * 7.4);
    }
    assert!(!st.is_stalled());
    assert_eq!(
        st.forward().profile().setpoint().position,
        stood + n(200.0),
        "the move is measured from where the fault was cleared"
    );
    let moved = fx_wide(st.encoders().forward() - stood);
    assert!(
        (moved - 200.0).abs() < 3.0,
        "the rover followed: moved {moved} counts"
    );
}

fn fx_wide(x: I32F32) -> f64 {
    x.to_num()
}
