//! Identify a drive's [`Plant`] (gain, time constant, friction bias) from logged tests.
//!
//! Two ways in, chosen automatically by [`identify`] (or called directly):
//!
//! - [`identify_steps`]: every log is one voltage step. Each step is fitted on its own by
//!   least squares ([`fit::fit_step`]: steady speed and time constant, on the position itself
//!   for position logs), then gain and bias come from the steady speeds across voltages
//!   (`speed = K * sign(v) * max(|v| - bias, 0)`, [`fit::fit_steady_line`]) and the time
//!   constant is pooled across steps (inverse-variance weighted mean).
//! - [`identify_excitation`]: any voltage history (staircase, recorded profile run). The
//!   discrete first-order model with bias is fitted over whole logs: an equation-error
//!   regression, linear in its parameters, gives a start, and an output-error least-squares
//!   fit of the recorded signal itself ([`fit::fit_output_error`]) gives the answer.
//!
//! Fit quality is reported on speed (for position logs, speed from central differences over a
//! window, applied identically to data and model), as RMS residual and R², per log and
//! pooled, with warnings for data that weakens the answer.
//!
//! ```
//! use ctrl_design::identify::{self, simulate::{simulate, step_volts, Recording}, Options, SignalKind};
//! use ctrl_design::Plant;
//! let truth = Plant::new(400.0, 0.08, 0.5).unwrap();
//! let rec = Recording { sample_period_s: 0.002, count_size: 1.0, speed_noise_rms: 0.0,
//!                       kind: SignalKind::Position, seed: 1 };
//! let logs: Vec<_> = [2.0, 4.0, -6.0].iter().enumerate()
//!     .map(|(i, &v)| simulate(&format!("step{i}"), &truth, &step_volts(v, 0.1, 0.8, 0.002), &rec).unwrap())
//!     .collect();
//! let id = identify::identify(&logs, &Options::default()).unwrap();
//! assert!((id.plant.gain / 400.0 - 1.0).abs() < 0.01);
//! assert!((id.plant.time_constant_s / 0.08 - 1.0).abs() < 0.03);
//! assert!((id.plant.bias_volts - 0.5).abs() < 0.05);
//! ```

use rayon::prelude::*;

pub mod fit;
mod log;
mod plot;
pub mod simulate;

pub use fit::{ModelParams, OutputErrorFit, SteadyLine, StepFit};
pub use log::{Column, Columns, IdentifyError, Log, SignalKind};
pub use plot::plot_svg;

use crate::Plant;
use fit::{
    equation_error_estimate, exceeds, fit_initial_state, fit_output_error, fit_steady_line,
    fit_step, median_dt, noise_level, resolution, run_model, smoothing_half_window,
};

/// Which method to use.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Mode {
    /// Step mode when every log has exactly one change of voltage, else excitation mode.
    #[default]
    Auto,
    /// [`identify_steps`].
    Step,
    /// [`identify_excitation`].
    Excitation,
}

/// Settings of an identification.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Options {
    /// Method; see [`Mode`].
    pub mode: Mode,
    /// Name of the distance unit, used in messages and output (empty: "unit").
    pub unit: String,
}

/// Spread of the constants across logs.
#[derive(Debug, Clone, Copy, PartialEq, Default, serde::Serialize)]
pub struct Spread {
    /// Step mode: standard error of the gain from the steady-speed line (three or more
    /// voltages). Excitation mode: sample standard deviation of the per-log gains (two or
    /// more logs). Units/s per volt.
    pub gain: Option<f64>,
    /// Sample standard deviation of the per-log time constants, seconds (two or more logs).
    pub time_constant_s: Option<f64>,
    /// As for `gain`, for the bias, volts.
    pub bias_volts: Option<f64>,
}

