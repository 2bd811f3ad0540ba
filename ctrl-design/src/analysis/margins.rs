//! Gain and phase margins of a loop transfer function, continuous (`s = j w`) or
//! discrete (`z = e^{j w h}`), from a dense logarithmic frequency sweep refined by
//! bisection.
//!
//! The loop is held in factored form (gain, zeros, poles), so its phase is the sum of
//! the factors' arguments: continuous in frequency with no unwrapping guesswork.
//!
//! Selection when there are several crossings (the same rule as python-control's
//! `stability_margins`): the gain margin is the one closest to 0 dB, the phase margin
//! the one smallest in magnitude. A loop whose phase never reaches -180 deg has an
//! infinite gain margin (`None`); a loop whose gain never crosses 1 has an infinite
//! phase margin (`None`).

use super::poly::Complex;

/// A loop transfer function in factored form: `gain * prod(x - zeros) / prod(x - poles)`.
#[derive(Debug, Clone, PartialEq)]
pub struct FactoredLoop {
    /// Leading-coefficient ratio.
    pub gain: f64,
    /// Zeros.
    pub zeros: Vec<Complex>,
    /// Poles.
    pub poles: Vec<Complex>,
    /// `None` for continuous time; `Some(h)` for a discrete loop with sample period `h` s.
    pub sample_period_s: Option<f64>,
}

/// Margins of a loop. `None` means infinite (no crossing).
#[derive(Debug, Clone, Copy, PartialEq, Default, serde::Serialize)]
pub struct Margins {
    /// Gain margin, dB (negative: the loop is unstable by that much).
    pub gain_margin_db: Option<f64>,
    /// Frequency where the loop phase is -180 deg and the gain margin is read, rad/s.
    pub phase_crossover_rad_s: Option<f64>,
    /// Phase margin, degrees, in [-180, 180).
    pub phase_margin_deg: Option<f64>,
    /// Frequency where the loop gain is 1 and the phase margin is read, rad/s.
    pub gain_crossover_rad_s: Option<f64>,
}

impl FactoredLoop {
    fn point(&self, w: f64) -> Complex {
        match self.sample_period_s {
            None => Complex::new(0.0, w),
            Some(h) => Complex::from_angle(w * h),
        }
    }

    /// Natural log of `|L|` at frequency `w` (rad/s).
    pub fn log_gain(&self, w: f64) -> f64 {
        let x = self.point(w);
        let mut g = self.gain.abs().ln();
        for z in &self.zeros {
            g += (x - *z).abs().ln();
        }
        for p in &self.poles {
            g -= (x - *p).abs().ln();
        }
        g
    }

    /// Phase of `L` in degrees, continuous in `w` (sum of the factors' arguments).
    pub fn phase_deg(&self, w: f64) -> f64 {
        let x = self.point(w);
        let mut ph = if self.gain < 0.0 {
            std::f64::consts::PI
        } else {
            0.0
        };
        for z in &self.zeros {
            ph += (x - *z).arg();
        }
        for p in &self.poles {
            ph -= (x - *p).arg();
        }
        ph.to_degrees()
    }

    /// Value of `L` at frequency `w`.
    pub fn eval(&self, w: f64) -> Complex {
        let x = self.point(w);
        let mut v = Complex::real(self.gain);
        for z in &self.zeros {
            v = v * (x - *z);
        }
        for p in &self.poles {
            v = v / (x - *p);
        }
        v
    }

    /// The swept frequency range, rad/s.
    fn range(&self) -> (f64, f64) {
        let mags: Vec<f64> = self
            .zeros
            .iter()
            .chain(&self.poles)
            .map(|r| match self.sample_period_s {
                None => r.abs(),
                // Equivalent s-plane magnitude |ln z| / h.
                Some(h) => {
                    let m = r.abs();
                    if m > 0.0 {
                        Complex::new(m.ln(), r.arg()).abs() / h
                    } else {
                        0.0
                    }
                }
            })
            .filter(|m| *m > 1e-12 && m.is_finite())
            .collect();
        let lo = mags.iter().cloned().fold(f64::INFINITY, f64::min);
        let hi = mags.iter().cloned().fold(0.0, f64::max);
        let (lo, hi) = if lo.is_finite() {
            (lo * 1e-6, hi * 1e4)
        } else {
            (1e-4, 1e4)
        };
        match self.sample_period_s {
            None => (lo, hi),
            Some(h) => {
                let nyq = std::f64::consts::PI / h;
                (lo.min(nyq * 1e-6), nyq)
            }
        }
    }

