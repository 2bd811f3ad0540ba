//! The simulation with every nonlinearity off (exact position reading, no supply limit, no
//! bias, f64 loop) against an outside reference: the same linear closed loop built from
//! transfer functions with python-control 0.10.2 (ZOH c2d, feedback, forced_response) by
//! `reference/sim/linear_reference.py`, whose output and library versions are committed in
//! `reference/sim/linear_reference.json`.
//!
//! Tolerances: positions and applied voltages within 1e-9 of the largest magnitude of the
//! series (the two computations differ only by f64 rounding; a modelling slip of one tick
//! or one term is orders of magnitude larger). Step figures (sampled, no interpolation)
//! must equal python-control's `step_info` to 1e-12 s / 1e-9 %.

use ctrl_design::sim::{
    simulate, simulate_traced, Command, DerivativeForm, Feedforward, IdealLoop, LoopDesign,
    SimConfig,
};
use ctrl_design::Plant;
use serde_json::Value;

fn reference() -> Value {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../reference/sim/linear_reference.json"
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

fn case_setup(root: &Value, case: &Value) -> (SimConfig, LoopDesign) {
    let p = &root["plant"];
    let plant = Plant::new(f(&p["gain"]), f(&p["time_constant_s"]), f(&p["bias_volts"])).unwrap();
    let c = &case["command"];
    let command = match c["kind"].as_str().unwrap() {
        "step" => Command::Step {
            distance: f(&c["distance"]),
        },
        _ => Command::Move {
            distance: f(&c["distance"]),
            cruise_speed: f(&c["cruise_speed"]),
            accel: f(&c["accel"]),
        },
    };
    let design = LoopDesign {
        kp: f(&root["kp"]),
        kd: f(&root["kd"]),
        derivative: match case["derivative"].as_str().unwrap() {
            "on_error" => DerivativeForm::OnError,
            _ => DerivativeForm::OnMeasurement,
        },
        feedforward: case["feedforward"]
            .as_bool()
            .unwrap()
            .then(|| Feedforward::for_plant(&plant)),
    };
    let config = SimConfig {
        plant,
        rate_hz: f(&root["rate_hz"]),
        count_size: None,
        supply_volts: f64::INFINITY,
        delay_ticks: case["delay_ticks"].as_u64().unwrap() as u32,
        disturbance: None,
        command,
        ticks: case["ticks"].as_u64().unwrap() as u32,
        band: 0.02,
    };
    config.check().unwrap();
    (config, design)
}

fn assert_close(name: &str, what: &str, got: &[f64], want: &[f64]) {
    assert_eq!(got.len(), want.len(), "{name} {what}: length");
    let scale = want.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let tol = 1e-9 * scale;
    for (k, (g, w)) in got.iter().zip(want).enumerate() {
        assert!(
            (g - w).abs() <= tol,
            "{name} {what}[{k}]: {g} vs reference {w} (tolerance {tol:e})"
        );
    }
}

#[test]
fn linear_responses_match_python_control() {
    let root = reference();
    let cases = root["cases"].as_array().unwrap();
    assert_eq!(cases.len(), 4);
    for case in cases {
        let name = case["name"].as_str().unwrap();
        let (config, design) = case_setup(&root, case);
        let mut ctrl = IdealLoop::new(&design, &config.command, config.rate_hz);
        let (m, trace) = simulate_traced(&config, &mut ctrl);
        assert_close(
            name,
            "position",
            &trace.position,
            &series(&case["position"]),
        );
        assert_close(
            name,
            "applied_volts",
            &trace.applied_volts,
            &series(&case["applied_volts"]),
        );
        // The untraced run gives the same figures.
        let mut again = IdealLoop::new(&design, &config.command, config.rate_hz);
        assert_eq!(
            simulate(&config, &mut again),
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
