//! Behaviour of the nonlinear simulation (f64 loop) that follows from the model, each
//! check against a fact stated beside it.

use ctrl_design::sim::{
    simulate, simulate_traced, Command, DerivativeForm, Disturbance, Feedforward, IdealLoop,
    LoopDesign, SimConfig,
};
use ctrl_design::Plant;
use proptest::prelude::*;

/// The invented demo rover's forward axis (mm, V, s).
fn rover() -> Plant {
    Plant::new(180.0, 0.09, 0.7).unwrap()
}

fn design(plant: &Plant, feedforward: bool) -> LoopDesign {
    LoopDesign {
        kp: 0.12,
        kd: 0.004,
        derivative: DerivativeForm::OnMeasurement,
        feedforward: feedforward.then(|| Feedforward::for_plant(plant)),
    }
}

fn config(plant: Plant, command: Command, ticks: u32) -> SimConfig {
    SimConfig {
        plant,
        rate_hz: 500.0,
        count_size: None,
        supply_volts: f64::INFINITY,
        delay_ticks: 0,
        disturbance: None,
        command,
        ticks,
        band: 0.02,
    }
}

fn run(cfg: &SimConfig, d: &LoopDesign) -> ctrl_design::sim::Metrics {
    cfg.check().unwrap();
    simulate(cfg, &mut IdealLoop::new(d, &cfg.command, cfg.rate_hz))
}

// Coulomb friction gives a proportional position loop a dead band: a stopped wheel stays
// stopped while |kp e| <= bias, so it comes to rest with |e| <= bias / kp, and without the
// bias it converges to the target (common practice, no source).
#[test]
fn bias_makes_the_loop_stop_short_without_bias_feedforward() {
    let p = rover();
    let d = design(&p, false);
    let step = Command::Step { distance: 50.0 };
    let with_bias = run(&config(p, step, 2000), &d);
    let band = p.bias_volts / d.kp;
    assert!(
        with_bias.final_error > 0.05 * band && with_bias.final_error <= band + 1e-9,
        "final error {} not in (0, {band}]",
        with_bias.final_error
    );
    let no_bias = Plant::new(p.gain, p.time_constant_s, 0.0).unwrap();
    let clean = run(&config(no_bias, step, 2000), &d);
    assert!(clean.final_error.abs() < 1e-6, "{}", clean.final_error);
}

// With the plant's inverse (speed, acceleration and bias terms) in the feedforward, the
// feedback only corrects what the model misses: a move is tracked far more closely than on
// feedback alone, which must build every volt from the error (common practice, no source).
// The derivative acts on the error here, so it damps the speed error instead of opposing
// the feedforward.
#[test]
fn feedforward_tracks_a_move_far_closer_than_feedback_alone() {
    let p = rover();
    let mv = Command::Move {
        distance: 400.0,
        cruise_speed: 400.0,
        accel: 1200.0,
    };
    let on_error = |ff| LoopDesign {
        derivative: DerivativeForm::OnError,
        ..design(&p, ff)
    };
    let plain = run(&config(p, mv, 1000), &on_error(false));
    let ff = run(&config(p, mv, 1000), &on_error(true));
    assert!(plain.final_error > 0.0);
    assert!(
        ff.max_tracking_error < 0.1 * plain.max_tracking_error,
        "tracking {} vs {}",
        ff.max_tracking_error,
        plain.max_tracking_error
    );
}

// A constant load d (volts equivalent) on a PD position loop with no integral action is
// balanced when kp e + d = 0: the steady error is -d / kp (final-value theorem on the type-1
// loop, any control text, from memory).
#[test]
fn load_disturbance_leaves_the_final_value_theorem_error() {
    let p = Plant::new(180.0, 0.09, 0.0).unwrap();
    let d = design(&p, false);
    let mut cfg = config(p, Command::Step { distance: 20.0 }, 3000);
    cfg.disturbance = Some(Disturbance {
        volts: -0.3,
        start_s: 1.0,
    });
    let m = run(&cfg, &d);
    let want = 0.3 / d.kp;
    assert!(
        (m.final_error - want).abs() < 1e-6 * want,
        "{} vs {want}",
        m.final_error
    );
}

