//! Design formulas against textbook results and physics, plus refusals.
//!
//! Textbook references are named beside each check ("from memory": recalled, not
//! re-read for this test).

use ctrl_design::analysis::{self, DerivativeOn, SettlingBand};
use ctrl_design::tune::{self, DesignError, Shape};
use ctrl_design::Plant;
use proptest::prelude::*;
use std::f64::consts::PI;

fn forward() -> Plant {
    // The demo rover's invented forward axis.
    Plant::new(180.0, 0.09, 0.7).unwrap()
}

#[test]
fn second_order_overshoot_and_peak_time_without_the_zero() {
    // Ogata, "Modern Control Engineering", ch. 5 (transient-response specifications of
    // the standard second-order system), from memory:
    //   Mp = exp(-zeta pi / sqrt(1 - zeta^2)),  tp = pi / (wn sqrt(1 - zeta^2)).
    // With the derivative on the measurement the closed loop is exactly that system.
    let p = forward();
    for &(zeta, ts) in &[(0.3, 0.5), (0.5, 0.4), (0.7, 0.3), (0.9, 0.2)] {
        let d = tune::design_pd(&p, zeta, ts, SettlingBand::TWO_PERCENT).unwrap();
        let f = analysis::pd_continuous(&p, d.kp, d.kd, DerivativeOn::Measurement)
            .figures(SettlingBand::TWO_PERCENT);
        let wd = d.natural_frequency * (1.0 - zeta * zeta).sqrt();
        let mp = 100.0 * (-zeta * PI / (1.0 - zeta * zeta).sqrt()).exp();
        let os = f.overshoot_pct.unwrap();
        assert!(
            (os - mp).abs() < 1e-6 * mp.max(1.0),
            "zeta {zeta}: overshoot {os} vs {mp}"
        );
        let tp = f.peak_time_s.unwrap();
        assert!(
            (tp - PI / wd).abs() < 1e-6 * (PI / wd),
            "zeta {zeta}: peak {tp} vs {}",
            PI / wd
        );
        // Same formula in the library.
        assert!((tune::second_order_overshoot_pct(zeta) - mp).abs() < 1e-12);
        assert!((tune::damping_for_overshoot(mp) - zeta).abs() < 1e-12);
    }
}

#[test]
fn settling_time_is_within_the_envelope_bound() {
    // Ogata, ch. 5, from memory: the underdamped step response stays inside the envelope
    // 1 +- exp(-zeta wn t) / sqrt(1 - zeta^2), so it has settled to the band b by
    // t = -ln(b sqrt(1 - zeta^2)) / (zeta wn); and ts ~ 4 / (zeta wn) is the usual 2 %
    // approximation (checked within 25 %).
    let p = forward();
    for &zeta in &[0.3, 0.5, 0.7] {
        let d = tune::design_pd(&p, zeta, 0.4, SettlingBand::TWO_PERCENT).unwrap();
        let f = analysis::pd_continuous(&p, d.kp, d.kd, DerivativeOn::Measurement)
            .figures(SettlingBand::TWO_PERCENT);
        let ts = f.settling_time_s.unwrap();
        let bound = -(0.02 * (1.0 - zeta * zeta).sqrt()).ln() / (zeta * d.natural_frequency);
        assert!(
            ts <= bound + 1e-9,
            "zeta {zeta}: {ts} > envelope bound {bound}"
        );
        assert!(
            (ts - 0.4).abs() < 0.25 * 0.4,
            "zeta {zeta}: {ts} far from the 4/(zeta wn) rule"
        );
    }
}

