//! The `f64` loop's stall guard (`IdealStallGuard`, the twin of `ctrl_core::stall::StallGuard`)
//! trips on the same tick as the fixed-point loop's in a blocked-wheel run, and neither trips
//! on the nominal demo move.

use ctrl_design::sim::{
    simulate, simulate_traced, stall_guard, AxisKind, Command, DerivativeForm, Disturbance,
    Feedforward, FirmwareLoop, FirmwareUnits, IdealLoop, IdealStallGuard, LoopDesign, SimConfig,
};
use ctrl_design::Plant;

const COUNT: f64 = 0.36652; // mm, the demo rover's encoder (invented numbers)

fn pair(load: Option<f64>) -> (SimConfig, FirmwareLoop, IdealLoop) {
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
    let cfg = SimConfig {
        plant,
        rate_hz: 500.0,
        count_size: Some(COUNT),
        supply_volts: 6.4,
        delay_ticks: 1,
        disturbance: load.map(|volts| Disturbance {
            volts,
            start_s: 0.0,
        }),
        command,
        ticks: 1200,
        band: 0.02,
    };
    let g = stall_guard(20.0, 0.1, &units).unwrap();
    let (mut fx, _) =
        FirmwareLoop::from_design(&d, AxisKind::Forward, &units, 6.4, &command).unwrap();
    fx.set_stall_guard(g);
    let mut id = IdealLoop::on_firmware_profile(&d, &command, &units).unwrap();
    id.set_stall_guard(IdealStallGuard::from_firmware(&g, COUNT));
    (cfg, fx, id)
}

// A 50 V-equivalent load against a 6.4 V supply pushes the wheel back from its start: the
// error is at least the setpoint, which passes 20 mm at tick ceil(500 sqrt(2 * 20 / 1200)) =
// 92 (constant acceleration from rest), so the 50-tick guard trips no later than tick
// 92 + 50 + 1 and no earlier than tick 50, and on the same tick in both loops.
#[test]
fn both_loops_trip_on_the_same_tick() {
    let (cfg, mut fx, mut id) = pair(Some(-50.0));
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
fn neither_trips_on_the_nominal_move() {
    let (cfg, mut fx, mut id) = pair(None);
    assert_eq!(simulate(&cfg, &mut fx).stall_tick, None);
    let m = simulate(&cfg, &mut id);
    assert_eq!(m.stall_tick, None);
    // and the guard changes nothing in the f64 run.
    let (_, _, mut off) = pair(None);
    off.set_stall_guard(IdealStallGuard::OFF);
    assert_eq!(simulate(&cfg, &mut off), m);
}
