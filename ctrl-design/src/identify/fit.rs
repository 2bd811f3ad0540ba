//! The least-squares core: per-step fits, the steady-speed line, the discrete first-order
//! model and its output-error fit.
//!
//! All fits minimise a plain sum of squared residuals of the recorded signal (position or
//! speed), so their answers can be checked against any general least-squares solver; see
//! `reference/identify/` for such a check with numpy and scipy.

use super::log::{Log, SignalKind};
use super::IdentifyError;
use rayon::prelude::*;

/// `a > b`, false when either is NaN (so `!exceeds(x, 0.0)` also refuses NaN).
#[inline]
pub(crate) fn exceeds(a: f64, b: f64) -> bool {
    a > b
}

/// `sign(v) * max(|v| - bias, 0)`: the part of the voltage that drives the wheel, volts.
pub fn effective_volts(volts: f64, bias_volts: f64) -> f64 {
    let excess = volts.abs() - bias_volts;
    if excess > 0.0 {
        excess * volts.signum()
    } else {
        0.0
    }
}

/// Solves the small symmetric system `a x = b` (`a` row-major, `n x n`) by Gaussian
/// elimination with partial pivoting after scaling by the diagonal. Returns `None` when the
/// system is singular or ill-conditioned beyond about 1e12 (after scaling).
pub(crate) fn solve_small(a: &[f64], b: &[f64], n: usize) -> Option<Vec<f64>> {
    if a.len() != n * n || b.len() != n || n == 0 {
        return None;
    }
    let scale: Vec<f64> = (0..n)
        .map(|i| {
            let d = a[i * n + i];
            if d > 0.0 && d.is_finite() {
                1.0 / d.sqrt()
            } else {
                0.0
            }
        })
        .collect();
    if scale.contains(&0.0) {
        return None;
    }
    let mut m: Vec<f64> = (0..n * n)
        .map(|ij| a[ij] * scale[ij / n] * scale[ij % n])
        .collect();
    let mut r: Vec<f64> = (0..n).map(|i| b[i] * scale[i]).collect();
    for col in 0..n {
        let mut piv = col;
        for row in col + 1..n {
            if m[row * n + col].abs() > m[piv * n + col].abs() {
                piv = row;
            }
        }
        if !exceeds(m[piv * n + col].abs(), 1e-12) {
            return None;
        }
        if piv != col {
            for j in 0..n {
                m.swap(col * n + j, piv * n + j);
            }
            r.swap(col, piv);
        }
        let p = m[col * n + col];
        for row in col + 1..n {
            let f = m[row * n + col] / p;
            if f != 0.0 {
                for j in col..n {
                    m[row * n + j] -= f * m[col * n + j];
                }
                r[row] -= f * r[col];
            }
        }
    }
    let mut x = vec![0.0; n];
    for i in (0..n).rev() {
        let mut s = r[i];
        for j in i + 1..n {
            s -= m[i * n + j] * x[j];
        }
        x[i] = s / m[i * n + i];
    }
    let out: Vec<f64> = x.iter().zip(&scale).map(|(v, s)| v * s).collect();
    if out.iter().all(|v| v.is_finite()) {
        Some(out)
    } else {
        None
    }
}

/// Result of fitting one step log by least squares.
///
/// The model after the step (time `tau` from the step row, speed relaxing from
/// `initial_speed` towards `steady_speed` with time constant `T`):
///
/// ```text
/// speed:    w(tau) = w_ss + (w0 - w_ss) exp(-tau/T)
/// position: x(tau) = x0 + w_ss (tau - T (1 - exp(-tau/T))) + w0 T (1 - exp(-tau/T))
/// ```
///
/// For fixed `T` the model is linear in `x0`, `w0`, `w_ss`; `T` is found by minimising the
/// remaining sum of squares over `ln T` (a log-spaced scan, then golden-section search).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct StepFit {
    /// First row at the new voltage.
    pub step_row: usize,
    /// Time of that row, seconds.
    pub step_time_s: f64,
    /// Voltage before the step, volts.
    pub volts_before: f64,
    /// Voltage after the step, volts.
    pub volts_after: f64,
    /// Fitted position at the step, distance units (position logs only).
    pub initial_position: Option<f64>,
    /// Fitted speed at the step, units/s.
    pub initial_speed: f64,
    /// Fitted steady speed, units/s.
    pub steady_speed: f64,
    /// Fitted time constant, seconds.
    pub time_constant_s: f64,
    /// Standard error of `ln T` from the curvature of the sum of squares (relative error of
    /// `T`); infinite when the data do not pin `T` down.
    pub time_constant_rel_se: f64,
    /// True when the best `T` sits at an end of the searched range.
    pub at_search_bound: bool,
    /// RMS residual of the recorded signal (position units or units/s).
    pub residual_rms: f64,
    /// Rows used (from the step to the end).
    pub rows: usize,
}

