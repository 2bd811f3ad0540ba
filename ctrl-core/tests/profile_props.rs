//! Property tests for the trapezoidal motion profile (`ctrl_core::profile`).
//!
//! Closed-form kinematics for the time check are the constant-acceleration equations of
//! Halliday, Resnick & Walker, "Fundamentals of Physics", ch. 2 (from memory):
//! `v = v0 + a t`, `x = v0 t + a t^2/2`, `v^2 = v0^2 + 2 a x`. From them: a ramp from `v0`
//! to `vc` takes `t = (vc - v0)/a` and covers `(vc^2 - v0^2)/(2a)`; a triangular move
//! peaks at `v_p = sqrt(a d + (v0^2 + ve^2)/2)` (sum of the two ramp distances equals `d`).
//! `closed_form_matches_the_textbook_equations` checks the time formula used here against
//! the position equation `x = v0 t + a t^2/2` piece by piece.
//!
//! All comparisons of the profile's output are exact on the raw bits, except the time
//! bound (`T <= K < T + 1 + (a/4 + 1/2 LSB)/v_top`, derived in the module docs), which is
//! computed in f64 with a 1e-9 tick allowance for f64 rounding of T.

use ctrl_core::profile::{Move, Profile, Setpoint, ACCEL_LIMIT, SPEED_LIMIT};
use fixed::types::{I16F16, I32F32};
use proptest::prelude::*;

/// LSB per count.
const ONE: f64 = 4_294_967_296.0;

fn bits(x: f64) -> i64 {
    (x * ONE) as i64
}

fn counts(b: i64) -> f64 {
    b as f64 / ONE
}

fn mv(d: i64, vc: i64, ve: i64, a: i64) -> Move {
    Move::new(
        I32F32::from_bits(d),
        I32F32::from_bits(vc),
        I32F32::from_bits(ve),
        I32F32::from_bits(a),
    )
}

fn run(p: &mut Profile, cap: usize) -> Vec<Setpoint> {
    let mut out = Vec::new();
    while !p.is_done() {
        assert!(out.len() < cap, "move did not finish within {cap} ticks");
        out.push(p.step());
    }
    out
}

/// Brings a fresh profile to speed `sign * w0` (LSB) with accel `a`, by a move that ends
/// at that speed.
fn at_speed(w0: i64, sign: i64, a: i64) -> Profile {
    let mut p = Profile::new();
    if w0 > 0 {
        let w = counts(w0);
        let d = bits(w * w / (2.0 * counts(a)) + 10.0 * w + 1.0);
        p.start(mv(sign * d, w0, w0, a)).unwrap();
        run(&mut p, 1_000_000);
        assert_eq!(p.setpoint().speed.to_bits(), sign * w0);
    }
    p
}

/// Continuous minimum time (ticks) and top speed for distance `d >= |ve^2 - w0^2|/(2a)`
/// with `0 <= w0, ve <= vc`, all in counts and ticks.
fn closed_form(w0: f64, ve: f64, vc: f64, a: f64, d: f64) -> (f64, f64) {
    let d_acc = (vc * vc - w0 * w0) / (2.0 * a);
    let d_dec = (vc * vc - ve * ve) / (2.0 * a);
    if d >= d_acc + d_dec {
        let t = (vc - w0) / a + (vc - ve) / a + (d - d_acc - d_dec) / vc;
        (t, vc)
    } else {
        let vp = (a * d + (w0 * w0 + ve * ve) / 2.0).sqrt();
        ((vp - w0) / a + (vp - ve) / a, vp)
    }
}