/// What one log contributed and how well the final constants fit it.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct LogFit {
    /// The log's name (file path).
    pub name: String,
    /// What it records.
    pub signal: SignalKind,
    /// Number of rows.
    pub rows: usize,
    /// Median sample period, seconds.
    pub sample_period_s: f64,
    /// Step mode: voltage after the step, volts.
    pub step_volts: Option<f64>,
    /// Step mode: this step's own least-squares steady speed, units/s.
    pub steady_speed: Option<f64>,
    /// Whether the wheel moved (step mode: travel after the step beyond three counts or
    /// three noise levels; excitation mode: always true).
    pub moved: bool,
    /// Excitation mode, two or more logs, this log alone identifiable (two or more nonzero
    /// voltage magnitudes): its own gain, units/s per volt.
    pub gain: Option<f64>,
    /// This log's own time constant (step fit, or excitation fit of this log alone), s.
    pub time_constant_s: Option<f64>,
    /// Excitation mode with two or more logs: this log's own bias, volts.
    pub bias_volts: Option<f64>,
    /// Fitted position at the first row for the final constants (position logs), units.
    pub initial_position: Option<f64>,
    /// Fitted speed at the first row for the final constants, units/s.
    pub initial_speed: f64,
    /// Half-width of the central difference used to get speed from position, rows
    /// (0 for speed logs, which are compared sample by sample).
    pub speed_window_rows: usize,
    /// RMS of measured minus model speed for the final constants, units/s.
    pub residual_rms: f64,
    /// 1 - (residual sum of squares) / (sum of squares of speed about its mean).
    pub r_squared: f64,
    /// Position logs: RMS of measured minus model position, units.
    pub position_residual_rms: Option<f64>,
}

/// Which method produced an [`Identification`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FitMode {
    /// Per-step fits, steady-speed line, pooled time constant.
    Step,
    /// Output-error fit of the discrete model over whole logs.
    Excitation,
}

/// The answer: the plant and how much to trust it.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Identification {
    /// Method used.
    pub mode: FitMode,
    /// Distance unit name.
    pub unit: String,
    /// Gain (units/s per volt), time constant (s), bias (volts); serialized flat as
    /// `gain`, `time_constant_s`, `bias_volts`.
    #[serde(flatten)]
    pub plant: Plant,
    /// Pooled R² of speed over all logs (1 - total residual / total variation about each
    /// log's mean speed).
    pub r_squared: f64,
    /// Pooled RMS speed residual over all logs, units/s.
    pub residual_rms: f64,
    /// Spread of the per-log estimates.
    pub spread: Spread,
    /// One entry per log, in the order given.
    pub per_log: Vec<LogFit>,
    /// Things that weaken the answer, each naming its log.
    pub warnings: Vec<String>,
}

/// Measured and model speed of one log, for plots.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct SpeedCurves {
    /// Times, seconds.
    pub time_s: Vec<f64>,
    /// Measured speed (position logs: central differences), units/s.
    pub measured: Vec<f64>,
    /// Model speed treated the same way, units/s.
    pub model: Vec<f64>,
}

fn params(p: &Plant) -> ModelParams {
    ModelParams {
        gain: p.gain,
        time_constant_s: p.time_constant_s,
        bias_volts: p.bias_volts,
    }
}

/// Measured and model speed of `log` under `plant`, started from the fitted initial state in
/// `fit`, both taken through the same central difference (position logs).
pub fn speed_curves(log: &Log, fit: &LogFit, plant: &Plant) -> SpeedCurves {
    let mut model_sig = Vec::with_capacity(log.len());
    run_model(
        log,
        &params(plant),
        fit.initial_position.unwrap_or(0.0),
        fit.initial_speed,
        |_, x, w| {
            model_sig.push(match log.kind {
                SignalKind::Position => x,
                SignalKind::Speed => w,
            })
        },
    );
    let n = log.len();
    match log.kind {
        SignalKind::Speed => SpeedCurves {
            time_s: log.time_s.clone(),
            measured: log.signal.clone(),
            model: model_sig,
        },
        SignalKind::Position => {
            let m = fit.speed_window_rows.max(1);
            let mut c = SpeedCurves::default();
            if n <= 2 * m {
                return c;
            }
            for k in m..n - m {
                let dt = log.time_s[k + m] - log.time_s[k - m];
                c.time_s.push(log.time_s[k]);
                c.measured
                    .push((log.signal[k + m] - log.signal[k - m]) / dt);
                c.model.push((model_sig[k + m] - model_sig[k - m]) / dt);
            }
            c
        }
    }
}

/// Sums for R² and RMS.
#[derive(Default, Clone, Copy)]
struct Quality {
    ss_res: f64,
    ss_tot: f64,
    count: usize,
}

