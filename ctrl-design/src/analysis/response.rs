//! Step responses and their figures: overshoot, peak time, 10-90 % rise time and
//! settling time to a band.
//!
//! Definitions (the same as python-control's `step_info`, so the reference script can
//! compare like with like):
//! - final value `yf`: the closed loop's DC gain;
//! - overshoot: `100 (max y - yf) / yf`, zero when the response never exceeds `yf`;
//! - peak time: time of the largest output; `None` when there is no overshoot (a
//!   monotone response has no peak);
//! - rise time: from the first time `y >= 0.1 yf` to the first time `y >= 0.9 yf`;
//! - settling time: the time after which `|y - yf| < band * |yf|` for good.
//!
//! Continuous responses are computed exactly on a fine grid (matrix exponential of the
//! closed loop) and crossing times are interpolated linearly between grid points, the
//! peak parabolically. Discrete responses are judged on their samples only, as the
//! firmware sees them: times are whole ticks.

use super::poly::Poly;

/// Figures of one step response. `None` where a figure does not exist (no overshoot,
/// never reaches 90 %, never settles, unstable loop).
#[derive(Debug, Clone, Copy, PartialEq, Default, serde::Serialize)]
pub struct StepFigures {
    /// Overshoot above the final value, percent of the final value.
    pub overshoot_pct: Option<f64>,
    /// Time of the largest output, seconds.
    pub peak_time_s: Option<f64>,
    /// 10 % to 90 % rise time, seconds.
    pub rise_time_s: Option<f64>,
    /// Settling time to the band, seconds.
    pub settling_time_s: Option<f64>,
}

/// Overshoot below this (percent) counts as none: rounding in a monotone response.
const NO_OVERSHOOT_PCT: f64 = 1e-7;

/// Figures from samples `y[k]` at times `t[k]`, judged on the samples alone.
pub fn sampled_figures(t: &[f64], y: &[f64], yf: f64, band: f64) -> StepFigures {
    let n = y.len();
    if n == 0 || !yf.is_finite() || yf == 0.0 || y.iter().any(|v| !v.is_finite()) {
        return StepFigures::default();
    }
    let s = yf.signum();
    let (imax, ymax) = y
        .iter()
        .enumerate()
        .fold((0, f64::NEG_INFINITY), |(bi, bv), (i, &v)| {
            if s * v > bv {
                (i, s * v)
            } else {
                (bi, bv)
            }
        });
    let os = 100.0 * (ymax - yf.abs()) / yf.abs();
    let (overshoot_pct, peak_time_s) = if os > NO_OVERSHOOT_PCT {
        (Some(os), Some(t[imax]))
    } else {
        (Some(0.0), None)
    };
    let first = |lvl: f64| y.iter().position(|&v| s * (v - lvl * yf) >= 0.0);
    let rise_time_s = match (first(0.1), first(0.9)) {
        (Some(a), Some(b)) => Some(t[b] - t[a]),
        _ => None,
    };
    let last_out = y.iter().rposition(|&v| (v / yf - 1.0).abs() >= band);
    let settling_time_s = match last_out {
        None => Some(t[0]),
        Some(i) if i + 1 < n => Some(t[i + 1]),
        Some(_) => None,
    };
    StepFigures {
        overshoot_pct,
        peak_time_s,
        rise_time_s,
        settling_time_s,
    }
}

/// Figures from a finely sampled continuous response, with crossing times interpolated
/// linearly and the peak parabolically between grid points (uniform grid step `h`).
pub fn continuous_figures(h: f64, y: &[f64], yf: f64, band: f64) -> StepFigures {
    let n = y.len();
    if n < 3 || !yf.is_finite() || yf == 0.0 || y.iter().any(|v| !v.is_finite()) {
        return StepFigures::default();
    }
    let s = yf.signum();
    let yn: Vec<f64> = y.iter().map(|v| s * v / yf.abs()).collect();
    let (imax, ymax) = yn
        .iter()
        .enumerate()
        .fold((0, f64::NEG_INFINITY), |(bi, bv), (i, &v)| {
            if v > bv {
                (i, v)
            } else {
                (bi, bv)
            }
        });
    let (overshoot_pct, peak_time_s) = if 100.0 * (ymax - 1.0) > NO_OVERSHOOT_PCT && imax + 1 < n {
        let (tp, yp) = if imax > 0 {
            let (a, b, c) = (yn[imax - 1], yn[imax], yn[imax + 1]);
            let den = a - 2.0 * b + c;
            if den < 0.0 {
                let d = 0.5 * (a - c) / den;
                ((imax as f64 + d) * h, b - 0.25 * (a - c) * d)
            } else {
                (imax as f64 * h, b)
            }
        } else {
            (0.0, ymax)
        };
        (Some(100.0 * (yp - 1.0)), Some(tp))
    } else {
        (Some(0.0), None)
    };
    let cross_up = |lvl: f64| -> Option<f64> {
        let i = yn.iter().position(|&v| v >= lvl)?;
        if i == 0 {
            return Some(0.0);
        }
        let (a, b) = (yn[i - 1], yn[i]);
        Some(h * ((i - 1) as f64 + (lvl - a) / (b - a)))
    };
    let rise_time_s = match (cross_up(0.1), cross_up(0.9)) {
        (Some(a), Some(b)) => Some(b - a),
        _ => None,
    };
    let err: Vec<f64> = yn.iter().map(|v| (v - 1.0).abs() - band).collect();
    let settling_time_s = match err.iter().rposition(|&e| e >= 0.0) {
        None => Some(0.0),
        Some(i) if i + 1 < n => {
            let (a, b) = (err[i], err[i + 1]);
            Some(h * (i as f64 + a / (a - b)))
        }
        Some(_) => None,
    };
    StepFigures {
        overshoot_pct,
        peak_time_s,
        rise_time_s,
        settling_time_s,
    }
}

