//! Property tests of the fixed-point loops (PD, lead, PI, feedforward, supply) against their
//! clamps and against an `f64` model with the same (quantized) coefficients.
//!
//! Quantization bounds, in `I16F16` LSB (`2^-16` V), derived from the documented multiply
//! error (`Coeff::saturating_mul` rounds the exact product to nearest: at most 0.5 LSB) while
//! nothing saturates at the `I16F16` range; clamping is 1-Lipschitz, so it never adds error:
//! * PD: two rounded products, sums exact: `|u - u_f64| <= 1 LSB`.
//! * lead: three rounded products per tick, and the previous output's error is fed back
//!   through `a1`: `E_k <= 1.5 + |a1| E_{k-1}`, so `E_k <= 1.5 / (1 - |a1|)` LSB.
//! * PI (no clamp active): the integral gains at most 0.5 LSB of error per tick and is never
//!   damped, so after tick `n` (1-based) `|I - I_f64| <= 0.5 n` and
//!   `|u - u_f64| <= 0.5 (n + 1)` LSB.
//!
//! The input ranges below are chosen so that no product or sum reaches the `I16F16` range
//! (|coefficient| <= 128, |error| <= 60 counts, clamp <= 1000 V), which the bounds assume.

use ctrl_core::{
    feedforward::Feedforward,
    lead::{Lead, LeadState},
    pd::{Derivative, Pd, PdState},
    pi::{Pi, PiState},
    supply::{Supply, SupplyState},
    Coeff,
};
use fixed::types::I16F16;
use proptest::prelude::*;

const LSB: f64 = 1.0 / 65536.0;

fn fx(x: I16F16) -> f64 {
    x.to_bits() as f64 * LSB
}

fn clamp(x: f64, l: f64) -> f64 {
    x.clamp(-l, l)
}

/// Any representable coefficient.
fn any_coeff() -> impl Strategy<Value = Coeff> {
    (-32767i32..=32767, 0u32..=47).prop_map(|(m, s)| Coeff::from_bits(m, s))
}

/// Coefficients with |c| <= 128 (shift >= 8).
fn small_coeff() -> impl Strategy<Value = Coeff> {
    (-32767i32..=32767, 8u32..=47).prop_map(|(m, s)| Coeff::from_bits(m, s))
}

fn any_fx() -> impl Strategy<Value = I16F16> {
    any::<i32>().prop_map(I16F16::from_bits)
}

/// Errors within +-60 counts, any fraction.
fn small_fx() -> impl Strategy<Value = I16F16> {
    (-60 * 65536..=60 * 65536).prop_map(I16F16::from_bits)
}

