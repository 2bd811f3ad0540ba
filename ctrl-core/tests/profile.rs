//! Hand-checked unit tests for the trapezoidal motion profile (`ctrl_core::profile`).
//!
//! Kinematics used for the expected values are the constant-acceleration equations
//! (Halliday, Resnick & Walker, "Fundamentals of Physics", ch. 2, from memory):
//! `v = v0 + a t`, `x = v0 t + a t^2 / 2`, `v^2 = v0^2 + 2 a x`. The profile integrates
//! position by the trapezoid rule, `p[k] = p[k-1] + (v[k-1] + v[k]) / 2`, which is exact for
//! speeds that change linearly within a tick.

use ctrl_core::profile::{
    Move, Profile, Setpoint, ACCEL_LIMIT, MAX_TICKS, POSITION_LIMIT, SPEED_LIMIT,
};
use ctrl_core::Error;
use fixed::types::{I16F16, I32F32};

/// One count in LSB of I32F32.
const ONE: i64 = 1 << 32;

fn c(x: f64) -> I32F32 {
    I32F32::from_num(x)
}

fn mv(d: f64, vc: f64, ve: f64, a: f64) -> Move {
    Move::new(c(d), c(vc), c(ve), c(a))
}

/// Steps until done (at most `cap` ticks) and returns every setpoint.
fn run(p: &mut Profile, cap: usize) -> Vec<Setpoint> {
    let mut out = Vec::new();
    while !p.is_done() {
        assert!(out.len() < cap, "move did not finish within {cap} ticks");
        out.push(p.step());
    }
    out
}

fn speeds(sps: &[Setpoint]) -> Vec<f64> {
    sps.iter().map(|s| s.speed.to_num()).collect()
}

fn positions(sps: &[Setpoint]) -> Vec<f64> {
    sps.iter().map(|s| s.position.to_num()).collect()
}

#[test]
fn trapezoid_six_counts_by_hand() {
    // From rest, cruise 2, accel 1, distance 6.
    // Continuous: t_accel = 2/1 = 2, d_accel = 2^2/(2*1) = 2, same to stop, cruise
    // (6 - 4)/2 = 1 tick: T = 5 ticks. Corners fall on whole ticks, so the sampled profile
    // is the continuous one: speeds 1, 2, 2, 1, 0;
    // positions 0.5, 0.5+1.5=2, 2+2=4, 4+1.5=5.5, 5.5+0.5=6.
    let mut p = Profile::new();
    p.start(mv(6.0, 2.0, 0.0, 1.0)).unwrap();
    assert_eq!(p.ticks_left(), 5);
    let sps = run(&mut p, 100);
    assert_eq!(speeds(&sps), [1.0, 2.0, 2.0, 1.0, 0.0]);
    assert_eq!(positions(&sps), [0.5, 2.0, 4.0, 5.5, 6.0]);
    let accels: Vec<f64> = sps.iter().map(|s| s.accel.to_num()).collect();
    assert_eq!(accels, [1.0, 1.0, 0.0, -1.0, -1.0]);
}

#[test]
fn trapezoid_seven_counts_needs_a_reduced_cruise_and_a_bump() {
    // Distance 7, cruise 2, accel 1. Continuous T = 7/2 + 2/1 = 5.5 ticks.
    // 5 ticks cover at most 6 counts (test above), so K = 6. With 6 ticks and level c in
    // [1, 2] the speeds are 1, c, c, c, 1, 0 and the trapezoid sum is
    // (sum of interior speeds) + (v0 + v6)/2 = (1 + 3c + 1) + 0 = 2 + 3c.
    // 2 + 3c = 7 gives c = 5/3: in LSB 5 * 2^32 / 3 = 7158278826.67, so c = 7158278826,
    // 3c = 21474836478, remainder 5 * 2^32 - 21474836478 = 2 LSB, which goes as +1 LSB on
    // the first two cruise ticks.
    let mut p = Profile::new();
    p.start(mv(7.0, 2.0, 0.0, 1.0)).unwrap();
    let sps = run(&mut p, 100);
    let bits: Vec<i64> = sps.iter().map(|s| s.speed.to_bits()).collect();
    assert_eq!(
        bits,
        [ONE, 7158278827, 7158278827, 7158278826, ONE, 0],
        "speeds in LSB"
    );
    assert_eq!(p.setpoint().position, c(7.0));
}