fn quality_of(c: &SpeedCurves) -> Quality {
    let n = c.measured.len();
    if n == 0 {
        return Quality::default();
    }
    let mean = c.measured.iter().sum::<f64>() / n as f64;
    let ss_res = c
        .measured
        .iter()
        .zip(&c.model)
        .map(|(a, b)| (a - b).powi(2))
        .sum();
    let ss_tot = c.measured.iter().map(|a| (a - mean).powi(2)).sum();
    Quality {
        ss_res,
        ss_tot,
        count: n,
    }
}

fn r2(q: &Quality) -> f64 {
    if q.ss_tot > 0.0 {
        1.0 - q.ss_res / q.ss_tot
    } else {
        f64::NAN
    }
}

fn rms(q: &Quality) -> f64 {
    if q.count > 0 {
        (q.ss_res / q.count as f64).sqrt()
    } else {
        f64::NAN
    }
}

fn std_dev(v: &[f64]) -> Option<f64> {
    if v.len() < 2 {
        return None;
    }
    let m = v.iter().sum::<f64>() / v.len() as f64;
    Some((v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (v.len() - 1) as f64).sqrt())
}

fn unit_name(opts: &Options) -> String {
    if opts.unit.trim().is_empty() {
        "unit".into()
    } else {
        opts.unit.trim().to_string()
    }
}

/// Identifies the plant from `logs`, choosing the method by `opts.mode`.
pub fn identify(logs: &[Log], opts: &Options) -> Result<Identification, IdentifyError> {
    let mode = match opts.mode {
        Mode::Auto => {
            if !logs.is_empty() && logs.iter().all(|l| l.voltage_changes().len() == 1) {
                Mode::Step
            } else {
                Mode::Excitation
            }
        }
        m => m,
    };
    match mode {
        Mode::Step => identify_steps(logs, opts),
        _ => identify_excitation(logs, opts),
    }
}

fn no_logs() -> IdentifyError {
    IdentifyError::Unidentifiable {
        message: "no logs given".into(),
    }
}

/// Step mode: each log one voltage step (see the module docs).
pub fn identify_steps(logs: &[Log], opts: &Options) -> Result<Identification, IdentifyError> {
    if logs.is_empty() {
        return Err(no_logs());
    }
    let unit = unit_name(opts);
    let fits: Vec<StepFit> = logs
        .par_iter()
        .map(fit_step)
        .collect::<Result<Vec<_>, _>>()?;
    let mut warnings = Vec::new();
    let moved: Vec<bool> = logs
        .iter()
        .zip(&fits)
        .map(|(l, f)| match l.kind {
            SignalKind::Position => {
                let after = &l.signal[f.step_row..];
                let travel = after.iter().fold(f64::NEG_INFINITY, |a, &b| a.max(b))
                    - after.iter().fold(f64::INFINITY, |a, &b| a.min(b));
                let q = resolution(&l.signal).max(3.0 * noise_level(&l.signal));
                travel > 3.0 * q
            }
            SignalKind::Speed => {
                let sigma = noise_level(&l.signal);
                f.steady_speed.abs().max(f.initial_speed.abs()) > 3.0 * sigma
            }
        })
        .collect();
    let mut points = Vec::new();
    let mut stuck = Vec::new();
    for ((l, f), &mv) in logs.iter().zip(&fits).zip(&moved) {
        if !mv {
            stuck.push((l, f));
        } else if f.volts_after != 0.0 {
            points.push((f.volts_after, f.steady_speed));
            if f.steady_speed * f.volts_after < 0.0 {
                warnings.push(format!(
                    "{}: steady speed {:.4} {unit}/s is opposite in sign to the step voltage {} V; check the sign convention of the columns",
                    l.name, f.steady_speed, f.volts_after
                ));
            }
        }
    }
    let line = fit_steady_line(&points)?;
    let (mut gain, mut bias) = (line.gain, line.bias_volts);
    if bias < 0.0 {
        warnings.push(format!(
            "the steady-speed line crosses zero speed at {bias:.3} V (negative bias); bias set to 0 and gain refitted through the origin"
        ));
        let sxy: f64 = points.iter().map(|(v, w)| v.abs() * w * v.signum()).sum();
        let sxx: f64 = points.iter().map(|(v, _)| v * v).sum();
        gain = sxy / sxx;
        bias = 0.0;
    }
    for (l, f) in &stuck {
        if f.volts_after.abs() > bias {
            warnings.push(format!(
                "{}: the wheel did not move at {} V although the fitted bias is {bias:.3} V; the bias may depend on direction or position",
                l.name, f.volts_after
            ));
        } else {
            warnings.push(format!(
                "{}: step to {} V is below the bias ({bias:.3} V): the wheel did not move; used only as a bound on the bias",
                l.name, f.volts_after
            ));
        }
    }
    // Pool T over moving steps, weighted by 1 / var(T).
    let mut num = 0.0;
    let mut den = 0.0;
    let mut ts = Vec::new();
    for ((l, f), &mv) in logs.iter().zip(&fits).zip(&moved) {
        if !mv {
            continue;
        }
        if f.at_search_bound {
            warnings.push(format!(
                "{}: the time constant runs to the end of the searched range ({:.4} s); not pooled",
                l.name, f.time_constant_s
            ));
            continue;
        }
        ts.push(f.time_constant_s);
        let var = (f.time_constant_s * f.time_constant_rel_se).powi(2);
        if var.is_finite() && var > 0.0 {
            num += f.time_constant_s / var;
            den += 1.0 / var;
        }
    }
    let t = if den > 0.0 {
        num / den
    } else if !ts.is_empty() {
        ts.iter().sum::<f64>() / ts.len() as f64
    } else {
        return Err(IdentifyError::Unidentifiable {
            message: "no step moved the wheel clearly enough to fit a time constant".into(),
        });
    };
    let plant = Plant::new(gain, t, bias).map_err(|e| IdentifyError::Unidentifiable {
        message: format!("the fitted constants are not physical: {e}"),
    })?;
    let per_log_t: Vec<Option<f64>> = fits
        .iter()
        .zip(&moved)
        .map(|(f, &mv)| mv.then_some(f.time_constant_s))
        .collect();
    let spread = Spread {
        gain: line.gain_se,
        time_constant_s: std_dev(&ts),
        bias_volts: line.bias_se,
    };
    finish(
        FitMode::Step,
        logs,
        plant,
        unit,
        spread,
        warnings,
        |j| {
            (
                Some(fits[j].volts_after),
                Some(fits[j].steady_speed),
                moved[j],
                None,
                per_log_t[j],
                None,
            )
        },
        None,
    )
}

