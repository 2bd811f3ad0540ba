//! `ctrl_design::emit`: the gains and firmware constants it writes, its determinism, and
//! each check that must refuse a design (with the key, its line and the valid range).

use std::path::{Path, PathBuf};

use ctrl_design::emit::{emit, Emission, EmitFailure, Gains};

/// The demo robot's design with its invented plant constants given as numbers (the
/// committed demo identifies them from logs instead).
const DESIGN: &str = r#"name = "emit test rover"

[drive]
loop_rate_hz = 500
wheel_diameter_mm = 42.0
track_width_mm = 140.0
encoder_counts_per_rev = 360
encoder_counter_bits = 16

[supply]
lowest_volts = 6.4
highest_volts = 8.4

[forward.plant]
gain = 180.0
time_constant_s = 0.09
bias_volts = 0.7

[forward.loop]
kind = "pd"
damping = 0.9
settling_time_s = 0.5

[forward.move]
cruise_speed = 400.0
accel = 1200.0

[forward.stall_guard]
max_tracking_error = 15.0
max_time_s = 0.2

[rotation.plant]
gain = 2.6
time_constant_s = 0.07
bias_volts = 0.8

[rotation.loop]
kind = "pd"
damping = 0.9
settling_time_s = 0.4

[rotation.move]
cruise_speed = 4.0
accel = 15.0

[rotation.stall_guard]
max_tracking_error = 0.25
max_time_s = 0.2
"#;