/// Move parameters in LSB: accel, cruise, start speed, end speed.
fn limits() -> impl Strategy<Value = (i64, i64, i64, i64)> {
    (0.002f64..0.5, 0.05f64..5.0, 0.0f64..=1.0, 0.0f64..=1.0).prop_map(|(a, vc, f0, fe)| {
        let (a, vc) = (bits(a), bits(vc));
        (a, vc, (vc as f64 * f0) as i64, (vc as f64 * fe) as i64)
    })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 192, failure_persistence: None, ..ProptestConfig::default() })]

    /// Exact arrival, limits, monotone position and the closed-form time.
    #[test]
    fn one_direction_move((a, vc, w0, ve) in limits(), extra in 0.0f64..1500.0, neg: bool) {
        let sign = if neg { -1 } else { 1 };
        let mut p = at_speed(w0, sign, a);
        let (af, vcf, w0f, vef) = (counts(a), counts(vc), counts(w0), counts(ve));
        let d_min = (vef * vef - w0f * w0f).abs() / (2.0 * af);
        let d = bits(d_min + 3.0 * vcf + extra);
        let start = p.setpoint();
        prop_assert!(p.start(mv(sign * d, vc, ve, a)).is_ok());
        let k_plan = p.ticks_left();
        let sps = run(&mut p, 10_000_000);
        prop_assert_eq!(sps.len() as u64, k_plan);
        let end = p.setpoint();
        prop_assert_eq!(end.position.to_bits(), start.position.to_bits() + sign * d);
        prop_assert_eq!(end.speed.to_bits(), sign * ve);
        let mut prev = start;
        for s in &sps {
            let dv = s.speed.to_bits() - prev.speed.to_bits();
            prop_assert!(dv.abs() <= a, "accel {} > {}", dv, a);
            prop_assert_eq!(s.accel.to_bits(), dv);
            prop_assert!(s.speed.to_bits().abs() <= vc, "speed over cruise");
            prop_assert!(sign * s.speed.to_bits() >= 0, "speed against the move");
            prop_assert!(sign * (s.position - prev.position).to_bits() >= 0, "not monotone");
            prev = *s;
        }
        let (t, v_top) = closed_form(w0f, vef, vcf, af, counts(d));
        let k = sps.len() as f64;
        let slack = (af / 4.0 + 0.5 / ONE) / v_top;
        prop_assert!(k >= t - 1e-9, "K = {} below closed form {}", k, t);
        prop_assert!(k < t + 1.0 + slack + 1e-9, "K = {} vs closed form {} (+1 +{})", k, t, slack);
    }

    /// A negative distance gives the mirror image: every setpoint negated bit for bit.
    #[test]
    fn negative_distance_mirrors((a, vc, w0, ve) in limits(), d in 0.0f64..800.0) {
        let mut runs = Vec::new();
        for sign in [1i64, -1] {
            let mut p = at_speed(w0, sign, a);
            let p0 = p.setpoint().position.to_bits();
            match p.start(mv(sign * bits(d), vc, ve, a)) {
                Ok(()) => runs.push(Some((p0, run(&mut p, 10_000_000)))),
                Err(_) => runs.push(None),
            }
        }
        let (plus, minus) = (runs[0].take(), runs[1].take());
        prop_assert_eq!(plus.is_some(), minus.is_some());
        if let (Some((p0, plus)), Some((m0, minus))) = (plus, minus) {
            prop_assert_eq!(m0, -p0);
            prop_assert_eq!(plus.len(), minus.len());
            for (s, m) in plus.iter().zip(&minus) {
                prop_assert_eq!(m.speed.to_bits(), -s.speed.to_bits());
                prop_assert_eq!(m.accel.to_bits(), -s.accel.to_bits());
                prop_assert_eq!(m.position.to_bits(), -s.position.to_bits());
            }
        }
    }

    /// No drift: after any chain of moves (end speeds chained straight into the next move)
    /// the position is the exact sum of the distances.
    #[test]
    fn no_drift_over_many_moves(
        moves in prop::collection::vec((-400.0f64..400.0, limits()), 1..10),
    ) {
        let mut p = Profile::at(I32F32::from_num(-1234.5));
        let mut expected = p.setpoint().position.to_bits();
        for (d, (a, vc, _, ve)) in moves {
            let d = bits(d);
            if p.start(mv(d, vc, ve, a)).is_err() {
                // A non-zero end speed may be out of reach; at rest it never is.
                prop_assert!(p.start(mv(d, vc, 0, a)).is_ok());
            }
            expected += d;
            run(&mut p, 10_000_000);
            prop_assert_eq!(p.setpoint().position.to_bits(), expected);
        }
    }

    /// Retargeting during a move (any new target, also behind or with a reversal): the
    /// speed changes by at most the running accel on every tick, also on the tick after
    /// the retarget, the new move lands exactly, and the speed stays within cruise once the
    /// extra speed is shed.
    #[test]
    fn retarget_is_continuous_and_exact(
        d1 in -600.0f64..600.0, (a1, vc1, _, _) in limits(),
        d2 in -600.0f64..600.0, (a2, vc2, _, ve2) in limits(),
        when in 0.0f64..1.0,
    ) {
        let mut p = Profile::new();
        p.start(mv(bits(d1), vc1, 0, a1)).unwrap();
        let ticks = (p.ticks_left() as f64 * when) as u64;
        let mut prev = p.setpoint();
        for _ in 0..ticks {
            let s = p.step();
            prop_assert!((s.speed - prev.speed).to_bits().abs() <= a1);
            prev = s;
        }
        let d2 = bits(d2);
        let from = p.setpoint().position.to_bits();
        let ve2 = if p.start(mv(d2, vc2, ve2, a2)).is_ok() {
            ve2
        } else {
            prop_assert!(p.start(mv(d2, vc2, 0, a2)).is_ok());
            0
        };
        let sps = run(&mut p, 10_000_000);
        for s in &sps {
            let v = s.speed.to_bits().abs();
            prop_assert!((s.speed - prev.speed).to_bits().abs() <= a2);
            prop_assert!(v <= vc2 || v < prev.speed.to_bits().abs(), "speed over cruise");
            prev = *s;
        }
        let end = p.setpoint();
        prop_assert_eq!(end.position.to_bits(), from + d2);
        prop_assert_eq!(end.speed.to_bits(), d2.signum() * ve2);
    }

    /// Stop: the speed falls by exactly the accel each tick (the last tick takes the
    /// rest), never changes sign, and then the setpoint stays put.
    #[test]
    fn stop_brakes_then_holds(d in -600.0f64..600.0, (a, vc, _, _) in limits(), when in 0.0f64..1.0) {
        let mut p = Profile::new();
        p.start(mv(bits(d), vc, 0, a)).unwrap();
        let ticks = (p.ticks_left() as f64 * when) as u64;
        for _ in 0..ticks {
            p.step();
        }
        p.stop();
        let mut prev = p.setpoint();
        let sps = run(&mut p, 10_000_000);
        for s in &sps {
            let (v0, v1) = (prev.speed.to_bits(), s.speed.to_bits());
            prop_assert_eq!(v0.abs() - v1.abs(), v0.abs().min(a));
            prop_assert!(v0.signum() * v1.signum() >= 0);
            prev = *s;
        }
        prop_assert_eq!(p.setpoint().speed.to_bits(), 0);
        let rest = p.setpoint();
        for _ in 0..5 {
            let s = p.step();
            prop_assert_eq!((s.position, s.speed.to_bits(), s.accel.to_bits()), (rest.position, 0, 0));
        }
    }

    /// Hold: speed zero at once, position frozen; a following move lands exactly.
    #[test]
    fn hold_freezes(d in -600.0f64..600.0, (a, vc, _, _) in limits(), when in 0.0f64..1.0, d2 in -50.0f64..50.0) {
        let mut p = Profile::new();
        p.start(mv(bits(d), vc, 0, a)).unwrap();
        let ticks = (p.ticks_left() as f64 * when) as u64;
        for _ in 0..ticks {
            p.step();
        }
        p.hold();
        prop_assert!(p.is_done());
        let here = p.setpoint().position;
        for _ in 0..5 {
            let s = p.step();
            prop_assert_eq!((s.position, s.speed.to_bits(), s.accel.to_bits()), (here, 0, 0));
        }
        p.start(mv(bits(d2), vc, 0, a)).unwrap();
        run(&mut p, 10_000_000);
        prop_assert_eq!(p.setpoint().position.to_bits(), here.to_bits() + bits(d2));
    }

    /// Zero distance while moving: brake, come back, stop exactly where it was asked.
    #[test]
    fn zero_distance_while_moving(d in -600.0f64..600.0, (a, vc, _, _) in limits(), when in 0.0f64..1.0) {
        let mut p = Profile::new();
        p.start(mv(bits(d), vc, 0, a)).unwrap();
        let ticks = (p.ticks_left() as f64 * when) as u64;
        for _ in 0..ticks {
            p.step();
        }
        let here = p.setpoint();
        prop_assert!(p.start(mv(0, vc, 0, a)).is_ok());
        let mut prev = here;
        for s in run(&mut p, 10_000_000) {
            prop_assert!((s.speed - prev.speed).to_bits().abs() <= a);
            prop_assert!(s.speed.to_bits().abs() <= vc);
            prev = s;
        }
        prop_assert_eq!(p.setpoint().position, here.position);
        prop_assert_eq!(p.setpoint().speed.to_bits(), 0);
    }

    /// The closed-form time used above against the textbook position equation
    /// `x = v0 t + a t^2/2`, applied to each phase (ramp, cruise, ramp).
    #[test]
    fn closed_form_matches_the_textbook_equations(
        a in 0.002f64..0.5, vc in 0.05f64..5.0, f0 in 0.0f64..=1.0, fe in 0.0f64..=1.0,
        extra in 0.0f64..1500.0,
    ) {
        let (w0, ve) = (vc * f0, vc * fe);
        let d = (ve * ve - w0 * w0).abs() / (2.0 * a) + extra;
        let (t, v_top) = closed_form(w0, ve, vc, a, d);
        // Phases from v = v0 + a t: up from w0 to v_top, down from v_top to ve.
        let t_up = (v_top - w0) / a;
        let t_down = (v_top - ve) / a;
        let t_cruise = t - t_up - t_down;
        prop_assert!(t_cruise >= -1e-9);
        let x = (w0 * t_up + a * t_up * t_up / 2.0)
            + v_top * t_cruise
            + (v_top * t_down - a * t_down * t_down / 2.0);
        prop_assert!((x - d).abs() <= 1e-9 * d.max(1.0), "x = {} d = {}", x, d);
        prop_assert!(v_top <= vc * (1.0 + 1e-12));
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 2000, failure_persistence: None, ..ProptestConfig::default() })]

    /// Nothing panics (tests run with overflow checks on) for any bits in a move, from any
    /// state reached by an earlier such move; an accepted move keeps its accel limit. (About
    /// 60 % of the cases have at least one accepted extreme move.)
    #[test]
    fn garbage_never_panics(
        first in (any::<i64>(), 1..=i64::MAX, 0.0f64..=1.0, 1..=i64::MAX)
            .prop_map(|(d, vc, fe, a)| (d, vc, (vc as f64 * fe) as i64, a)),
        second in (any::<i64>(), any::<i64>(), any::<i64>(), any::<i64>()),
        small in (any::<i32>(), 1i64..1 << 40, 0.0f64..=1.0, 1i64..1 << 36),
        pos in any::<i64>(),
        ticks in 0usize..300,
    ) {
        let mut p = Profile::at(I32F32::from_bits(pos));
        let (d, vc, fe, a) = small;
        let _ = p.start(mv(i64::from(d) << 8, vc, (vc as f64 * fe) as i64, a));
        for _ in 0..ticks {
            p.step();
        }
        for (d, vc, ve, a) in [first, second] {
            let before = p.setpoint();
            let accepted = p.start(mv(d, vc, ve.min(vc), a)).is_ok();
            let mut prev = before;
            for _ in 0..ticks {
                let s = p.step();
                if accepted {
                    prop_assert!((s.speed - prev.speed).to_bits().unsigned_abs() <= a.unsigned_abs());
                }
                prev = s;
            }
            p.stop();
            p.step();
            p.hold();
        }
    }
}