/// Square matrix, row major, small sizes.
type Mat = Vec<Vec<f64>>;

fn mat_mul(a: &Mat, b: &Mat) -> Mat {
    let n = a.len();
    let mut c = vec![vec![0.0; n]; n];
    for i in 0..n {
        for k in 0..n {
            let aik = a[i][k];
            if aik != 0.0 {
                for j in 0..n {
                    c[i][j] += aik * b[k][j];
                }
            }
        }
    }
    c
}

/// Matrix exponential by scaling and squaring with a degree-24 Taylor series
/// (norm scaled below 1/2 first, so the truncation error is below 1e-30 relative).
pub(crate) fn expm(a: &Mat) -> Mat {
    let n = a.len();
    let norm = a
        .iter()
        .map(|r| r.iter().map(|x| x.abs()).sum::<f64>())
        .fold(0.0, f64::max);
    let mut squarings = 0;
    let mut scale = 1.0;
    while norm * scale > 0.5 {
        scale *= 0.5;
        squarings += 1;
    }
    let a_s: Mat = a
        .iter()
        .map(|r| r.iter().map(|x| x * scale).collect())
        .collect();
    let mut result: Mat = (0..n)
        .map(|i| (0..n).map(|j| if i == j { 1.0 } else { 0.0 }).collect())
        .collect();
    let mut term = result.clone();
    for k in 1..=24 {
        term = mat_mul(&term, &a_s);
        for r in term.iter_mut() {
            for x in r.iter_mut() {
                *x /= k as f64;
            }
        }
        for i in 0..n {
            for j in 0..n {
                result[i][j] += term[i][j];
            }
        }
    }
    for _ in 0..squarings {
        result = mat_mul(&result, &result);
    }
    result
}

/// Exact step response of the strictly proper continuous system `num(s) / den(s)` at
/// `t = k h`, `k = 0..=steps`.
///
/// The system is put in controllable canonical form after scaling time so the
/// characteristic polynomial's constant and leading terms match (this keeps the
/// companion matrix well conditioned); the step is held exactly (augmented exponential).
pub fn continuous_step(num: &Poly, den: &Poly, h: f64, steps: usize) -> Vec<f64> {
    let n = den.degree();
    assert!(
        n >= 1 && num.degree() < n,
        "strictly proper system expected"
    );
    let lead = den.leading();
    let a0 = den.0[0] / lead;
    let w0 = if a0 != 0.0 {
        a0.abs().powf(1.0 / n as f64)
    } else {
        1.0
    };
    // s = w0 * sigma, tau = w0 t: coefficient of sigma^i is c_i w0^i.
    let a: Vec<f64> = (0..n)
        .map(|i| den.0[i] / lead * w0.powi(i as i32 - n as i32))
        .collect();
    let b: Vec<f64> = (0..n)
        .map(|i| num.0.get(i).copied().unwrap_or(0.0) / lead * w0.powi(i as i32 - n as i32))
        .collect();
    let hs = h * w0;
    // Augmented matrix [[A, B], [0, 0]] * hs.
    let m = n + 1;
    let mut aug = vec![vec![0.0; m]; m];
    for i in 0..n - 1 {
        aug[i][i + 1] = hs;
    }
    for j in 0..n {
        aug[n - 1][j] = -a[j] * hs;
    }
    aug[n - 1][n] = hs;
    let e = expm(&aug);
    let mut x = vec![0.0; n];
    let mut out = Vec::with_capacity(steps + 1);
    let mut next = vec![0.0; n];
    for _ in 0..=steps {
        out.push(b.iter().zip(&x).map(|(bi, xi)| bi * xi).sum());
        for i in 0..n {
            next[i] = e[i][n] + (0..n).map(|j| e[i][j] * x[j]).sum::<f64>();
        }
        std::mem::swap(&mut x, &mut next);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn first_order_step_is_exponential() {
        // 1/(0.5 s + 1): y = 1 - exp(-2t)
        let y = continuous_step(&Poly::new(vec![1.0]), &Poly::new(vec![1.0, 0.5]), 0.01, 300);
        for (k, v) in y.iter().enumerate() {
            let t = k as f64 * 0.01;
            assert!((v - (1.0 - (-2.0 * t).exp())).abs() < 1e-12);
        }
    }

    #[test]
    fn expm_of_rotation() {
        let a = vec![vec![0.0, -1.0], vec![1.0, 0.0]];
        let e = expm(&a);
        assert!((e[0][0] - 1f64.cos()).abs() < 1e-14);
        assert!((e[1][0] - 1f64.sin()).abs() < 1e-14);
    }

    #[test]
    fn sampled_figures_follow_the_index_rules() {
        let t: Vec<f64> = (0..6).map(|k| k as f64).collect();
        let y = [0.0, 0.5, 0.95, 1.1, 1.01, 1.0];
        let f = sampled_figures(&t, &y, 1.0, 0.02);
        assert!((f.overshoot_pct.unwrap() - 10.0).abs() < 1e-9);
        assert_eq!(f.peak_time_s, Some(3.0));
        assert_eq!(f.rise_time_s, Some(1.0));
        assert_eq!(f.settling_time_s, Some(4.0));
    }
}
