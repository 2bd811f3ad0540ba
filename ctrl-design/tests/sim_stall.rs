//! The stall guard in the simulated firmware loop (`ctrl-core`'s `StallGuard` through
//! `Axis`): a blocked wheel trips it within a number of ticks worked out from the move, a
//! normal move does not, and the tripped loop's duties are those of `TwoAxisDrive::tick`.
//! The `f64` loop's guard (`IdealStallGuard`, the twin of `ctrl_core::stall::StallGuard`)
//! trips on the same tick as the fixed-point loop's, and neither trips on the nominal move.

use ctrl_core::drive::{Axis, DriveState, Feedback, TwoAxisDrive};
use ctrl_core::encoder::Encoders;
use ctrl_core::pd::{Derivative, Pd};
use ctrl_core::stall::StallGuard;
use ctrl_core::supply::Supply;
use ctrl_core::Coeff;
use ctrl_design::sim::{
    quantize_axis, quantize_move, simulate, simulate_traced, stall_guard, AxisKind, Command,
    DerivativeForm, Disturbance, Feedforward, FirmwareLoop, FirmwareUnits, IdealLoop,
    IdealStallGuard, LoopDesign, SimConfig, MAX_RELATIVE_ERROR,
};
use ctrl_design::Plant;
use fixed::types::I16F16;

const COUNT: f64 = 0.36652; // mm, the demo rover's encoder (invented numbers)
const LIMIT_MM: f64 = 20.0;
const GUARD_S: f64 = 0.1; // 50 ticks at 500 Hz

/// The demo PD design, its firmware units and the 400 mm move.
fn parts() -> (Plant, LoopDesign, FirmwareUnits, Command) {
    let plant = Plant::new(180.0, 0.09, 0.7).unwrap();
    let d = LoopDesign {
        kp: 0.12,
        kd: 0.004,
        derivative: DerivativeForm::OnError,
        feedforward: Some(Feedforward::for_plant(&plant)),
    };
    let units = FirmwareUnits {
        count_size: COUNT,
        rate_hz: 500.0,
    };
    let command = Command::Move {
        distance: 400.0,
        cruise_speed: 400.0,
        accel: 1200.0,
    };
    (plant, d, units, command)
}

fn setup(load_volts: Option<f64>) -> (SimConfig, FirmwareLoop) {
    let (plant, d, units, command) = parts();
    let cfg = SimConfig {
        plant,
        rate_hz: 500.0,
        count_size: Some(COUNT),
        supply_volts: 6.4,
        delay_ticks: 1,
        disturbance: load_volts.map(|volts| Disturbance {
            volts,
            start_s: 0.0,
        }),
        command,
        ticks: 1200,
        band: 0.02,
    };
    let (mut lp, _) =
        FirmwareLoop::from_design(&d, AxisKind::Forward, &units, 6.4, &command).unwrap();
    lp.set_stall_guard(stall_guard(LIMIT_MM, GUARD_S, &units).unwrap());
    (cfg, lp)
}

/// The `f64` twin of [`setup`]'s loop on the same profile, holding the firmware guard's
/// limit and ticks (`IdealStallGuard::from_firmware`).
fn ideal_twin() -> IdealLoop {
    let (_, d, units, command) = parts();
    let g = stall_guard(LIMIT_MM, GUARD_S, &units).unwrap();
    let mut id = IdealLoop::on_firmware_profile(&d, &command, &units).unwrap();
    id.set_stall_guard(IdealStallGuard::from_firmware(&g, COUNT));
    id
}

// A load far beyond the supply (50 V equivalent against a 6.4 V supply) holds the wheel at
// or behind its start, so the tracking error is at least the setpoint. The setpoint passes
// the 20 mm limit at t = sqrt(2 * 20 / 1200) s (constant acceleration from rest), tick
// ceil(500 t) = 92; the guard then needs 50 ticks over the limit: it must trip by tick
// 92 + 50 (plus one tick for the profile's own sampling). After the trip the applied
// voltage is 0 (one tick of computation delay later).
#[test]
fn a_blocked_wheel_trips_the_guard_in_time() {
    let (cfg, mut lp) = setup(Some(-50.0));
    let (m, t) = simulate_traced(&cfg, &mut lp);
    let over_at = ((2.0 * LIMIT_MM / 1200.0f64).sqrt() * 500.0).ceil() as u32;
    let latest = over_at + 50 + 1;
    let k = m.stall_tick.expect("the blocked wheel trips the guard");
    assert!(k <= latest, "tripped at tick {k}, later than {latest}");
    assert!(
        k >= 50,
        "tripped at tick {k}, before the guard's 50 ticks could pass"
    );
    assert!(lp.is_stalled());
    let after = &t.applied_volts[k as usize + 1..];
    assert!(after.iter().all(|&v| v == 0.0), "voltage after the trip");
    // Without the guard the same run keeps pushing at the supply
    let (cfg, lp2) = setup(Some(-50.0));
    let mut lp2 = lp2;
    lp2.set_stall_guard(StallGuard::OFF);
    let m2 = simulate(&cfg, &mut lp2);
    assert_eq!(m2.stall_tick, None);
    // (the firmware's own limit holds its command at the supply, so nothing is clipped).
    assert!(m2.rms_volts > 0.95 * 6.4, "{m2:?}");
}