fn derivative() -> impl Strategy<Value = Derivative> {
    prop_oneof![Just(Derivative::OnError), Just(Derivative::OnMeasurement)]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(2000))]

    #[test]
    fn multiply_is_within_half_an_lsb(c in any_coeff(), x in any_fx()) {
        let exact = c.to_f64() * fx(x);
        let got = fx(c.saturating_mul(x));
        if exact.abs() < 32767.0 {
            prop_assert!((got - exact).abs() <= 0.5 * LSB, "c={c:?} x={x} got={got} exact={exact}");
        } else {
            prop_assert_eq!(got.signum(), exact.signum());
            prop_assert!(got.abs() >= 32767.0);
        }
    }

    #[test]
    fn pd_output_never_leaves_its_clamp(
        kp in any_coeff(), kd in any_coeff(), der in derivative(), limit in any_fx(),
        inputs in prop::collection::vec((any_fx(), any_fx()), 1..50),
    ) {
        let pd = Pd::new(kp, kd, der, limit);
        let lim = pd.limit_volts();
        prop_assert!(lim >= I16F16::ZERO);
        let mut st = PdState::new();
        for (e, v) in inputs {
            let u = pd.update(&mut st, e, v);
            prop_assert!(u <= lim && u >= -lim, "u={u} lim={lim}");
        }
    }

    #[test]
    fn pd_matches_f64_model_within_one_lsb(
        kp in small_coeff(), kd in small_coeff(), der in derivative(),
        limit in 0.0f64..1000.0,
        inputs in prop::collection::vec((small_fx(), small_fx()), 1..50),
    ) {
        let limit = I16F16::from_num(limit);
        let pd = Pd::new(kp, kd, der, limit);
        let mut st = PdState::new();
        let mut prev = 0.0;
        for (e, v) in inputs {
            let u = fx(pd.update(&mut st, e, v));
            let d = match der {
                Derivative::OnError => fx(e) - prev,
                Derivative::OnMeasurement => -fx(v),
            };
            prev = fx(e);
            let model = clamp(kp.to_f64() * fx(e) + kd.to_f64() * d, fx(limit));
            prop_assert!((u - model).abs() <= LSB, "u={u} model={model}");
        }
    }

    #[test]
    fn lead_output_and_state_never_leave_the_clamp(
        b0 in any_coeff(), b1 in any_coeff(), a1 in any_coeff(), limit in any_fx(),
        inputs in prop::collection::vec(any_fx(), 1..80),
    ) {
        let lead = Lead::new(b0, b1, a1, limit);
        let lim = lead.limit_volts();
        let mut st = LeadState::new();
        for e in inputs {
            let u = lead.update(&mut st, e);
            prop_assert!(u <= lim && u >= -lim);
            prop_assert_eq!(st.prev_output(), u);
        }
    }

    #[test]
    fn lead_matches_f64_model_within_derived_bound(
        b0 in small_coeff(), b1 in small_coeff(), a1 in -0.95f64..0.95,
        limit in 0.0f64..1000.0,
        inputs in prop::collection::vec(small_fx(), 1..200),
    ) {
        let (a1, _) = Coeff::from_f64(a1).unwrap();
        let limit = I16F16::from_num(limit);
        let lead = Lead::new(b0, b1, a1, limit);
        let bound = 1.5 / (1.0 - a1.to_f64().abs()) * LSB;
        let mut st = LeadState::new();
        let (mut e1, mut u1) = (0.0, 0.0);
        for e in inputs {
            let u = fx(lead.update(&mut st, e));
            let model = clamp(b0.to_f64() * fx(e) + b1.to_f64() * e1 - a1.to_f64() * u1, fx(limit));
            e1 = fx(e);
            u1 = model;
            prop_assert!((u - model).abs() <= bound, "u={u} model={model} bound={bound}");
        }
    }

    #[test]
    fn pi_output_and_integral_never_leave_the_clamp(
        kp in any_coeff(), ki in any_coeff(), limit in any_fx(),
        inputs in prop::collection::vec(any_fx(), 1..80),
    ) {
        let pi = Pi::new(kp, ki, limit);
        let lim = pi.limit_volts();
        let mut st = PiState::new();
        for e in inputs {
            let u = pi.update(&mut st, e);
            prop_assert!(u <= lim && u >= -lim);
            prop_assert!(st.integral() <= lim && st.integral() >= -lim);
        }
    }

    #[test]
    fn pi_matches_f64_model_while_unsaturated(
        kp in small_coeff(), ki in (-32767i32..=32767, 15u32..=47).prop_map(|(m, s)| Coeff::from_bits(m, s)),
        inputs in prop::collection::vec(small_fx(), 1..200),
    ) {
        // |ki| < 1, |e| <= 60, n < 200: |I| < 12000; |kp e| <= 7680; never near 30000 V.
        let pi = Pi::new(kp, ki, I16F16::from_num(30000));
        let mut st = PiState::new();
        let mut integral = 0.0;
        for (k, e) in inputs.into_iter().enumerate() {
            let n = (k + 1) as f64;
            let u = fx(pi.update(&mut st, e));
            integral += ki.to_f64() * fx(e);
            let model = kp.to_f64() * fx(e) + integral;
            prop_assert!((fx(st.integral()) - integral).abs() <= 0.5 * n * LSB);
            prop_assert!((u - model).abs() <= 0.5 * (n + 1.0) * LSB, "tick {n}: u={u} model={model}");
        }
    }

    #[test]
    fn pi_never_winds_up_beyond_the_clamp(
        kp in small_coeff(), ki in small_coeff(), limit in 0.5f64..20.0, ticks in 1usize..300,
    ) {
        // Hold a large error for a long time, then reverse it. A wound-up integrator would
        // hold about ticks * ki * 50 V and keep the output pinned; here the integral stays
        // within the clamp, so the reversed tick gives the model value
        // clamp(kp e + clamp(I + ki e)) at once (two rounded products: 1 LSB).
        let limit = I16F16::from_num(limit);
        let pi = Pi::new(kp, ki, limit);
        let mut st = PiState::new();
        for _ in 0..ticks {
            pi.update(&mut st, I16F16::from_num(50));
        }
        let before = fx(st.integral());
        prop_assert!(before.abs() <= fx(limit));
        let u = pi.update(&mut st, I16F16::from_num(-50));
        let l = fx(limit);
        let expect = clamp(kp.to_f64() * -50.0 + clamp(before + ki.to_f64() * -50.0, l), l);
        prop_assert!((fx(u) - expect).abs() <= LSB, "u={u} expect={expect}");
    }

    #[test]
    fn feedforward_bias_follows_the_sign_of_speed(
        kv in small_coeff(), ka in small_coeff(), bias in 0.0f64..3.0,
        v in small_fx(), a in small_fx(),
    ) {
        let ff = Feedforward::new(kv, ka, I16F16::from_num(bias));
        let b = fx(ff.bias_volts());
        let sign = if v > I16F16::ZERO { 1.0 } else if v < I16F16::ZERO { -1.0 } else { 0.0 };
        let model = kv.to_f64() * fx(v) + ka.to_f64() * fx(a) + sign * b;
        prop_assert!((fx(ff.volts(v, a)) - model).abs() <= LSB);
    }

    #[test]
    fn duty_never_leaves_plus_minus_one(battery in any_fx(), volts in any_fx(), low in any_fx()) {
        let s = Supply::new(low);
        let mut st = SupplyState::new();
        s.set_battery(&mut st, battery);
        let d = st.duty(volts);
        prop_assert!(d <= I16F16::ONE && d >= -I16F16::ONE);
        prop_assert_eq!(st.is_low(), battery < low || st.reciprocal() == Coeff::ZERO);
    }

    #[test]
    fn duty_matches_volts_over_battery(battery in 2.0f64..30.0, volts in -30.0f64..30.0) {
        let s = Supply::new(I16F16::from_num(6.4));
        let mut st = SupplyState::new();
        let (b, v) = (I16F16::from_num(battery), I16F16::from_num(volts));
        s.set_battery(&mut st, b);
        let model = clamp(fx(v) / fx(b), 1.0);
        // Reciprocal within 1e-4 relative (|v / b| <= 15), plus 0.5 LSB from the multiply.
        let bound = 1e-4 * (fx(v) / fx(b)).abs() + 0.5 * LSB;
        prop_assert!((fx(st.duty(v)) - model).abs() <= bound);
    }
}
