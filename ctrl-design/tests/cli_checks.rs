//! `lead` and `pi` run the loop-rate and encoder checks `pd` runs, report them in the text
//! and JSON outputs, and report a failing check the way `pd` does: a `warning:` line (and
//! an entry of the JSON `warnings`) ending "the drive will chatter", exit status 0; bad
//! check flags exit 2 naming the flag.

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
    let mut a = args.to_vec();
    a.extend(["--format", "json"]);
    let (code, out, err) = run(&a);
    assert_eq!(code, 0, "{a:?} failed: {err}");
    serde_json::from_str(&out).unwrap_or_else(|e| panic!("not one JSON object ({e}): {out}"))
}

fn args<'a>(head: &[&'a str], tail: &[&'a str]) -> Vec<&'a str> {
    head.iter().chain(tail).copied().collect()
}

// The demo rover's forward axis and encoder (invented numbers).
const PLANT: [&str; 4] = ["--plant-gain", "180", "--time-constant", "0.09"];
const LEAD: [&str; 7] = [
    "lead",
    "--crossover",
    "20",
    "--phase-margin",
    "50",
    "--rate",
    "500",
];
const PI: [&str; 7] = [
    "pi",
    "--bandwidth",
    "60",
    "--damping",
    "0.8",
    "--rate",
    "500",
];
const PD: [&str; 5] = ["pd", "--damping", "0.8", "--settling-time", "0.3"];
const COUNT: f64 = 0.36652;

fn checks(cmd: &[&str], count: &str) -> Vec<String> {
    let mut a: Vec<String> = cmd.iter().map(|s| s.to_string()).collect();
    a.extend(PLANT.iter().map(|s| s.to_string()));
    for s in [
        "--count-size",
        count,
        "--cruise-speed",
        "400",
        "--supply-min",
        "6.4",
    ] {
        a.push(s.to_string());
    }
    a
}

fn strs(v: &[String]) -> Vec<&str> {
    v.iter().map(|s| s.as_str()).collect()
}

fn chatter_warnings(v: &Value) -> Vec<String> {
    v["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|w| w.as_str())
        .filter(|w| w.ends_with("the drive will chatter"))
        .map(str::to_string)
        .collect()
}

// The rover's lead steps |b0| * count = 0.3276 * 0.36652 = 0.120 V per count (1.9 % of
// 6.4 V): reported, accepted. The first-tick jump is read off the JSON's own coefficients.
#[test]
fn lead_reports_the_checks() {
    let a = checks(&LEAD, "0.36652");
    let v = json(&strs(&a));
    let c = &v["checks"];
    let b0 = v["coefficients"]["b0"].as_f64().unwrap();
    let step = c["count_step"]["step_volts"].as_f64().unwrap();
    assert!((step - b0.abs() * COUNT).abs() < 1e-15, "{c}");
    assert_eq!(c["measured"], "position");
    assert_eq!(c["count_step"]["chatters"], false);
    // |C(-1)| = Kc / alpha for a Tustin lead.
    let hf = v["kc"].as_f64().unwrap() / v["alpha"].as_f64().unwrap();
    let got = c["count_step"]["high_frequency_gain"].as_f64().unwrap();
    assert!((got - hf).abs() < 1e-12 * hf, "{got} vs {hf}");
    assert!((c["counts_per_tick"].as_f64().unwrap() - 0.8 / COUNT).abs() < 1e-12);
    assert!(c["rate_per_bandwidth"].as_f64().unwrap() > 10.0);
    assert!(chatter_warnings(&v).is_empty(), "{v}");
    let (code, text, _) = run(&strs(&a));
    assert_eq!(code, 0);
    assert!(
        text.contains("one count moves the output by 0.1201 V on the first tick"),
        "{text}"
    );
    assert!(!text.contains("chatter"), "{text}");
}

// A 5 mm count makes the same lead step 1.64 V per count (26 %): reported like pd's
// derivative chatter, exit 0.
#[test]
fn a_chattering_lead_is_reported_like_pd() {
    let pd = checks(&PD, "0.36652");
    let pd = args(&strs(&pd), &["--rate", "500"]);
    let (pd_code, pd_text, _) = run(&pd);
    let pd_json = json(&pd);
    let pd_warn = chatter_warnings(&pd_json);
    assert_eq!(pd_warn.len(), 1, "{pd_json}");

    let a = checks(&LEAD, "5");
    let (code, text, err) = run(&strs(&a));
    let v = json(&strs(&a));
    assert_eq!(code, pd_code, "{err}");
    assert_eq!(code, 0);
    let warn = chatter_warnings(&v);
    assert_eq!(warn.len(), 1, "{v}");
    assert_eq!(v["checks"]["count_step"]["chatters"], true);
    assert!(
        warn[0].contains("1.638 V") && warn[0].contains("above 10 %"),
        "{warn:?}"
    );
    // Both print their chatter warning as a `warning:` line of the text output.
    assert!(
        pd_text.contains(&format!("warning: {}", pd_warn[0])),
        "{pd_text}"
    );
    assert!(text.contains(&format!("warning: {}", warn[0])), "{text}");
    // and the JSON's checks carry the warnings too, as pd's do.
    assert!(pd_json["checks"]["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .any(|w| w.as_str() == Some(pd_warn[0].as_str())));
    assert!(v["checks"]["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .any(|w| w.as_str() == Some(warn[0].as_str())));
}

// PI at 60 rad/s: one count per tick is 0.36652 * 500 = 183.26 mm/s, and the first tick
// weighs it by kp + ki / rate: 4.26 V, far above 10 % of 6.4 V. With a 0.01 mm count the
// quantum is 5 mm/s and the step 0.116 V: accepted.
#[test]
fn pi_reports_the_checks_and_the_chatter() {
    let a = checks(&PI, "0.36652");
    let v = json(&strs(&a));
    let c = &v["checks"];
    let (kp, ki) = (v["kp"].as_f64().unwrap(), v["ki"].as_f64().unwrap());
    let step = c["count_step"]["step_volts"].as_f64().unwrap();
    let want = (kp + ki / 500.0) * COUNT * 500.0;
    assert!((step - want).abs() < 1e-12 * want, "{step} vs {want}");
    assert_eq!(c["measured"], "speed");
    assert_eq!(c["count_step"]["chatters"], true);
    assert_eq!(chatter_warnings(&v).len(), 1, "{v}");
    let (code, text, _) = run(&strs(&a));
    assert_eq!(code, 0);
    assert!(
        text.contains("one count per tick (183.2600 units/s)"),
        "{text}"
    );
    assert!(
        text.contains("warning: one count per tick of speed reading"),
        "{text}"
    );

    let fine = checks(&PI, "0.01");
    let v = json(&strs(&fine));
    let step = v["checks"]["count_step"]["step_volts"].as_f64().unwrap();
    assert!(
        (step - (kp + ki / 500.0) * 0.01 * 500.0).abs() < 1e-12,
        "{v}"
    );
    assert_eq!(v["checks"]["count_step"]["chatters"], false);
    assert!(chatter_warnings(&v).is_empty());
}

// Without the encoder flags only the loop-rate check runs (as in pd): no `checks` key, and
// the rate warning still appears at a low rate.
#[test]
fn without_encoder_flags_only_the_rate_is_checked() {
    for cmd in [&LEAD[..5], &PI[..5]] {
        let a = args(&args(cmd, &PLANT), &["--rate", "20"]);
        let v = json(&a);
        assert!(v.get("checks").is_none(), "{v}");
        assert!(
            v["warnings"]
                .as_array()
                .unwrap()
                .iter()
                .any(|w| w.as_str().unwrap().contains("closed-loop bandwidth")),
            "{v}"
        );
    }
}

#[test]
fn bad_check_flags_exit_2_naming_the_flag() {
    for cmd in [&LEAD[..], &PI[..]] {
        for (flag, value) in [
            ("--count-size", "-1"),
            ("--count-size", "nan"),
            ("--supply-min", "0"),
            ("--cruise-speed", "-5"),
        ] {
            let a = args(&args(cmd, &PLANT), &[flag, value]);
            let (code, _, err) = run(&a);
            assert_eq!(code, 2, "{a:?}: {err}");
            assert!(err.contains(flag) && err.contains("valid"), "{a:?}: {err}");
        }
    }
}
