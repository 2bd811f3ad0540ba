//! The fixed-point loop (`ctrl-core`, as the firmware runs it) against the f64 loop.
//!
//! Quantization bound. Follow the same setpoints (the f64 loop on `ctrl-core`'s profile)
//! with friction, clipping and saturation out of play. Then the fixed-point loop is the
//! linear f64 loop plus two perturbations: an encoder reading error `n` in `(-c, 0]` (whole
//! counts of size `c`; the f64 loop reads the exact position) and a voltage error `dv` from
//! the arithmetic. For a stable linear loop,
//! `max|x_fixed - x_f64| <= l1_m * c + l1_v * max|dv|`, where `l1_m`, `l1_v` are the l1
//! norms of the closed loop's pulse responses from a measurement error and from a voltage at
//! the plant input to the position; they are computed with python-control by
//! `reference/sim/linear_reference.py` (committed output). `max|dv|` is summed from the error
//! bounds `ctrl-core` documents for each operation (listed in `voltage_error_bound`).

use ctrl_core::drive::{Axis, DriveState, Feedback, TwoAxisDrive};
use ctrl_core::encoder::Encoders;
use ctrl_core::pd::{Derivative, Pd};
use ctrl_core::stall::StallGuard;
use ctrl_core::supply::Supply;
use ctrl_core::Coeff;
use ctrl_design::sim::{
    quantize_axis, quantize_move, simulate, simulate_traced, AxisKind, Command, DerivativeForm,
    Feedforward, FirmwareLoop, FirmwareUnits, IdealLoop, LoopDesign, SimConfig, MAX_RELATIVE_ERROR,
};
use ctrl_design::Plant;
use fixed::types::I16F16;
use proptest::prelude::*;
use serde_json::Value;

const LSB: f64 = 1.0 / 65536.0; // I16F16

fn sensitivity(delay: u64) -> (f64, f64) {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../reference/sim/linear_reference.json"
    );
    let v: Value = serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    let s = v["sensitivity"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["delay_ticks"].as_u64() == Some(delay))
        .unwrap();
    (
        s["l1_volts_to_position"].as_f64().unwrap(),
        s["l1_measurement_to_position"].as_f64().unwrap(),
    )
}

fn rover(bias: f64) -> Plant {
    Plant::new(180.0, 0.09, bias).unwrap()
}

fn design(plant: &Plant) -> LoopDesign {
    LoopDesign {
        kp: 0.12,
        kd: 0.004,
        derivative: DerivativeForm::OnError,
        feedforward: Some(Feedforward::for_plant(plant)),
    }
}

#[test]
fn fixed_point_loop_stays_within_the_quantization_bound() {
    let plant = rover(0.0);
    let d = design(&plant);
    let c = 0.001; // mm per count: fine enough that every signal stays in I16F16 range
    let units = FirmwareUnits {
        count_size: c,
        rate_hz: 500.0,
    };
    let supply = 24.0;
    let (l1_v, l1_m) = sensitivity(1);
    let q = quantize_axis(&d, &units, supply, MAX_RELATIVE_ERROR).unwrap();
    let rel = q.report.worst_gain_error();
    assert!(rel < 3.1e-5, "Coeff holds these gains within 2^-15: {rel}");
    let r = &q.report;
    for command in [
        Command::Move {
            distance: 400.0,
            cruise_speed: 400.0,
            accel: 1200.0,
        },
        Command::Step { distance: 10.0 },
    ] {
        let base = SimConfig {
            plant,
            rate_hz: 500.0,
            count_size: None,
            supply_volts: supply,
            delay_ticks: 1,
            disturbance: None,
            command,
            ticks: 1000,
            band: 0.02,
        };
        let mut ideal = IdealLoop::on_firmware_profile(&d, &command, &units).unwrap();
        let (_, ti) = simulate_traced(&base, &mut ideal);
        let fixed_cfg = SimConfig {
            count_size: Some(c),
            ..base
        };
        let (mut fw, _) =
            FirmwareLoop::from_design(&d, AxisKind::Forward, &units, supply, &command).unwrap();
        let (mf, tf) = simulate_traced(&fixed_cfg, &mut fw);
        assert_eq!(mf.saturated_ticks, 0, "the bound assumes no clipping");
        // Largest signals of the run (from the f64 trace, +1 mm / +1 count margins that
        // cover the difference itself, which the assertion below shows is far smaller).
        let maxabs = |v: &[f64]| v.iter().fold(0.0f64, |m, x| m.max(x.abs()));
        let e: Vec<f64> = ti
            .setpoint_position
            .iter()
            .zip(&ti.position)
            .map(|(s, x)| s - x)
            .collect();
        let de = e
            .windows(2)
            .map(|w| (w[1] - w[0]).abs())
            .fold(0.0, f64::max);
        let e_max = maxabs(&e) + 1.0;
        let de_max = de + 2.0 * (1.0 + c);
        let s_max = maxabs(&ti.setpoint_speed);
        let ff = q.feedforward;
        let a_max = 1200.0 * 2.0; // profile acceleration, with the junction tick's leftover
        let v_max = maxabs(&ti.applied_volts) + 1.0;
        // voltage_error_bound:
        // (a) gains held within `rel` (Coeff::from_f64), times each term's magnitude;
        let gains = rel
            * (d.kp * e_max
                + d.kd * 500.0 * de_max
                + s_max / plant.gain
                + a_max * plant.time_constant_s / plant.gain);
        // (b) four Coeff products rounded to 0.5 LSB; error narrowed to I16F16 (< 1 LSB, so
        //     its difference < 2 LSB) through kp and kd_per_tick; setpoint speed and accel
        //     narrowed (< 1 LSB each) through kv and ka;
        let rounding = LSB
            * (2.0 + r.kp.held + 2.0 * r.kd_per_tick.held + ff.kv().to_f64() + ff.ka().to_f64());
        // (c) supply compensation: the stored reciprocal within 1e-4 relative, the duty
        //     product rounded to 0.5 LSB, times the supply.
        let duty = 1e-4 * v_max + 0.5 * LSB * supply;
        let dv = gains + rounding + duty;
        let bound = l1_v * dv + l1_m * c;
        let dx = ti
            .position
            .iter()
            .zip(&tf.position)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        eprintln!("{command:?}: drift {dx:e} mm, bound {bound:e} mm");
        assert!(
            dx <= bound,
            "{command:?}: fixed-point drifts {dx} mm from f64, bound {bound} mm (dv {dv} V)"
        );
        // The bound is tight enough to matter: far below one count of the demo's encoder, and
        // far below what a slip of one tick or of a unit conversion would cause.
        assert!(
            bound < 0.05,
            "bound {bound} mm is too loose to test anything"
        );
    }
}