// Clipping: the applied voltage never exceeds the supply, and a supply far below what the
// step asks for is reached (saturated ticks counted).
#[test]
fn low_supply_clips_and_counts() {
    let p = rover();
    let mut cfg = config(p, Command::Step { distance: 100.0 }, 1000);
    cfg.supply_volts = 2.0;
    let m = run(&cfg, &design(&p, false));
    assert!(m.saturated_ticks > 10);
    assert!((m.peak_volts - 2.0).abs() < 1e-12);
}

// Reading whole encoder counts makes the derivative term jump by kd * rate * count on every
// count edge: the voltage's total variation grows with the count size.
#[test]
fn coarse_counts_raise_the_voltage_variation() {
    let p = rover();
    let d = LoopDesign {
        derivative: DerivativeForm::OnError,
        ..design(&p, true)
    };
    let mv = Command::Move {
        distance: 400.0,
        cruise_speed: 400.0,
        accel: 1200.0,
    };
    let mut tv = Vec::new();
    for count in [None, Some(0.05), Some(0.36652), Some(1.0)] {
        let mut cfg = config(p, mv, 1000);
        cfg.count_size = count;
        tv.push(run(&cfg, &d).voltage_total_variation);
    }
    assert!(tv.windows(2).all(|w| w[1] > w[0]), "{tv:?}");
}

// A computation delay of one tick costs phase: a lightly damped loop overshoots more.
#[test]
fn delay_raises_overshoot() {
    let p = Plant::new(180.0, 0.09, 0.0).unwrap();
    let d = design(&p, false);
    let mut cfg = config(p, Command::Step { distance: 10.0 }, 500);
    let a = run(&cfg, &d).overshoot_pct;
    cfg.delay_ticks = 3;
    let b = run(&cfg, &d).overshoot_pct;
    assert!(b > a + 1.0, "{a} -> {b}");
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    // Whatever the plant, gains, counts, delay, load and command, the voltage applied to the
    // drive stays within the supply.
    #[test]
    fn applied_voltage_never_exceeds_the_supply(
        gain in 1.0f64..1000.0,
        tau in 0.005f64..0.5,
        bias in 0.0f64..2.0,
        kp in 0.001f64..50.0,
        kd in 0.0f64..1.0,
        on_error in any::<bool>(),
        ff in any::<bool>(),
        supply in 0.5f64..24.0,
        delay in 0u32..4,
        count in prop::option::of(0.01f64..2.0),
        load in -3.0f64..3.0,
        distance in -500.0f64..500.0,
        is_move in any::<bool>(),
    ) {
        prop_assume!(distance.abs() > 0.1);
        let plant = Plant::new(gain, tau, bias).unwrap();
        let command = if is_move {
            Command::Move { distance, cruise_speed: 300.0, accel: 2000.0 }
        } else {
            Command::Step { distance }
        };
        let d = LoopDesign {
            kp,
            kd,
            derivative: if on_error { DerivativeForm::OnError } else { DerivativeForm::OnMeasurement },
            feedforward: ff.then(|| Feedforward::for_plant(&plant)),
        };
        let cfg = SimConfig {
            supply_volts: supply,
            delay_ticks: delay,
            count_size: count,
            disturbance: Some(Disturbance { volts: load, start_s: 0.1 }),
            ..config(plant, command, 600)
        };
        prop_assert!(cfg.check().is_ok());
        let (m, t) = simulate_traced(&cfg, &mut IdealLoop::new(&d, &cfg.command, cfg.rate_hz));
        prop_assert!(t.applied_volts.iter().all(|v| v.abs() <= supply));
        prop_assert!(m.peak_volts <= supply);
        prop_assert!(t.position.iter().all(|x| x.is_finite()));
    }
}
