//! Robustness sweep: the simulation of [`crate::sim`] over a spread of plant constants,
//! in parallel, with the worst case of each figure and the plant that gave it.
//!
//! The loop is designed once for the nominal plant (the caller builds it for every run with
//! the same constants); only the drive that is "really there" varies. That is the question
//! a sweep answers: how badly does the fixed design behave if K, T or the bias are off.

use crate::sim::{simulate, simulate_pair, Controller, Metrics, SimConfig};
use crate::Plant;
use indicatif::ProgressBar;
use rand::{Rng, SeedableRng};
use rayon::prelude::*;
use std::fmt;

/// Relative spread of each plant constant: a run's value lies in `nominal * (1 ± spread)`.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Spread {
    /// Spread of the gain K, fraction (0 ..< 1; 0.2 for ±20 %).
    pub gain: f64,
    /// Spread of the time constant T, fraction (0 ..< 1).
    pub time_constant: f64,
    /// Spread of the friction bias, fraction (0 ..< 1).
    pub bias: f64,
}

impl Spread {
    /// The same spread on all three constants.
    pub fn uniform(fraction: f64) -> Self {
        Spread {
            gain: fraction,
            time_constant: fraction,
            bias: fraction,
        }
    }
}

/// How the runs' plants are chosen.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Sampling {
    /// `points` evenly spaced values per constant from `1 - spread` to `1 + spread` times
    /// nominal (`points = 1`: nominal only), every combination: `points^3` runs.
    Grid {
        /// Values per constant (1 ..= 200).
        points: u32,
    },
    /// `samples` plants, each constant drawn independently and uniformly in its range, from
    /// a seeded generator (`rand`'s `StdRng`), so a seed always gives the same plants with
    /// the same `rand` version.
    MonteCarlo {
        /// Number of runs (1 ..= 10,000,000).
        samples: u32,
        /// Generator seed.
        seed: u64,
    },
}

/// A sweep request outside its valid range.
#[derive(Debug, Clone, PartialEq)]
pub struct SweepError {
    /// The field's name.
    pub field: &'static str,
    /// The value given.
    pub value: f64,
    /// The valid range, in words.
    pub valid: &'static str,
}

impl fmt::Display for SweepError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{} = {} is out of range: valid is {}",
            self.field, self.value, self.valid
        )
    }
}

impl std::error::Error for SweepError {}

/// Largest number of runs one sweep accepts.
pub const MAX_RUNS: u64 = 10_000_000;

/// The plants of a sweep around `nominal`, in run order.
pub fn plants(
    nominal: &Plant,
    spread: &Spread,
    sampling: &Sampling,
) -> Result<Vec<Plant>, SweepError> {
    for (field, v) in [
        ("spread.gain", spread.gain),
        ("spread.time_constant", spread.time_constant),
        ("spread.bias", spread.bias),
    ] {
        if !(v.is_finite() && (0.0..1.0).contains(&v)) {
            return Err(SweepError {
                field,
                value: v,
                valid: "0 <= spread < 1 (fraction of the nominal value)",
            });
        }
    }
    let make = |fk: f64, ft: f64, fb: f64| Plant {
        gain: nominal.gain * (1.0 + spread.gain * fk),
        time_constant_s: nominal.time_constant_s * (1.0 + spread.time_constant * ft),
        bias_volts: nominal.bias_volts * (1.0 + spread.bias * fb),
    };
    match *sampling {
        Sampling::Grid { points } => {
            if !(1..=200).contains(&points) {
                return Err(SweepError {
                    field: "grid",
                    value: f64::from(points),
                    valid: "1 ..= 200 points per constant",
                });
            }
            let f = |i: u32| {
                if points == 1 {
                    0.0
                } else {
                    -1.0 + 2.0 * f64::from(i) / f64::from(points - 1)
                }
            };
            let mut out = Vec::with_capacity((points as usize).pow(3));
            for i in 0..points {
                for j in 0..points {
                    for k in 0..points {
                        out.push(make(f(i), f(j), f(k)));
                    }
                }
            }
            Ok(out)
        }
        Sampling::MonteCarlo { samples, seed } => {
            if samples == 0 || u64::from(samples) > MAX_RUNS {
                return Err(SweepError {
                    field: "samples",
                    value: f64::from(samples),
                    valid: "1 ..= 10000000 runs",
                });
            }
            let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
            let mut u = || rng.random_range(-1.0..=1.0);
            Ok((0..samples).map(|_| make(u(), u(), u())).collect())
        }
    }
}

/// The worst value of one figure over a sweep and the run that gave it.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct WorstCase {
    /// The worst value; `None` when the worst run never got there (never rose to 90 %, never
    /// settled), which ranks worse than any number.
    pub value: Option<f64>,
    /// Index of the run (into the plant list), the first one on ties.
    pub run: usize,
    /// That run's plant.
    pub plant: Plant,
}

impl WorstCase {
    /// Keeps the worse of the two; ties go to the lower run index, so the result does not
    /// depend on how the runs were split between threads.
    fn merge(self, other: WorstCase) -> WorstCase {
        let rank = |w: &WorstCase| w.value.unwrap_or(f64::INFINITY);
        let (a, b) = (rank(&self), rank(&other));
        if b > a || (b == a && other.run < self.run) {
            other
        } else {
            self
        }
    }
}