/// Incremental factor `exp(-dt/T)` with a cache for regular sampling.
struct Decay {
    inv_t: f64,
    last_dt: f64,
    last_a: f64,
}

impl Decay {
    fn new(t: f64) -> Self {
        Decay {
            inv_t: 1.0 / t,
            last_dt: f64::NAN,
            last_a: 0.0,
        }
    }
    #[inline]
    fn factor(&mut self, dt: f64) -> f64 {
        if dt != self.last_dt {
            self.last_dt = dt;
            self.last_a = (-dt * self.inv_t).exp();
        }
        self.last_a
    }
}

/// Sum of squares of the step model at time constant `t` and its linear coefficients.
fn step_sse(log: &Log, k0: usize, t: f64) -> Option<(f64, Vec<f64>)> {
    let n = log.len();
    let t0 = log.time_s[k0];
    let y0 = log.signal[k0];
    let p = match log.kind {
        SignalKind::Position => 3,
        SignalKind::Speed => 2,
    };
    let basis = |tau: f64, e: f64, out: &mut [f64; 3]| {
        let one_minus = 1.0 - e;
        match log.kind {
            SignalKind::Position => {
                let c = t * one_minus;
                *out = [1.0, c, tau - c];
            }
            SignalKind::Speed => *out = [e, one_minus, 0.0],
        }
    };
    let mut ata = [0.0f64; 9];
    let mut aty = [0.0f64; 3];
    let mut e = 1.0f64;
    let mut dec = Decay::new(t);
    let mut phi = [0.0f64; 3];
    for k in k0..n {
        if k > k0 {
            e *= dec.factor(log.time_s[k] - log.time_s[k - 1]);
            if e < 1e-250 {
                e = 0.0;
            }
        }
        let tau = log.time_s[k] - t0;
        basis(tau, e, &mut phi);
        let y = log.signal[k] - y0;
        for i in 0..p {
            aty[i] += phi[i] * y;
            for j in i..p {
                ata[i * p + j] += phi[i] * phi[j];
            }
        }
    }
    for i in 0..p {
        for j in 0..i {
            ata[i * p + j] = ata[j * p + i];
        }
    }
    let c = solve_small(&ata[..p * p], &aty[..p], p)?;
    let mut sse = 0.0;
    e = 1.0;
    let mut dec = Decay::new(t);
    for k in k0..n {
        if k > k0 {
            e *= dec.factor(log.time_s[k] - log.time_s[k - 1]);
            if e < 1e-250 {
                e = 0.0;
            }
        }
        basis(log.time_s[k] - t0, e, &mut phi);
        let model: f64 = (0..p).map(|i| c[i] * phi[i]).sum();
        let r = log.signal[k] - y0 - model;
        sse += r * r;
    }
    Some((sse, c))
}

/// Fits one step log (exactly one change of voltage) by least squares; see [`StepFit`].
pub fn fit_step(log: &Log) -> Result<StepFit, IdentifyError> {
    let changes = log.voltage_changes();
    if changes.len() != 1 {
        return Err(IdentifyError::Input {
            file: log.name.clone(),
            line: None,
            column: Some(log.columns[1].clone()),
            problem: format!(
                "the voltage changes {} times; a step log changes it exactly once (use the excitation mode for other logs)",
                changes.len()
            ),
        });
    }
    let k0 = changes[0];
    let n = log.len();
    let rows = n - k0;
    let p = match log.kind {
        SignalKind::Position => 3,
        SignalKind::Speed => 2,
    };
    if rows < p + 3 {
        return Err(IdentifyError::Input {
            file: log.name.clone(),
            line: log.lines.get(k0).copied(),
            column: Some(log.columns[1].clone()),
            problem: format!(
                "only {rows} rows after the step; a step fit needs at least {} (in practice several time constants of rows)",
                p + 3
            ),
        });
    }
    let duration = log.time_s[n - 1] - log.time_s[k0];
    let dt_min = (k0 + 1..n)
        .map(|k| log.time_s[k] - log.time_s[k - 1])
        .fold(f64::INFINITY, f64::min);
    let lo = (0.1 * dt_min).ln();
    let hi = (10.0 * duration).ln();
    let eval = |lt: f64| {
        step_sse(log, k0, lt.exp())
            .map(|(s, _)| s)
            .unwrap_or(f64::INFINITY)
    };
    let grid = 48usize;
    let pts: Vec<f64> = (0..=grid)
        .map(|i| lo + (hi - lo) * i as f64 / grid as f64)
        .collect();
    let vals: Vec<f64> = pts.iter().map(|&lt| eval(lt)).collect();
    let best = vals
        .iter()
        .enumerate()
        .min_by(|a, b| a.1.total_cmp(b.1))
        .map(|(i, _)| i)
        .unwrap_or(0);
    let at_search_bound = best == 0 || best == grid;
    let (mut a, mut b) = (pts[best.saturating_sub(1)], pts[(best + 1).min(grid)]);
    let g = (5f64.sqrt() - 1.0) / 2.0;
    let mut c = b - g * (b - a);
    let mut d = a + g * (b - a);
    let (mut fc, mut fd) = (eval(c), eval(d));
    for _ in 0..200 {
        if (b - a).abs() < 1e-10 {
            break;
        }
        if fc < fd {
            b = d;
            d = c;
            fd = fc;
            c = b - g * (b - a);
            fc = eval(c);
        } else {
            a = c;
            c = d;
            fc = fd;
            d = a + g * (b - a);
            fd = eval(d);
        }
    }
    let lt = 0.5 * (a + b);
    let t = lt.exp();
    let Some((sse, coef)) = step_sse(log, k0, t) else {
        return Err(IdentifyError::Unidentifiable {
            message: format!(
                "{}: the step fit is singular (the signal carries no information about the step)",
                log.name
            ),
        });
    };
    let h = 0.01;
    let curv = (eval(lt + h) - 2.0 * sse + eval(lt - h)) / (h * h);
    let dof = rows.saturating_sub(p + 1).max(1) as f64;
    let sigma2 = sse / dof;
    let rel_se = if curv > 0.0 {
        (2.0 * sigma2 / curv).sqrt()
    } else {
        f64::INFINITY
    };
    let y0 = log.signal[k0];
    let (initial_position, initial_speed, steady_speed) = match log.kind {
        SignalKind::Position => (Some(y0 + coef[0]), coef[1], coef[2]),
        SignalKind::Speed => (None, y0 + coef[0], y0 + coef[1]),
    };
    Ok(StepFit {
        step_row: k0,
        step_time_s: log.time_s[k0],
        volts_before: log.volts[k0 - 1],
        volts_after: log.volts[k0],
        initial_position,
        initial_speed,
        steady_speed,
        time_constant_s: t,
        time_constant_rel_se: rel_se,
        at_search_bound,
        residual_rms: (sse / rows as f64).sqrt(),
        rows,
    })
}

