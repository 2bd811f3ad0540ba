//! A simulated drive for tests, benches and the invented demo logs.
//!
//! The speed obeys the first-order model of [`crate::plant`], stepped exactly for a voltage
//! held over each sample interval. The wheel's actual speed wobbles: over interval `k` it is
//! the model speed plus `n_k`, white Gaussian noise of the given RMS, so a position log
//! integrates the wobble and a speed log records it. Positions are then quantized to whole
//! encoder counts (floor, with a random phase of the first count), as an encoder reports them.

use rand::{Rng, SeedableRng};
use rand_distr::{Distribution, Normal};

use super::fit::{run_model, ModelParams};
use super::log::{IdentifyError, Log, SignalKind};
use crate::Plant;

/// How to record a simulated test.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Recording {
    /// Sample period, seconds (> 0).
    pub sample_period_s: f64,
    /// Encoder count size, distance units; 0 records exact positions.
    pub count_size: f64,
    /// RMS of the speed wobble, units/s; 0 for none.
    pub speed_noise_rms: f64,
    /// What the log records.
    pub kind: SignalKind,
    /// Seed of the noise and of the encoder phase.
    pub seed: u64,
}

/// Simulates `plant` from rest at position 0 under `volts` (one value per row, held for one
/// sample period) and returns the recorded log, named `name`.
///
/// Fails (as a checked [`Log`] would) when `volts` has fewer than two rows or never changes,
/// or when the recording parameters are not finite and positive where required.
pub fn simulate(
    name: &str,
    plant: &Plant,
    volts: &[f64],
    rec: &Recording,
) -> Result<Log, IdentifyError> {
    let bad = |what: &str| IdentifyError::Input {
        file: name.to_string(),
        line: None,
        column: None,
        problem: what.to_string(),
    };
    if !(rec.sample_period_s > 0.0 && rec.sample_period_s.is_finite()) {
        return Err(bad("sample period must be finite and > 0 s"));
    }
    if !(rec.count_size >= 0.0 && rec.count_size.is_finite()) {
        return Err(bad("count size must be finite and >= 0"));
    }
    if !(rec.speed_noise_rms >= 0.0 && rec.speed_noise_rms.is_finite()) {
        return Err(bad("speed noise RMS must be finite and >= 0"));
    }
    let n = volts.len();
    let dt = rec.sample_period_s;
    let time_s: Vec<f64> = (0..n).map(|k| k as f64 * dt).collect();
    let mut rng = rand::rngs::StdRng::seed_from_u64(rec.seed);
    let normal = Normal::new(0.0, rec.speed_noise_rms.max(f64::MIN_POSITIVE))
        .map_err(|e| bad(&format!("noise: {e}")))?;
    let noise: Vec<f64> = (0..n)
        .map(|_| {
            if rec.speed_noise_rms > 0.0 {
                normal.sample(&mut rng)
            } else {
                0.0
            }
        })
        .collect();
    let phase = if rec.count_size > 0.0 {
        rng.random::<f64>() * rec.count_size
    } else {
        0.0
    };
    // Exact model first (no noise), on a log skeleton with the right times and voltages.
    let skeleton = Log {
        name: name.to_string(),
        time_s: time_s.clone(),
        volts: volts.to_vec(),
        kind: rec.kind,
        signal: vec![0.0; n],
        lines: (0..n).map(|k| k + 2).collect(),
        columns: Default::default(),
    };
    let m = ModelParams {
        gain: plant.gain,
        time_constant_s: plant.time_constant_s,
        bias_volts: plant.bias_volts,
    };
    let mut x_model = Vec::with_capacity(n);
    let mut w_model = Vec::with_capacity(n);
    run_model(&skeleton, &m, 0.0, 0.0, |_, x, w| {
        x_model.push(x);
        w_model.push(w);
    });
    let mut drift = 0.0;
    let signal: Vec<f64> = (0..n)
        .map(|k| {
            if k > 0 {
                drift += noise[k - 1] * dt;
            }
            match rec.kind {
                SignalKind::Speed => w_model[k] + noise[k],
                SignalKind::Position => {
                    let x = x_model[k] + drift;
                    if rec.count_size > 0.0 {
                        ((x + phase) / rec.count_size).floor() * rec.count_size
                    } else {
                        x
                    }
                }
            }
        })
        .collect();
    Log::new(name, time_s, volts.to_vec(), rec.kind, signal)
}

/// Voltages of a step test: `before_s` seconds at 0 V, then `after_s` seconds at `volts`,
/// sampled every `sample_period_s`.
pub fn step_volts(volts: f64, before_s: f64, after_s: f64, sample_period_s: f64) -> Vec<f64> {
    let n0 = (before_s / sample_period_s).round().max(1.0) as usize;
    let n1 = (after_s / sample_period_s).round().max(1.0) as usize;
    let mut v = vec![0.0; n0];
    v.extend(std::iter::repeat_n(volts, n1));
    v
}

/// Voltages of a staircase: each `(volts, seconds)` level in turn, sampled every
/// `sample_period_s`.
pub fn staircase_volts(levels: &[(f64, f64)], sample_period_s: f64) -> Vec<f64> {
    let mut v = Vec::new();
    for &(volts, secs) in levels {
        let n = (secs / sample_period_s).round().max(1.0) as usize;
        v.extend(std::iter::repeat_n(volts, n));
    }
    v
}
