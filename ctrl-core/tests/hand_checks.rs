//! Hand-checked values for the invented greenhouse-bench rover (numbers from COMMON.md, all
//! invented). Each check shows its arithmetic.
//!
//! Plant model: first-order motor `T dv/dt + v = K (V - bias sign v)`, so the steady voltage
//! for speed `v` and acceleration `a` is `V = v / K + T a / K + bias` (common practice, no
//! source; it is the DC-motor model of Franklin, Powell & Emami-Naeini, "Feedback Control of
//! Dynamic Systems", from memory).

use ctrl_core::{
    feedforward::Feedforward,
    mix::mix,
    supply::{Supply, SupplyState},
    Coeff,
};
use fixed::types::I16F16;

/// Count size pi * 42 mm / 360 = 0.366519 mm; loop rate 500 Hz.
const COUNT_MM: f64 = std::f64::consts::PI * 42.0 / 360.0;
const RATE: f64 = 500.0;

fn c(x: f64) -> Coeff {
    let (c, rel) = Coeff::from_f64(x).unwrap();
    assert!(rel < 3.1e-5, "{x} kept within 2^-15");
    c
}

#[test]
fn forward_feedforward_at_cruise() {
    // kv = RATE * COUNT_MM / K = 500 * 0.366519 / 180 = 1.018109 V per count/tick.
    // ka = T * RATE^2 * COUNT_MM / K = 0.09 * 250000 * 0.366519 / 180 = 45.8149 V per count/tick^2.
    let kv = RATE * COUNT_MM / 180.0;
    let ka = 0.09 * RATE * RATE * COUNT_MM / 180.0;
    assert!((kv - 1.018109).abs() < 1e-6 && (ka - 45.8149).abs() < 1e-4);
    let ff = Feedforward::new(c(kv), c(ka), I16F16::from_num(0.7));

    // Cruise 400 mm/s = 400 / 0.366519 / 500 = 2.182697 counts/tick, no acceleration:
    // V = 400 / 180 + 0.7 = 2.922222 V.
    let v = I16F16::from_num(400.0 / COUNT_MM / RATE);
    let volts = ff.volts(v, I16F16::ZERO).to_num::<f64>();
    // Error budget: speed quantized to 1 LSB (x kv ~ 1.6e-5 V), kv relative 3e-5 (x 2.2 V =
    // 7e-5 V), the multiply 0.5 LSB: below 1e-4 V.
    assert!((volts - 2.922222).abs() < 1e-4, "{volts}");

    // Accelerating at 1200 mm/s^2 = 1200 / 0.366519 / 250000 = 0.0130961 counts/tick^2
    // from 200 mm/s (1.091348 counts/tick): V = 200/180 + 0.09 * 1200 / 180 + 0.7
    // = 1.111111 + 0.6 + 0.7 = 2.411111 V.
    let v = I16F16::from_num(200.0 / COUNT_MM / RATE);
    let a = I16F16::from_num(1200.0 / COUNT_MM / (RATE * RATE));
    let volts = ff.volts(v, a).to_num::<f64>();
    // The acceleration is quantized to 1 LSB = 1.5e-5 counts/tick^2, x ka = 7e-4 V.
    assert!((volts - 2.411111).abs() < 8e-4, "{volts}");
}

#[test]
fn duty_on_a_half_charged_pack() {
    // 2.922222 V on a 7.4 V pack: duty = 2.922222 / 7.4 = 0.394895.
    let mut st = SupplyState::new();
    Supply::new(I16F16::from_num(6.4)).set_battery(&mut st, I16F16::from_num(7.4));
    let d = st.duty(I16F16::from_num(2.922222)).to_num::<f64>();
    assert!((d - 0.394895).abs() < 1e-4 * 0.4 + 2e-5, "{d}");
    assert!(!st.is_low());
}

#[test]
fn turning_while_driving_at_full_pack() {
    // Forward 7 V, rotation 2.5 V, limit 8.4 V: 7 + 2.5 = 9.5 > 8.4, so forward is cut to
    // 8.4 - 2.5 = 5.9 V: left = 5.9 - 2.5 = 3.4 V, right = 5.9 + 2.5 = 8.4 V.
    let w = mix(
        I16F16::from_num(7),
        I16F16::from_num(2.5),
        I16F16::from_num(8.4),
    );
    let lim = I16F16::from_num(8.4);
    assert_eq!(w.right, lim);
    assert_eq!(w.left, lim - I16F16::from_num(5));
}