/// Gain and bias from steady speeds across voltages.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct SteadyLine {
    /// Slope of `|speed|` against `|volts|`, units/s per volt.
    pub gain: f64,
    /// Where the line crosses zero speed, volts (may be negative before clamping).
    pub bias_volts: f64,
    /// Standard error of the gain from the line's residuals (None with two points).
    pub gain_se: Option<f64>,
    /// Standard error of the bias from the line's residuals (None with two points).
    pub bias_se: Option<f64>,
}

/// Least-squares line `sign(v) * speed = K * |v| - K * bias` through `(volts, steady speed)`
/// points of steps that moved the wheel. Needs two or more distinct `|volts|`.
pub fn fit_steady_line(points: &[(f64, f64)]) -> Result<SteadyLine, IdentifyError> {
    let n = points.len();
    let xs: Vec<f64> = points.iter().map(|p| p.0.abs()).collect();
    let ys: Vec<f64> = points.iter().map(|p| p.1 * p.0.signum()).collect();
    let mean_x = xs.iter().sum::<f64>() / n.max(1) as f64;
    let mean_y = ys.iter().sum::<f64>() / n.max(1) as f64;
    let sxx: f64 = xs.iter().map(|x| (x - mean_x).powi(2)).sum();
    let sxy: f64 = xs
        .iter()
        .zip(&ys)
        .map(|(x, y)| (x - mean_x) * (y - mean_y))
        .sum();
    let spread_ok = xs
        .iter()
        .any(|x| (x - mean_x).abs() > 1e-9 * mean_x.abs().max(1e-9));
    if n < 2 || !spread_ok || !exceeds(sxx, 0.0) {
        return Err(IdentifyError::Unidentifiable {
            message: format!(
                "gain and bias need steps that move the wheel at two or more different voltage magnitudes; got {n} moving step(s) at {:?} V",
                xs
            ),
        });
    }
    let gain = sxy / sxx;
    let intercept = mean_y - gain * mean_x;
    if !exceeds(gain, 0.0) || !gain.is_finite() {
        return Err(IdentifyError::Unidentifiable {
            message: format!(
                "steady speed does not grow with voltage (slope {gain:.4} units/s per volt); check the sign of the position/speed column and the voltages"
            ),
        });
    }
    let bias = -intercept / gain;
    let (gain_se, bias_se) = if n > 2 {
        let ssr: f64 = xs
            .iter()
            .zip(&ys)
            .map(|(x, y)| (y - gain * x - intercept).powi(2))
            .sum();
        let s2 = ssr / (n - 2) as f64;
        let se_k = (s2 / sxx).sqrt();
        let se_c = (s2 * (1.0 / n as f64 + mean_x * mean_x / sxx)).sqrt();
        // bias = -c/K: first-order propagation, with cov(c, K) = -mean_x s2 / sxx.
        let cov = -mean_x * s2 / sxx;
        let db_dc = -1.0 / gain;
        let db_dk = intercept / (gain * gain);
        let var_b =
            db_dc * db_dc * se_c * se_c + db_dk * db_dk * se_k * se_k + 2.0 * db_dc * db_dk * cov;
        (Some(se_k), Some(var_b.max(0.0).sqrt()))
    } else {
        (None, None)
    };
    Ok(SteadyLine {
        gain,
        bias_volts: bias,
        gain_se,
        bias_se,
    })
}

