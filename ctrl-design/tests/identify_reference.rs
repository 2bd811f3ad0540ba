//! The least-squares core against numpy/scipy: `reference/identify/lsq_reference.py` solves
//! the same problems on the same (committed) data with `scipy.optimize.least_squares`
//! (MINPACK Levenberg-Marquardt) and `numpy.linalg.lstsq`; its answers and library versions
//! are in `reference/identify/expected.json`.
//!
//! Tolerances: both sides solve the problem to convergence, so they must agree far below any
//! accuracy that matters: time constant, gain and steady speed to a relative 1e-6, bias to
//! 1e-6 V, initial states to 1e-6 of the signal's scale, sum of squares to a relative 1e-8.
//! The steady-speed line is a direct linear solve: relative 1e-12.

use std::path::PathBuf;

use ctrl_design::identify::{fit, Columns, Log, SignalKind};
use serde_json::Value;

fn dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../reference/identify")
}

fn expected() -> Value {
    let text = std::fs::read_to_string(dir().join("expected.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn load(file: &str) -> Log {
    Log::from_file(&dir().join(file), &Columns::default()).unwrap()
}

fn num(v: &Value, key: &str) -> f64 {
    v[key]
        .as_f64()
        .unwrap_or_else(|| panic!("{key} missing in {v}"))
}

fn close_rel(what: &str, got: f64, want: f64, rel: f64) {
    let err = (got - want).abs() / want.abs();
    assert!(
        err <= rel,
        "{what}: {got} vs reference {want} (relative {err:.2e} > {rel:.0e})"
    );
}

fn close_abs(what: &str, got: f64, want: f64, abs: f64) {
    let err = (got - want).abs();
    assert!(
        err <= abs,
        "{what}: {got} vs reference {want} (difference {err:.2e} > {abs:.0e})"
    );
}

fn sse(log: &Log, m: &fit::ModelParams, x0: f64, w0: f64) -> f64 {
    let mut s = 0.0;
    fit::run_model(log, m, x0, w0, |k, x, w| {
        let y = if log.kind == SignalKind::Position {
            x
        } else {
            w
        };
        s += (log.signal[k] - y).powi(2);
    });
    s
}

#[test]
fn provenance_is_recorded() {
    let e = expected();
    let p = &e["provenance"];
    for key in ["date", "python", "numpy", "scipy", "solvers"] {
        assert!(p[key].is_string(), "provenance.{key} missing");
    }
}

#[test]
fn step_fit_matches_scipy() {
    let e = expected();
    let r = &e["step"];
    let log = load("step.csv");
    let f = fit::fit_step(&log).unwrap();
    assert_eq!(f.step_row as u64, r["step_row"].as_u64().unwrap());
    close_rel("T", f.time_constant_s, num(r, "time_constant_s"), 1e-6);
    close_rel("steady speed", f.steady_speed, num(r, "steady_speed"), 1e-6);
    let scale = f.steady_speed.abs();
    close_abs(
        "initial speed",
        f.initial_speed,
        num(r, "initial_speed"),
        1e-6 * scale,
    );
    let span = log.signal[log.len() - 1] - log.signal[0];
    close_abs(
        "initial position",
        f.initial_position.unwrap(),
        num(r, "initial_position"),
        1e-6 * span,
    );
    let ours = (f.residual_rms.powi(2)) * f.rows as f64;
    close_rel("sum of squares", ours, num(r, "sum_of_squares"), 1e-8);
}

#[test]
fn steady_line_matches_numpy() {
    let e = expected();
    let r = &e["steady_line"];
    let pts: Vec<(f64, f64)> = r["points"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| (p[0].as_f64().unwrap(), p[1].as_f64().unwrap()))
        .collect();
    let line = fit::fit_steady_line(&pts).unwrap();
    close_rel("gain", line.gain, num(r, "gain"), 1e-12);
    close_rel("bias", line.bias_volts, num(r, "bias_volts"), 1e-12);
}

fn check_oe(key: &str) {
    let e = expected();
    let r = &e[key];
    let log = load(r["file"].as_str().unwrap());
    let s = &r["start"];
    let start = fit::ModelParams {
        gain: num(s, "gain"),
        time_constant_s: num(s, "time_constant_s"),
        bias_volts: num(s, "bias_volts"),
    };
    let f = fit::fit_output_error(&[&log], &start).unwrap();
    let p = f.params;
    close_rel("gain", p.gain, num(r, "gain"), 1e-6);
    close_rel("T", p.time_constant_s, num(r, "time_constant_s"), 1e-6);
    close_abs("bias", p.bias_volts, num(r, "bias_volts"), 1e-6);
    let (x0, w0) = f.initial[0];
    let peak = p.gain * 5.0;
    close_abs("initial speed", w0, num(r, "initial_speed"), 1e-6 * peak);
    if let Some(x0) = x0 {
        close_abs(
            "initial position",
            x0,
            num(r, "initial_position"),
            1e-6 * peak * 0.1,
        );
    }
    let ours = sse(&log, &p, x0.unwrap_or(0.0), w0);
    close_rel("sum of squares", ours, num(r, "sum_of_squares"), 1e-8);
}

#[test]
fn output_error_fit_of_a_speed_log_matches_scipy() {
    check_oe("output_error_speed");
}

#[test]
fn output_error_fit_of_a_position_log_matches_scipy() {
    check_oe("output_error_position");
}
