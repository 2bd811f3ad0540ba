//! The `simulate` and `sweep` subcommands' contract: one JSON object, exit status 2 with a
//! message naming the flag and its valid range for refused input, an SVG plot on request.

use serde_json::Value;
use std::process::{Command, Output};

fn tool(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_ctrl-design"))
        .args(args)
        .output()
        .expect("the binary runs")
}

const ROVER: &[&str] = &[
    "--plant-gain",
    "180",
    "--time-constant",
    "0.09",
    "--bias",
    "0.7",
    "--count-size",
    "0.36652",
    "--supply",
    "6.4",
    "--delay-ticks",
    "1",
];

fn with(extra: &[&'static str]) -> Vec<&'static str> {
    ROVER.iter().copied().chain(extra.iter().copied()).collect()
}

#[test]
fn simulate_prints_one_json_object_with_both_arithmetics() {
    let mut args = vec!["simulate"];
    args.extend(with(&[
        "--kp",
        "0.12",
        "--kd",
        "0.004",
        "--distance",
        "400",
        "--cruise-speed",
        "400",
        "--accel",
        "1200",
        "--arithmetic",
        "both",
        "--format",
        "json",
    ]));
    let out = tool(&args);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: Value = serde_json::from_slice(&out.stdout).expect("one JSON object");
    let runs = v["runs"].as_array().unwrap();
    assert_eq!(runs.len(), 2);
    assert_eq!(runs[0]["arithmetic"], "fixed");
    assert_eq!(runs[1]["arithmetic"], "f64");
    for key in [
        "overshoot_pct",
        "peak_time_s",
        "rise_time_s",
        "settling_time_s",
        "final_error",
        "peak_volts",
        "rms_volts",
        "voltage_total_variation",
    ] {
        assert!(runs[0]["metrics"].get(key).is_some(), "missing {key}");
    }
    // kd per tick = kd * rate (the firmware's derivative gain per count is this times the
    // count size).
    assert!((v["kd_per_tick"].as_f64().unwrap() - 2.0).abs() < 1e-12);
    assert!(v["quantization"]["kp"]["relative_error"].as_f64().unwrap() < 3.1e-5);
}

#[test]
fn simulate_designs_from_damping_and_settling_time() {
    let mut args = vec!["simulate"];
    args.extend(with(&[
        "--damping",
        "0.9",
        "--settling-time",
        "0.3",
        "--step",
        "20",
        "--format",
        "json",
    ]));
    let out = tool(&args);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    // Pole placement (issue formulas): wn = 4 / (zeta ts), kp = wn^2 T / K.
    let wn = 4.0 / (0.9 * 0.3);
    let kp = wn * wn * 0.09 / 180.0;
    assert!((v["design"]["kp"].as_f64().unwrap() - kp).abs() < 1e-12 * kp);
}

#[test]
fn bad_input_exits_2_naming_the_flag_and_range() {
    let cases: &[(&[&str], &str)] = &[
        (
            &[
                "--plant-gain",
                "-3",
                "--time-constant",
                "0.09",
                "--kp",
                "1",
                "--kd",
                "0",
                "--step",
                "1",
                "--arithmetic",
                "f64",
            ],
            "--plant-gain",
        ),
        (
            &[
                "--plant-gain",
                "180",
                "--time-constant",
                "0.09",
                "--kp",
                "1",
                "--kd",
                "0",
                "--step",
                "1",
                "--delay-ticks",
                "40",
                "--arithmetic",
                "f64",
            ],
            "--delay-ticks",
        ),
        (
            &[
                "--plant-gain",
                "180",
                "--time-constant",
                "0.09",
                "--kp",
                "1",
                "--kd",
                "0",
                "--step",
                "0",
                "--arithmetic",
                "f64",
            ],
            "--step",
        ),
        (
            &[
                "--plant-gain",
                "180",
                "--time-constant",
                "0.09",
                "--kp",
                "1",
                "--kd",
                "0",
                "--distance",
                "5",
                "--cruise-speed",
                "0",
                "--accel",
                "1",
                "--arithmetic",
                "f64",
            ],
            "--cruise-speed",
        ),
        (
            &[
                "--plant-gain",
                "180",
                "--time-constant",
                "0.09",
                "--kp",
                "nan",
                "--kd",
                "0",
                "--step",
                "1",
                "--arithmetic",
                "f64",
            ],
            "--kp",
        ),
        (
            &[
                "--plant-gain",
                "180",
                "--time-constant",
                "0.09",
                "--kp",
                "1",
                "--kd",
                "0",
                "--step",
                "1",
            ],
            "--count-size",
        ),
        (
            &[
                "--plant-gain",
                "180",
                "--time-constant",
                "0.09",
                "--kp",
                "1",
                "--kd",
                "0",
                "--step",
                "1",
                "--count-size",
                "0.3",
            ],
            "--supply",
        ),
        (
            &[
                "--plant-gain",
                "180",
                "--time-constant",
                "0.09",
                "--damping",
                "0.8",
                "--settling-time",
                "30",
                "--step",
                "1",
                "--arithmetic",
                "f64",
            ],
            "settling",
        ),
    ];
    for (args, flag) in cases {
        let mut a = vec!["simulate"];
        a.extend_from_slice(args);
        let out = tool(&a);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{a:?}: {err}");
        assert!(err.contains(flag) && err.contains("valid"), "{a:?}: {err}");
    }
}

#[test]
fn plot_writes_an_svg() {
    let dir = std::env::temp_dir().join(format!("ctrl-design-sim-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("move.svg");
    let p = path.to_str().unwrap().to_string();
    let mut args: Vec<&str> = vec!["simulate"];
    args.extend(with(&[
        "--kp",
        "0.12",
        "--kd",
        "0.004",
        "--distance",
        "400",
        "--cruise-speed",
        "400",
        "--accel",
        "1200",
        "--unit",
        "mm",
        "--plot",
    ]));
    args.push(&p);
    let out = tool(&args);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let svg = std::fs::read_to_string(&path).unwrap();
    assert!(svg.starts_with("<svg"));
    for label in [
        "position",
        "speed",
        "voltage",
        "feedforward",
        "feedback",
        "setpoint",
    ] {
        assert!(svg.contains(label), "plot lacks {label}");
    }
    std::fs::remove_dir_all(&dir).ok();
}

#[test]
fn sweep_json_has_the_worst_cases_and_is_seeded() {
    let run = |seed: &'static str| {
        let mut args = vec!["sweep"];
        args.extend(with(&[
            "--kp",
            "0.12",
            "--kd",
            "0.004",
            "--distance",
            "300",
            "--cruise-speed",
            "400",
            "--accel",
            "1200",
            "--samples",
            "200",
            "--seed",
            seed,
            "--format",
            "json",
            "--quiet",
        ]));
        let out = tool(&args);
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        assert!(out.stderr.is_empty(), "quiet means quiet");
        let v: Value = serde_json::from_slice(&out.stdout).unwrap();
        v
    };
    let a = run("5");
    assert_eq!(a["runs"], 200);
    let w = &a["worst"]["overshoot_pct"];
    assert!(w["value"].is_number() && w["plant"]["gain"].is_number() && w["run"].is_number());
    assert_eq!(a["worst"], run("5")["worst"]);
    let mut bad = vec!["sweep"];
    bad.extend(with(&[
        "--kp", "0.12", "--kd", "0.004", "--step", "5", "--spread", "150",
    ]));
    let out = tool(&bad);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--spread"));
}

// The lead loop from crossover and phase margin: the design block carries the discrete
// coefficients tune::design_lead + discretize give, the fixed-point run reports b0, b1 (V
// per count: times the count size) and a1, and the two arithmetics agree to well under
// one count.
#[test]
fn simulate_runs_the_lead_loop_from_crossover_and_margin() {
    let mut args = vec!["simulate"];
    args.extend(with(&[
        "--crossover",
        "30",
        "--phase-margin",
        "50",
        "--distance",
        "400",
        "--cruise-speed",
        "400",
        "--accel",
        "1200",
        "--arithmetic",
        "both",
        "--format",
        "json",
    ]));
    let out = tool(&args);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: Value = serde_json::from_slice(&out.stdout).expect("one JSON object");
    assert_eq!(v["design"]["form"], "lead");
    let plant = ctrl_design::Plant::new(180.0, 0.09, 0.7).unwrap();
    let c = ctrl_design::tune::design_lead(&plant, 30.0, 50.0)
        .unwrap()
        .discretize(500.0)
        .unwrap();
    assert_eq!(v["design"]["b0"].as_f64().unwrap(), c.b0);
    assert_eq!(v["design"]["a1"].as_f64().unwrap(), c.a1);
    assert_eq!(v["kd_per_tick"], Value::Null);
    let q = &v["quantization"];
    assert!((q["b1"]["wanted"].as_f64().unwrap() - c.b1 * 0.36652).abs() < 1e-15);
    assert_eq!(q["a1"]["wanted"].as_f64().unwrap(), c.a1);
    let runs = v["runs"].as_array().unwrap();
    let fe = |i: usize| runs[i]["metrics"]["final_error"].as_f64().unwrap();
    assert!((fe(0) - fe(1)).abs() < 0.36652, "{} vs {}", fe(0), fe(1));
}

#[test]
fn simulate_reports_the_stall_guard_trip_and_refuses_bad_lead_input() {
    let mut args = vec!["simulate"];
    args.extend(with(&[
        "--kp",
        "0.12",
        "--kd",
        "0.004",
        "--distance",
        "400",
        "--cruise-speed",
        "400",
        "--accel",
        "1200",
        "--disturbance",
        "-50",
        "--stall-limit",
        "20",
        "--stall-time",
        "0.1",
        "--arithmetic",
        "both",
        "--format",
        "json",
    ]));
    let out = tool(&args);
    assert!(out.status.success());
    let v: Value = serde_json::from_slice(&out.stdout).unwrap();
    let k = v["runs"][0]["metrics"]["stall_tick"].as_u64().unwrap();
    assert!((50..=143).contains(&k), "tick {k}");
    // The f64 run has the same guard (the firmware's held limit and ticks) and trips on the
    // same tick: both read whole counts of the same blocked drive.
    assert_eq!(v["runs"][1]["arithmetic"], "f64");
    assert_eq!(v["runs"][1]["metrics"]["stall_tick"].as_u64(), Some(k));
    for (flag, value, name) in [
        ("--lead-a1", "1.5", "--lead-a1"),
        ("--stall-time", "-1", "--stall-time"),
    ] {
        let mut args = vec!["simulate"];
        let extra: Vec<&str> = if flag == "--lead-a1" {
            vec![
                "--lead-b0",
                "0.8",
                "--lead-b1",
                "-0.77",
                flag,
                value,
                "--step",
                "10",
            ]
        } else {
            vec![
                "--kp",
                "0.12",
                "--kd",
                "0",
                "--stall-limit",
                "5",
                flag,
                value,
                "--step",
                "10",
            ]
        };
        args.extend(ROVER.iter().copied());
        args.extend(extra);
        let out = tool(&args);
        assert_eq!(out.status.code(), Some(2), "{flag} {value}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(name) && err.contains("valid"), "{err}");
    }
}