/// Constants of the discrete model, in the parametrisation the fit uses.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ModelParams {
    /// Gain, units/s per volt.
    pub gain: f64,
    /// Time constant, seconds.
    pub time_constant_s: f64,
    /// Bias, volts.
    pub bias_volts: f64,
}

/// Runs the first-order model through a log's voltages with the voltage held over each
/// row's interval (exact for piecewise-constant voltage), from `x0`, `w0` at the first row.
/// Calls `visit(row, position, speed)` for every row.
pub fn run_model(
    log: &Log,
    m: &ModelParams,
    x0: f64,
    w0: f64,
    mut visit: impl FnMut(usize, f64, f64),
) {
    let n = log.len();
    let t = m.time_constant_s;
    let mut dec = Decay::new(t);
    let (mut x, mut w) = (x0, w0);
    for k in 0..n {
        visit(k, x, w);
        if k + 1 < n {
            let dt = log.time_s[k + 1] - log.time_s[k];
            let a = dec.factor(dt);
            let c = t * (1.0 - a);
            let g = m.gain * effective_volts(log.volts[k], m.bias_volts);
            let d = w - g;
            x += g * dt + d * c;
            w = g + d * a;
        }
    }
}

/// Least-squares initial state `(x0, w0)` at the first row of a log for known constants
/// (`x0` is `None` for speed logs). Returns `None` when singular.
pub fn fit_initial_state(log: &Log, m: &ModelParams) -> Option<(Option<f64>, f64)> {
    // Response = zero-state response + x0 * 1 + w0 * (response to unit initial speed).
    let zero = ModelParams { gain: 0.0, ..*m };
    let mut h = Vec::with_capacity(log.len());
    run_model(log, &zero, 0.0, 1.0, |_, x, w| {
        h.push(match log.kind {
            SignalKind::Position => x,
            SignalKind::Speed => w,
        })
    });
    let mut s = [0.0f64; 5]; // sum 1, h, h^2, r, h r
    run_model(log, m, 0.0, 0.0, |k, x, w| {
        let g = match log.kind {
            SignalKind::Position => x,
            SignalKind::Speed => w,
        };
        let r = log.signal[k] - g;
        let hk = h[k];
        s[0] += 1.0;
        s[1] += hk;
        s[2] += hk * hk;
        s[3] += r;
        s[4] += hk * r;
    });
    match log.kind {
        SignalKind::Position => {
            let c = solve_small(&[s[0], s[1], s[1], s[2]], &[s[3], s[4]], 2)?;
            Some((Some(c[0]), c[1]))
        }
        SignalKind::Speed => {
            if s[2] > 0.0 {
                Some((None, s[4] / s[2]))
            } else {
                None
            }
        }
    }
}

/// Noise level of a recorded signal from its second differences (`rms / sqrt(6)` for white
/// noise), floored so that noise-free data still gets a positive weight.
pub(crate) fn noise_level(signal: &[f64]) -> f64 {
    let n = signal.len();
    let range = signal.iter().fold(f64::NEG_INFINITY, |a, &b| a.max(b))
        - signal.iter().fold(f64::INFINITY, |a, &b| a.min(b));
    let floor = 1e-9 * range.abs().max(1e-12);
    if n < 3 {
        return floor;
    }
    let ss: f64 = (1..n - 1)
        .map(|k| (signal[k + 1] - 2.0 * signal[k] + signal[k - 1]).powi(2))
        .sum();
    ((ss / (n - 2) as f64 / 6.0).sqrt()).max(floor)
}

/// Weight of each log's residuals: 1 / noise level, the noise level being the larger of the
/// second-difference estimate and the quantization noise `count / sqrt(12)`. A log whose
/// signal never changes carries no noise information and gets the median noise level of the
/// other logs of its kind (or 1).
pub(crate) fn log_weights(logs: &[&Log]) -> Vec<f64> {
    let est: Vec<Option<f64>> = logs
        .iter()
        .map(|l| {
            let q = resolution(&l.signal);
            if q > 0.0 {
                Some(noise_level(&l.signal).max(q / 12f64.sqrt()))
            } else {
                None
            }
        })
        .collect();
    logs.iter()
        .zip(&est)
        .map(|(l, e)| {
            let sigma = e.unwrap_or_else(|| {
                let mut others: Vec<f64> = logs
                    .iter()
                    .zip(&est)
                    .filter(|(o, _)| o.kind == l.kind)
                    .filter_map(|(_, e)| *e)
                    .collect();
                others.sort_by(f64::total_cmp);
                others.get(others.len() / 2).copied().unwrap_or(1.0)
            });
            1.0 / sigma
        })
        .collect()
}

