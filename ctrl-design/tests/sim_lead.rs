//! The phase-lead loop in the simulation: the `f64` loop against an outside reference, and
//! the fixed-point loop (`ctrl-core`'s `Lead` through `Axis`) against the `f64` loop within
//! a stated quantization bound.
//!
//! Reference: `reference/sim/lead_reference.py` (python-control 0.10.2, scipy 1.17.1, output
//! with versions in `reference/sim/lead_reference.json`) designs the lead for the demo
//! rover's forward axis (crossover 30 rad/s, phase margin 50 deg) by the closed form,
//! discretises it with python-control's Tustin map pre-warped at the crossover, and runs the
//! closed loop with the ZOH plant built from transfer functions (`C(z) P(z)` feedback
//! algebra, not the difference equation). So a coefficient applied with the wrong sign, to
//! the wrong sample or in the wrong units cannot match it (a test below shows that it
//! does not).
//!
//! Tolerances: the discrete coefficients within 1e-9 relative (both are the same formula in
//! f64); positions and applied voltages within 1e-9 of the largest magnitude of the series
//! (f64 rounding only); step figures equal to `step_info`'s (1e-12 s, 1e-9 %).

use ctrl_design::sim::{
    quantize_lead, simulate, simulate_traced, AxisDesign, AxisKind, AxisQuantization, Command,
    Feedforward, FirmwareLoop, FirmwareUnits, IdealLoop, LeadLoopDesign, SimConfig, Trace,
    MAX_RELATIVE_ERROR,
};
use ctrl_design::{tune, Plant};
use serde_json::Value;

const LSB: f64 = 1.0 / 65536.0; // I16F16

fn reference() -> Value {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../reference/sim/lead_reference.json"
    );
    let text = std::fs::read_to_string(path).expect("reference file is committed");
    serde_json::from_str(&text).expect("reference is JSON")
}

fn f(v: &Value) -> f64 {
    v.as_f64().expect("number")
}

fn series(v: &Value) -> Vec<f64> {
    v.as_array().expect("array").iter().map(f).collect()
}

fn plant(root: &Value) -> Plant {
    let p = &root["plant"];
    Plant::new(f(&p["gain"]), f(&p["time_constant_s"]), f(&p["bias_volts"])).unwrap()
}

/// The lead as the CLI builds it: tune::design_lead, then its pre-warped Tustin map.
fn lead(root: &Value, feedforward: bool) -> LeadLoopDesign {
    let p = plant(root);
    let d = tune::design_lead(
        &p,
        f(&root["crossover_rad_s"]),
        f(&root["phase_margin_deg"]),
    )
    .unwrap();
    let c = d.discretize(f(&root["rate_hz"])).unwrap();
    LeadLoopDesign::from_coeffs(&c, feedforward.then(|| Feedforward::for_plant(&p)))
}

fn command(case: &Value) -> Command {
    let c = &case["command"];
    match c["kind"].as_str().unwrap() {
        "step" => Command::Step {
            distance: f(&c["distance"]),
        },
        _ => Command::Move {
            distance: f(&c["distance"]),
            cruise_speed: f(&c["cruise_speed"]),
            accel: f(&c["accel"]),
        },
    }
}

fn config(root: &Value, case: &Value) -> SimConfig {
    let cfg = SimConfig {
        plant: plant(root),
        rate_hz: f(&root["rate_hz"]),
        count_size: None,
        supply_volts: f64::INFINITY,
        delay_ticks: case["delay_ticks"].as_u64().unwrap() as u32,
        disturbance: None,
        command: command(case),
        ticks: case["ticks"].as_u64().unwrap() as u32,
        band: 0.02,
    };
    cfg.check().unwrap();
    cfg
}

fn run_f64(cfg: &SimConfig, d: &LeadLoopDesign) -> (ctrl_design::sim::Metrics, Trace) {
    let mut lp = IdealLoop::with_design(&AxisDesign::Lead(*d), &cfg.command, cfg.rate_hz);
    simulate_traced(cfg, &mut lp)
}

/// Largest |got - want| relative to the largest |want|.
fn rel_diff(got: &[f64], want: &[f64]) -> f64 {
    assert_eq!(got.len(), want.len());
    let scale = want.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    got.iter()
        .zip(want)
        .map(|(g, w)| (g - w).abs())
        .fold(0.0, f64::max)
        / scale
}

#[test]
fn lead_coefficients_match_python_controls_prewarped_tustin_map() {
    let root = reference();
    let d = lead(&root, false);
    let r = &root["design"];
    for (name, got, want) in [
        ("b0", d.b0, f(&r["b0"])),
        ("b1", d.b1, f(&r["b1"])),
        ("a1", d.a1, f(&r["a1"])),
    ] {
        assert!(
            (got - want).abs() <= 1e-9 * want.abs(),
            "{name}: {got} vs python-control {want}"
        );
    }
    // The reference's own check of the design: the continuous loop has the margin asked for.
    assert!((f(&r["continuous_phase_margin_deg"]) - 50.0).abs() < 1e-6);
}