type PerLogExtra = (
    Option<f64>,
    Option<f64>,
    bool,
    Option<f64>,
    Option<f64>,
    Option<f64>,
);

/// Common end of both modes: per-log quality, warnings, pooled figures.
#[allow(clippy::too_many_arguments)]
fn finish(
    mode: FitMode,
    logs: &[Log],
    plant: Plant,
    unit: String,
    spread: Spread,
    mut warnings: Vec<String>,
    extra: impl Fn(usize) -> PerLogExtra + Sync,
    initial: Option<&[(Option<f64>, f64)]>,
) -> Result<Identification, IdentifyError> {
    let m = params(&plant);
    let results: Vec<(LogFit, Quality, Vec<String>)> = logs
        .par_iter()
        .enumerate()
        .map(|(j, log)| {
            let init = match initial {
                Some(i) => i.get(j).copied(),
                None => fit_initial_state(log, &m),
            };
            let (x0, w0) = init.unwrap_or((Some(log.signal[0]), 0.0));
            let dt = median_dt(log);
            let window = match log.kind {
                SignalKind::Speed => 0,
                SignalKind::Position => {
                    let cap = ((plant.time_constant_s / (2.0 * dt)).floor() as usize).max(1);
                    smoothing_half_window(log).min(cap)
                }
            };
            let (step_volts, steady_speed, moved, g, t, b) = extra(j);
            let mut fit = LogFit {
                name: log.name.clone(),
                signal: log.kind,
                rows: log.len(),
                sample_period_s: dt,
                step_volts,
                steady_speed,
                moved,
                gain: g,
                time_constant_s: t,
                bias_volts: b,
                initial_position: x0,
                initial_speed: w0,
                speed_window_rows: window,
                residual_rms: f64::NAN,
                r_squared: f64::NAN,
                position_residual_rms: None,
            };
            let curves = speed_curves(log, &fit, &plant);
            let q = quality_of(&curves);
            fit.residual_rms = rms(&q);
            fit.r_squared = r2(&q);
            if log.kind == SignalKind::Position {
                let mut ss = 0.0;
                run_model(log, &m, x0.unwrap_or(0.0), w0, |k, x, _| {
                    ss += (log.signal[k] - x).powi(2)
                });
                fit.position_residual_rms = Some((ss / log.len() as f64).sqrt());
            }
            let w = log_warnings(log, &fit, &plant, &curves, &unit, mode);
            (fit, q, w)
        })
        .collect();
    let mut total = Quality::default();
    let mut per_log = Vec::with_capacity(results.len());
    for (fit, q, w) in results {
        total.ss_res += q.ss_res;
        total.ss_tot += q.ss_tot;
        total.count += q.count;
        per_log.push(fit);
        warnings.extend(w);
    }
    Ok(Identification {
        mode,
        unit,
        plant,
        r_squared: r2(&total),
        residual_rms: rms(&total),
        spread,
        per_log,
        warnings,
    })
}