/// Result of the output-error fit.
#[derive(Debug, Clone, PartialEq)]
pub struct OutputErrorFit {
    /// Fitted constants.
    pub params: ModelParams,
    /// Fitted initial state `(x0, w0)` of each log (`x0` is `None` for speed logs).
    pub initial: Vec<(Option<f64>, f64)>,
    /// Weighted sum of squares at the answer (residuals divided by each log's noise level).
    pub cost: f64,
    /// Levenberg-Marquardt iterations taken.
    pub iterations: usize,
}

struct Pass {
    jtj: Vec<f64>,
    jtr: Vec<f64>,
    cost: f64,
}

/// Rows per position chunk: each chunk of a position log gets its own position offset,
/// eliminated in closed form, so a long log's small drifts (wheel slip, a bumped encoder) do
/// not accumulate and the fit stays as well conditioned as on a short log. Logs up to this
/// length are one chunk, i.e. the plain output-error problem with one initial position.
pub const POSITION_CHUNK_ROWS: usize = 4096;

/// Index layout: 0 gain, 1 ln T, 2 bias, then one initial speed per log.
fn layout(logs: &[&Log]) -> (Vec<usize>, usize) {
    let offs: Vec<usize> = (0..logs.len()).map(|j| 3 + j).collect();
    let p = 3 + logs.len();
    (offs, p)
}

fn params_from(theta: &[f64]) -> ModelParams {
    ModelParams {
        gain: theta[0],
        time_constant_s: theta[1].exp(),
        bias_volts: theta[2],
    }
}

/// Sums over one log: residual r and Jacobian row j (4 entries: K, ln T, bias, w0), with the
/// per-chunk offset projected out for position logs.
#[derive(Clone, Copy, Default)]
struct Sums {
    jj: [f64; 10],
    jr: [f64; 4],
    rr: f64,
}

#[derive(Clone, Copy, Default)]
struct Chunk {
    n: f64,
    j0: [f64; 4],
    r0: f64,
    sj: [f64; 4],
    sr: f64,
    sums: Sums,
}

impl Chunk {
    #[inline]
    fn add(&mut self, j: &[f64; 4], r: f64, with_j: bool) {
        if self.n == 0.0 {
            self.j0 = *j;
            self.r0 = r;
        }
        self.n += 1.0;
        let r = r - self.r0;
        self.sr += r;
        self.sums.rr += r * r;
        if with_j {
            let d = [
                j[0] - self.j0[0],
                j[1] - self.j0[1],
                j[2] - self.j0[2],
                j[3] - self.j0[3],
            ];
            let mut idx = 0;
            for a in 0..4 {
                self.sj[a] += d[a];
                self.sums.jr[a] += d[a] * r;
                for b in a..4 {
                    self.sums.jj[idx] += d[a] * d[b];
                    idx += 1;
                }
            }
        }
    }
    /// Sums with the chunk mean removed (the offset's least-squares elimination).
    fn centred(&self) -> Sums {
        let mut s = self.sums;
        if self.n > 0.0 {
            let n = self.n;
            s.rr -= self.sr * self.sr / n;
            let mut idx = 0;
            for a in 0..4 {
                s.jr[a] -= self.sj[a] * self.sr / n;
                for b in a..4 {
                    s.jj[idx] -= self.sj[a] * self.sj[b] / n;
                    idx += 1;
                }
            }
        }
        s
    }
}

