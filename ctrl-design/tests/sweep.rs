//! The robustness sweep: its worst cases are the maxima of the individual runs, and it is
//! reproducible (seeded draw, result independent of the thread count).

use ctrl_design::sim::{
    simulate, AxisKind, Command, DerivativeForm, Feedforward, FirmwareLoop, FirmwareUnits,
    IdealLoop, LoopDesign, Metrics, SimConfig,
};
use ctrl_design::sweep::{plants, sweep, Sampling, Spread, SweepReport, WorstCase};
use ctrl_design::Plant;
use indicatif::ProgressBar;

fn nominal() -> Plant {
    Plant::new(180.0, 0.09, 0.7).unwrap()
}

fn setup() -> (SimConfig, LoopDesign) {
    let plant = nominal();
    let design = LoopDesign {
        kp: 0.12,
        kd: 0.004,
        derivative: DerivativeForm::OnError,
        feedforward: Some(Feedforward::for_plant(&plant)),
    };
    let config = SimConfig {
        plant,
        rate_hz: 500.0,
        count_size: Some(0.36652),
        supply_volts: 6.4,
        delay_ticks: 1,
        disturbance: None,
        command: Command::Move {
            distance: 300.0,
            cruise_speed: 400.0,
            accel: 1200.0,
        },
        ticks: 700,
        band: 0.02,
    };
    (config, design)
}

/// The worst case found by brute force over the individual runs, for one figure.
fn brute(
    runs: &[(Plant, Metrics)],
    value: impl Fn(&Metrics) -> Option<f64>,
) -> (Option<f64>, usize) {
    let mut best: Option<(f64, usize)> = None;
    for (i, (_, m)) in runs.iter().enumerate() {
        let v = value(m).unwrap_or(f64::INFINITY);
        if best.is_none_or(|(b, _)| v > b) {
            best = Some((v, i));
        }
    }
    let (v, i) = best.unwrap();
    (v.is_finite().then_some(v), i)
}

fn check_worst(report: &SweepReport, runs: &[(Plant, Metrics)]) {
    let w = report.worst.expect("non-empty sweep");
    type Figure = fn(&Metrics) -> Option<f64>;
    let pairs: [(&str, &WorstCase, Figure); 10] = [
        ("overshoot", &w.overshoot_pct, |m| Some(m.overshoot_pct)),
        ("peak time", &w.peak_time_s, |m| Some(m.peak_time_s)),
        ("rise time", &w.rise_time_s, |m| m.rise_time_s),
        ("settling", &w.settling_time_s, |m| m.settling_time_s),
        ("final error", &w.final_error_abs, |m| {
            Some(m.final_error.abs())
        }),
        ("tracking", &w.max_tracking_error, |m| {
            Some(m.max_tracking_error)
        }),
        ("peak volts", &w.peak_volts, |m| Some(m.peak_volts)),
        ("rms volts", &w.rms_volts, |m| Some(m.rms_volts)),
        ("variation", &w.voltage_total_variation, |m| {
            Some(m.voltage_total_variation)
        }),
        ("saturated", &w.saturated_ticks, |m| {
            Some(f64::from(m.saturated_ticks))
        }),
    ];
    for (name, got, value) in pairs {
        let (v, i) = brute(runs, value);
        assert_eq!((got.value, got.run), (v, i), "{name}");
        assert_eq!(got.plant, runs[i].0, "{name}: plant of the worst run");
    }
    let unsettled = runs
        .iter()
        .filter(|(_, m)| m.settling_time_s.is_none())
        .count();
    assert_eq!(report.unsettled_runs, unsettled);
    assert_eq!(report.runs, runs.len());
}

#[test]
fn worst_case_is_the_maximum_over_the_individual_runs() {
    let (config, design) = setup();
    let spread = Spread::uniform(0.3);
    let ps = plants(
        &nominal(),
        &spread,
        &Sampling::MonteCarlo {
            samples: 150,
            seed: 7,
        },
    )
    .unwrap();
    // f64 loop
    let report = sweep(
        &config,
        &ps,
        || IdealLoop::new(&design, &config.command, config.rate_hz),
        &ProgressBar::hidden(),
    );
    let runs: Vec<(Plant, Metrics)> = ps
        .iter()
        .map(|p| {
            let cfg = SimConfig {
                plant: *p,
                ..config
            };
            (
                *p,
                simulate(
                    &cfg,
                    &mut IdealLoop::new(&design, &cfg.command, cfg.rate_hz),
                ),
            )
        })
        .collect();
    check_worst(&report, &runs);
    // fixed-point loop
    let units = FirmwareUnits {
        count_size: 0.36652,
        rate_hz: 500.0,
    };
    let (proto, _) =
        FirmwareLoop::from_design(&design, AxisKind::Forward, &units, 6.4, &config.command)
            .unwrap();
    let report = sweep(&config, &ps, || proto.clone(), &ProgressBar::hidden());
    let runs: Vec<(Plant, Metrics)> = ps
        .iter()
        .map(|p| {
            let cfg = SimConfig {
                plant: *p,
                ..config
            };
            (*p, simulate(&cfg, &mut proto.clone()))
        })
        .collect();
    check_worst(&report, &runs);
}