/// Checks of one log against the final constants.
fn log_warnings(
    log: &Log,
    fit: &LogFit,
    plant: &Plant,
    curves: &SpeedCurves,
    unit: &str,
    mode: FitMode,
) -> Vec<String> {
    let mut w = Vec::new();
    let name = &log.name;
    let n = log.len();
    let t = plant.time_constant_s;
    let dts: Vec<f64> = log.time_s.windows(2).map(|p| p[1] - p[0]).collect();
    let dt = fit.sample_period_s;
    let (dmin, dmax) = dts
        .iter()
        .fold((f64::INFINITY, 0.0f64), |(a, b), &d| (a.min(d), b.max(d)));
    if dmax > 1.5 * dt || dmin < 0.5 * dt {
        w.push(format!(
            "{name}: irregular sampling: intervals from {:.3} ms to {:.3} ms (median {:.3} ms); the fit uses the actual times, but check the logger",
            dmin * 1e3,
            dmax * 1e3,
            dt * 1e3
        ));
    }
    if t / dt < 5.0 {
        w.push(format!(
            "{name}: only {:.1} samples per time constant ({:.4} s at {:.3} ms); log faster (10 or more per time constant) for a trustworthy T",
            t / dt,
            t,
            dt * 1e3
        ));
    }
    // Longest stretch of constant voltage after which steady state could be seen.
    let mut longest = 0.0f64;
    let mut start = 0usize;
    for k in 1..=n {
        if k == n || log.volts[k] != log.volts[k - 1] {
            let end = log.time_s[k.min(n - 1)];
            longest = longest.max(end - log.time_s[start]);
            start = k;
        }
    }
    if longest < 3.0 * t {
        let what = match mode {
            FitMode::Step => "after the step",
            FitMode::Excitation => "in its longest constant-voltage stretch",
        };
        w.push(format!(
            "{name}: never reaches steady state: {longest:.3} s {what} is {:.1} time constants (3 or more wanted); the steady speed is extrapolated",
            longest / t
        ));
    }
    if mode == FitMode::Excitation {
        let below = log
            .volts
            .iter()
            .filter(|v| **v != 0.0 && v.abs() <= plant.bias_volts)
            .count();
        if below > 0 {
            w.push(format!(
                "{name}: {below} rows command a voltage below the bias ({:.3} V), where the wheel should not move",
                plant.bias_volts
            ));
        }
    }
    // Resolution.
    let peak = curves
        .model
        .iter()
        .fold(0.0f64, |a, &b| a.max(b.abs()))
        .max(fit.steady_speed.unwrap_or(0.0).abs());
    let q = resolution(&log.signal);
    if fit.moved && peak > 0.0 && q > 0.0 {
        match log.kind {
            SignalKind::Position => {
                let lag_counts = peak * t / q;
                if lag_counts < 10.0 {
                    w.push(format!(
                        "{name}: speed resolution too coarse: one count ({q:.5} {unit}) per sample is {:.0} {unit}/s and the position lags its asymptote by only {lag_counts:.1} counts at the peak speed; T rests on few counts (finer encoder or higher voltage)",
                        q / dt
                    ));
                }
            }
            SignalKind::Speed => {
                if q > 0.05 * peak {
                    w.push(format!(
                        "{name}: speed resolution too coarse: steps of {q:.4} {unit}/s are {:.0} % of the peak speed {peak:.3} {unit}/s",
                        100.0 * q / peak
                    ));
                }
            }
        }
    }
    // Clipping (speed logs): the extreme value repeated exactly for a run of rows that the
    // signal entered while still changing fast, as a sensor or a limiter at its end stop does.
    let mut clipped_run_found = false;
    if log.kind == SignalKind::Speed {
        if let Some((first, last, value)) = flat_extreme_run(log, t, dt, q) {
            clipped_run_found = true;
            w.push(format!(
                "{name}: clipped or saturated: speed held exactly at {value} {unit}/s on lines {}-{}, entered while still rising; exclude that segment or lower the voltage",
                log.lines.get(first).copied().unwrap_or(0),
                log.lines.get(last).copied().unwrap_or(0),
            ));
        }
    }
    // Clipping: measured speed pinned at its extreme while the model wants more.
    let sres = fit.residual_rms;
    let mpeak = curves.measured.iter().fold(0.0f64, |a, &b| a.max(b.abs()));
    if mpeak > 0.0 && sres.is_finite() {
        let step = (0.005 * mpeak).max(match log.kind {
            SignalKind::Speed => q,
            SignalKind::Position => 0.0,
        });
        let min_run = 10usize.max((t / dt / 2.0) as usize);
        let mut run = 0usize;
        let mut first = 0usize;
        let mut reported = false;
        for (i, (&s, &mm)) in curves.measured.iter().zip(&curves.model).enumerate() {
            let pinned = s.abs() >= mpeak - step && mm.abs() > s.abs() + 3.0 * sres.max(step);
            if pinned {
                if run == 0 {
                    first = i;
                }
                run += 1;
            } else {
                run = 0;
            }
            if run >= min_run && !reported && !clipped_run_found {
                reported = true;
                let t0 = curves.time_s.get(first).copied().unwrap_or(0.0);
                w.push(format!(
                    "{name}: clipped or saturated: speed held at {:.4} {unit}/s from t = {t0:.3} s while the model asks for more; exclude that segment or lower the voltage",
                    s
                ));
            }
        }
    }
    w
}