#[test]
fn triangular_by_hand() {
    // Distance 4, cruise 10 (never reached), accel 1, from rest to rest.
    // Peak v_p = sqrt(a d + (v0^2 + ve^2)/2) = sqrt(4) = 2, T = 2 v_p / a = 4 ticks.
    // Speeds 1, 2, 1, 0; positions 0.5, 2, 3.5, 4.
    let mut p = Profile::new();
    p.start(mv(4.0, 10.0, 0.0, 1.0)).unwrap();
    let sps = run(&mut p, 100);
    assert_eq!(speeds(&sps), [1.0, 2.0, 1.0, 0.0]);
    assert_eq!(positions(&sps), [0.5, 2.0, 3.5, 4.0]);
}

#[test]
fn negative_distance_is_the_mirror() {
    let mut p = Profile::new();
    p.start(mv(-6.0, 2.0, 0.0, 1.0)).unwrap();
    let sps = run(&mut p, 100);
    assert_eq!(speeds(&sps), [-1.0, -2.0, -2.0, -1.0, 0.0]);
    assert_eq!(positions(&sps), [-0.5, -2.0, -4.0, -5.5, -6.0]);
}

#[test]
fn zero_distance_at_rest_is_done_at_once() {
    let mut p = Profile::at(c(12.5));
    p.start(mv(0.0, 1.0, 0.0, 0.5)).unwrap();
    assert!(p.is_done());
    let sp = p.step();
    assert_eq!((sp.position, sp.speed, sp.accel), (c(12.5), c(0.0), c(0.0)));
}

#[test]
fn end_speed_then_start_above_cruise() {
    // Move 1: from rest to end speed 3 at accel 1: speeds 1, 2, 3 cover
    // (0+1)/2 + (1+2)/2 + (2+3)/2 = 4.5 counts in 3 ticks (x = v^2/(2a) = 4.5, t = 3).
    let mut p = Profile::new();
    p.start(mv(4.5, 3.0, 3.0, 1.0)).unwrap();
    let sps = run(&mut p, 100);
    assert_eq!(speeds(&sps), [1.0, 2.0, 3.0]);
    assert_eq!(p.setpoint().position, c(4.5));
    // Move 2 starts at 3 counts/tick with cruise 1: it sheds speed at accel 1 first.
    // 3 -> 2 -> 1 covers 2.5 + 1.5 = 4, the last tick 1 -> 0 covers 0.5, so 8.5 counts
    // leave 4 ticks at 1: speeds 2, 1, 1, 1, 1, 1, 0 (7 ticks).
    p.start(mv(8.5, 1.0, 0.0, 1.0)).unwrap();
    let sps = run(&mut p, 100);
    assert_eq!(speeds(&sps), [2.0, 1.0, 1.0, 1.0, 1.0, 1.0, 0.0]);
    assert_eq!(p.setpoint().position, c(13.0));
}