/// Runs one log at `theta`; returns its sums and, if asked, the mean offset of its first
/// chunk (the fitted initial position for position logs).
fn log_pass(log: &Log, wt: f64, kk: f64, t: f64, b: f64, w0: f64, with_j: bool) -> (Sums, f64) {
    let n = log.len();
    let is_pos = log.kind == SignalKind::Position;
    let mut dec = Decay::new(t);
    let (mut x, mut w) = (0.0f64, w0);
    let mut sw = [0.0, 0.0, 0.0, 1.0];
    let mut sx = [0.0f64; 4];
    let mut total = Sums::default();
    let mut chunk = Chunk::default();
    let mut first_offset = f64::NAN;
    let mut first_chunk_sum = 0.0;
    let mut first_chunk_n = 0.0;
    for k in 0..n {
        if is_pos {
            let r = (log.signal[k] - x) * wt;
            chunk.add(&[sx[0] * wt, sx[1] * wt, sx[2] * wt, sx[3] * wt], r, with_j);
            if first_offset.is_nan() {
                first_chunk_sum += log.signal[k] - x;
                first_chunk_n += 1.0;
            }
            if chunk.n as usize >= POSITION_CHUNK_ROWS || k + 1 == n {
                let c = chunk.centred();
                for i in 0..10 {
                    total.jj[i] += c.jj[i];
                }
                for i in 0..4 {
                    total.jr[i] += c.jr[i];
                }
                total.rr += c.rr;
                chunk = Chunk::default();
                if first_offset.is_nan() {
                    first_offset = first_chunk_sum / first_chunk_n;
                }
            }
        } else {
            let r = (log.signal[k] - w) * wt;
            total.rr += r * r;
            if with_j {
                let j = [sw[0] * wt, sw[1] * wt, sw[2] * wt, sw[3] * wt];
                let mut idx = 0;
                for a in 0..4 {
                    total.jr[a] += j[a] * r;
                    for bb in a..4 {
                        total.jj[idx] += j[a] * j[bb];
                        idx += 1;
                    }
                }
            }
        }
        if k + 1 < n {
            let dt = log.time_s[k + 1] - log.time_s[k];
            let aa = dec.factor(dt);
            let c = t * (1.0 - aa);
            let v = log.volts[k];
            let excess = v.abs() - b;
            let (u, ub) = if excess > 0.0 {
                (excess * v.signum(), -v.signum())
            } else {
                (0.0, 0.0)
            };
            let g = kk * u;
            let d = w - g;
            if with_j {
                let one_a = 1.0 - aa;
                let dtc = dt - c;
                // gain
                let (gk, gb) = (u, kk * ub);
                sx[0] += gk * dtc + sw[0] * c;
                sw[0] = gk * one_a + sw[0] * aa;
                // ln T
                sx[1] += sw[1] * c + d * (c - aa * dt);
                sw[1] = sw[1] * aa + d * aa * dt / t;
                // bias
                sx[2] += gb * dtc + sw[2] * c;
                sw[2] = gb * one_a + sw[2] * aa;
                // initial speed
                sx[3] += sw[3] * c;
                sw[3] *= aa;
            }
            x += g * dt + d * c;
            w = g + d * aa;
        }
    }
    (total, first_offset)
}

/// One pass over every log: weighted cost, and if `with_jacobian` the normal equations.
fn oe_pass(logs: &[&Log], weights: &[f64], theta: &[f64], with_jacobian: bool) -> Pass {
    let (offs, p) = layout(logs);
    let mut jtj = vec![0.0; if with_jacobian { p * p } else { 0 }];
    let mut jtr = vec![0.0; if with_jacobian { p } else { 0 }];
    let (kk, t, b) = (theta[0], theta[1].exp(), theta[2]);
    let sums: Vec<Sums> = logs
        .par_iter()
        .enumerate()
        .map(|(j, log)| log_pass(log, weights[j], kk, t, b, theta[offs[j]], with_jacobian).0)
        .collect();
    let mut cost = 0.0;
    for (j, s) in sums.iter().enumerate() {
        cost += s.rr;
        if with_jacobian {
            let map = |a: usize| if a < 3 { a } else { offs[j] };
            let mut idx = 0;
            for a in 0..4 {
                jtr[map(a)] += s.jr[a];
                for bb in a..4 {
                    let (ia, ib) = (map(a), map(bb));
                    jtj[ia * p + ib] += s.jj[idx];
                    if ia != ib {
                        jtj[ib * p + ia] += s.jj[idx];
                    }
                    idx += 1;
                }
            }
        }
    }
    Pass { jtj, jtr, cost }
}