#[test]
fn the_pd_zero_raises_overshoot() {
    // The zero at -Kp/Kd adds overshoot to the second-order response (Franklin, Powell &
    // Emami-Naeini, "Feedback Control of Dynamic Systems", ch. 3, effect of a zero, from
    // memory): derivative on error must overshoot more than derivative on measurement.
    let p = forward();
    let d = tune::design_pd(&p, 0.8, 0.3, SettlingBand::TWO_PERCENT).unwrap();
    let on_err = analysis::report_pd(
        &p,
        d.kp,
        d.kd,
        Some(500.0),
        SettlingBand::TWO_PERCENT,
        DerivativeOn::Error,
    );
    let on_meas = analysis::report_pd(
        &p,
        d.kp,
        d.kd,
        Some(500.0),
        SettlingBand::TWO_PERCENT,
        DerivativeOn::Measurement,
    );
    assert!(
        on_err.continuous.overshoot_pct.unwrap() > 2.0 * on_meas.continuous.overshoot_pct.unwrap()
    );
    // One tick of delay costs phase: w_c * h in radians at the crossover (a pure delay's
    // phase, common practice, no source), within 0.5 deg.
    let d0 = on_err.discrete.as_ref().unwrap();
    let d1 = on_err.discrete_delayed.as_ref().unwrap();
    let wc = d0.gain_crossover_rad_s.unwrap();
    let lost = d0.phase_margin_deg.unwrap() - d1.phase_margin_deg.unwrap();
    assert!(
        (lost - (wc / 500.0).to_degrees()).abs() < 0.5,
        "lost {lost} deg"
    );
}

#[test]
fn too_long_a_settling_time_names_the_longest_allowed() {
    let p = forward();
    let e = tune::design_pd(&p, 0.8, 0.9, SettlingBand::TWO_PERCENT).unwrap_err();
    let msg = e.to_string();
    assert!(msg.contains("settling_time_s = 0.9"), "{msg}");
    // 2 * 4 * T = 0.72 s for the 2 % band; 2 * 3 * T = 0.54 s for 5 %.
    assert!(msg.contains("0.72"), "{msg}");
    let e5 = tune::design_pd(&p, 0.8, 0.6, SettlingBand::FIVE_PERCENT).unwrap_err();
    assert!(e5.to_string().contains("0.54"), "{e5}");
    // At the limit Kd is zero, not negative.
    let d = tune::design_pd(&p, 0.8, 0.72, SettlingBand::TWO_PERCENT).unwrap();
    assert!(d.kd.abs() < 1e-15 && d.zero_rad_s.is_none());
    assert!(matches!(
        tune::design_pd(&p, f64::NAN, 0.3, SettlingBand::TWO_PERCENT),
        Err(DesignError::OutOfRange {
            field: "damping",
            ..
        })
    ));
}

#[test]
fn meet_targets_meets_them_in_the_discrete_loop() {
    let p = forward();
    for delayed in [false, true] {
        let t = tune::meet_targets(
            &p,
            5.0,
            0.3,
            500.0,
            SettlingBand::TWO_PERCENT,
            delayed,
            DerivativeOn::Error,
        )
        .unwrap();
        // Recompute independently of the search.
        let f = analysis::pd_discrete(&p, t.kp, t.kd, DerivativeOn::Error, 500.0, delayed)
            .figures(SettlingBand::TWO_PERCENT);
        let os = f.overshoot_pct.unwrap();
        assert!(os <= 5.0 + 1e-9 && os > 4.5, "overshoot {os}");
        assert!(f.settling_time_s.unwrap() <= 0.3 + 1e-12);
        // Pole placement at the textbook damping for 5 % ignores the PD zero: it misses.
        assert!(t.pole_placement_overshoot_miss_pct.unwrap() > 1.0);
    }
    // Too fast for the loop rate: refused with the shortest found.
    let e = tune::meet_targets(
        &p,
        5.0,
        0.005,
        100.0,
        SettlingBand::TWO_PERCENT,
        true,
        DerivativeOn::Error,
    )
    .unwrap_err();
    assert!(e.to_string().contains("settling_time_s = 0.005"), "{e}");
}