// The simulation steps one axis with ctrl-core's pieces in TwoAxisDrive::tick's order and
// skips the axis at rest; the duties must be those of the whole TwoAxisDrive, bit for bit,
// including across the 16-bit encoder wrap.
#[test]
fn single_axis_path_equals_the_two_axis_drive_bit_for_bit() {
    let plant = rover(0.7);
    let d = design(&plant);
    let units = FirmwareUnits {
        count_size: 0.01,
        rate_hz: 500.0,
    };
    let (distance, cruise, accel) = (400.0, 400.0, 1200.0);
    let command = Command::Move {
        distance,
        cruise_speed: cruise,
        accel,
    };
    let q = quantize_axis(&d, &units, 6.4, MAX_RELATIVE_ERROR).unwrap();
    let battery = I16F16::checked_from_num(6.4).unwrap();
    for kind in [AxisKind::Forward, AxisKind::Rotation] {
        let mut lp = FirmwareLoop::new(&q, kind, &units, 6.4, &command).unwrap();
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
        let active = q.axis(StallGuard::OFF);
        let (f, r) = match kind {
            AxisKind::Forward => (active, quiet),
            AxisKind::Rotation => (quiet, active),
        };
        let drive = TwoAxisDrive::new(
            Encoders::new(false, false),
            f,
            r,
            Supply::new(I16F16::ZERO),
            battery,
        );
        let mut st = DriveState::new();
        drive.set_battery(&mut st, battery);
        let mv = quantize_move(distance, cruise, accel, &units).unwrap();
        match kind {
            AxisKind::Forward => st.forward_mut().start(mv).unwrap(),
            AxisKind::Rotation => st.rotation_mut().start(mv).unwrap(),
        }
        let target = distance / units.count_size; // 40000 counts: the u16 counter wraps
        for k in 0..1200i64 {
            let s = (k as f64 / 700.0).min(1.0);
            let counts = (target * s * s * (3.0 - 2.0 * s)) as i64 + (k * 7919 % 11) - 5;
            let raw = counts as u16;
            let (l, r) = match kind {
                AxisKind::Forward => (raw, raw),
                AxisKind::Rotation => (raw.wrapping_neg(), raw),
            };
            assert_eq!(
                lp.read(counts),
                drive.tick(&mut st, l, r),
                "{kind:?} tick {k}"
            );
        }
    }
}

