//! The loop-rate and encoder checks for the lead and PI loops (`tune::count_step`,
//! `tune::check_section_rate_and_encoder`), against hand formulas and the firmware's own
//! PI arithmetic, and their consistency with the PD's check.

use ctrl_core::pi::{Pi, PiState};
use ctrl_core::Coeff;
use ctrl_design::analysis::lead_tustin;
use ctrl_design::tune::{
    self, check_rate_and_encoder, check_section_rate_and_encoder, count_step, FirstOrderSection,
    LoopCheckInput, Measured, SectionCheckInput, SettlingBand, MAX_DERIVATIVE_STEP_SHARE,
};
use ctrl_design::Plant;
use fixed::types::I16F16;
use std::f64::consts::PI;

const COUNT: f64 = PI * 42.0 / 360.0; // mm, the demo rover's encoder (invented numbers)
const RATE: f64 = 500.0;

fn forward() -> Plant {
    Plant::new(180.0, 0.09, 0.7).unwrap()
}

/// Runs `u[k] = b0 e[k] + b1 e[k-1] - a1 u[k-1]` from rest on `e`.
fn run(s: &FirstOrderSection, e: &[f64]) -> Vec<f64> {
    let (mut e1, mut u1) = (0.0, 0.0);
    e.iter()
        .map(|&x| {
            let u = s.b0 * x + s.b1 * e1 - s.a1 * u1;
            e1 = x;
            u1 = u;
            u
        })
        .collect()
}

fn input(section: FirstOrderSection, measured: Measured, supply: f64) -> SectionCheckInput {
    SectionCheckInput {
        bandwidth_rad_s: 30.0,
        rate_hz: RATE,
        cruise_speed: 400.0,
        count_size: COUNT,
        measured,
        section,
        supply_min_volts: supply,
    }
}

// The rover's lead (20 rad/s, 50 deg, 500 Hz). First-tick jump of a one-count step: u[0] =
// b0 e[0] with e[-1] = u[-1] = 0 (initial-value theorem, Ogata "Discrete-Time Control
// Systems", from memory). Toggling reading 0, c, 0, c, ...: the steady swing is |C(-1)| c,
// and Tustin maps s = inf to z = -1, so |C(-1)| = Kc / alpha, the continuous lead's
// high-frequency gain (Franklin, Powell and Workman, "Digital Control of Dynamic Systems",
// bilinear transform, from memory).
#[test]
fn lead_step_is_b0_per_count_and_toggle_is_kc_over_alpha() {
    let d = tune::design_lead(&forward(), 20.0, 50.0).unwrap();
    let co = d.discretize(RATE).unwrap();
    let s = FirstOrderSection::from_lead(&co);
    let c = count_step(&s, COUNT, 6.4);
    let first = run(&s, &[COUNT])[0];
    assert!(
        (c.step_volts - first).abs() <= 1e-15 * first,
        "{c:?} vs {first}"
    );
    let toggle: Vec<f64> = (0..4000)
        .map(|k| if k % 2 == 1 { COUNT } else { 0.0 })
        .collect();
    let u = run(&s, &toggle);
    let swing = (u[3999] - u[3998]).abs();
    assert!(
        (c.toggle_volts - swing).abs() < 1e-9 * swing,
        "{} vs {swing}",
        c.toggle_volts
    );
    let hf = d.kc / d.alpha;
    assert!(
        (c.high_frequency_gain - hf).abs() < 1e-12 * hf,
        "{} vs {hf}",
        c.high_frequency_gain
    );
    // The rover's lead steps 0.120 V per count: 1.9 % of 6.4 V, within the 10 % limit.
    assert!(!c.chatters);
    assert!((c.step_share - first / 6.4).abs() < 1e-15);
}

// ctrl-core's PI: I += ki_per_tick e, u = kp e + I. Fed one count per tick of speed error
// from rest, its first output is kp + ki_per_tick in V per (count/tick), which is the check's
// step: (kp + ki / rate) * (count * rate) in user units. The firmware's gains are held within
// 2^-15 relative and each product rounds to 0.5 LSB of I16F16 (ctrl-core's documented bound).
#[test]
fn pi_step_equals_the_firmware_pi_first_tick() {
    let d = tune::design_pi(&forward(), 60.0, 0.8).unwrap();
    let s = d.section(RATE);
    let c = count_step(&s, COUNT * RATE, 6.4);
    assert_eq!(s, FirstOrderSection::pi(d.kp, d.ki / RATE));
    let kp_counts = d.kp * COUNT * RATE; // V per count/tick
    let ki_counts = d.ki / RATE * COUNT * RATE; // V per count/tick, per tick
    let (kp, _) = Coeff::from_f64(kp_counts).unwrap();
    let (ki, _) = Coeff::from_f64(ki_counts).unwrap();
    let pi = Pi::new(kp, ki, I16F16::lit("100"));
    let mut st = PiState::new();
    let u0: f64 = pi.update(&mut st, I16F16::ONE).to_num();
    let tol = (kp_counts + ki_counts) * 2f64.powi(-15) + 2.0 * 2f64.powi(-17);
    assert!((c.step_volts - u0).abs() <= tol, "{} vs {u0}", c.step_volts);
    // |C(-1)| = kp + ki h / 2 for C(z) = kp + ki h / (1 - z^-1) (hand algebra at z = -1).
    let hf = d.kp + d.ki / RATE / 2.0;
    assert!((c.high_frequency_gain - hf).abs() < 1e-15 * hf);
    // Demo numbers: one count per tick is 183 mm/s; 4.26 V, well above 10 % of 6.4 V.
    assert!(c.chatters, "{c:?}");
    assert!(c.step_volts > 4.0 && c.step_volts < 4.5, "{c:?}");
}

