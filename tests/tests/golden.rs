//! The committed demo constants (`examples/greenhouse-rover/constants.rs`) are exactly what
//! the emitter makes from `rover.toml` and its logs today, and they compile to the values
//! the emitter reports.

use ctrl_core::drive::Feedback;
use ctrl_design::emit::{emit, Emission};
use ctrl_tests::rover_dir;

#[allow(dead_code)]
mod committed {
    include!("../../examples/greenhouse-rover/constants.rs");
}

fn fresh() -> Emission {
    emit(&rover_dir().join("rover.toml")).unwrap_or_else(|e| panic!("the demo design fails: {e}"))
}

fn value(e: &Emission, name: &str) -> f64 {
    e.constants
        .iter()
        .find(|c| c.name == name)
        .unwrap_or_else(|| panic!("no constant {name}"))
        .quantized
}

#[test]
fn committed_constants_match_a_fresh_emission() {
    let e = fresh();
    let path = rover_dir().join("constants.rs");
    let committed = std::fs::read_to_string(&path).expect("committed constants.rs");
    if committed != e.source {
        let first = committed
            .lines()
            .zip(e.source.lines())
            .position(|(a, b)| a != b)
            .unwrap_or(committed.lines().count().min(e.source.lines().count()));
        panic!(
            "{} differs from a fresh emission from line {}:\n  committed: {}\n  fresh:     {}\n\
             regenerate: cargo run -p ctrl-design -- emit examples/greenhouse-rover/rover.toml -o examples/greenhouse-rover/constants.rs",
            path.display(),
            first + 1,
            committed.lines().nth(first).unwrap_or("<end>"),
            e.source.lines().nth(first).unwrap_or("<end>")
        );
    }
}

#[test]
fn committed_constants_hold_the_reported_values() {
    let e = fresh();
    assert_eq!(
        f64::from(committed::LOOP_RATE_HZ),
        value(&e, "loop_rate_hz")
    );
    let axes = [
        ("forward", committed::FORWARD_AXIS),
        ("rotation", committed::ROTATION_AXIS),
    ];
    for (name, axis) in axes {
        let ff = axis.feedforward();
        assert_eq!(
            ff.kv().to_f64(),
            value(&e, &format!("{name}.kv")),
            "{name}.kv"
        );
        assert_eq!(
            ff.ka().to_f64(),
            value(&e, &format!("{name}.ka")),
            "{name}.ka"
        );
        assert_eq!(
            ff.bias_volts().to_num::<f64>(),
            value(&e, &format!("{name}.bias_volts"))
        );
        match axis.feedback() {
            Feedback::Pd(pd) => {
                assert_eq!(pd.kp().to_f64(), value(&e, &format!("{name}.kp")));
                assert_eq!(
                    pd.kd_per_tick().to_f64(),
                    value(&e, &format!("{name}.kd_per_tick"))
                );
                assert_eq!(pd.limit_volts(), committed::SUPPLY_HIGHEST_VOLTS);
            }
            Feedback::Lead(lead) => {
                let [b0, b1, a1] = lead.coefficients();
                assert_eq!(b0.to_f64(), value(&e, &format!("{name}.lead_b0")));
                assert_eq!(b1.to_f64(), value(&e, &format!("{name}.lead_b1")));
                assert_eq!(a1.to_f64(), value(&e, &format!("{name}.lead_a1")));
            }
        }
        let stall = axis.stall_guard();
        assert_eq!(
            stall.limit().to_num::<f64>(),
            value(&e, &format!("{name}.stall_limit"))
        );
        assert_eq!(
            f64::from(stall.ticks()),
            value(&e, &format!("{name}.stall_ticks"))
        );
    }
    assert_eq!(committed::DRIVE.forward(), committed::FORWARD_AXIS);
    assert_eq!(
        committed::DRIVE.max_volts(),
        committed::SUPPLY_HIGHEST_VOLTS
    );
    assert_eq!(
        committed::FORWARD_CRUISE_SPEED.to_num::<f64>(),
        value(&e, "forward.cruise_speed")
    );
}