/// Longest run (first row, last row, value) of rows holding a speed log's largest or smallest
/// value exactly, at least 10 rows long, entered with a change over the preceding `T/5`
/// larger than the noise, the resolution and 2 % of the value.
fn flat_extreme_run(log: &Log, t: f64, dt: f64, q: f64) -> Option<(usize, usize, f64)> {
    let s = &log.signal;
    let hi = s.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let lo = s.iter().copied().fold(f64::INFINITY, f64::min);
    let sigma = noise_level(s);
    let m = ((t / (5.0 * dt)).round() as usize).max(3);
    let mut best: Option<(usize, usize, f64)> = None;
    for ext in [hi, lo] {
        if ext == 0.0 {
            continue;
        }
        let tol = 1e-9 * ext.abs();
        let mut k = 0;
        while k < s.len() {
            if (s[k] - ext).abs() <= tol {
                let start = k;
                while k < s.len() && (s[k] - ext).abs() <= tol {
                    k += 1;
                }
                let len = k - start;
                let entered_fast = start >= m
                    && (s[start] - s[start - m]).abs()
                        > (5.0 * sigma).max(3.0 * q).max(0.02 * ext.abs());
                let longer = best.is_none_or(|(a, b, _)| len > b - a + 1);
                if len >= 10 && entered_fast && longer {
                    best = Some((start, k - 1, ext));
                }
            } else {
                k += 1;
            }
        }
    }
    best
}