// The same guard on the nominal move never trips (the demo's largest tracking error is a
// few mm) and changes nothing in the run.
#[test]
fn a_normal_move_does_not_trip_the_guard() {
    let (cfg, mut lp) = setup(None);
    let m = simulate(&cfg, &mut lp);
    assert_eq!(m.stall_tick, None, "{m:?}");
    assert!(m.max_tracking_error < LIMIT_MM / 4.0, "{m:?}");
    let (_, mut off) = setup(None);
    off.set_stall_guard(StallGuard::OFF);
    let mut expect = simulate(&cfg, &mut off);
    expect.stall_tick = None;
    assert_eq!(m, expect);
}

// With the guard on, the single-axis path still gives TwoAxisDrive::tick's duties bit for
// bit, before and after the trip (which zeroes both wheels).
#[test]
fn tripped_duties_equal_the_two_axis_drive() {
    let plant = Plant::new(180.0, 0.09, 0.7).unwrap();
    let d = LoopDesign {
        kp: 0.12,
        kd: 0.004,
        derivative: DerivativeForm::OnError,
        feedforward: Some(Feedforward::for_plant(&plant)),
    };
    let units = FirmwareUnits {
        count_size: COUNT,
        rate_hz: 500.0,
    };
    let command = Command::Move {
        distance: 400.0,
        cruise_speed: 400.0,
        accel: 1200.0,
    };
    let q = quantize_axis(&d, &units, 6.4, MAX_RELATIVE_ERROR).unwrap();
    let guard = stall_guard(LIMIT_MM, GUARD_S, &units).unwrap();
    let battery = I16F16::checked_from_num(6.4).unwrap();
    let quiet = Axis::new(
        ctrl_core::feedforward::Feedforward::NONE,
        Feedback::Pd(Pd::new(
            Coeff::ZERO,
            Coeff::ZERO,
            Derivative::OnError,
            I16F16::ZERO,
        )),
        StallGuard::OFF,
    );
    let drive = TwoAxisDrive::new(
        Encoders::new(false, false),
        q.axis(guard),
        quiet,
        Supply::new(I16F16::ZERO),
        battery,
    );
    let mut st = DriveState::new();
    drive.set_battery(&mut st, battery);
    st.forward_mut()
        .start(quantize_move(400.0, 400.0, 1200.0, &units).unwrap())
        .unwrap();
    let mut lp =
        FirmwareLoop::with_axis(q.axis(guard), AxisKind::Forward, &units, 6.4, &command).unwrap();
    let mut tripped_at = None;
    for k in 0..400i64 {
        // The wheel creeps at a third of the setpoint's pace: it falls behind and trips.
        let counts = (k * k) / 300;
        let raw = counts as u16;
        let want = drive.tick(&mut st, raw, raw);
        assert_eq!(lp.read(counts), want, "tick {k}");
        if lp.is_stalled() && tripped_at.is_none() {
            tripped_at = Some(k);
            assert_eq!(want, [I16F16::ZERO; 2]);
        }
    }
    assert!(tripped_at.is_some(), "the lagging wheel trips the guard");
}

// The blocked-wheel run of `a_blocked_wheel_trips_the_guard_in_time`: the 50-tick guard trips
// no earlier than tick 50 and no later than tick 92 + 50 + 1, and on the same tick in the
// fixed-point and the f64 loop.
#[test]
fn both_loops_trip_on_the_same_tick() {
    let (cfg, mut fx) = setup(Some(-50.0));
    let mut id = ideal_twin();
    let mf = simulate(&cfg, &mut fx);
    let (mi, t) = simulate_traced(&cfg, &mut id);
    let kf = mf.stall_tick.expect("fixed trips");
    let ki = mi.stall_tick.expect("f64 trips");
    assert_eq!(kf, ki);
    assert!((50..=143).contains(&ki), "{ki}");
    assert!(id.is_stalled());
    assert!(t.applied_volts[ki as usize + 1..].iter().all(|&v| v == 0.0));
}

#[test]
fn neither_loop_trips_on_the_nominal_move() {
    let (cfg, mut fx) = setup(None);
    let mut id = ideal_twin();
    assert_eq!(simulate(&cfg, &mut fx).stall_tick, None);
    let m = simulate(&cfg, &mut id);
    assert_eq!(m.stall_tick, None);
    // and the guard changes nothing in the f64 run.
    let mut off = ideal_twin();
    off.set_stall_guard(IdealStallGuard::OFF);
    assert_eq!(simulate(&cfg, &mut off), m);
}
