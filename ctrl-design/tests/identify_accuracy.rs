//! Accuracy of `identify` on simulated logs, against the true constants used to make them.
//!
//! The logs are made here by an independent simulator: the differential equation of the
//! first-order drive, `T dw/dt + w = K sign(v) max(|v| - bias, 0)` (the standard DC-motor
//! speed model with the electrical time constant neglected and Coulomb friction as a dead
//! band on the voltage; common practice, no source), integrated by classical 4th-order
//! Runge-Kutta with 16 sub-steps per sample, not by the exact discrete model the library
//! fits. Logs: 500 Hz, positions floored to 3-unit encoder counts with a random phase, and a
//! speed wobble of 0.5 % of the log's largest steady speed (white Gaussian, held over each
//! sample). Targets from the issue: K within 1 %, T within 3 %, bias within 0.05 V.

use ctrl_design::identify::{self, FitMode, Log, Mode, Options, SignalKind};
use ctrl_design::Plant;
use rand::{Rng, SeedableRng};
use rand_distr::{Distribution, Normal};

const DT: f64 = 0.002;
const COUNT: f64 = 3.0;
const NOISE: f64 = 0.005;

/// Records a test of `truth` under `volts` (one value per row) with the noise.
fn record(name: &str, truth: &Plant, volts: &[f64], kind: SignalKind, seed: u64) -> Log {
    let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
    let peak = volts
        .iter()
        .map(|&v| truth.steady_speed(v).abs())
        .fold(0.0f64, f64::max);
    let normal = Normal::new(0.0, NOISE * peak).unwrap();
    let phase: f64 = rng.random::<f64>() * COUNT;
    let sub = 16;
    let h = DT / sub as f64;
    let t = truth.time_constant_s;
    let (mut x, mut w) = (0.0f64, 0.0f64);
    let mut drift = 0.0;
    let mut time = Vec::new();
    let mut sig = Vec::new();
    for (i, &v) in volts.iter().enumerate() {
        let n: f64 = normal.sample(&mut rng);
        time.push(i as f64 * DT);
        sig.push(match kind {
            SignalKind::Speed => w + n,
            SignalKind::Position => (((x + drift) + phase) / COUNT).floor() * COUNT,
        });
        let target = truth.steady_speed(v);
        let f = |w: f64| (target - w) / t;
        for _ in 0..sub {
            // RK4 on (x, w): x' = w, w' = (K u - w) / T
            let k1w = f(w);
            let k1x = w;
            let k2w = f(w + 0.5 * h * k1w);
            let k2x = w + 0.5 * h * k1w;
            let k3w = f(w + 0.5 * h * k2w);
            let k3x = w + 0.5 * h * k2w;
            let k4w = f(w + h * k3w);
            let k4x = w + h * k3w;
            x += h / 6.0 * (k1x + 2.0 * k2x + 2.0 * k3x + k4x);
            w += h / 6.0 * (k1w + 2.0 * k2w + 2.0 * k3w + k4w);
        }
        drift += n * DT;
    }
    Log::new(name, time, volts.to_vec(), kind, sig).unwrap()
}

fn step(v: f64) -> Vec<f64> {
    let mut out = vec![0.0; 100];
    out.extend(std::iter::repeat_n(v, 500));
    out
}

fn stairs(levels: &[(f64, usize)]) -> Vec<f64> {
    levels
        .iter()
        .flat_map(|&(v, n)| std::iter::repeat_n(v, n))
        .collect()
}

fn check(id: &identify::Identification, truth: &Plant, what: &str) {
    let p = id.plant;
    let ek = p.gain / truth.gain - 1.0;
    let et = p.time_constant_s / truth.time_constant_s - 1.0;
    let eb = p.bias_volts - truth.bias_volts;
    eprintln!(
        "{what}: K err {:+.4} %, T err {:+.4} %, bias err {eb:+.4} V",
        ek * 100.0,
        et * 100.0
    );
    assert!(
        ek.abs() < 0.01,
        "{what}: gain {} vs {} ({:+.3} %)",
        p.gain,
        truth.gain,
        ek * 100.0
    );
    assert!(
        et.abs() < 0.03,
        "{what}: T {} vs {} ({:+.3} %)",
        p.time_constant_s,
        truth.time_constant_s,
        et * 100.0
    );
    assert!(
        eb.abs() < 0.05,
        "{what}: bias {} vs {}",
        p.bias_volts,
        truth.bias_volts
    );
}