/// Output-error least squares over whole logs: the constants (shared by all logs) and each
/// log's initial state that make the simulated signal match the recorded one, by
/// Levenberg-Marquardt with exact sensitivities. Each log's residuals are divided by its
/// noise level (from second differences), so logs of position and of speed can be mixed.
/// Position offsets are eliminated per chunk of [`POSITION_CHUNK_ROWS`] rows.
pub fn fit_output_error(
    logs: &[&Log],
    start: &ModelParams,
) -> Result<OutputErrorFit, IdentifyError> {
    let (offs, p) = layout(logs);
    let weights = log_weights(logs);
    let max_v = logs
        .iter()
        .flat_map(|l| l.volts.iter())
        .fold(0.0f64, |a, &b| a.max(b.abs()));
    let dt_min = logs
        .iter()
        .flat_map(|l| l.time_s.windows(2).map(|w| w[1] - w[0]))
        .fold(f64::INFINITY, f64::min);
    let span = logs
        .iter()
        .map(|l| l.time_s[l.len() - 1] - l.time_s[0])
        .fold(0.0f64, f64::max);
    let (lt_lo, lt_hi) = ((0.01 * dt_min).ln(), (100.0 * span).ln());
    let mut theta = vec![0.0; p];
    theta[0] = start.gain;
    theta[1] = start.time_constant_s.ln().clamp(lt_lo, lt_hi);
    theta[2] = start.bias_volts.clamp(0.0, max_v);
    let mut pass = oe_pass(logs, &weights, &theta, true);
    let mut lambda = 1e-6;
    let mut iterations = 0;
    for _ in 0..100 {
        iterations += 1;
        let mut a = pass.jtj.clone();
        for i in 0..p {
            a[i * p + i] *= 1.0 + lambda;
            if a[i * p + i] == 0.0 {
                a[i * p + i] = lambda;
            }
        }
        let Some(delta) = solve_small(&a, &pass.jtr, p) else {
            lambda *= 10.0;
            if lambda > 1e12 {
                break;
            }
            continue;
        };
        let mut cand = theta.clone();
        for i in 0..p {
            cand[i] += delta[i];
        }
        cand[1] = cand[1].clamp(lt_lo, lt_hi);
        cand[2] = cand[2].clamp(0.0, max_v);
        // A step this small changes nothing that matters; below it rounding decides.
        let small_step = (delta[1].abs() < 1e-9)
            && (delta[0].abs() <= 1e-9 * cand[0].abs().max(1e-300))
            && (delta[2].abs() < 1e-9);
        let c_cost = oe_pass(logs, &weights, &cand, false).cost;
        if c_cost.is_finite() && c_cost <= pass.cost {
            let gain = pass.cost - c_cost;
            theta = cand;
            lambda = (lambda / 10.0).max(1e-15);
            let done = gain <= 1e-11 * pass.cost || small_step;
            pass = oe_pass(logs, &weights, &theta, !done);
            if done {
                break;
            }
        } else {
            if small_step {
                break;
            }
            lambda *= 10.0;
            if lambda > 1e12 {
                break;
            }
        }
    }
    let params = params_from(&theta);
    if !(params.gain.is_finite()
        && params.time_constant_s.is_finite()
        && params.bias_volts.is_finite())
    {
        return Err(IdentifyError::Unidentifiable {
            message: "the output-error fit did not converge to finite constants".into(),
        });
    }
    let initial = logs
        .iter()
        .enumerate()
        .map(|(j, l)| {
            let w0 = theta[offs[j]];
            let x0 = (l.kind == SignalKind::Position).then(|| {
                log_pass(
                    l,
                    1.0,
                    params.gain,
                    params.time_constant_s,
                    params.bias_volts,
                    w0,
                    false,
                )
                .1
            });
            (x0, w0)
        })
        .collect();
    Ok(OutputErrorFit {
        params,
        initial,
        cost: pass.cost,
        iterations,
    })
}

/// Equation-error estimate used to start the output-error fit: over consecutive windows of
/// `m` rows, `T * (w_j - w_i) + (x_j - x_i) = K * int(v dt) - K * bias * int(sign(v) dt)`
/// is linear in `T`, `K` and `K * bias`, and is solved by ordinary least squares with speed
/// `w` taken from central differences (position logs) or a moving average (speed logs).
/// Returns `None` when the regression is singular or gives a non-physical answer.
pub fn equation_error_estimate(logs: &[&Log]) -> Option<ModelParams> {
    let mut ata = [0.0f64; 9];
    let mut aty = [0.0f64; 3];
    for log in logs {
        let n = log.len();
        let m = smoothing_half_window(log);
        if n < 4 * m + 2 {
            continue;
        }
        let ws = smoothed_speed(log, m);
        // position (or integrated speed) at each row
        let xs: Vec<f64> = match log.kind {
            SignalKind::Position => log.signal.clone(),
            SignalKind::Speed => {
                let mut acc = 0.0;
                let mut v = Vec::with_capacity(n);
                v.push(0.0);
                for k in 1..n {
                    acc += 0.5
                        * (log.signal[k] + log.signal[k - 1])
                        * (log.time_s[k] - log.time_s[k - 1]);
                    v.push(acc);
                }
                v
            }
        };
        let mut i = m;
        while i + m < n - m {
            let j = i + m;
            let mut vint = 0.0;
            let mut sint = 0.0;
            for k in i..j {
                let dt = log.time_s[k + 1] - log.time_s[k];
                vint += log.volts[k] * dt;
                sint += log.volts[k].signum() * dt;
            }
            let row = [-(ws[j] - ws[i]), vint, -sint];
            let y = xs[j] - xs[i];
            for a in 0..3 {
                aty[a] += row[a] * y;
                for b in 0..3 {
                    ata[a * 3 + b] += row[a] * row[b];
                }
            }
            i = j;
        }
    }
    let c = solve_small(&ata, &aty, 3)?;
    let (t, k, kb) = (c[0], c[1], c[2]);
    if !(t > 0.0 && k > 0.0) {
        return None;
    }
    Some(ModelParams {
        gain: k,
        time_constant_s: t,
        bias_volts: (kb / k).max(0.0),
    })
}

/// Smallest step between distinct consecutive values of a signal (its resolution), or 0
/// when the signal never changes.
pub(crate) fn resolution(signal: &[f64]) -> f64 {
    let range = signal.iter().fold(f64::NEG_INFINITY, |a, &b| a.max(b))
        - signal.iter().fold(f64::INFINITY, |a, &b| a.min(b));
    if !exceeds(range, 0.0) || !range.is_finite() {
        return 0.0;
    }
    let tiny = 1e-9 * range;
    let q = signal
        .windows(2)
        .map(|w| (w[1] - w[0]).abs())
        .filter(|&d| d > tiny)
        .fold(f64::INFINITY, f64::min);
    if q.is_finite() {
        q
    } else {
        0.0
    }
}