/// One operation of a chain: a move (distance, cruise, end speed as a fraction of the
/// cruise, accel; all LSB), a run of steps, a stop or a hold.
#[derive(Clone, Debug)]
enum Op {
    Start(i64, i64, f64, i64),
    Steps(u16),
    Stop,
    Hold,
}

/// An LSB magnitude in `[1, 2^47)` spread evenly over its binary exponent (any scale up
/// to just below 2^15 counts/tick), one of the last thousand LSB below 2^47, or (rarely)
/// one at or above 2^47, which `start` must refuse.
fn rate() -> BoxedStrategy<i64> {
    prop_oneof![
        8 => (0u32..47).prop_flat_map(|e| (1i64 << e)..1i64 << (e + 1)),
        2 => (1i64..1000).prop_map(|r| (1i64 << 47) - r),
        1 => (1i64 << 47)..1 << 50,
    ]
    .boxed()
}

fn chain_op() -> impl Strategy<Value = Op> {
    // Distances up to 2^62 LSB (2^30 counts) either way, spread over the exponent.
    let distance = (0u32..62, any::<bool>()).prop_flat_map(|(e, neg)| {
        ((1i64 << e)..1i64 << (e + 1)).prop_map(move |d| if neg { -d } else { d })
    });
    let end = prop_oneof![Just(0.0), Just(1.0), 0.0f64..=1.0];
    prop_oneof![
        5 => (distance, rate(), end.clone(), rate()).prop_map(|(d, vc, fe, a)| Op::Start(d, vc, fe, a)),
        // Fast: long moves near the speed limit at a high accel, so that later moves
        // retarget from speeds near 2^15 counts/tick.
        2 => (
            (1i64 << 59..1 << 62, any::<bool>()).prop_map(|(d, neg)| if neg { -d } else { d }),
            (1i64 << 46)..1 << 47,
            end,
            (1i64 << 40)..1 << 47,
        )
            .prop_map(|(d, vc, fe, a)| Op::Start(d, vc, fe, a)),
        // Hard turns: fast moves either way with an accel near 2^15 counts/tick^2 (half of
        // them at or above it, which must be refused), so a retarget against a fast
        // setpoint would change the speed by more than 2^15 in one tick if let through.
        1 => (
            (1i64 << 50..1 << 62, any::<bool>()).prop_map(|(d, neg)| if neg { -d } else { d }),
            (1i64 << 46)..1 << 47,
            (1i64 << 46)..1 << 48,
        )
            .prop_map(|(d, vc, a)| Op::Start(d, vc, 0.0, a)),
        4 => (0u16..3000).prop_map(Op::Steps),
        1 => Just(Op::Stop),
        1 => Just(Op::Hold),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 600, failure_persistence: None, ..ProptestConfig::default() })]

    /// Every setpoint has `|speed| < 2^15` counts/tick and `|accel| < 2^15` counts/tick^2
    /// (`SPEED_LIMIT`, `ACCEL_LIMIT`), so narrowing them to I16F16 needs no saturation:
    /// `Setpoint::speed_i16f16` / `accel_i16f16` (a shift) equal the `fixed` crate's own
    /// checked conversion, which exists (no overflow). Over chains of moves at any scale up
    /// to the limits, retargets from whatever speed the last move left (end speeds up to
    /// the cruise speed carry into the next move), stops and holds; the bound holds by
    /// induction (a plan's speeds lie between its start speed, its end speed and its cruise
    /// level), and this checks it on every tick.
    #[test]
    fn setpoints_stay_in_i16f16_range(
        pos in -(1i64 << 61)..1 << 61,
        ops in prop::collection::vec(chain_op(), 1..12),
    ) {
        let mut p = Profile::at(I32F32::from_bits(pos));
        let check = |s: Setpoint| -> Result<(), TestCaseError> {
            prop_assert!(s.speed.abs() < SPEED_LIMIT, "speed {}", s.speed);
            prop_assert!(s.accel.abs() < ACCEL_LIMIT, "accel {}", s.accel);
            prop_assert_eq!(Some(s.speed_i16f16()), I16F16::checked_from_num(s.speed));
            prop_assert_eq!(Some(s.accel_i16f16()), I16F16::checked_from_num(s.accel));
            Ok(())
        };
        for op in ops {
            match op {
                Op::Start(d, vc, fe, a) => {
                    let ve = (vc as f64 * fe) as i64;
                    let _ = p.start(mv(d, vc, ve.min(vc), a));
                }
                Op::Steps(n) => {
                    for _ in 0..n {
                        check(p.step())?;
                    }
                }
                Op::Stop => p.stop(),
                Op::Hold => p.hold(),
            }
            check(p.setpoint())?;
        }
    }
}