#[test]
fn demo_forward_axis_one_metre_time() {
    // Invented demo rover: 400 mm/s cruise, 1200 mm/s^2, 500 Hz, count = pi*42/360 mm.
    // Continuous (HRW ch. 2, from memory): t_accel = v/a = 1/3 s, d_accel = v^2/(2a)
    // = 66.67 mm, cruise (1000 - 133.33)/400 = 2.1667 s, T = 2.8333 s = 1416.67 ticks.
    // Bound from the module docs: T <= K < T + 1 + a/(4 vc) (+ 1/2 LSB), so K = 1417.
    let count_mm = core::f64::consts::PI * 42.0 / 360.0;
    let vc = 400.0 / 500.0 / count_mm;
    let a = 1200.0 / 500.0 / 500.0 / count_mm;
    let d = 1000.0 / count_mm;
    let mut p = Profile::new();
    p.start(mv(d, vc, 0.0, a)).unwrap();
    let t = d / vc + vc / a;
    assert!((t - 1416.6667).abs() < 1e-3, "closed form {t}");
    assert_eq!(p.ticks_left(), 1417);
    let sps = run(&mut p, 5000);
    assert_eq!(sps.len(), 1417);
    assert_eq!(p.setpoint().position, c(d));
    let a_bits = c(a).to_bits();
    let vc_bits = c(vc).to_bits();
    let mut prev = 0;
    for s in &sps {
        assert!(s.speed.to_bits() <= vc_bits);
        assert!((s.speed.to_bits() - prev).abs() <= a_bits);
        prev = s.speed.to_bits();
    }
}

#[test]
fn hold_freezes_and_a_new_move_starts_from_rest() {
    let mut p = Profile::new();
    p.start(mv(100.0, 1.0, 0.0, 0.25)).unwrap();
    for _ in 0..10 {
        p.step();
    }
    // After 10 ticks: speeds 0.25, 0.5, 0.75, 1, 1, ... positions
    // 0.125, 0.5, 1.125, 2, 3, 4, 5, 6, 7, 8.
    assert_eq!(p.setpoint().position, c(8.0));
    p.hold();
    assert!(p.is_done());
    for _ in 0..3 {
        let sp = p.step();
        assert_eq!((sp.position, sp.speed, sp.accel), (c(8.0), c(0.0), c(0.0)));
    }
    p.start(mv(2.0, 1.0, 0.0, 1.0)).unwrap();
    run(&mut p, 100);
    assert_eq!(p.setpoint().position, c(10.0));
}

#[test]
fn stop_brakes_at_the_move_accel() {
    let mut p = Profile::new();
    p.start(mv(100.0, 1.0, 0.0, 0.25)).unwrap();
    for _ in 0..10 {
        p.step();
    }
    p.stop();
    assert!(!p.is_done());
    // From 1 at 0.25: speeds 0.75, 0.5, 0.25, 0; positions 8 + 0.875 = 8.875,
    // + 0.625 = 9.5, + 0.375 = 9.875, + 0.125 = 10.
    let sps = run(&mut p, 100);
    assert_eq!(speeds(&sps), [0.75, 0.5, 0.25, 0.0]);
    assert_eq!(positions(&sps), [8.875, 9.5, 9.875, 10.0]);
    assert_eq!(p.step().position, c(10.0));
}

#[test]
fn stop_at_rest_or_before_any_move_holds() {
    let mut p = Profile::at(c(3.0));
    p.stop();
    assert!(p.is_done());
    assert_eq!(p.step().position, c(3.0));
}

#[test]
fn zero_distance_while_moving_comes_back() {
    // Cruising at 1 with accel 0.25, ask for distance 0: brake (covers 0.875 + 0.625 +
    // 0.375 + 0.125 = 2 counts), reverse, come back and stop exactly where we asked.
    let mut p = Profile::new();
    p.start(mv(100.0, 1.0, 0.0, 0.25)).unwrap();
    for _ in 0..10 {
        p.step();
    }
    let here = p.setpoint().position;
    p.start(mv(0.0, 1.0, 0.0, 0.25)).unwrap();
    let sps = run(&mut p, 1000);
    let peak = sps.iter().map(|s| s.position).max().unwrap();
    assert_eq!(peak, here + c(2.0));
    assert_eq!(p.setpoint().position, here);
    assert_eq!(p.setpoint().speed, c(0.0));
    let mut prev = c(1.0);
    for s in &sps {
        assert!((s.speed - prev).abs() <= c(0.25));
        assert!(s.speed.abs() <= c(1.0));
        prev = s.speed;
    }
}

