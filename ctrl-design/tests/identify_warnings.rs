//! Each warning of `identify` appears on data made to trigger it, and not on clean data.

use ctrl_design::identify::{
    self,
    simulate::{simulate, staircase_volts, step_volts, Recording},
    Identification, Log, Mode, Options, SignalKind,
};
use ctrl_design::Plant;

fn rec(kind: SignalKind, count: f64, seed: u64) -> Recording {
    Recording {
        sample_period_s: 0.002,
        count_size: count,
        speed_noise_rms: 0.5,
        kind,
        seed,
    }
}

fn steps(truth: &Plant, r: &Recording, after_s: f64, volts: &[f64]) -> Vec<Log> {
    volts
        .iter()
        .enumerate()
        .map(|(i, &v)| {
            simulate(
                &format!("step{i}.csv"),
                truth,
                &step_volts(v, 0.1, after_s, r.sample_period_s),
                &Recording {
                    seed: r.seed + i as u64,
                    ..*r
                },
            )
            .unwrap()
        })
        .collect()
}

fn has(id: &Identification, words: &str) -> bool {
    id.warnings.iter().any(|w| w.contains(words))
}

fn truth() -> Plant {
    Plant::new(400.0, 0.08, 0.6).unwrap()
}

#[test]
fn clean_step_logs_give_no_warnings() {
    let logs = steps(
        &truth(),
        &rec(SignalKind::Position, 0.5, 1),
        0.9,
        &[2.0, 4.0, -6.0],
    );
    let id = identify::identify(&logs, &Options::default()).unwrap();
    assert!(id.warnings.is_empty(), "{:?}", id.warnings);
    assert!(id.r_squared > 0.99);
}

#[test]
fn below_bias() {
    let logs = steps(
        &truth(),
        &rec(SignalKind::Position, 0.5, 2),
        0.9,
        &[2.0, 4.0, 0.4],
    );
    let id = identify::identify(&logs, &Options::default()).unwrap();
    assert!(
        has(&id, "step2.csv: step to 0.4 V is below the bias"),
        "{:?}",
        id.warnings
    );
    assert!(!id.per_log[2].moved);
}

#[test]
fn never_steady() {
    // 0.12 s after the step is 1.5 time constants
    let logs = steps(
        &truth(),
        &rec(SignalKind::Position, 0.5, 3),
        0.12,
        &[2.0, 4.0, 6.0],
    );
    let id = identify::identify(&logs, &Options::default()).unwrap();
    assert!(has(&id, "never reaches steady state"), "{:?}", id.warnings);
}

#[test]
fn too_few_samples_per_time_constant() {
    let fast = Plant::new(400.0, 0.006, 0.6).unwrap();
    let logs = steps(
        &fast,
        &rec(SignalKind::Speed, 0.0, 4),
        0.5,
        &[2.0, 4.0, 6.0],
    );
    let id = identify::identify(&logs, &Options::default()).unwrap();
    assert!(has(&id, "samples per time constant"), "{:?}", id.warnings);
}

#[test]
fn irregular_sampling() {
    let mut logs = steps(
        &truth(),
        &rec(SignalKind::Speed, 0.0, 5),
        0.9,
        &[2.0, 4.0, 6.0],
    );
    // stretch one interval of the first log to three periods (a dropped pair of samples)
    let l = &mut logs[0];
    for t in l.time_s.iter_mut().skip(200) {
        *t += 0.004;
    }
    let id = identify::identify(&logs, &Options::default()).unwrap();
    assert!(
        has(&id, "step0.csv: irregular sampling"),
        "{:?}",
        id.warnings
    );
}

#[test]
fn coarse_speed_resolution() {
    // 40-unit counts: the position lags its asymptote by K * 1.4 V * T / 40 = 1.1 counts
    let logs = steps(
        &truth(),
        &rec(SignalKind::Position, 40.0, 6),
        0.9,
        &[2.0, 4.0, 6.0],
    );
    let id = identify::identify(&logs, &Options::default()).unwrap();
    assert!(has(&id, "speed resolution too coarse"), "{:?}", id.warnings);
    // speed logs quantized to 100 units/s
    let mut logs = steps(
        &truth(),
        &rec(SignalKind::Speed, 0.0, 7),
        0.9,
        &[2.0, 4.0, 6.0],
    );
    for l in &mut logs {
        l.signal
            .iter_mut()
            .for_each(|s| *s = (*s / 100.0).round() * 100.0);
    }
    let id = identify::identify(&logs, &Options::default()).unwrap();
    assert!(has(&id, "speed resolution too coarse"), "{:?}", id.warnings);
}

#[test]
fn clipped_speed() {
    let mut logs = steps(
        &truth(),
        &rec(SignalKind::Speed, 0.0, 8),
        0.9,
        &[2.0, 4.0, 6.0],
    );
    // the speed sensor tops out at 1500 units/s; the 6 V step wants 2160
    logs[2].signal.iter_mut().for_each(|s| *s = s.min(1500.0));
    let id = identify::identify(&logs, &Options::default()).unwrap();
    assert!(
        has(&id, "step2.csv: clipped or saturated"),
        "{:?}",
        id.warnings
    );
    let clean = steps(
        &truth(),
        &rec(SignalKind::Speed, 0.0, 8),
        0.9,
        &[2.0, 4.0, 6.0],
    );
    let id = identify::identify(&clean, &Options::default()).unwrap();
    assert!(!has(&id, "clipped"), "{:?}", id.warnings);
}

#[test]
fn excitation_mode_warns_about_rows_below_bias_and_reports_per_log_spread() {
    let t = truth();
    let v = staircase_volts(
        &[(0.0, 0.1), (0.3, 0.3), (3.0, 0.4), (6.0, 0.4), (-4.0, 0.4)],
        0.002,
    );
    let logs: Vec<Log> = (0..3)
        .map(|s| {
            simulate(
                "stairs.csv",
                &t,
                &v,
                &rec(SignalKind::Position, 0.5, 20 + s),
            )
            .unwrap()
        })
        .collect();
    let opts = Options {
        mode: Mode::Auto,
        unit: "mm".into(),
    };
    let id = identify::identify(&logs, &opts).unwrap();
    assert!(has(&id, "below the bias"), "{:?}", id.warnings);
    assert!(id.spread.gain.is_some() && id.spread.time_constant_s.is_some());
    assert!(id.per_log.iter().all(|l| l.gain.is_some()));
    let json = serde_json::to_value(&id).unwrap();
    for key in [
        "gain",
        "time_constant_s",
        "bias_volts",
        "r_squared",
        "residual_rms",
    ] {
        assert!(json[key].is_number(), "{key}: {json}");
    }
    assert_eq!(json["per_log"].as_array().unwrap().len(), 3);
    assert!(json["warnings"].is_array());
    assert_eq!(json["unit"], "mm");
}
