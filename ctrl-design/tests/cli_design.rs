//! The `pd`, `lead`, `pi` and `profile` subcommands' scripting contract: one JSON object
//! with the documented keys, infinite margins as `null`, refused requests exit 2 naming
//! the flag and the valid range.

use serde_json::Value;
use std::process::Command;

fn run(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_ctrl-design"))
        .args(args)
        .output()
        .expect("binary runs");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn json(args: &[&str]) -> Value {
    let (code, out, err) = run(args);
    assert_eq!(code, 0, "{args:?} failed: {err}");
    serde_json::from_str(&out).unwrap_or_else(|e| panic!("not one JSON object ({e}): {out}"))
}

const FORWARD: [&str; 4] = ["--plant-gain", "180", "--time-constant", "0.09"];

fn with(base: &[&str], more: &[&str]) -> Vec<String> {
    base.iter().chain(more).map(|s| s.to_string()).collect()
}

fn strs(v: &[String]) -> Vec<&str> {
    v.iter().map(|s| s.as_str()).collect()
}

const BLOCK_KEYS: [&str; 6] = [
    "overshoot_pct",
    "peak_time_s",
    "rise_time_s",
    "settling_time_s",
    "gain_margin_db",
    "phase_margin_deg",
];

#[test]
fn pd_json_has_the_contract_keys() {
    let mut a = vec!["pd"];
    a.extend(FORWARD);
    a.extend([
        "--damping",
        "0.8",
        "--settling-time",
        "0.3",
        "--rate",
        "500",
        "--format",
        "json",
    ]);
    let v = json(&a);
    // Kp = wn^2 T / K, Kd = (2 zeta wn T - 1) / K with wn = 4 / (0.8 * 0.3).
    let wn = 4.0 / (0.8 * 0.3);
    assert!((v["natural_frequency"].as_f64().unwrap() - wn).abs() < 1e-9);
    assert!((v["kp"].as_f64().unwrap() - wn * wn * 0.09 / 180.0).abs() < 1e-12);
    let kd = (2.0 * 0.8 * wn * 0.09 - 1.0) / 180.0;
    assert!((v["kd"].as_f64().unwrap() - kd).abs() < 1e-12);
    assert!((v["kd_per_tick"].as_f64().unwrap() - kd * 500.0).abs() < 1e-9);
    for block in ["continuous", "discrete", "discrete_delayed"] {
        for k in BLOCK_KEYS {
            assert!(v[block].get(k).is_some(), "{block}.{k} missing: {v}");
        }
    }
    for block in ["discrete", "discrete_delayed"] {
        assert!(v[block]["max_pole_magnitude"].as_f64().unwrap() < 1.0);
        assert_eq!(v[block]["stable"], Value::Bool(true));
    }
    // The continuous PD loop's phase never reaches -180 deg: infinite gain margin.
    assert_eq!(v["continuous"]["gain_margin_db"], Value::Null);
    assert!(v["warnings"].is_array());
}

#[test]
fn pd_without_rate_has_no_discrete_blocks() {
    let a = with(&["pd"], &FORWARD);
    let a = with(
        &strs(&a),
        &[
            "--damping",
            "0.7",
            "--settling-time",
            "0.4",
            "--format",
            "json",
        ],
    );
    let v = json(&strs(&a));
    assert!(v.get("kd_per_tick").is_none());
    assert!(v.get("discrete").is_none());
    assert!(v["continuous"]["overshoot_pct"].as_f64().unwrap() > 0.0);
}

#[test]
fn pd_refuses_a_settling_time_too_long() {
    let a = with(&["pd"], &FORWARD);
    let a = with(&strs(&a), &["--damping", "0.8", "--settling-time", "0.9"]);
    let (code, _out, err) = run(&strs(&a));
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("--settling-time") && err.contains("0.72"),
        "{err}"
    );
}