/// Worst case of each figure of [`Metrics`] (largest value; for the final error, the
/// largest magnitude).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Worst {
    /// Largest overshoot, percent.
    pub overshoot_pct: WorstCase,
    /// Latest peak time, s.
    pub peak_time_s: WorstCase,
    /// Longest rise time, s.
    pub rise_time_s: WorstCase,
    /// Longest settling time, s.
    pub settling_time_s: WorstCase,
    /// Largest |final error|, units.
    pub final_error_abs: WorstCase,
    /// Largest tracking error, units.
    pub max_tracking_error: WorstCase,
    /// Largest peak voltage, V.
    pub peak_volts: WorstCase,
    /// Largest RMS voltage, V.
    pub rms_volts: WorstCase,
    /// Largest voltage total variation, V.
    pub voltage_total_variation: WorstCase,
    /// Most ticks clipped at the supply.
    pub saturated_ticks: WorstCase,
}

impl Worst {
    fn of(m: &Metrics, run: usize, plant: Plant) -> Worst {
        let w = |value: Option<f64>| WorstCase { value, run, plant };
        Worst {
            overshoot_pct: w(Some(m.overshoot_pct)),
            peak_time_s: w(Some(m.peak_time_s)),
            rise_time_s: w(m.rise_time_s),
            settling_time_s: w(m.settling_time_s),
            final_error_abs: w(Some(m.final_error.abs())),
            max_tracking_error: w(Some(m.max_tracking_error)),
            peak_volts: w(Some(m.peak_volts)),
            rms_volts: w(Some(m.rms_volts)),
            voltage_total_variation: w(Some(m.voltage_total_variation)),
            saturated_ticks: w(Some(f64::from(m.saturated_ticks))),
        }
    }

    fn merge(self, o: Worst) -> Worst {
        Worst {
            overshoot_pct: self.overshoot_pct.merge(o.overshoot_pct),
            peak_time_s: self.peak_time_s.merge(o.peak_time_s),
            rise_time_s: self.rise_time_s.merge(o.rise_time_s),
            settling_time_s: self.settling_time_s.merge(o.settling_time_s),
            final_error_abs: self.final_error_abs.merge(o.final_error_abs),
            max_tracking_error: self.max_tracking_error.merge(o.max_tracking_error),
            peak_volts: self.peak_volts.merge(o.peak_volts),
            rms_volts: self.rms_volts.merge(o.rms_volts),
            voltage_total_variation: self
                .voltage_total_variation
                .merge(o.voltage_total_variation),
            saturated_ticks: self.saturated_ticks.merge(o.saturated_ticks),
        }
    }
}

/// What a sweep found.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct SweepReport {
    /// Runs simulated.
    pub runs: usize,
    /// Ticks simulated in all (runs × ticks per run).
    pub ticks: u64,
    /// Runs that had not settled at their last tick.
    pub unsettled_runs: usize,
    /// Runs in which the loop's stall guard tripped.
    pub stalled_runs: usize,
    /// Worst case of each figure; `None` for an empty sweep.
    pub worst: Option<Worst>,
}

#[derive(Clone, Copy)]
struct Partial {
    runs: usize,
    unsettled: usize,
    stalled: usize,
    worst: Option<Worst>,
}

impl Partial {
    const EMPTY: Partial = Partial {
        runs: 0,
        unsettled: 0,
        stalled: 0,
        worst: None,
    };
    fn merge(self, o: Partial) -> Partial {
        Partial {
            runs: self.runs + o.runs,
            unsettled: self.unsettled + o.unsettled,
            stalled: self.stalled + o.stalled,
            worst: match (self.worst, o.worst) {
                (Some(a), Some(b)) => Some(a.merge(b)),
                (a, None) => a,
                (None, b) => b,
            },
        }
    }
}

/// Runs per progress-bar step (and per unit of parallel work).
const CHUNK: usize = 64;

/// Simulates `base` once per plant of `plants` (replacing `base.plant`), in parallel on the
/// rayon pool, with a loop made by `make_loop` for each run, and returns the worst cases.
///
/// `progress` is advanced by one per finished run (pass `ProgressBar::hidden()` for none).
/// The result does not depend on the thread count.
pub fn sweep<C, F>(
    base: &SimConfig,
    plants: &[Plant],
    make_loop: F,
    progress: &ProgressBar,
) -> SweepReport
where
    C: Controller,
    F: Fn() -> C + Sync,
{
    let total = plants
        .par_chunks(CHUNK)
        .enumerate()
        .map(|(c, chunk)| {
            let mut part = Partial::EMPTY;
            let add = |part: &mut Partial, i: usize, m: &Metrics| {
                let plant = chunk[i];
                *part = part.merge(Partial {
                    runs: 1,
                    unsettled: usize::from(m.settling_time_s.is_none()),
                    stalled: usize::from(m.stall_tick.is_some()),
                    worst: Some(Worst::of(m, c * CHUNK + i, plant)),
                });
            };
            let cfg = |plant: &Plant| SimConfig {
                plant: *plant,
                ..*base
            };
            // Two runs at a time, interleaved tick by tick (simulate_pair: the same figures
            // as one by one, but the two runs' serial dependency chains overlap).
            let mut i = 0;
            while i + 1 < chunk.len() {
                let (ca, cb) = (cfg(&chunk[i]), cfg(&chunk[i + 1]));
                let (mut la, mut lb) = (make_loop(), make_loop());
                let [ma, mb] = simulate_pair([&ca, &cb], [&mut la, &mut lb]);
                add(&mut part, i, &ma);
                add(&mut part, i + 1, &mb);
                i += 2;
            }
            if i < chunk.len() {
                let mut ctrl = make_loop();
                let m = simulate(&cfg(&chunk[i]), &mut ctrl);
                add(&mut part, i, &m);
            }
            progress.inc(chunk.len() as u64);
            part
        })
        .reduce(|| Partial::EMPTY, Partial::merge);
    SweepReport {
        runs: total.runs,
        ticks: total.runs as u64 * u64::from(base.ticks),
        unsettled_runs: total.unsettled,
        stalled_runs: total.stalled,
        worst: total.worst,
    }
}