#[test]
fn refuses_bad_moves_and_keeps_running() {
    let mut p = Profile::new();
    let bad = [
        mv(10.0, 1.0, 0.0, 0.0),  // no accel
        mv(10.0, 1.0, 0.0, -0.1), // negative accel
        mv(10.0, 0.0, 0.0, 0.1),  // no cruise speed
        mv(10.0, -1.0, 0.0, 0.1), // negative cruise speed
        mv(10.0, 1.0, 1.5, 0.1),  // end speed above cruise
        mv(10.0, 1.0, -0.5, 0.1), // negative end speed
        mv(0.0, 1.0, 0.5, 0.1),   // end speed with no direction
        mv(1.0, 2.0, 2.0, 0.01),  // 2^2/(2*0.01) = 200 counts needed to reach 2
    ];
    for m in bad {
        assert_eq!(p.start(m), Err(Error::OutOfRange), "{m:?}");
        assert!(p.is_done());
    }
    // A refused retarget leaves the running move alone.
    p.start(mv(6.0, 2.0, 0.0, 1.0)).unwrap();
    p.step();
    assert_eq!(p.start(mv(1.0, 2.0, 2.0, 0.01)), Err(Error::OutOfRange));
    let sps = run(&mut p, 100);
    assert_eq!(speeds(&sps), [2.0, 2.0, 1.0, 0.0]);
    // Target outside the position range (±2^30 counts, see `position_range_is_2_pow_30`).
    let mut edge = Profile::at(POSITION_LIMIT - c(1.0));
    assert_eq!(edge.start(mv(2.0, 1.0, 0.0, 1.0)), Err(Error::OutOfRange));
    assert_eq!(edge.start(mv(-2.0, 1.0, 0.0, 1.0)), Ok(()));
}

/// 2^30 counts in LSB.
const EDGE: i64 = 1 << 62;

fn bits(b: i64) -> I32F32 {
    I32F32::from_bits(b)
}

#[test]
fn position_range_is_2_pow_30() {
    // Targets must lie strictly inside ±2^30 counts: from 1 count below the top, a move
    // of 1 count reaches 2^30 (refused), one LSB less lands on the last position inside.
    assert_eq!(POSITION_LIMIT.to_bits(), EDGE);
    let mut p = Profile::at(POSITION_LIMIT - c(1.0));
    assert_eq!(p.start(mv(1.0, 1.0, 0.0, 1.0)), Err(Error::OutOfRange));
    assert!(p.is_done(), "a refused move leaves the profile as it was");
    p.start(Move::new(c(1.0) - I32F32::DELTA, c(1.0), c(0.0), c(1.0)))
        .unwrap();
    run(&mut p, 100);
    assert_eq!(p.setpoint().position.to_bits(), EDGE - 1);
    // The same at the bottom: -2^30 itself is outside too.
    let mut q = Profile::at(-POSITION_LIMIT + c(1.0));
    assert_eq!(q.start(mv(-1.0, 1.0, 0.0, 1.0)), Err(Error::OutOfRange));
    q.start(Move::new(I32F32::DELTA - c(1.0), c(1.0), c(0.0), c(1.0)))
        .unwrap();
    run(&mut q, 100);
    assert_eq!(q.setpoint().position.to_bits(), 1 - EDGE);
}

#[test]
fn a_start_position_outside_the_range_saturates() {
    // The doubled position is an i64: 2 * I32F32::MAX saturates to i64::MAX, whose half
    // (rounded toward zero) is 2^62 - 1 LSB; 2 * I32F32::MIN saturates to i64::MIN,
    // exactly -2^62 LSB = -2^30 counts.
    assert_eq!(
        Profile::at(I32F32::MAX).setpoint().position.to_bits(),
        EDGE - 1
    );
    assert_eq!(
        Profile::at(I32F32::MIN).setpoint().position.to_bits(),
        -EDGE
    );
    assert_eq!(Profile::at(c(-1e9)).setpoint().position, c(-1e9));
}