#[test]
fn pd_refuses_garbage() {
    for bad in [
        ["--plant-gain", "-3"],
        ["--time-constant", "nan"],
        ["--band", "70"],
        ["--rate", "0"],
    ] {
        let mut a = vec!["pd", "--damping", "0.8", "--settling-time", "0.3"];
        for f in FORWARD.chunks(2) {
            if f[0] != bad[0] {
                a.extend(f);
            }
        }
        a.extend(bad);
        let (code, _, err) = run(&a);
        assert_eq!(code, 2, "{a:?}: {err}");
        assert!(err.contains(bad[0]), "{a:?}: {err}");
    }
}

#[test]
fn pd_target_mode() {
    let a = with(&["pd"], &FORWARD);
    let a = with(
        &strs(&a),
        &[
            "--overshoot",
            "5",
            "--settling-time",
            "0.3",
            "--rate",
            "500",
            "--with-delay",
            "--format",
            "json",
        ],
    );
    let v = json(&strs(&a));
    assert_eq!(v["mode"], "targets");
    let os = v["discrete_delayed"]["overshoot_pct"].as_f64().unwrap();
    assert!(os <= 5.0 + 1e-9, "{os}");
    assert!(v["discrete_delayed"]["settling_time_s"].as_f64().unwrap() <= 0.3 + 1e-12);
}

#[test]
fn lead_json_and_refusal() {
    let a = with(&["lead"], &FORWARD);
    let ok = with(
        &strs(&a),
        &[
            "--crossover",
            "20",
            "--phase-margin",
            "50",
            "--rate",
            "500",
            "--format",
            "json",
        ],
    );
    let v = json(&strs(&ok));
    for k in ["kc", "alpha", "t1", "lead_deg"] {
        assert!(v[k].as_f64().is_some(), "{k}: {v}");
    }
    for k in ["b0", "b1", "a1"] {
        assert!(v["coefficients"][k].as_f64().is_some(), "{k}: {v}");
    }
    for block in ["continuous", "discrete", "discrete_delayed"] {
        for k in BLOCK_KEYS {
            assert!(v[block].get(k).is_some(), "{block}.{k} missing");
        }
    }
    assert!((v["continuous"]["phase_margin_deg"].as_f64().unwrap() - 50.0).abs() < 1e-6);
    let bad = with(&strs(&a), &["--crossover", "100", "--phase-margin", "80"]);
    let (code, _, err) = run(&strs(&bad));
    assert_eq!(code, 2);
    assert!(
        err.contains("--phase-margin") && err.contains("65"),
        "{err}"
    );
}

#[test]
fn pi_json() {
    let a = with(&["pi"], &FORWARD);
    let a = with(
        &strs(&a),
        &[
            "--bandwidth",
            "60",
            "--damping",
            "0.8",
            "--rate",
            "500",
            "--format",
            "json",
        ],
    );
    let v = json(&strs(&a));
    assert!((v["continuous"]["bandwidth_rad_s"].as_f64().unwrap() - 60.0).abs() < 1e-6);
    assert!((v["ki_per_tick"].as_f64().unwrap() - v["ki"].as_f64().unwrap() / 500.0).abs() < 1e-15);
}

#[test]
fn profile_json_and_refusal() {
    let v = json(&[
        "profile",
        "--distance",
        "500",
        "--cruise-speed",
        "400",
        "--accel",
        "1200",
        "--start-speed",
        "0",
        "--end-speed",
        "0",
        "--format",
        "json",
    ]);
    assert_eq!(v["shape"], "trapezoid");
    assert_eq!(v["peak_speed"].as_f64().unwrap(), 400.0);
    assert!((v["time_to_peak_s"].as_f64().unwrap() - 1.0 / 3.0).abs() < 1e-12);
    assert!(v["total_time_s"].as_f64().unwrap() > 0.0);
    let (code, _, err) = run(&[
        "profile",
        "--distance",
        "10",
        "--cruise-speed",
        "400",
        "--accel",
        "1200",
        "--end-speed",
        "300",
    ]);
    assert_eq!(code, 2);
    assert!(
        err.contains("--end-speed") && err.contains("154.9"),
        "{err}"
    );
}