/// Writes `src` to a fresh file named `name` in a per-test folder and returns its path.
fn write(name: &str, src: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("ctrl-design-emit-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let p = dir.join("rover.toml");
    std::fs::write(&p, src).unwrap();
    p
}

fn ok(name: &str, src: &str) -> Emission {
    emit(&write(name, src)).unwrap_or_else(|e| panic!("{e}"))
}

fn refused(name: &str, src: &str) -> (EmitFailure, String) {
    let f = emit(&write(name, src)).expect_err("must be refused");
    let text = f.to_string();
    (f, text)
}

fn line_of(src: &str, needle: &str) -> usize {
    src[..src.find(needle).expect("needle")]
        .matches('\n')
        .count()
        + 1
}

fn constant(e: &Emission, name: &str) -> f64 {
    e.constants
        .iter()
        .find(|c| c.name == name)
        .unwrap_or_else(|| panic!("no constant {name}"))
        .quantized
}

#[test]
fn pd_gains_follow_pole_placement() {
    // Pole placement for K/(s(Ts+1)) with PD (Ogata, "Modern Control Engineering", PD
    // control of a second-order plant, from memory): s^2 + (1 + K Kd)/T s + K Kp/T, so
    // Kp = wn^2 T / K and Kd = (2 zeta wn T - 1) / K, with wn = 4 / (zeta ts) for 2 %.
    let e = ok("gains", DESIGN);
    let wn: f64 = 4.0 / (0.9 * 0.5);
    let kp = wn * wn * 0.09 / 180.0;
    let kd = (2.0 * 0.9 * wn * 0.09 - 1.0) / 180.0;
    match e.axes[0].gains {
        Gains::Pd { kp: p, kd: d, .. } => {
            assert!((p - kp).abs() < 1e-12 * kp, "{p} vs {kp}");
            assert!((d - kd).abs() < 1e-12 * kd, "{d} vs {kd}");
        }
        ref g => panic!("{g:?}"),
    }
    // Firmware units (DEVELOPERS.md): count = pi * 42 / 360 mm, tick = 1/500 s.
    let count = std::f64::consts::PI * 42.0 / 360.0;
    let close = |name: &str, want: f64| {
        let got = constant(&e, name);
        assert!(
            (got - want).abs() <= 3.1e-5 * want.abs(),
            "{name}: {got} vs {want}"
        );
    };
    close("forward.kp", kp * count);
    close("forward.kd_per_tick", kd * 500.0 * count);
    close("forward.kv", 500.0 * count / 180.0);
    close("forward.ka", 0.09 * 500.0 * 500.0 * count / 180.0);
    close("forward.cruise_speed", 400.0 / count / 500.0);
    close("forward.accel", 1200.0 / count / 250_000.0);
    close("forward.stall_limit", 15.0 / count);
    close("forward.plant_decay", (-1.0f64 / 45.0).exp());
    // Rotation: one radian of heading is 70 mm of arc per wheel.
    close("rotation.stall_limit", 0.25 * 70.0 / count);
    assert_eq!(constant(&e, "forward.stall_ticks"), 100.0);
}

#[test]
fn every_constant_is_held_within_the_limit_and_its_bits_say_so() {
    let e = ok("quant", DESIGN);
    assert!(e.constants.len() > 20);
    for c in &e.constants {
        assert!(c.rel_err <= 1e-3, "{}: {}", c.name, c.rel_err);
        // Recompute the value from the bits written in the expression.
        let inner = c
            .expr
            .rsplit_once('(')
            .map(|(_, r)| r.trim_end_matches(')'));
        let from_bits = match (c.format, inner) {
            ("Coeff", Some(args)) => {
                let (m, s) = args.split_once(", ").unwrap();
                m.parse::<f64>().unwrap() * (-(s.parse::<i32>().unwrap() as f64)).exp2()
            }
            ("I16F16", Some(b)) => b.parse::<f64>().unwrap() / 65536.0,
            ("I32F32", Some(b)) => b.parse::<f64>().unwrap() / 4294967296.0,
            _ => c.expr.parse::<f64>().unwrap(),
        };
        assert_eq!(from_bits, c.quantized, "{}: {}", c.name, c.expr);
        let rel = if c.value == 0.0 {
            0.0
        } else {
            ((from_bits - c.value) / c.value).abs()
        };
        assert!(
            (rel - c.rel_err).abs() <= 1e-12,
            "{}: {rel} vs {}",
            c.name,
            c.rel_err
        );
        assert!(e.source.contains(&c.expr), "{} not in the source", c.expr);
    }
}

#[test]
fn output_is_deterministic_and_says_what_made_it() {
    let a = ok("det-a", DESIGN);
    let b = ok("det-b", DESIGN);
    assert_eq!(
        a.source, b.source,
        "same design, same bytes (from another folder too)"
    );
    assert!(a.source.starts_with("// Generated by ctrl-design "));
    assert!(a.source.contains("from the design file `rover.toml`"));
    assert!(
        !a.source.contains(std::env::temp_dir().to_str().unwrap()),
        "no absolute paths"
    );
    for item in [
        "pub const DRIVE:",
        "pub const FORWARD_AXIS:",
        "pub const ROTATION_AXIS:",
        "pub const LOOP_RATE_HZ: u32 = 500;",
    ] {
        assert!(a.source.contains(item), "{item}");
    }
    let c = ok(
        "det-c",
        &DESIGN.replace(
            "max_time_s = 0.2\n\n[rotation",
            "max_time_s = 0.3\n\n[rotation",
        ),
    );
    assert_ne!(a.source, c.source, "a changed design changes the output");
}

#[test]
fn negative_kd_is_refused_at_the_settling_time_line() {
    let src = DESIGN.replacen("settling_time_s = 0.5", "settling_time_s = 1.0", 1);
    let (f, text) = refused("kd", &src);
    assert_eq!(f.errors.len(), 1, "{text}");
    let line = line_of(&src, "settling_time_s = 1.0");
    assert!(
        text.contains(&format!(
            "rover.toml:{line}: `forward.loop.settling_time_s`"
        )),
        "{text}"
    );
    assert!(text.contains("negative"), "{text}");
    // Longest settling time 2 * 4 * T = 0.72 s (from Kd >= 0 above).
    assert!(text.contains("0.72"), "{text}");
}

#[test]
fn peak_move_voltage_above_the_lowest_supply_is_refused() {
    // 0.7 + 400/180 + 0.09 * 12000 / 180 = 8.92 V > 6.4 V.
    let src = DESIGN.replace("accel = 1200.0", "accel = 12000.0");
    let (_, text) = refused("peak", &src);
    assert!(
        text.contains(&format!(
            ":{}: `forward.move.accel`",
            line_of(&src, "accel = 12000.0")
        )),
        "{text}"
    );
    assert!(text.contains("8.92222 V"), "{text}");
    assert!(text.contains("above the lowest supply 6.4 V"), "{text}");
}

#[test]
fn derivative_chatter_is_refused_with_a_filter_suggestion() {
    // Kd * rate * count = 0.00244 * 500 * 0.3665 = 0.448 V: above 5 % of 6.4 V = 0.32 V.
    let src = format!("{DESIGN}\n[checks]\nmax_chatter_share = 0.05\n");
    let (f, text) = refused("chatter", &src);
    assert!(text.contains("`forward.loop.settling_time_s`"), "{text}");
    assert!(text.contains("0.447968 V"), "{text}");
    assert!(text.contains("kind = \"lead\""), "{text}");
    // The rotation axis (0.40 V) fails too; both are reported.
    assert_eq!(f.errors.len(), 2, "{text}");
}

#[test]
fn loop_rate_too_low_for_the_bandwidth_is_refused() {
    let src = format!("{DESIGN}\n[checks]\nmin_rate_ratio = 1000\n");
    let (_, text) = refused("rate", &src);
    assert!(text.contains("closed-loop bandwidth"), "{text}");
    assert!(text.contains("at least 1000x"), "{text}");
}

#[test]
fn overshoot_above_the_limit_is_refused() {
    let src = DESIGN.replacen("damping = 0.9", "damping = 0.4", 1)
        + "\n[checks]\nmax_overshoot_pct = 10\n";
    let (_, text) = refused("overshoot", &src);
    assert!(
        text.contains(&format!(
            ":{}: `forward.loop.damping`",
            line_of(&src, "damping = 0.4")
        )),
        "{text}"
    );
    assert!(text.contains("overshoots"), "{text}");
    assert!(text.contains("raise the damping"), "{text}");
}

#[test]
fn unstable_discrete_loop_is_refused() {
    // A 30 ms settling time at 40 Hz: the discrete loop with one tick of delay diverges.
    let src = DESIGN
        .replace("loop_rate_hz = 500", "loop_rate_hz = 40")
        .replacen("settling_time_s = 0.5", "settling_time_s = 0.03", 1);
    let (f, text) = refused("unstable", &src);
    assert!(
        f.checks
            .iter()
            .any(|c| c.name == "discrete_stable" && !c.passed),
        "{text}"
    );
    assert!(text.contains("unstable"), "{text}");
}

#[test]
fn a_stall_limit_below_normal_tracking_is_refused() {
    // A full-speed move lags by a fraction of a mm; a 0.01 mm limit would trip on it.
    let src = DESIGN.replacen("max_tracking_error = 15.0", "max_tracking_error = 0.01", 1);
    let (f, text) = refused("stall", &src);
    assert_eq!(f.errors.len(), 1, "{text}");
    let line = line_of(&src, "max_tracking_error = 0.01");
    assert!(
        text.contains(&format!(
            ":{line}: `forward.stall_guard.max_tracking_error`"
        )),
        "{text}"
    );
    assert!(text.contains("would trip on ordinary moves"), "{text}");
}

#[test]
fn a_constant_above_the_quantization_limit_is_refused() {
    // Coeff keeps about 2^-15 (3e-5) relative error; a limit of 1e-4 % refuses most gains,
    // each at the key it comes from.
    let src = format!("{DESIGN}\n[checks]\nmax_quantization_error_pct = 0.0001\n");
    let (f, text) = refused("quant", &src);
    assert!(f.errors.len() >= 4, "{text}");
    assert!(
        text.contains("`forward.loop`: constant forward.kp = "),
        "{text}"
    );
    assert!(text.contains("relative error"), "{text}");
    assert!(
        text.contains("quantization error at most 0.0001 %"),
        "{text}"
    );
    for e in &f.errors {
        assert!(e.line.is_some(), "{e}");
    }
}

#[test]
fn lead_design_emits_a_lead_loop() {
    let src = DESIGN.replace(
        "kind = \"pd\"\ndamping = 0.9\nsettling_time_s = 0.4",
        "kind = \"lead\"\ncrossover_rad_s = 12.0\nphase_margin_deg = 60.0",
    );
    let e = ok("lead", &src);
    match e.axes[1].gains {
        Gains::Lead {
            alpha, lead_deg, ..
        } => {
            // Needed lead: PM - 90 + atan(wc T) = 60 - 90 + atan(0.84) = 10.03 deg.
            let want = 60.0 - 90.0 + (12.0f64 * 0.07).atan().to_degrees();
            assert!((lead_deg - want).abs() < 1e-9, "{lead_deg}");
            let s = want.to_radians().sin();
            assert!((alpha - (1.0 - s) / (1.0 + s)).abs() < 1e-12);
        }
        ref g => panic!("{g:?}"),
    }
    assert!(e
        .source
        .contains("::ctrl_core::drive::Feedback::Lead(::ctrl_core::lead::Lead::new("));
}

#[test]
fn design_file_errors_pass_through_with_their_lines() {
    let src = DESIGN.replace(
        "track_width_mm = 140.0",
        "track_width_mm = 140.0\ntrack = 1",
    );
    let (f, text) = refused("badkey", &src);
    assert_eq!(f.inputs.len(), 1);
    assert!(
        text.contains(&format!(
            ":{}: `drive.track`: unknown key",
            line_of(&src, "track = 1")
        )),
        "{text}"
    );
}

#[test]
fn missing_file_is_an_error() {
    let f = emit(Path::new("/nonexistent/rover.toml")).unwrap_err();
    assert!(f.to_string().contains("/nonexistent/rover.toml"));
}

#[test]
fn encoder_direction_keys_reach_the_drive_constant() {
    // Default: both encoders count forward.
    let plain = ok("enc-default", DESIGN);
    assert!(plain
        .source
        .contains("::ctrl_core::encoder::Encoders::new(false, false),"));
    assert!(!plain.design.drive.invert_left_encoder && !plain.design.drive.invert_right_encoder);
    // A mirrored left motor: the left encoder counts down when driving forward.
    let src = DESIGN.replace(
        "encoder_counter_bits = 16\n",
        "encoder_counter_bits = 16\ninvert_left_encoder = true\n",
    );
    let e = ok("enc-left", &src);
    assert!(e.design.drive.invert_left_encoder && !e.design.drive.invert_right_encoder);
    assert!(e
        .source
        .contains("::ctrl_core::encoder::Encoders::new(true, false),"));
    assert!(e.source.contains("encoders (left inverted)"));
    // Not a boolean: refused at its line, naming the key.
    let bad = DESIGN.replace(
        "encoder_counter_bits = 16\n",
        "encoder_counter_bits = 16\ninvert_right_encoder = \"yes\"\n",
    );
    let (_, text) = refused("enc-bad", &bad);
    let line = line_of(&bad, "invert_right_encoder");
    assert!(text.contains(&format!("rover.toml:{line}")), "{text}");
    assert!(text.contains("invert_right_encoder"), "{text}");
}