// The PD's derivative term as a section: b0 = kd rate gives the PD check's `kd rate count`
// to the bit, and |C(-1)| = 2 kd rate (kd rate (1 - z^-1) at z = -1).
#[test]
fn pd_derivative_section_matches_the_pd_check() {
    let d = tune::design_pd(&forward(), 0.8, 0.3, SettlingBand::TWO_PERCENT).unwrap();
    let s = FirstOrderSection::pd_derivative(d.kd, RATE);
    let c = count_step(&s, COUNT, 6.4);
    let pd = check_rate_and_encoder(&LoopCheckInput {
        bandwidth_rad_s: 22.0,
        rate_hz: RATE,
        cruise_speed: 400.0,
        count_size: COUNT,
        kp: d.kp,
        kd: d.kd,
        supply_min_volts: 6.4,
        crossover_rad_s: Some(18.5),
    })
    .unwrap();
    assert_eq!(c.step_volts, pd.derivative_step_volts);
    assert_eq!(c.step_share, pd.derivative_step_share);
    assert_eq!(c.step_volts, d.kd * RATE * COUNT);
    assert!((c.high_frequency_gain - 2.0 * d.kd * RATE).abs() < 1e-12);
    assert!(c.chatters);
}

// One limit for all three loops: the lead, the PI and the PD's derivative flip from
// accepted to "will chatter" at the same share of the supply (MAX_DERIVATIVE_STEP_SHARE).
#[test]
fn the_limit_is_the_pds() {
    let lead = FirstOrderSection::from_lead(
        &tune::design_lead(&forward(), 20.0, 50.0)
            .unwrap()
            .discretize(RATE)
            .unwrap(),
    );
    let pi = tune::design_pi(&forward(), 60.0, 0.8)
        .unwrap()
        .section(RATE);
    let pd = tune::design_pd(&forward(), 0.8, 0.3, SettlingBand::TWO_PERCENT).unwrap();
    for (section, measured) in [(lead, Measured::Position), (pi, Measured::Speed)] {
        let q = match measured {
            Measured::Position => COUNT,
            Measured::Speed => COUNT * RATE,
        };
        let at = section.b0.abs() * q / MAX_DERIVATIVE_STEP_SHARE; // supply at the limit
        let low =
            check_section_rate_and_encoder(&input(section, measured, at * (1.0 - 1e-9))).unwrap();
        let high =
            check_section_rate_and_encoder(&input(section, measured, at * (1.0 + 1e-9))).unwrap();
        assert!(low.count_step.chatters && low.warnings.iter().any(|w| w.contains("chatter")));
        assert!(!high.count_step.chatters && !high.warnings.iter().any(|w| w.contains("chatter")));
        // The suggested remedies land exactly on the limit.
        let scaled = FirstOrderSection {
            b0: section.b0 * low.gain_scale_to_limit,
            b1: section.b1 * low.gain_scale_to_limit,
            a1: section.a1,
        };
        let s = count_step(&scaled, q, at * (1.0 - 1e-9));
        assert!(
            (s.step_share - MAX_DERIVATIVE_STEP_SHARE).abs() < 1e-12,
            "{s:?}"
        );
        let finer = check_section_rate_and_encoder(&SectionCheckInput {
            count_size: low.largest_count_size * (1.0 - 1e-9),
            ..input(section, measured, at * (1.0 - 1e-9))
        })
        .unwrap();
        assert!(!finer.count_step.chatters, "{finer:?}");
    }
    let at = pd.kd * RATE * COUNT / MAX_DERIVATIVE_STEP_SHARE;
    for (supply, chatters) in [(at * (1.0 - 1e-9), true), (at * (1.0 + 1e-9), false)] {
        let c = check_rate_and_encoder(&LoopCheckInput {
            bandwidth_rad_s: 22.0,
            rate_hz: RATE,
            cruise_speed: 400.0,
            count_size: COUNT,
            kp: pd.kp,
            kd: pd.kd,
            supply_min_volts: supply,
            crossover_rad_s: Some(18.5),
        })
        .unwrap();
        assert_eq!(c.warnings.iter().any(|w| w.contains("chatter")), chatters);
    }
}