#[test]
fn sweep_is_reproducible_from_its_seed_and_independent_of_threads() {
    let (config, design) = setup();
    let spread = Spread::uniform(0.2);
    let draw = |seed| {
        plants(
            &nominal(),
            &spread,
            &Sampling::MonteCarlo { samples: 300, seed },
        )
        .unwrap()
    };
    assert_eq!(draw(42), draw(42));
    assert_ne!(draw(42), draw(43));
    let ps = draw(42);
    let run_in = |threads| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| {
                sweep(
                    &config,
                    &ps,
                    || IdealLoop::new(&design, &config.command, config.rate_hz),
                    &ProgressBar::hidden(),
                )
            })
    };
    assert_eq!(run_in(1), run_in(3));
}

#[test]
fn draws_stay_in_their_ranges_and_the_grid_spans_them() {
    let p = nominal();
    let spread = Spread {
        gain: 0.2,
        time_constant: 0.1,
        bias: 0.5,
    };
    let mc = plants(
        &p,
        &spread,
        &Sampling::MonteCarlo {
            samples: 2000,
            seed: 1,
        },
    )
    .unwrap();
    let within =
        |v: f64, nom: f64, s: f64| v >= nom * (1.0 - s) - 1e-12 && v <= nom * (1.0 + s) + 1e-12;
    assert!(mc.iter().all(|q| within(q.gain, p.gain, 0.2)
        && within(q.time_constant_s, p.time_constant_s, 0.1)
        && within(q.bias_volts, p.bias_volts, 0.5)));
    // A uniform draw over 2000 samples comes within 2 % of both ends of its range.
    let max_gain = mc.iter().map(|q| q.gain).fold(0.0, f64::max);
    assert!(max_gain > p.gain * 1.19, "{max_gain}");
    let grid = plants(&p, &spread, &Sampling::Grid { points: 3 }).unwrap();
    assert_eq!(grid.len(), 27);
    assert_eq!(grid[0].gain, p.gain * 0.8);
    assert_eq!(grid[26].bias_volts, p.bias_volts * 1.5);
    assert!(grid.contains(&p), "an odd grid holds the nominal plant");
    assert_eq!(
        plants(&p, &spread, &Sampling::Grid { points: 1 }).unwrap(),
        vec![p]
    );
}

#[test]
fn out_of_range_requests_are_refused_with_the_field() {
    let p = nominal();
    let e = plants(&p, &Spread::uniform(1.0), &Sampling::Grid { points: 3 }).unwrap_err();
    assert_eq!(e.field, "spread.gain");
    let e = plants(&p, &Spread::uniform(0.2), &Sampling::Grid { points: 0 }).unwrap_err();
    assert_eq!(e.field, "grid");
    let e = plants(
        &p,
        &Spread::uniform(0.2),
        &Sampling::MonteCarlo {
            samples: 0,
            seed: 0,
        },
    )
    .unwrap_err();
    assert_eq!(e.field, "samples");
    let e = plants(
        &p,
        &Spread::uniform(f64::NAN),
        &Sampling::Grid { points: 2 },
    )
    .unwrap_err();
    assert!(e.to_string().contains("valid is"));
}

// The sweep steps runs two at a time (simulate_pair); each lane must give exactly the
// figures of its own simulate call, for both loops, with a stall guard that trips in one
// lane only, and with unequal lengths (the fallback).
#[test]
fn paired_runs_equal_single_runs_exactly() {
    use ctrl_design::sim::{simulate_pair, stall_guard, Disturbance};
    let (base, design) = setup();
    let units = FirmwareUnits {
        count_size: 0.36652,
        rate_hz: 500.0,
    };
    let a = SimConfig {
        plant: Plant::new(150.0, 0.1, 0.5).unwrap(),
        ..base
    };
    let b = SimConfig {
        plant: Plant::new(210.0, 0.07, 0.9).unwrap(),
        disturbance: Some(Disturbance {
            volts: -40.0,
            start_s: 0.2,
        }),
        ..base
    };
    let short = SimConfig { ticks: 321, ..a };
    let (mut proto, _) =
        FirmwareLoop::from_design(&design, AxisKind::Forward, &units, 6.4, &base.command).unwrap();
    proto.set_stall_guard(stall_guard(20.0, 0.1, &units).unwrap());
    for (x, y) in [(a, b), (b, a), (a, short)] {
        let [mx, my] = simulate_pair([&x, &y], [&mut proto.clone(), &mut proto.clone()]);
        assert_eq!(mx, simulate(&x, &mut proto.clone()));
        assert_eq!(my, simulate(&y, &mut proto.clone()));
        let ideal = || IdealLoop::new(&design, &base.command, 500.0);
        let [ix, iy] = simulate_pair([&x, &y], [&mut ideal(), &mut ideal()]);
        assert_eq!(ix, simulate(&x, &mut ideal()));
        assert_eq!(iy, simulate(&y, &mut ideal()));
    }
    let [_, mb] = simulate_pair([&a, &b], [&mut proto.clone(), &mut proto.clone()]);
    assert!(mb.stall_tick.is_some(), "the loaded lane trips: {mb:?}");
}