#[test]
fn lead_loop_matches_the_python_control_closed_loop() {
    let root = reference();
    let cases = root["cases"].as_array().unwrap();
    assert_eq!(cases.len(), 3);
    for case in cases {
        let name = case["name"].as_str().unwrap();
        let cfg = config(&root, case);
        let d = lead(&root, case["feedforward"].as_bool().unwrap());
        let (m, trace) = run_f64(&cfg, &d);
        let dx = rel_diff(&trace.position, &series(&case["position"]));
        let dv = rel_diff(&trace.applied_volts, &series(&case["applied_volts"]));
        assert!(
            dx <= 1e-9,
            "{name}: positions differ by {dx:e} of the largest"
        );
        assert!(
            dv <= 1e-9,
            "{name}: voltages differ by {dv:e} of the largest"
        );
        let mut again = IdealLoop::with_design(&AxisDesign::Lead(d), &cfg.command, cfg.rate_hz);
        assert_eq!(
            simulate(&cfg, &mut again),
            m,
            "{name}: traced and untraced differ"
        );
        if let Some(info) = case.get("step_info") {
            let close = |a: f64, b: f64, tol: f64, what: &str| {
                assert!((a - b).abs() <= tol, "{name} {what}: {a} vs step_info {b}")
            };
            close(
                m.rise_time_s.unwrap(),
                f(&info["RiseTime"]),
                1e-12,
                "rise time",
            );
            close(
                m.settling_time_s.unwrap(),
                f(&info["SettlingTime"]),
                1e-12,
                "settling",
            );
            close(m.overshoot_pct, f(&info["Overshoot"]), 1e-9, "overshoot");
            close(m.peak_time_s, f(&info["PeakTime"]), 1e-12, "peak time");
        }
    }
}

// The comparison above can fail: the same loop with a coefficient misapplied (the sign of
// a1 flipped, b0 and b1 swapped onto the wrong samples, or b0 and b1 left in V per count
// of the demo encoder) is far from the reference.
#[test]
fn misapplied_lead_coefficients_do_not_match_the_reference() {
    let root = reference();
    let case = &root["cases"][1];
    let cfg = config(&root, case);
    let good = lead(&root, false);
    let want = series(&case["position"]);
    let wrong = [
        (
            "a1 sign",
            LeadLoopDesign {
                a1: -good.a1,
                ..good
            },
        ),
        (
            "b0 <-> b1",
            LeadLoopDesign {
                b0: good.b1,
                b1: good.b0,
                ..good
            },
        ),
        (
            "V per count",
            LeadLoopDesign {
                b0: good.b0 * 0.36652,
                b1: good.b1 * 0.36652,
                ..good
            },
        ),
    ];
    for (what, d) in wrong {
        let (_, t) = run_f64(&cfg, &d);
        let dx = rel_diff(&t.position, &want);
        assert!(dx > 1e-2, "{what}: only {dx:e} from the reference");
    }
}