#[test]
fn lead_refused_beyond_one_stage() {
    let p = forward();
    // At 100 rad/s the plant phase is -90 - atan(9) = -173.66 deg, so a plain gain gives
    // 6.34 deg; 80 deg of margin needs 73.66 deg of lead (> 65): refused, and the
    // largest margin one stage gives there is 6.34 + 65 = 71.34 deg.
    let e = tune::design_lead(&p, 100.0, 80.0).unwrap_err();
    let msg = e.to_string();
    assert!(
        msg.contains("phase_margin_deg = 80") && msg.contains("71.34"),
        "{msg}"
    );
    // At 20 rad/s the plant phase is -90 - atan(1.8) = -150.95 deg: 85 deg needs 55.95
    // deg of lead (marginal, warned), 80 deg needs 50.95 (fine), 25 deg needs none.
    let marginal = tune::design_lead(&p, 20.0, 85.0).unwrap();
    assert!(!marginal.warnings.is_empty(), "{marginal:?}");
    assert!(tune::design_lead(&p, 20.0, 80.0)
        .unwrap()
        .warnings
        .is_empty());
    assert!(tune::design_lead(&p, 20.0, 25.0).is_err(), "no lead needed");
    let d = tune::design_lead(&p, 20.0, 50.0).unwrap();
    assert!(d.discretize(6.0).is_err(), "crossover above Nyquist");
}

#[test]
fn feedforward_inverts_the_plant() {
    let p = forward();
    let ff = tune::feedforward(&p);
    // Steady speed under the speed feedforward is the commanded speed (plant model).
    for v in [50.0, 400.0, -300.0] {
        let u = ff.volts(v, 0.0);
        assert!((p.steady_speed(u) - v).abs() < 1e-9 * v.abs());
    }
    // Demo move: 0.7 + 400/180 + 1200 * 0.09 / 180 = 3.5222 V.
    let peak = tune::move_peak_volts(&p, 400.0, 1200.0);
    assert!((peak - (0.7 + 400.0 / 180.0 + 1200.0 * 0.09 / 180.0)).abs() < 1e-12);
    assert!(tune::check_move_voltage(&p, 400.0, 1200.0, 6.4).is_ok());
    let e = tune::check_move_voltage(&p, 1200.0, 1200.0, 6.4).unwrap_err();
    // Largest cruise that fits: (6.4 - 0.7 - 0.6) * 180 = 918 units/s.
    assert!(e.to_string().contains("918"), "{e}");
}

#[test]
fn feedforward_tracks_a_ramp_exactly() {
    // T w' + w = K u with u = (v + T a) / K and v = a t: w = a t solves it (common
    // kinematics of a first-order lag). Integrate the plant exactly over small steps.
    let p = forward();
    let ff = tune::feedforward(&p);
    let (a, h) = (1200.0, 1e-4);
    let mut w = 0.0f64;
    let decay = (-h / p.time_constant_s).exp();
    for k in 0..5000 {
        let t = k as f64 * h;
        // Input linear over the step: use its mean (exact for a linear input to first order).
        let u = (ff.kv * a * (t + h / 2.0) + ff.ka * a) * p.gain;
        w = decay * w + (1.0 - decay) * u;
        let _ = t;
    }
    let want = a * 5000.0 * h;
    assert!((w - want).abs() < 1e-3 * want, "{w} vs {want}");
}

#[test]
fn profile_shapes() {
    // Demo forward move: 400 mm/s, 1200 mm/s^2. Reaching cruise takes 400^2 / 2400 =
    // 66.67 mm each way, so 100 mm is a triangle with peak sqrt(1200 * 100) = 346.4 mm/s.
    let tri = tune::profile_shape(100.0, 400.0, 1200.0, 0.0, 0.0).unwrap();
    assert_eq!(tri.shape, Shape::Triangle);
    assert!((tri.peak_speed - (1200.0f64 * 100.0).sqrt()).abs() < 1e-9);
    let trap = tune::profile_shape(500.0, 400.0, 1200.0, 0.0, 0.0).unwrap();
    assert_eq!(trap.shape, Shape::Trapezoid);
    // 1/3 s up, 1/3 s down, (500 - 133.33) / 400 s cruising.
    let want = 2.0 / 3.0 + (500.0 - 400.0 * 400.0 / 1200.0) / 400.0;
    assert!((trap.total_time_s - want).abs() < 1e-12);
    let e = tune::profile_shape(10.0, 400.0, 1200.0, 0.0, 300.0).unwrap_err();
    let msg = e.to_string();
    // sqrt(2 * 1200 * 10) = 154.9 mm/s is the fastest reachable end speed.
    assert!(
        msg.contains("end_speed = 300") && msg.contains("154.919"),
        "{msg}"
    );
    let e = tune::profile_shape(10.0, 400.0, 1200.0, 400.0, 0.0).unwrap_err();
    assert!(e.to_string().contains("[368.78"), "{e}"); // sqrt(400^2 - 2 * 1200 * 10)
}