// The derivative filter `pd` suggests is a lead sized so that b0 * count is exactly at the
// limit: the lead check puts it at the limit too (within rounding; a design exactly at the
// limit can come out one ulp over and be flagged, as in the emitter's `step <= limit`).
#[test]
fn the_pds_suggested_filter_is_at_the_lead_checks_limit() {
    let d = tune::design_pd(&forward(), 0.8, 0.3, SettlingBand::TWO_PERCENT).unwrap();
    let pd = check_rate_and_encoder(&LoopCheckInput {
        bandwidth_rad_s: 22.0,
        rate_hz: RATE,
        cruise_speed: 400.0,
        count_size: COUNT,
        kp: d.kp,
        kd: d.kd,
        supply_min_volts: 6.4,
        crossover_rad_s: Some(18.5),
    })
    .unwrap();
    let f = pd.suggested_filter.unwrap();
    let co = lead_tustin(f.kc, f.alpha, f.t1, RATE, Some(18.5));
    let c = check_section_rate_and_encoder(&input(
        FirstOrderSection::from_lead(&co),
        Measured::Position,
        6.4,
    ))
    .unwrap();
    let miss = c.count_step.step_share / MAX_DERIVATIVE_STEP_SHARE - 1.0;
    assert!(miss.abs() < 1e-12, "{c:?}");
    // Any margin at all brings it inside.
    let inside = check_section_rate_and_encoder(&input(
        FirstOrderSection::from_lead(&co),
        Measured::Position,
        6.4 * (1.0 + 1e-9),
    ))
    .unwrap();
    assert!(!inside.count_step.chatters, "{inside:?}");
}

// Loop rate: the same warning as the PD's below 10 x the bandwidth in Hz; counts per tick.
#[test]
fn rate_and_counts_per_tick() {
    let s = FirstOrderSection::pi(0.001, 0.0);
    let slow = check_section_rate_and_encoder(&SectionCheckInput {
        rate_hz: 40.0,
        ..input(s, Measured::Speed, 6.4)
    })
    .unwrap();
    // 30 rad/s = 4.77 Hz; 40 Hz is 8.4 x.
    assert!((slow.rate_per_bandwidth - 40.0 / (30.0 / (2.0 * PI))).abs() < 1e-12);
    assert!(slow
        .warnings
        .iter()
        .any(|w| w.contains("closed-loop bandwidth")));
    let r = tune::check_loop_rate(30.0, 40.0).unwrap();
    assert_eq!(slow.warnings[0], r.warning.unwrap());
    let fast = check_section_rate_and_encoder(&input(s, Measured::Speed, 6.4)).unwrap();
    assert!(
        !fast.warnings.iter().any(|w| w.contains("bandwidth")),
        "{fast:?}"
    );
    // 400 mm/s at 500 Hz is 0.8 mm = 2.18 counts per tick; 100 mm/s is 0.55: warned.
    assert!((fast.counts_per_tick - 0.8 / COUNT).abs() < 1e-12);
    let crawl = check_section_rate_and_encoder(&SectionCheckInput {
        cruise_speed: 100.0,
        ..input(s, Measured::Speed, 6.4)
    })
    .unwrap();
    assert!(crawl.warnings.iter().any(|w| w.contains("counts per tick")));
}

#[test]
fn refuses_bad_inputs_naming_the_field() {
    let s = FirstOrderSection::pi(0.01, 0.0);
    let field = |i: SectionCheckInput| match check_section_rate_and_encoder(&i) {
        Err(tune::DesignError::OutOfRange { field, .. }) => field,
        other => panic!("{other:?}"),
    };
    let base = input(s, Measured::Speed, 6.4);
    assert_eq!(
        field(SectionCheckInput {
            count_size: f64::NAN,
            ..base
        }),
        "count_size"
    );
    assert_eq!(
        field(SectionCheckInput {
            count_size: 0.0,
            ..base
        }),
        "count_size"
    );
    assert_eq!(
        field(SectionCheckInput {
            supply_min_volts: 0.0,
            ..base
        }),
        "supply_min_volts"
    );
    assert_eq!(
        field(SectionCheckInput {
            rate_hz: -1.0,
            ..base
        }),
        "rate_hz"
    );
    assert_eq!(
        field(SectionCheckInput {
            bandwidth_rad_s: f64::INFINITY,
            ..base
        }),
        "bandwidth_rad_s"
    );
    let nan = FirstOrderSection { b0: f64::NAN, ..s };
    assert_eq!(
        field(SectionCheckInput {
            section: nan,
            ..base
        }),
        "b0"
    );
}