#[test]
fn cruise_speed_and_accel_below_2_pow_15() {
    let big = SPEED_LIMIT; // 2^15 counts/tick
    assert_eq!(big, c(32768.0));
    assert_eq!(ACCEL_LIMIT, c(32768.0));
    let just = big - I32F32::DELTA;
    let far = c(1e8);
    let mut p = Profile::new();
    assert_eq!(
        p.start(Move::new(far, big, c(0.0), c(1.0))),
        Err(Error::OutOfRange)
    );
    assert_eq!(
        p.start(Move::new(far, c(1.0), c(0.0), ACCEL_LIMIT)),
        Err(Error::OutOfRange)
    );
    // One LSB below both: accepted. Speeds just, just, ..., just, 0 cover
    // just/2 + (K - 2) just + just/2 = (K - 1) just, so 1000 just take K = 1001 ticks,
    // the first at full accel.
    let far = just * 1000;
    p.start(Move::new(far, just, c(0.0), just)).unwrap();
    assert_eq!(p.ticks_left(), 1001);
    let sp = p.step();
    assert_eq!((sp.speed, sp.accel), (just, just));
    assert_eq!(sp.speed_i16f16().to_bits(), i32::MAX);
    assert_eq!(sp.speed_i16f16(), I16F16::saturating_from_num(sp.speed));
    run(&mut p, 100_000);
    assert_eq!(p.setpoint().position, far);
}

#[test]
fn max_ticks_is_u32_max() {
    // Cruise and accel of 1 LSB from rest: speeds 1, 1, ..., 1, 0 (LSB) cover
    // 1/2 + (K - 2) + 1/2 = K - 1 LSB in K ticks, so D LSB take D + 1 ticks.
    assert_eq!(MAX_TICKS, u64::from(u32::MAX));
    let lsb = I32F32::DELTA;
    let d = (1i64 << 32) - 2;
    let mut p = Profile::new();
    p.start(Move::new(bits(d), lsb, c(0.0), lsb)).unwrap();
    assert_eq!(p.ticks_left(), MAX_TICKS);
    let mut q = Profile::new();
    assert_eq!(
        q.start(Move::new(bits(d + 1), lsb, c(0.0), lsb)),
        Err(Error::OutOfRange)
    );
}

/// A profile at `2^30 - 100` counts brought to 10 counts/tick towards the top by a move
/// of 50 counts at accel 1 (speeds 1..=10: 50 counts in 10 ticks, `v^2/(2a)` = 50).
fn fast_near_the_top() -> Profile {
    let mut p = Profile::at(POSITION_LIMIT - c(100.0));
    p.start(mv(50.0, 10.0, 10.0, 1.0)).unwrap();
    let sps = run(&mut p, 100);
    assert_eq!(sps.len(), 10);
    assert_eq!(p.setpoint().position, POSITION_LIMIT - c(50.0));
    assert_eq!(p.setpoint().speed, c(10.0));
    p
}

#[test]
fn a_retarget_that_would_overshoot_the_range_is_refused() {
    // From 2^30 - 50 at 10 counts/tick, go back 10 counts. At accel 1 the brake alone
    // (speeds 9, 8, ..., 0) covers (10 + 9)/2 + ... + (1 + 0)/2 = 50 counts, so the
    // setpoint would reach 2^30: refused, and the profile carries on as it was.
    let mut p = fast_near_the_top();
    let before = p.clone();
    assert_eq!(p.start(mv(-10.0, 10.0, 0.0, 1.0)), Err(Error::OutOfRange));
    assert_eq!(p, before);
    // At accel 2 the brake (8, 6, 4, 2, 0) covers (18 + 14 + 10 + 6 + 2)/2 = 25 counts:
    // the peak is 2^30 - 25 and the move lands exactly at 2^30 - 60.
    p.start(mv(-10.0, 10.0, 0.0, 2.0)).unwrap();
    let sps = run(&mut p, 1000);
    let peak = sps.iter().map(|s| s.position).max().unwrap();
    assert_eq!(peak, POSITION_LIMIT - c(25.0));
    assert_eq!(p.setpoint().position, POSITION_LIMIT - c(60.0));
    assert_eq!(p.setpoint().speed, c(0.0));
}