/// Excitation mode: the discrete first-order model fitted over whole logs (see the module
/// docs). Works for any voltage history with at least two different nonzero voltage
/// magnitudes across the logs.
pub fn identify_excitation(logs: &[Log], opts: &Options) -> Result<Identification, IdentifyError> {
    if logs.is_empty() {
        return Err(no_logs());
    }
    let unit = unit_name(opts);
    let mags = voltage_magnitudes(logs.iter());
    if mags.len() < 2 {
        return Err(IdentifyError::Unidentifiable {
            message: format!(
                "gain and bias need at least two different nonzero voltage magnitudes across the logs; found {:?} V",
                mags
            ),
        });
    }
    let refs: Vec<&Log> = logs.iter().collect();
    let fit = fit_joint(&refs)?;
    let plant = Plant::new(
        fit.params.gain,
        fit.params.time_constant_s,
        fit.params.bias_volts,
    )
    .map_err(|e| IdentifyError::Unidentifiable {
        message: format!(
            "the fitted constants are not physical ({e}); check the sign convention of the columns and that the logs move the wheel"
        ),
    })?;
    let singles: Vec<Option<ModelParams>> = if logs.len() >= 2 {
        logs.par_iter()
            .map(|l| {
                if voltage_magnitudes(std::iter::once(l)).len() >= 2 {
                    fit_joint(&[l]).ok().map(|f| f.params)
                } else {
                    None
                }
            })
            .collect()
    } else {
        vec![None]
    };
    let collect =
        |f: fn(&ModelParams) -> f64| -> Vec<f64> { singles.iter().flatten().map(f).collect() };
    let spread = Spread {
        gain: std_dev(&collect(|p| p.gain)),
        time_constant_s: std_dev(&collect(|p| p.time_constant_s)),
        bias_volts: std_dev(&collect(|p| p.bias_volts)),
    };
    let initial = fit.initial.clone();
    finish(
        FitMode::Excitation,
        logs,
        plant,
        unit,
        spread,
        Vec::new(),
        |j| {
            let s = singles.get(j).copied().flatten();
            (
                None,
                None,
                true,
                s.map(|p| p.gain),
                s.map(|p| p.time_constant_s),
                s.map(|p| p.bias_volts),
            )
        },
        Some(&initial),
    )
}

/// Distinct nonzero voltage magnitudes in the logs, ascending.
fn voltage_magnitudes<'a>(logs: impl Iterator<Item = &'a Log>) -> Vec<f64> {
    let mut mags: Vec<f64> = logs
        .flat_map(|l| l.volts.iter().map(|v| v.abs()))
        .filter(|v| *v > 0.0)
        .collect();
    mags.sort_by(f64::total_cmp);
    mags.dedup_by(|a, b| (*a - *b).abs() <= 1e-9 * b.abs());
    mags
}

/// Output-error fit from the equation-error start, with a fallback start when the
/// regression is unusable; keeps the better of the two.
fn fit_joint(logs: &[&Log]) -> Result<OutputErrorFit, IdentifyError> {
    // Crude start from the data's scales: T of 20 samples, no bias, gain from peak speed.
    let fallback = || {
        let dt = logs
            .iter()
            .map(|l| median_dt(l))
            .fold(f64::INFINITY, f64::min);
        let max_v = logs
            .iter()
            .flat_map(|l| l.volts.iter())
            .fold(0.0f64, |a, &b| a.max(b.abs()));
        let peak = logs
            .iter()
            .map(|l| {
                fit::smoothed_speed(l, smoothing_half_window(l))
                    .iter()
                    .fold(0.0f64, |a, &b| a.max(b.abs()))
            })
            .fold(0.0f64, f64::max);
        ModelParams {
            gain: (peak / max_v.max(1e-9)).max(1e-9),
            time_constant_s: 20.0 * dt,
            bias_volts: 0.0,
        }
    };
    let rows: usize = logs.iter().map(|l| l.len()).sum();
    let poor = |f: &OutputErrorFit| !exceeds(f.params.gain, 0.0) || f.cost > 100.0 * rows as f64;
    let mut best: Option<OutputErrorFit> = None;
    let mut last_err = None;
    // Starts, tried in turn (each computed only when the ones before it fell short).
    let scaled = |scale: f64| {
        let f = fallback();
        ModelParams {
            time_constant_s: f.time_constant_s * scale,
            ..f
        }
    };
    let starts: [&dyn Fn() -> Option<ModelParams>; 5] = [
        &|| fit::segment_estimate(logs),
        &|| equation_error_estimate(logs),
        &|| Some(fallback()),
        &|| Some(scaled(0.2)),
        &|| Some(scaled(5.0)),
    ];
    for start in starts {
        let Some(s) = start() else { continue };
        match fit_output_error(logs, &s) {
            Ok(f) => {
                let better = match &best {
                    None => true,
                    Some(b) => {
                        (f.params.gain > 0.0 && f.cost < b.cost) || !exceeds(b.params.gain, 0.0)
                    }
                };
                if better {
                    best = Some(f);
                }
            }
            Err(e) => last_err = Some(e),
        }
        if best.as_ref().is_some_and(|b| !poor(b)) {
            break;
        }
    }
    match best {
        Some(b) => Ok(b),
        None => Err(last_err.unwrap_or_else(|| IdentifyError::Unidentifiable {
            message: "the output-error fit failed from every start".into(),
        })),
    }
}