// Quantization bound, as for the PD loop in `sim_firmware.rs`: following the same
// setpoints (the f64 loop on ctrl-core's profile) with no friction or clipping, the
// fixed-point loop is the linear f64 loop plus a measurement error (whole counts of size c,
// and the error narrowed to I16F16, < 1 LSB count) and a voltage error dv at the plant
// input, so max|x_fixed - x_f64| <= l1_m (c + c LSB) + l1_v max|dv|, with the lead loop's
// l1 pulse-response norms from python-control (committed). The lead's own error obeys
// d[k] = -a1 d[k-1] + (coefficient errors x signals) + rounding, so it is at most
// (db0 E + db1 E + da1 U + 1.5 LSB) / (1 - |a1|) (ctrl-core's Lead docs: three products
// rounded to 0.5 LSB each); E, U are the largest error (counts) and lead output (V).
#[test]
fn fixed_point_lead_stays_within_the_quantization_bound() {
    let root = reference();
    let p = plant(&root);
    let c = 0.001; // mm per count: fine enough that every signal stays in I16F16 range
    let units = FirmwareUnits {
        count_size: c,
        rate_hz: 500.0,
    };
    let supply = 24.0;
    let sens = root["sensitivity"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["delay_ticks"].as_u64() == Some(1))
        .unwrap();
    let (l1_v, l1_m) = (
        f(&sens["l1_volts_to_position"]),
        f(&sens["l1_measurement_to_position"]),
    );
    for case in root["cases"].as_array().unwrap() {
        if case["delay_ticks"].as_u64() != Some(1) {
            continue;
        }
        let name = case["name"].as_str().unwrap();
        let d = lead(&root, case["feedforward"].as_bool().unwrap());
        let base = SimConfig {
            supply_volts: supply,
            ..config(&root, case)
        };
        let cmd = base.command;
        let design = AxisDesign::Lead(d);
        let mut ideal = IdealLoop::with_design_on_firmware_profile(&design, &cmd, &units).unwrap();
        ideal.set_feedback_limit(supply);
        let (_, ti) = simulate_traced(&base, &mut ideal);
        let (mut fw, report) =
            FirmwareLoop::from_axis_design(&design, AxisKind::Forward, &units, supply, &cmd)
                .unwrap();
        let q = match report {
            AxisQuantization::Lead(q) => q,
            AxisQuantization::Pd(_) => panic!("a lead design gives a lead report"),
        };
        let (mf, tf) = simulate_traced(
            &SimConfig {
                count_size: Some(c),
                ..base
            },
            &mut fw,
        );
        assert_eq!(mf.saturated_ticks, 0, "the bound assumes no clipping");
        let maxabs = |v: &[f64]| v.iter().fold(0.0f64, |m, x| m.max(x.abs()));
        let e_units: Vec<f64> = ti
            .setpoint_position
            .iter()
            .zip(&ti.position)
            .map(|(s, x)| s - x)
            .collect();
        // Largest error (counts) and lead output, with margins (+1 mm, +1 V) that cover the
        // difference itself, which the assertion shows is far smaller.
        let e_max = (maxabs(&e_units) + 1.0) / c;
        let u_max = maxabs(&ti.feedback_volts) + 1.0;
        let a1 = q.a1.held.abs();
        let err = |q: ctrl_design::sim::Quantized| (q.held - q.wanted).abs();
        let lead_dv =
            (err(q.b0) * e_max + err(q.b1) * e_max + err(q.a1) * u_max + 1.5 * LSB) / (1.0 - a1);
        // Feedforward: kv, ka held within their relative errors; two products rounded to
        // 0.5 LSB; the setpoint speed and acceleration narrowed (< 1 LSB) through kv, ka.
        let s_max = maxabs(&ti.setpoint_speed);
        let a_max = 1200.0 * 2.0; // profile acceleration, with the junction tick's leftover
        let ff = q.kv.relative_error * s_max / p.gain
            + q.ka.relative_error * a_max * p.time_constant_s / p.gain
            + LSB * (1.0 + q.kv.held + q.ka.held);
        // Supply compensation: the stored reciprocal within 1e-4 relative, the duty product
        // rounded to 0.5 LSB, times the supply.
        let v_max = maxabs(&ti.applied_volts) + 1.0;
        let duty = 1e-4 * v_max + 0.5 * LSB * supply;
        let dv = lead_dv + ff + duty;
        let bound = l1_v * dv + l1_m * c * (1.0 + LSB);
        let dx = ti
            .position
            .iter()
            .zip(&tf.position)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        eprintln!("{name}: drift {dx:e} mm, bound {bound:e} mm (lead dv {lead_dv:e} V)");
        assert!(
            dx <= bound,
            "{name}: fixed-point drifts {dx} mm from f64, bound {bound} mm"
        );
        assert!(
            bound < 0.1,
            "{name}: bound {bound} mm is too loose to test anything"
        );
    }
}

// quantize_lead scales b0, b1 by the count size and leaves a1 alone, and refuses an
// unstable controller pole.
#[test]
fn lead_quantization_scales_b_and_not_a() {
    let root = reference();
    let d = lead(&root, true);
    let units = FirmwareUnits {
        count_size: 0.36652,
        rate_hz: 500.0,
    };
    let q = quantize_lead(&d, &units, 6.4, MAX_RELATIVE_ERROR).unwrap();
    assert_eq!(q.report.b0.wanted, d.b0 * 0.36652);
    assert_eq!(q.report.b1.wanted, d.b1 * 0.36652);
    assert_eq!(q.report.a1.wanted, d.a1);
    let [b0, b1, a1] = q.lead.coefficients();
    assert_eq!(
        (b0.to_f64(), b1.to_f64(), a1.to_f64()),
        (q.report.b0.held, q.report.b1.held, q.report.a1.held)
    );
    assert!(q.report.worst_gain_error() < 3.1e-5, "{:?}", q.report);
    let bad = LeadLoopDesign { a1: -1.0, ..d };
    let e = quantize_lead(&bad, &units, 6.4, MAX_RELATIVE_ERROR).unwrap_err();
    assert_eq!(e.constant, "a1");
}