#[test]
fn coasting_past_the_range_saturates_the_position() {
    // After a move with a non-zero end speed the setpoint coasts: from 2^30 - 50 at 10
    // counts/tick it reaches 2^30 after 5 ticks, where the position saturates at the
    // last value inside (2^62 - 1 LSB) and stays; the speed stays 10.
    let mut p = fast_near_the_top();
    let pos: Vec<i64> = (0..8).map(|_| p.step().position.to_bits()).collect();
    let step = 10 * ONE;
    assert_eq!(
        pos,
        [
            EDGE - 4 * step,
            EDGE - 3 * step,
            EDGE - 2 * step,
            EDGE - step,
            EDGE - 1,
            EDGE - 1,
            EDGE - 1,
            EDGE - 1
        ]
    );
    assert_eq!(p.setpoint().speed, c(10.0));
    // Any move from here that brakes first would pass 2^30: refused. After a hold the
    // way back is fine and lands exactly.
    assert_eq!(p.start(mv(-100.0, 10.0, 0.0, 1.0)), Err(Error::OutOfRange));
    p.hold();
    p.start(mv(-100.0, 10.0, 0.0, 1.0)).unwrap();
    run(&mut p, 1000);
    assert_eq!(p.setpoint().position.to_bits(), EDGE - 1 - 100 * ONE);
    // Braking (stop) past the range saturates the same way.
    let mut q = fast_near_the_top();
    for _ in 0..3 {
        q.step(); // 2^30 - 20 at 10 counts/tick
    }
    q.stop(); // 9, 8, ..., 0 at accel 1: 50 counts more would be needed
    run(&mut q, 100);
    assert_eq!(q.setpoint().position.to_bits(), EDGE - 1);
    assert_eq!(q.setpoint().speed, c(0.0));
}

#[test]
fn the_bottom_of_the_range_saturates_at_minus_2_pow_30() {
    // Mirror of the coast above: the doubled position saturates at i64::MIN, exactly
    // -2^30 counts.
    let mut p = Profile::at(-POSITION_LIMIT + c(100.0));
    p.start(mv(-50.0, 10.0, 10.0, 1.0)).unwrap();
    run(&mut p, 100);
    for _ in 0..8 {
        p.step();
    }
    assert_eq!(p.setpoint().position, -POSITION_LIMIT);
    assert_eq!(p.setpoint().speed, c(-10.0));
}

#[test]
fn end_speed_just_reachable() {
    // From rest to 2 counts/tick at 0.5: speeds 0.5, 1, 1.5, 2 cover
    // 0.25 + 0.75 + 1.25 + 1.75 = 4 counts = v^2/(2a) = 4/1 exactly, 4 ticks = v/a.
    let mut p = Profile::new();
    p.start(mv(4.0, 2.0, 2.0, 0.5)).unwrap();
    let sps = run(&mut p, 100);
    assert_eq!(speeds(&sps), [0.5, 1.0, 1.5, 2.0]);
    assert_eq!(p.setpoint().position, c(4.0));
    // One LSB less cannot be done in 4 ticks, and 3 ticks cannot reach 2 at all.
    let mut q = Profile::new();
    let short = Move::new(c(4.0) - I32F32::DELTA, c(2.0), c(2.0), c(0.5));
    assert_eq!(q.start(short), Err(Error::OutOfRange));
}