// The rotation axis is the same loop on the wheel difference: with the same constants it
// behaves like the forward axis. Not bit for bit: the rotation axis drives the left wheel
// with -v, and the duty product rounds ties toward +infinity, so duty(-v) can differ from
// -duty(v) by one LSB (2^-16); that moves the response by far less than one count.
#[test]
fn rotation_axis_runs_the_same_loop() {
    let plant = Plant::new(2.6, 0.07, 0.8).unwrap();
    let d = LoopDesign {
        kp: 8.0,
        kd: 0.25,
        derivative: DerivativeForm::OnError,
        feedforward: Some(Feedforward::for_plant(&plant)),
    };
    // rad of heading per wheel-arc count: 0.36652 mm / 70 mm
    let units = FirmwareUnits {
        count_size: 0.36652 / 70.0,
        rate_hz: 500.0,
    };
    let command = Command::Move {
        distance: -1.5,
        cruise_speed: 4.0,
        accel: 15.0,
    };
    let cfg = SimConfig {
        plant,
        rate_hz: 500.0,
        count_size: Some(units.count_size),
        supply_volts: 6.4,
        delay_ticks: 1,
        disturbance: None,
        command,
        ticks: 800,
        band: 0.02,
    };
    let run = |kind| {
        let (mut lp, _) = FirmwareLoop::from_design(&d, kind, &units, 6.4, &command).unwrap();
        simulate(&cfg, &mut lp)
    };
    let (f, r) = (run(AxisKind::Forward), run(AxisKind::Rotation));
    let count = units.count_size;
    assert!(
        (f.final_error - r.final_error).abs() < 0.01 * count,
        "{f:?}\n{r:?}"
    );
    assert!((f.max_tracking_error - r.max_tracking_error).abs() < 0.01 * count);
    assert!((f.peak_volts - r.peak_volts).abs() <= 2.0 * 6.4 / 65536.0);
    assert_eq!(
        (f.rise_time_s, f.settling_time_s, f.saturated_ticks),
        (r.rise_time_s, r.settling_time_s, r.saturated_ticks)
    );
    assert!(f.final_error.abs() < 5.0 * units.count_size, "{f:?}");
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(32))]

    // The fixed-point loop's voltage stays within the supply whatever it is asked.
    #[test]
    fn fixed_point_voltage_never_exceeds_the_supply(
        gain in 10.0f64..1000.0,
        tau in 0.01f64..0.3,
        bias in 0.0f64..1.5,
        kp in 0.01f64..2.0,
        kd in 0.0f64..0.05,
        supply in 3.0f64..16.0,
        delay in 0u32..3,
        distance in 5.0f64..800.0,
        back in any::<bool>(),
        is_move in any::<bool>(),
    ) {
        let plant = Plant::new(gain, tau, bias).unwrap();
        let d = LoopDesign { kp, kd, derivative: DerivativeForm::OnError,
            feedforward: Some(Feedforward::for_plant(&plant)) };
        let distance = if back { -distance } else { distance };
        let command = if is_move {
            Command::Move { distance, cruise_speed: 300.0, accel: 1500.0 }
        } else {
            Command::Step { distance: distance.clamp(-10.0, 10.0) }
        };
        let units = FirmwareUnits { count_size: 0.36652, rate_hz: 500.0 };
        let cfg = SimConfig { plant, rate_hz: 500.0, count_size: Some(0.36652),
            supply_volts: supply, delay_ticks: delay, disturbance: None, command,
            ticks: 600, band: 0.02 };
        let (mut lp, _) = FirmwareLoop::from_design(&d, AxisKind::Forward, &units, supply, &command).unwrap();
        let (m, t) = simulate_traced(&cfg, &mut lp);
        // The loop's own limit is the supply held in I16F16 (rounded down to 2^-16 V), and the
        // duty is clamped to ±1: the command never reaches the clip.
        prop_assert!(t.applied_volts.iter().all(|v| v.abs() <= supply * (1.0 + 1e-4) ));
        prop_assert!(m.peak_volts <= supply * (1.0 + 1e-4));
    }
}

/// The conversion refuses a move the firmware profile would refuse on range (its
/// POSITION_LIMIT / SPEED_LIMIT / ACCEL_LIMIT), naming the constant and the limit, and
/// accepts one just inside; a move it accepts on range also starts on ctrl-core's profile.
#[test]
fn quantize_move_refuses_what_the_profile_cannot_start() {
    use ctrl_core::profile::Profile;
    let units = FirmwareUnits {
        count_size: 0.5, // mm per count
        rate_hz: 1000.0,
    };
    // 2^30 counts = 536870912 mm; 2^15 counts/tick = 16384000 mm/s; 2^15 counts/tick² =
    // 1.6384e10 mm/s².
    let ok = quantize_move(536_870_000.0, 16_383_000.0, 1.638e10, &units).unwrap();
    let mut p = Profile::new();
    assert_eq!(p.start(ok), Ok(()));
    for (args, field) in [
        ((536_870_912.0, 1000.0, 1000.0), "distance"),
        ((-536_870_912.0, 1000.0, 1000.0), "distance"),
        ((1000.0, 16_384_000.0, 1000.0), "cruise_speed"),
        ((1000.0, 1000.0, 1.6384e10), "accel"),
        ((f64::NAN, 1000.0, 1000.0), "distance"),
    ] {
        let e = quantize_move(args.0, args.1, args.2, &units).unwrap_err();
        assert_eq!(e.constant, field, "{args:?}");
        assert!(e.valid.contains("magnitude below"), "{}", e.valid);
    }
}