    /// Gain and phase margins.
    pub fn margins(&self) -> Margins {
        let (mut lo, hi) = self.range();
        // A loop with an integrator has unbounded gain at low frequency: reach down
        // until the gain is above 1 so a very low crossover is not missed.
        let integrator = self.poles.iter().any(|p| match self.sample_period_s {
            None => p.abs() < 1e-12,
            Some(_) => (*p - Complex::real(1.0)).abs() < 1e-12,
        });
        while integrator && lo > 1e-12 && self.log_gain(lo) < 0.0 {
            lo /= 10.0;
        }
        // About 1000 points per decade.
        let n = (((hi / lo).log10() * 1000.0).ceil() as usize).clamp(2000, 40_000);
        let ratio = (hi / lo).ln() / n as f64;
        let ws: Vec<f64> = (0..=n)
            .map(|k| {
                if k == n {
                    hi
                } else {
                    lo * (ratio * k as f64).exp()
                }
            })
            .collect();
        let lg: Vec<f64> = ws.iter().map(|&w| self.log_gain(w)).collect();
        let turns: Vec<f64> = ws
            .iter()
            .map(|&w| (self.phase_deg(w) + 180.0) / 360.0)
            .collect();
        // Gain crossovers.
        let mut pms: Vec<(f64, f64)> = Vec::new();
        for k in 0..n {
            if lg[k] == 0.0 || (lg[k] > 0.0) != (lg[k + 1] > 0.0) {
                let w = if lg[k] == 0.0 {
                    ws[k]
                } else {
                    bisect(|w| self.log_gain(w), ws[k], ws[k + 1])
                };
                let ph = self.phase_deg(w);
                let pm = ph.rem_euclid(360.0) - 180.0;
                pms.push((pm, w));
            }
        }
        // Phase crossovers at -180 deg (+ multiples of 360): turns crosses an integer.
        let mut gms: Vec<(f64, f64)> = Vec::new();
        for k in 0..n {
            let (a, b) = (turns[k], turns[k + 1]);
            if a.floor() != b.floor() {
                let m = a.floor().max(b.floor());
                let w = bisect(
                    |w| (self.phase_deg(w) + 180.0) / 360.0 - m,
                    ws[k],
                    ws[k + 1],
                );
                gms.push((-20.0 * self.log_gain(w) / std::f64::consts::LN_10, w));
            }
        }
        // Discrete loops are real at the Nyquist frequency: a phase of exactly -180 deg
        // there is a crossing at the end of the sweep.
        if self.sample_period_s.is_some() {
            let t = turns[n];
            if (t - t.round()).abs() < 1e-9 && !gms.iter().any(|g| (g.1 - hi).abs() < 1e-9 * hi) {
                gms.push((-20.0 * lg[n] / std::f64::consts::LN_10, hi));
            }
        }
        let gm = gms.iter().cloned().min_by(|a, b| {
            a.0.abs()
                .partial_cmp(&b.0.abs())
                .unwrap_or(std::cmp::Ordering::Equal)
        });
        let pm = pms.iter().cloned().min_by(|a, b| {
            a.0.abs()
                .partial_cmp(&b.0.abs())
                .unwrap_or(std::cmp::Ordering::Equal)
        });
        Margins {
            gain_margin_db: gm.map(|g| g.0),
            phase_crossover_rad_s: gm.map(|g| g.1),
            phase_margin_deg: pm.map(|p| p.0),
            gain_crossover_rad_s: pm.map(|p| p.1),
        }
    }
}

/// Root of `f` between `a` and `b` (a sign change is assumed), to full precision.
fn bisect(f: impl Fn(f64) -> f64, mut a: f64, mut b: f64) -> f64 {
    let mut fa = f(a);
    for _ in 0..200 {
        let m = 0.5 * (a + b);
        if m <= a || m >= b {
            break;
        }
        let fm = f(m);
        if fm == 0.0 {
            return m;
        }
        if (fm > 0.0) == (fa > 0.0) {
            a = m;
            fa = fm;
        } else {
            b = m;
        }
    }
    0.5 * (a + b)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn integrator_with_lag_has_closed_form_margins() {
        // L = 1 / (s (s + 1)): |L| = 1 at w^4 + w^2 - 1 = 0, phase -90 - atan(w);
        // the phase never reaches -180, so the gain margin is infinite.
        let l = FactoredLoop {
            gain: 1.0,
            zeros: vec![],
            poles: vec![Complex::real(0.0), Complex::real(-1.0)],
            sample_period_s: None,
        };
        let m = l.margins();
        let wc = ((5f64.sqrt() - 1.0) / 2.0).sqrt();
        assert!((m.gain_crossover_rad_s.unwrap() - wc).abs() < 1e-9);
        assert!((m.phase_margin_deg.unwrap() - (90.0 - wc.atan().to_degrees())).abs() < 1e-9);
        assert_eq!(m.gain_margin_db, None);
    }

    #[test]
    fn very_low_crossover_is_found() {
        // L = 1e-7 / (s (s + 1)): |L| = 1 near w = 1e-7, phase margin ~ 90 deg.
        let l = FactoredLoop {
            gain: 1e-7,
            zeros: vec![],
            poles: vec![Complex::real(0.0), Complex::real(-1.0)],
            sample_period_s: None,
        };
        let m = l.margins();
        assert!((m.gain_crossover_rad_s.unwrap() - 1e-7).abs() < 1e-12);
        assert!((m.phase_margin_deg.unwrap() - 90.0).abs() < 1e-4);
    }

    #[test]
    fn triple_lag_gain_margin() {
        // L = 2 / (s + 1)^3: phase -180 at w = sqrt(3), |L| = 2 / 8 -> GM = 4 = 12.04 dB.
        let l = FactoredLoop {
            gain: 2.0,
            zeros: vec![],
            poles: vec![Complex::real(-1.0); 3],
            sample_period_s: None,
        };
        let m = l.margins();
        assert!((m.phase_crossover_rad_s.unwrap() - 3f64.sqrt()).abs() < 1e-9);
        assert!((m.gain_margin_db.unwrap() - 20.0 * 4f64.log10()).abs() < 1e-9);
    }
}