fn plants() -> Vec<Plant> {
    vec![
        // the demo rover's forward axis with the drive counted in 3-unit counts
        Plant::new(180.0, 0.09, 0.7).unwrap(),
        Plant::new(600.0, 0.05, 0.4).unwrap(),
        Plant::new(1500.0, 0.15, 1.1).unwrap(),
    ]
}

#[test]
fn step_mode_position_logs_meet_the_accuracy_targets() {
    for (pi, truth) in plants().iter().enumerate() {
        for seed in 0..4u64 {
            let volts = [1.5, 3.0, 4.5, 6.0, -4.0, 0.3];
            let logs: Vec<Log> = volts
                .iter()
                .enumerate()
                .map(|(i, &v)| {
                    record(
                        &format!("p{pi}s{seed}v{v}"),
                        truth,
                        &step(v),
                        SignalKind::Position,
                        seed * 97 + i as u64,
                    )
                })
                .collect();
            let id = identify::identify(&logs, &Options::default()).unwrap();
            assert_eq!(id.mode, FitMode::Step);
            check(&id, truth, &format!("step plant {pi} seed {seed}"));
            // the 0.3 V step is below every bias here
            assert!(!id.per_log[5].moved);
            assert!(
                id.warnings.iter().any(|w| w.contains("below the bias")),
                "{:?}",
                id.warnings
            );
        }
    }
}

#[test]
fn step_mode_speed_logs_meet_the_accuracy_targets() {
    for (pi, truth) in plants().iter().enumerate() {
        for seed in 0..3u64 {
            let logs: Vec<Log> = [2.0, 4.0, 6.0, -5.0]
                .iter()
                .enumerate()
                .map(|(i, &v)| {
                    record(
                        "s",
                        truth,
                        &step(v),
                        SignalKind::Speed,
                        1000 + seed * 31 + i as u64,
                    )
                })
                .collect();
            let id = identify::identify_steps(&logs, &Options::default()).unwrap();
            check(&id, truth, &format!("speed steps plant {pi} seed {seed}"));
            assert!(id.r_squared > 0.99);
        }
    }
}

#[test]
fn excitation_mode_meets_the_accuracy_targets_on_a_staircase() {
    let levels = [
        (0.0, 50),
        (2.0, 200),
        (4.0, 200),
        (6.0, 200),
        (3.0, 200),
        (0.0, 150),
        (-3.0, 200),
        (-6.0, 200),
        (0.0, 200),
    ];
    for (pi, truth) in plants().iter().enumerate() {
        for seed in 0..4u64 {
            for kind in [SignalKind::Position, SignalKind::Speed] {
                let log = record("stairs", truth, &stairs(&levels), kind, 5000 + seed);
                let id =
                    identify::identify(std::slice::from_ref(&log), &Options::default()).unwrap();
                assert_eq!(id.mode, FitMode::Excitation);
                check(
                    &id,
                    truth,
                    &format!("staircase {kind} plant {pi} seed {seed}"),
                );
            }
        }
    }
}

#[test]
fn excitation_mode_on_step_logs_agrees_with_step_mode() {
    let truth = Plant::new(180.0, 0.09, 0.7).unwrap();
    let logs: Vec<Log> = [1.5, 3.0, 6.0, -4.5, 0.5]
        .iter()
        .enumerate()
        .map(|(i, &v)| record("x", &truth, &step(v), SignalKind::Position, 77 + i as u64))
        .collect();
    let opts = Options {
        mode: Mode::Excitation,
        ..Options::default()
    };
    let id = identify::identify(&logs, &opts).unwrap();
    assert_eq!(id.mode, FitMode::Excitation);
    check(&id, &truth, "excitation over step logs");
    let s = identify::identify(&logs, &Options::default()).unwrap();
    check(&s, &truth, "step mode over the same logs");
}