#[test]
fn profile_shape_backwards_and_zero_distance() {
    // A move backwards has the same shape and times as the same move forwards; speeds are
    // magnitudes along the motion (as in ctrl-core's Move).
    for d in [100.0, 500.0, 3.0] {
        let fwd = tune::profile_shape(d, 400.0, 1200.0, 50.0, 20.0).unwrap();
        let back = tune::profile_shape(-d, 400.0, 1200.0, 50.0, 20.0).unwrap();
        assert_eq!(fwd, back, "distance {d}");
    }
    // Zero distance from rest: nothing to do, 0 s.
    let z = tune::profile_shape(0.0, 400.0, 1200.0, 0.0, 0.0).unwrap();
    assert_eq!(z.total_time_s, 0.0);
    assert_eq!(z.peak_speed, 0.0);
    // Zero distance cannot change the speed.
    assert!(tune::profile_shape(0.0, 400.0, 1200.0, 0.0, 10.0).is_err());
    assert!(tune::profile_shape(f64::NAN, 400.0, 1200.0, 0.0, 0.0).is_err());
}

#[test]
fn encoder_step_and_suggested_filter() {
    let p = forward();
    let d = tune::design_pd(&p, 0.8, 0.3, SettlingBand::TWO_PERCENT).unwrap();
    let count = PI * 42.0 / 360.0;
    let input = tune::LoopCheckInput {
        bandwidth_rad_s: 22.0,
        rate_hz: 500.0,
        cruise_speed: 400.0,
        count_size: count,
        kp: d.kp,
        kd: d.kd,
        supply_min_volts: 6.4,
        crossover_rad_s: Some(18.5),
    };
    let c = tune::check_rate_and_encoder(&input).unwrap();
    assert!((c.derivative_step_volts - d.kd * 500.0 * count).abs() < 1e-12);
    assert!((c.counts_per_tick - 400.0 / 500.0 / count).abs() < 1e-12);
    assert!(c.warnings.iter().any(|w| w.contains("chatter")));
    let f = c.suggested_filter.unwrap();
    // Run the suggested lead's difference equation on a one-count step: its first output
    // is the voltage step, and it must be at the stated share of the supply.
    let co = analysis::lead_tustin(f.kc, f.alpha, f.t1, 500.0, Some(18.5));
    let u0 = co.b0 * count;
    assert!(u0 <= tune::MAX_DERIVATIVE_STEP_SHARE * 6.4 + 1e-9, "{u0}");
    assert!(u0 >= 0.99 * tune::MAX_DERIVATIVE_STEP_SHARE * 6.4, "{u0}");
    // The filtered loop still has the PD's low-frequency behaviour: same DC gain Kp.
    assert!((f.kc - d.kp).abs() < 1e-15);
    // Slow loop rate warning.
    let slow = tune::check_rate_and_encoder(&tune::LoopCheckInput {
        rate_hz: 30.0,
        ..input
    })
    .unwrap();
    assert!(slow.warnings.iter().any(|w| w.contains("bandwidth")));
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    #[test]
    fn pole_placement_puts_the_poles_where_asked(
        k in 0.5f64..2000.0, t in 0.005f64..1.0, zeta in 0.1f64..2.5, frac in 0.05f64..1.0,
    ) {
        let p = Plant::new(k, t, 0.0).unwrap();
        let ts = frac * 8.0 * t;
        let d = tune::design_pd(&p, zeta, ts, SettlingBand::TWO_PERCENT).unwrap();
        let poles = analysis::pd_continuous(&p, d.kp, d.kd, DerivativeOn::Error).closed_loop().den.roots();
        // Roots of s^2 + 2 zeta wn s + wn^2.
        let wn = 4.0 / (zeta * ts);
        prop_assert!((d.natural_frequency - wn).abs() < 1e-12 * wn);
        let prod = (poles[0] * poles[1]).re;
        let sum = -(poles[0] + poles[1]).re;
        prop_assert!((prod - wn * wn).abs() < 1e-9 * wn * wn, "{prod} vs {}", wn * wn);
        prop_assert!((sum - 2.0 * zeta * wn).abs() < 1e-9 * wn, "{sum} vs {}", 2.0 * zeta * wn);
    }

    #[test]
    fn lead_gives_the_margin_it_promises(
        k in 0.5f64..2000.0, t in 0.005f64..1.0, wct in 0.3f64..5.0, extra in 5.0f64..60.0,
    ) {
        let p = Plant::new(k, t, 0.0).unwrap();
        let wc = wct / t;
        let plain = 90.0 - wct.atan().to_degrees();
        let pm = plain + extra;
        prop_assume!(pm < 89.0);
        let d = tune::design_lead(&p, wc, pm).unwrap();
        // Maximum lead of one stage: sin(phi_m) = (1 - alpha) / (1 + alpha) at
        // w = 1 / (T1 sqrt(alpha)) (Ogata, lead compensation, from memory).
        prop_assert!(((1.0 - d.alpha) / (1.0 + d.alpha) - d.lead_deg.to_radians().sin()).abs() < 1e-12);
        let m = analysis::lead_continuous(&p, d.kc, d.alpha, d.t1).loop_tf().margins();
        prop_assert!((m.gain_crossover_rad_s.unwrap() - wc).abs() < 1e-6 * wc);
        prop_assert!((m.phase_margin_deg.unwrap() - pm).abs() < 1e-6);
    }

    #[test]
    fn pi_gets_its_bandwidth(k in 0.5f64..2000.0, t in 0.005f64..1.0, m in 1.5f64..20.0, zeta in 0.4f64..1.5) {
        let p = Plant::new(k, t, 0.0).unwrap();
        let bw = m / t;
        let d = tune::design_pi(&p, bw, zeta).unwrap();
        let f = analysis::pi_continuous(&p, d.kp, d.ki).figures(SettlingBand::TWO_PERCENT);
        prop_assert!((f.bandwidth_rad_s.unwrap() - bw).abs() < 1e-6 * bw);
    }

    #[test]
    fn profile_covers_the_distance(
        d in 0.1f64..5000.0, vc in 1.0f64..2000.0, a in 1.0f64..20000.0, s0 in 0.0f64..1.0, s1 in 0.0f64..1.0,
    ) {
        let v0 = s0 * vc;
        let lo = (v0 * v0 - 2.0 * a * d).max(0.0).sqrt();
        let hi = vc.min((v0 * v0 + 2.0 * a * d).sqrt());
        let v1 = lo + s1 * (hi - lo);
        let p = tune::profile_shape(d, vc, a, v0, v1).unwrap();
        // Distance covered by the three phases (constant acceleration kinematics).
        let ta = p.time_to_peak_s;
        let tdec = p.decel_time_s;
        let covered = v0 * ta + 0.5 * a * ta * ta + p.peak_speed * p.cruise_time_s
            + p.peak_speed * tdec - 0.5 * a * tdec * tdec;
        prop_assert!((covered - d).abs() < 1e-6 * d.max(1.0), "{covered} vs {d}");
        prop_assert!(p.peak_speed <= vc * (1.0 + 1e-12));
        prop_assert!((p.peak_speed - a * tdec - v1).abs() < 1e-6 * vc);
    }
}

proptest! {
    // Each case runs a target search; fewer cases keep the debug test run short.
    #![proptest_config(ProptestConfig::with_cases(16))]

    #[test]
    fn garbage_never_panics(kp in proptest::num::f64::ANY, kd in proptest::num::f64::ANY, rate in proptest::num::f64::ANY) {
        let p = forward();
        let _ = analysis::report_pd(&p, kp, kd, Some(rate), SettlingBand::TWO_PERCENT, DerivativeOn::Error);
        let _ = tune::meet_targets(&p, kp, kd, rate, SettlingBand::TWO_PERCENT, false, DerivativeOn::Error);
        let _ = tune::profile_shape(kp, kd, rate, 0.0, 0.0);
        let _ = tune::design_lead(&p, kp, kd);
        let _ = tune::design_pi(&p, kp, kd);
    }
}