pub(crate) fn median_dt(log: &Log) -> f64 {
    let mut d: Vec<f64> = log.time_s.windows(2).map(|w| w[1] - w[0]).collect();
    if d.is_empty() {
        return 1.0;
    }
    let mid = d.len() / 2;
    let (_, m, _) = d.select_nth_unstable_by(mid, f64::total_cmp);
    *m
}

/// Half-width (rows) of the difference window used to estimate speed from a position log:
/// wide enough that one count of position changes the estimate by at most about 2 % of the
/// peak speed, and at most 1/50 of the log.
pub(crate) fn smoothing_half_window(log: &Log) -> usize {
    let n = log.len();
    if log.kind == SignalKind::Speed {
        return 1;
    }
    let q = resolution(&log.signal);
    let dt = median_dt(log);
    // peak speed over coarse windows
    let w = (n / 50).max(1);
    let mut peak = 0.0f64;
    let mut k = 0;
    while k + w < n {
        let s = (log.signal[k + w] - log.signal[k]) / (log.time_s[k + w] - log.time_s[k]);
        peak = peak.max(s.abs());
        k += w;
    }
    if !exceeds(peak, 0.0) || !exceeds(q, 0.0) {
        return 1;
    }
    let m = (q / (2.0 * dt * 0.02 * peak)).ceil();
    (m.max(1.0) as usize).min((n / 50).max(1))
}

/// Speed at each row: central difference of position over `+-m` rows (ends use the nearest
/// full window) or, for speed logs, a moving average over `+-m` rows.
pub(crate) fn smoothed_speed(log: &Log, m: usize) -> Vec<f64> {
    let n = log.len();
    let m = m.max(1).min((n - 1) / 2).max(1);
    (0..n)
        .map(|k| {
            let lo = k.saturating_sub(m);
            let hi = (k + m).min(n - 1);
            match log.kind {
                SignalKind::Position => {
                    (log.signal[hi] - log.signal[lo]) / (log.time_s[hi] - log.time_s[lo])
                }
                SignalKind::Speed => log.signal[lo..=hi].iter().sum::<f64>() / (hi - lo + 1) as f64,
            }
        })
        .collect()
}

/// Start for the output-error fit from the constant-voltage stretches of the logs: each
/// stretch of at least 20 rows (at most 48 of them, spread over the logs) is fitted as a step
/// from a free initial speed ([`fit_step`]), then gain and bias come from the steady-speed
/// line of the stretches that moved and the time constant is their median. Returns `None`
/// when fewer than two voltage magnitudes moved the wheel.
pub fn segment_estimate(logs: &[&Log]) -> Option<ModelParams> {
    let mut segs: Vec<(usize, usize, usize)> = Vec::new();
    for (j, log) in logs.iter().enumerate() {
        let ch = log.voltage_changes();
        for (i, &k0) in ch.iter().enumerate() {
            let end = ch.get(i + 1).copied().unwrap_or(log.len());
            if end - k0 >= 20 && log.volts[k0] != 0.0 {
                segs.push((j, k0, end));
            }
        }
    }
    let stride = segs.len().div_ceil(48).max(1);
    let fits: Vec<(f64, f64, f64)> = segs
        .par_iter()
        .step_by(stride)
        .filter_map(|&(j, k0, end)| {
            let l = logs[j];
            let sub = Log {
                name: l.name.clone(),
                time_s: l.time_s[k0 - 1..end].to_vec(),
                volts: l.volts[k0 - 1..end].to_vec(),
                kind: l.kind,
                signal: l.signal[k0 - 1..end].to_vec(),
                lines: l.lines[k0 - 1..end].to_vec(),
                columns: l.columns.clone(),
            };
            let f = fit_step(&sub).ok()?;
            (!f.at_search_bound).then_some((f.volts_after, f.steady_speed, f.time_constant_s))
        })
        .collect();
    let peak = fits.iter().fold(0.0f64, |a, f| a.max(f.1.abs()));
    let moving: Vec<&(f64, f64, f64)> = fits
        .iter()
        .filter(|f| f.1.abs() > 0.05 * peak && f.1 * f.0 > 0.0)
        .collect();
    let pts: Vec<(f64, f64)> = moving.iter().map(|f| (f.0, f.1)).collect();
    let line = fit_steady_line(&pts).ok()?;
    let mut ts: Vec<f64> = moving.iter().map(|f| f.2).collect();
    ts.sort_by(f64::total_cmp);
    let t = *ts.get(ts.len() / 2)?;
    Some(ModelParams {
        gain: line.gain,
        time_constant_s: t,
        bias_volts: line.bias_volts.max(0.0),
    })
}
