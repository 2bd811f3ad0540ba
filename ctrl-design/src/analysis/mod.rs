//! Continuous and discrete analysis of the position and speed loops: closed-loop poles
//! and zeros, step-response figures, gain and phase margins, closed-loop bandwidth.
//!
//! Plant (see [`crate::plant`]): speed `K / (T s + 1)`, position its integral
//! `K / (s (T s + 1))`, in the plant's own units. The friction bias is a nonlinearity
//! and plays no part in this linear analysis.
//!
//! Three versions of each loop are analysed:
//! - **continuous**: the controller in `s`;
//! - **discrete**: the plant held by a zero-order hold at the loop rate (exact ZOH of the
//!   two plant states, position and speed), the controller as the firmware runs it (PD:
//!   derivative as a backward difference times the rate; lead: the Tustin coefficients;
//!   PI: a running sum), the output used in the same tick it is measured;
//! - **discrete with one tick of computation delay**: the voltage computed at tick `k`
//!   is applied at tick `k + 1`.
//!
//! The discrete step response is simulated in the time domain exactly as above (state
//! update of the held plant, controller difference equation), and judged on its samples.

pub mod margins;
pub mod poly;
pub mod response;

use crate::plant::Plant;
pub use margins::{FactoredLoop, Margins};
pub use poly::{Complex, Poly, Rational};
pub use response::StepFigures;

/// Where the PD loop takes its derivative.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum DerivativeOn {
    /// Derivative of the tracking error: `C(s) = Kp + Kd s` in the forward path; the
    /// closed loop has the PD zero at `s = -Kp / Kd`, which raises overshoot.
    #[default]
    Error,
    /// Derivative of the measured position only: the reference sees `Kp` alone, the
    /// closed loop has no zero and its step response is the plain second-order one.
    Measurement,
}

/// The settling band: the settling time is the time after which the response stays
/// within `band` of its final value.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct SettlingBand {
    /// The band as a percentage of the final value, in (0, 50).
    pub percent: f64,
}

impl SettlingBand {
    /// The 2 % band (the default).
    pub const TWO_PERCENT: SettlingBand = SettlingBand { percent: 2.0 };
    /// The 5 % band.
    pub const FIVE_PERCENT: SettlingBand = SettlingBand { percent: 5.0 };

    /// A band in percent; `None` unless finite and in (0, 50).
    pub fn percent(percent: f64) -> Option<SettlingBand> {
        (percent.is_finite() && percent > 0.0 && percent < 50.0).then_some(SettlingBand { percent })
    }

    /// The band as a fraction (0.02 for 2 %).
    pub fn fraction(self) -> f64 {
        self.percent / 100.0
    }

    /// The settling-time factor `c` in `t_s = c / (zeta wn)`: 4 for the 2 % band and 3
    /// for the 5 % band (the textbook rounding of `-ln(band)`; Ogata, "Modern Control
    /// Engineering", ch. 5 transient-response specifications, from memory), and
    /// `-ln(band)` for any other band.
    pub fn factor(self) -> f64 {
        if self.percent == 2.0 {
            4.0
        } else if self.percent == 5.0 {
            3.0
        } else {
            -(self.fraction()).ln()
        }
    }
}

impl Default for SettlingBand {
    fn default() -> Self {
        SettlingBand::TWO_PERCENT
    }
}

/// Which plant output the loop closes on.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PlantOutput {
    /// Position: `K / (s (T s + 1))`.
    Position,
    /// Speed: `K / (T s + 1)`.
    Speed,
}

/// Everything reported about one version (continuous, discrete, discrete delayed) of a loop.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct LoopFigures {
    /// All closed-loop poles are inside the stability region (left half plane / unit disc).
    pub stable: bool,
    /// Largest closed-loop pole magnitude (discrete loops only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub max_pole_magnitude: Option<f64>,
    /// Overshoot, percent of the final value.
    pub overshoot_pct: Option<f64>,
    /// Peak time, s (`None` without overshoot).
    pub peak_time_s: Option<f64>,
    /// 10-90 % rise time, s.
    pub rise_time_s: Option<f64>,
    /// Settling time to the band, s.
    pub settling_time_s: Option<f64>,
    /// Gain margin, dB (`None`: infinite).
    pub gain_margin_db: Option<f64>,
    /// Frequency of the gain-margin reading (loop phase -180 deg), rad/s.
    pub phase_crossover_rad_s: Option<f64>,
    /// Phase margin, degrees (`None`: infinite).
    pub phase_margin_deg: Option<f64>,
    /// Frequency of the phase-margin reading (loop gain 1), rad/s.
    pub gain_crossover_rad_s: Option<f64>,
    /// Closed-loop bandwidth of the reference-to-output response: the first frequency
    /// where the gain is 3 dB below DC ([`BANDWIDTH_DROP`]), rad/s.
    pub bandwidth_rad_s: Option<f64>,
    /// Closed-loop poles (in `s` or in `z`).
    pub poles: Vec<Complex>,
    /// Closed-loop zeros of the reference-to-output response (in `s` or in `z`).
    pub zeros: Vec<Complex>,
}

/// A loop analysed in continuous time and, with a loop rate, in discrete time with and
/// without one tick of computation delay.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ResponseReport {
    /// The settling band used, percent.
    pub band_pct: f64,
    /// The loop rate of the discrete blocks, Hz.
    pub rate_hz: Option<f64>,
    /// Continuous loop.
    pub continuous: LoopFigures,
    /// Discrete loop, ZOH plant, no computation delay (with a rate only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub discrete: Option<LoopFigures>,
    /// Discrete loop with one tick of computation delay (with a rate only).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub discrete_delayed: Option<LoopFigures>,
}

/// Both PD forms, side by side.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct PdReport {
    /// Derivative on the tracking error (with the PD zero).
    pub derivative_on_error: ResponseReport,
    /// Derivative on the measurement (no zero).
    pub derivative_on_measurement: ResponseReport,
}

/// Discrete lead coefficients for `u[k] = b0 e[k] + b1 e[k-1] - a1 u[k-1]`.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct LeadCoeffs {
    /// Weight of the present error, V per unit.
    pub b0: f64,
    /// Weight of the previous error, V per unit.
    pub b1: f64,
    /// Feedback of the previous output (dimensionless, enters with a minus sign).
    pub a1: f64,
    /// Loop rate they were computed for, Hz.
    pub rate_hz: f64,
    /// Pre-warping frequency (exact match of the continuous lead there), rad/s; `None`
    /// for plain Tustin.
    pub prewarp_rad_s: Option<f64>,
}

/// Tustin discretisation of `Kc (T1 s + 1) / (alpha T1 s + 1)` at `rate_hz`, pre-warped
/// at `prewarp_rad_s` (`s = c (z - 1) / (z + 1)`, `c = w / tan(w h / 2)`; plain Tustin
/// `c = 2 / h` without one).
pub fn lead_tustin(
    kc: f64,
    alpha: f64,
    t1: f64,
    rate_hz: f64,
    prewarp_rad_s: Option<f64>,
) -> LeadCoeffs {
    let h = 1.0 / rate_hz;
    let c = match prewarp_rad_s {
        Some(w) => w / (w * h / 2.0).tan(),
        None => 2.0 / h,
    };
    let d = alpha * t1 * c + 1.0;
    LeadCoeffs {
        b0: kc * (t1 * c + 1.0) / d,
        b1: kc * (1.0 - t1 * c) / d,
        a1: (1.0 - alpha * t1 * c) / d,
        rate_hz,
        prewarp_rad_s,
    }
}

/// A continuous loop: plant `P = pn / pd`, feedback controller `C = cn / cd`, reference
/// path `F = fn / cd` (same denominator); `u = F r - C y`.
#[derive(Debug, Clone, PartialEq)]
pub struct ContinuousLoop {
    /// Plant numerator (in `s`).
    pub plant_num: Poly,
    /// Plant denominator.
    pub plant_den: Poly,
    /// Feedback-path controller numerator.
    pub c_num: Poly,
    /// Reference-path controller numerator.
    pub f_num: Poly,
    /// Controller denominator (shared by both paths).
    pub c_den: Poly,
}

/// A discrete controller as the firmware runs it:
/// `a0 u[k] + a1 u[k-1] + .. = f0 r[k] + f1 r[k-1] + .. - (c0 y[k] + c1 y[k-1] + ..)`.
#[derive(Debug, Clone, PartialEq)]
pub struct DiscreteController {
    /// Output weights `a`, `a[0] != 0`.
    pub a: Vec<f64>,
    /// Measurement weights `c`.
    pub c: Vec<f64>,
    /// Reference weights `f`.
    pub f: Vec<f64>,
}

/// A discrete loop: ZOH plant at `rate_hz`, the controller, and the delay option.
#[derive(Debug, Clone, PartialEq)]
pub struct DiscreteLoop {
    /// The plant.
    pub plant: Plant,
    /// Which plant output is fed back.
    pub output: PlantOutput,
    /// Loop rate, Hz.
    pub rate_hz: f64,
    /// The controller.
    pub controller: DiscreteController,
    /// One tick of computation delay.
    pub delayed: bool,
}

/// Continuous plant transfer function `(num, den)` in `s`.
pub fn plant_tf(plant: &Plant, output: PlantOutput) -> (Poly, Poly) {
    let k = plant.gain;
    let t = plant.time_constant_s;
    match output {
        PlantOutput::Position => (Poly::constant(k), Poly::new(vec![0.0, 1.0, t])),
        PlantOutput::Speed => (Poly::constant(k), Poly::new(vec![1.0, t])),
    }
}

/// Zero-order-hold equivalent `(num, den)` in `z` of the plant at `rate_hz`.
///
/// Position: `K [(h - T + a T) z + (T - a T - a h)] / ((z - 1)(z - a))`, speed:
/// `K (1 - a) / (z - a)`, with `a = exp(-h / T)`.
pub fn zoh_plant(plant: &Plant, output: PlantOutput, rate_hz: f64) -> (Poly, Poly) {
    let k = plant.gain;
    let t = plant.time_constant_s;
    let h = 1.0 / rate_hz;
    let a = (-h / t).exp();
    // 1 - a without cancellation for small h / T.
    let one_minus_a = -(-h / t).exp_m1();
    match output {
        PlantOutput::Position => {
            let b1 = k * (h - t * one_minus_a);
            let b0 = k * (t * one_minus_a - a * h);
            (Poly::new(vec![b0, b1]), Poly::new(vec![a, -(1.0 + a), 1.0]))
        }
        PlantOutput::Speed => (Poly::constant(k * one_minus_a), Poly::new(vec![-a, 1.0])),
    }
}

/// Gain drop that defines the closed-loop bandwidth: -3 dB exactly, `10^(-3/20)` =
/// 0.7079 of the DC gain (python-control's `bandwidth` uses the same).
pub const BANDWIDTH_DROP: f64 = 0.707_945_784_384_137_9;

fn bandwidth(eval: impl Fn(f64) -> f64, lo: f64, hi: f64) -> Option<f64> {
    let dc = eval(lo * 1e-3);
    if !(dc.is_finite() && dc > 0.0) {
        return None;
    }
    let target = dc * BANDWIDTH_DROP;
    let n = 4000;
    let r = (hi / lo).ln() / n as f64;
    let mut prev = lo;
    for k in 0..=n {
        let w = if k == n {
            hi
        } else {
            lo * (r * k as f64).exp()
        };
        if eval(w) < target {
            let (mut a, mut b) = (prev, w);
            for _ in 0..200 {
                let m = 0.5 * (a + b);
                if m <= a || m >= b {
                    break;
                }
                if eval(m) < target {
                    b = m;
                } else {
                    a = m;
                }
            }
            return Some(0.5 * (a + b));
        }
        prev = w;
    }
    None
}

fn no_figures(stable: bool, poles: Vec<Complex>, zeros: Vec<Complex>) -> LoopFigures {
    LoopFigures {
        stable,
        max_pole_magnitude: None,
        overshoot_pct: None,
        peak_time_s: None,
        rise_time_s: None,
        settling_time_s: None,
        gain_margin_db: None,
        phase_crossover_rad_s: None,
        phase_margin_deg: None,
        gain_crossover_rad_s: None,
        bandwidth_rad_s: None,
        poles,
        zeros,
    }
}

fn all_finite(p: &Poly) -> bool {
    p.0.iter().all(|c| c.is_finite())
}

impl ContinuousLoop {
    /// Closed-loop reference-to-output transfer function `F P / (1 + C P)`.
    pub fn closed_loop(&self) -> Rational {
        let num = self.f_num.mul(&self.plant_num);
        let den = self
            .c_den
            .mul(&self.plant_den)
            .add(&self.c_num.mul(&self.plant_num));
        Rational::new(num, den)
    }

    /// The loop transfer function `C P` in factored form.
    pub fn loop_tf(&self) -> FactoredLoop {
        let mut zeros = self.c_num.roots();
        zeros.extend(self.plant_num.roots());
        let mut poles = self.c_den.roots();
        poles.extend(self.plant_den.roots());
        FactoredLoop {
            gain: self.c_num.leading() * self.plant_num.leading()
                / (self.c_den.leading() * self.plant_den.leading()),
            zeros,
            poles,
            sample_period_s: None,
        }
    }

    /// Exact step response on a grid fine enough for the figures: `(h, y)` with
    /// `y[k] = y(k h)`. `None` for an unstable or improper loop.
    pub fn step(&self) -> Option<(f64, Vec<f64>)> {
        let cl = self.closed_loop();
        if !all_finite(&cl.num) || !all_finite(&cl.den) || cl.den.degree() <= cl.num.degree() {
            return None;
        }
        let poles = cl.den.roots();
        if !poles.iter().all(|p| p.re < 0.0) {
            return None;
        }
        let sigma = poles.iter().map(|p| -p.re).fold(f64::INFINITY, f64::min);
        let fastest = poles.iter().map(|p| p.abs()).fold(0.0, f64::max);
        let t_end = 18.0 / sigma;
        let steps = ((t_end * fastest * 200.0).ceil() as usize).clamp(20_000, 2_000_000);
        let h = t_end / steps as f64;
        Some((h, response::continuous_step(&cl.num, &cl.den, h, steps)))
    }

    /// Everything about this loop.
    pub fn figures(&self, band: SettlingBand) -> LoopFigures {
        let cl = self.closed_loop();
        if !all_finite(&cl.num) || !all_finite(&cl.den) {
            return no_figures(false, vec![], vec![]);
        }
        let poles = cl.den.roots();
        let zeros = cl.num.roots();
        let stable = !poles.is_empty() && poles.iter().all(|p| p.re < 0.0);
        let mut f = no_figures(stable, poles, zeros);
        let lp = self.loop_tf();
        let m = lp.margins();
        f.gain_margin_db = m.gain_margin_db;
        f.phase_crossover_rad_s = m.phase_crossover_rad_s;
        f.phase_margin_deg = m.phase_margin_deg;
        f.gain_crossover_rad_s = m.gain_crossover_rad_s;
        if !stable {
            return f;
        }
        if let Some((h, y)) = self.step() {
            let yf = cl.num.eval(0.0) / cl.den.eval(0.0);
            let s = response::continuous_figures(h, &y, yf, band.fraction());
            f.overshoot_pct = s.overshoot_pct;
            f.peak_time_s = s.peak_time_s;
            f.rise_time_s = s.rise_time_s;
            f.settling_time_s = s.settling_time_s;
            let fastest = f.poles.iter().map(|p| p.abs()).fold(0.0, f64::max);
            let slowest = f
                .poles
                .iter()
                .map(|p| p.abs())
                .fold(f64::INFINITY, f64::min);
            f.bandwidth_rad_s = bandwidth(
                |w| cl.eval_c(Complex::new(0.0, w)).abs(),
                slowest * 1e-3,
                fastest * 1e3,
            );
        }
        f
    }
}

/// `z^m v(z^-1)` as an ascending polynomial in `z`.
fn to_z(v: &[f64], m: usize) -> Poly {
    let mut out = vec![0.0; m + 1];
    for (i, c) in v.iter().enumerate() {
        out[m - i] = *c;
    }
    Poly::new(out)
}

impl DiscreteLoop {
    fn sample_period(&self) -> f64 {
        1.0 / self.rate_hz
    }

    /// Controller polynomials in `z`: `(a, c, f)`.
    fn controller_z(&self) -> (Poly, Poly, Poly) {
        let c = &self.controller;
        let m = c.a.len().max(c.c.len()).max(c.f.len()).max(1) - 1;
        (to_z(&c.a, m), to_z(&c.c, m), to_z(&c.f, m))
    }

    /// Plant `(num, den)` in `z`, including the delay tick.
    fn plant_z(&self) -> (Poly, Poly) {
        let (n, d) = zoh_plant(&self.plant, self.output, self.rate_hz);
        if self.delayed {
            (n, d.mul(&Poly::new(vec![0.0, 1.0])))
        } else {
            (n, d)
        }
    }

    /// Closed-loop reference-to-output transfer function in `z`.
    pub fn closed_loop(&self) -> Rational {
        let (a, c, f) = self.controller_z();
        let (pn, pd) = self.plant_z();
        Rational::new(f.mul(&pn), a.mul(&pd).add(&c.mul(&pn)))
    }

    /// The loop transfer function `C Pd` (with the delay) in factored form.
    pub fn loop_tf(&self) -> FactoredLoop {
        let (a, c, _) = self.controller_z();
        let (pn, pd) = self.plant_z();
        let mut zeros = c.roots();
        zeros.extend(pn.roots());
        let mut poles = a.roots();
        poles.extend(pd.roots());
        FactoredLoop {
            gain: c.leading() * pn.leading() / (a.leading() * pd.leading()),
            zeros,
            poles,
            sample_period_s: Some(self.sample_period()),
        }
    }

    /// Simulates `ticks` ticks of a unit step in the setpoint (from tick 0), exactly as the
    /// firmware runs the loop: measure, compute, apply (now, or at the next tick when
    /// delayed), hold for one tick. Returns the measured output at ticks `0..ticks`.
    pub fn step(&self, ticks: usize) -> Vec<f64> {
        let k = self.plant.gain;
        let t = self.plant.time_constant_s;
        let h = self.sample_period();
        let a = (-h / t).exp();
        let one_minus_a = -(-h / t).exp_m1();
        let gx = k * (h - t * one_minus_a);
        let gw = k * one_minus_a;
        let c = &self.controller;
        let (na, nc, nf) = (c.a.len(), c.c.len(), c.f.len());
        let mut y_hist = vec![0.0; nc];
        let mut u_hist = vec![0.0; na.max(1)];
        let (mut x, mut w) = (0.0f64, 0.0f64);
        let mut applied_next = 0.0;
        let mut out = Vec::with_capacity(ticks);
        for tick in 0..ticks {
            let y = match self.output {
                PlantOutput::Position => x,
                PlantOutput::Speed => w,
            };
            out.push(y);
            y_hist.rotate_right(1);
            y_hist[0] = y;
            // Reference is 1 from tick 0: r[k - i] = 1 when i <= k.
            let mut acc: f64 = (0..nf).filter(|i| *i <= tick).map(|i| c.f[i]).sum();
            acc -= (0..nc).map(|i| c.c[i] * y_hist[i]).sum::<f64>();
            acc -= (1..na).map(|i| c.a[i] * u_hist[i - 1]).sum::<f64>();
            let u = acc / c.a[0];
            u_hist.rotate_right(1);
            u_hist[0] = u;
            let v = if self.delayed {
                let v = applied_next;
                applied_next = u;
                v
            } else {
                u
            };
            let x_next = x + t * one_minus_a * w + gx * v;
            w = a * w + gw * v;
            x = x_next;
        }
        out
    }

    /// Everything about this loop.
    pub fn figures(&self, band: SettlingBand) -> LoopFigures {
        let cl = self.closed_loop();
        if !all_finite(&cl.num)
            || !all_finite(&cl.den)
            || self.rate_hz.is_nan()
            || self.rate_hz <= 0.0
        {
            return no_figures(false, vec![], vec![]);
        }
        let poles = cl.den.roots();
        let zeros = cl.num.roots();
        let rho = poles.iter().map(|p| p.abs()).fold(0.0, f64::max);
        let stable = rho < 1.0;
        let mut f = no_figures(stable, poles, zeros);
        f.max_pole_magnitude = Some(rho);
        let m = self.loop_tf().margins();
        f.gain_margin_db = m.gain_margin_db;
        f.phase_crossover_rad_s = m.phase_crossover_rad_s;
        f.phase_margin_deg = m.phase_margin_deg;
        f.gain_crossover_rad_s = m.gain_crossover_rad_s;
        if !stable {
            return f;
        }
        let ticks = if rho > 0.0 {
            ((18.0 / -rho.ln()).ceil() as usize).clamp(200, 2_000_000)
        } else {
            200
        };
        let y = self.step(ticks);
        let h = self.sample_period();
        let t: Vec<f64> = (0..ticks).map(|k| k as f64 * h).collect();
        let yf = cl.num.eval(1.0) / cl.den.eval(1.0);
        let s = response::sampled_figures(&t, &y, yf, band.fraction());
        f.overshoot_pct = s.overshoot_pct;
        f.peak_time_s = s.peak_time_s;
        f.rise_time_s = s.rise_time_s;
        f.settling_time_s = s.settling_time_s;
        let nyq = std::f64::consts::PI * self.rate_hz;
        f.bandwidth_rad_s = bandwidth(
            |w| cl.eval_c(Complex::from_angle(w / self.rate_hz)).abs(),
            nyq * 1e-6,
            nyq,
        );
        f
    }
}

/// PD loop on the position: continuous form.
pub fn pd_continuous(plant: &Plant, kp: f64, kd: f64, derivative: DerivativeOn) -> ContinuousLoop {
    let (pn, pd) = plant_tf(plant, PlantOutput::Position);
    let c = Poly::new(vec![kp, kd]);
    ContinuousLoop {
        plant_num: pn,
        plant_den: pd,
        f_num: match derivative {
            DerivativeOn::Error => c.clone(),
            DerivativeOn::Measurement => Poly::constant(kp),
        },
        c_num: c,
        c_den: Poly::constant(1.0),
    }
}

/// PD loop on the position as the firmware runs it:
/// `u[k] = Kp e[k] + Kd rate (e[k] - e[k-1])` (on error) or
/// `u[k] = Kp e[k] - Kd rate (y[k] - y[k-1])` (on measurement).
pub fn pd_discrete(
    plant: &Plant,
    kp: f64,
    kd: f64,
    derivative: DerivativeOn,
    rate_hz: f64,
    delayed: bool,
) -> DiscreteLoop {
    let kdt = kd * rate_hz;
    let c = vec![kp + kdt, -kdt];
    DiscreteLoop {
        plant: *plant,
        output: PlantOutput::Position,
        rate_hz,
        controller: DiscreteController {
            a: vec![1.0],
            f: match derivative {
                DerivativeOn::Error => c.clone(),
                DerivativeOn::Measurement => vec![kp],
            },
            c,
        },
        delayed,
    }
}

/// Lead loop on the position, continuous: `C(s) = Kc (T1 s + 1) / (alpha T1 s + 1)` on
/// the tracking error.
pub fn lead_continuous(plant: &Plant, kc: f64, alpha: f64, t1: f64) -> ContinuousLoop {
    let (pn, pd) = plant_tf(plant, PlantOutput::Position);
    let c = Poly::new(vec![kc, kc * t1]);
    ContinuousLoop {
        plant_num: pn,
        plant_den: pd,
        f_num: c.clone(),
        c_num: c,
        c_den: Poly::new(vec![1.0, alpha * t1]),
    }
}

/// Lead loop on the position as the firmware runs it, from its coefficients.
pub fn lead_discrete(plant: &Plant, coeffs: &LeadCoeffs, delayed: bool) -> DiscreteLoop {
    let c = vec![coeffs.b0, coeffs.b1];
    DiscreteLoop {
        plant: *plant,
        output: PlantOutput::Position,
        rate_hz: coeffs.rate_hz,
        controller: DiscreteController {
            a: vec![1.0, coeffs.a1],
            f: c.clone(),
            c,
        },
        delayed,
    }
}

/// PI loop on the speed, continuous: `C(s) = Kp + Ki / s` on the speed error.
pub fn pi_continuous(plant: &Plant, kp: f64, ki: f64) -> ContinuousLoop {
    let (pn, pd) = plant_tf(plant, PlantOutput::Speed);
    let c = Poly::new(vec![ki, kp]);
    ContinuousLoop {
        plant_num: pn,
        plant_den: pd,
        f_num: c.clone(),
        c_num: c,
        c_den: Poly::new(vec![0.0, 1.0]),
    }
}

/// PI loop on the speed as the firmware runs it: `s[k] = s[k-1] + Ki h e[k]`,
/// `u[k] = Kp e[k] + s[k]`, i.e. `u[k] - u[k-1] = (Kp + Ki h) e[k] - Kp e[k-1]`.
pub fn pi_discrete(plant: &Plant, kp: f64, ki: f64, rate_hz: f64, delayed: bool) -> DiscreteLoop {
    let kih = ki / rate_hz;
    let c = vec![kp + kih, -kp];
    DiscreteLoop {
        plant: *plant,
        output: PlantOutput::Speed,
        rate_hz,
        controller: DiscreteController {
            a: vec![1.0, -1.0],
            f: c.clone(),
            c,
        },
        delayed,
    }
}

fn report(
    band: SettlingBand,
    rate_hz: Option<f64>,
    cont: ContinuousLoop,
    disc: impl Fn(f64, bool) -> DiscreteLoop,
) -> ResponseReport {
    ResponseReport {
        band_pct: band.percent,
        rate_hz,
        continuous: cont.figures(band),
        discrete: rate_hz.map(|r| disc(r, false).figures(band)),
        discrete_delayed: rate_hz.map(|r| disc(r, true).figures(band)),
    }
}

/// Report of a PD position loop (`kp` V per unit, `kd` V per unit/s) in one form.
pub fn report_pd(
    plant: &Plant,
    kp: f64,
    kd: f64,
    rate_hz: Option<f64>,
    band: SettlingBand,
    derivative: DerivativeOn,
) -> ResponseReport {
    report(
        band,
        rate_hz,
        pd_continuous(plant, kp, kd, derivative),
        |r, d| pd_discrete(plant, kp, kd, derivative, r, d),
    )
}

/// Report of a PD position loop in both forms.
pub fn report_pd_both(
    plant: &Plant,
    kp: f64,
    kd: f64,
    rate_hz: Option<f64>,
    band: SettlingBand,
) -> PdReport {
    PdReport {
        derivative_on_error: report_pd(plant, kp, kd, rate_hz, band, DerivativeOn::Error),
        derivative_on_measurement: report_pd(
            plant,
            kp,
            kd,
            rate_hz,
            band,
            DerivativeOn::Measurement,
        ),
    }
}

/// Report of a lead position loop; the discrete blocks use [`lead_tustin`] pre-warped at
/// `prewarp_rad_s`.
pub fn report_lead(
    plant: &Plant,
    kc: f64,
    alpha: f64,
    t1: f64,
    rate_hz: Option<f64>,
    prewarp_rad_s: Option<f64>,
    band: SettlingBand,
) -> ResponseReport {
    report(
        band,
        rate_hz,
        lead_continuous(plant, kc, alpha, t1),
        |r, d| lead_discrete(plant, &lead_tustin(kc, alpha, t1, r, prewarp_rad_s), d),
    )
}

/// Report of a PI speed loop (`kp` V per unit/s, `ki` V per unit/s per s).
pub fn report_pi(
    plant: &Plant,
    kp: f64,
    ki: f64,
    rate_hz: Option<f64>,
    band: SettlingBand,
) -> ResponseReport {
    report(band, rate_hz, pi_continuous(plant, kp, ki), |r, d| {
        pi_discrete(plant, kp, ki, r, d)
    })
}

impl DiscreteLoop {
    /// Step figures only (no margins): the light evaluation used by searches. `None`
    /// when the loop is unstable or the input is not finite.
    pub fn step_figures(&self, band: SettlingBand) -> Option<StepFigures> {
        let cl = self.closed_loop();
        if !all_finite(&cl.num)
            || !all_finite(&cl.den)
            || self.rate_hz.is_nan()
            || self.rate_hz <= 0.0
        {
            return None;
        }
        let rho = cl.den.roots().iter().map(|p| p.abs()).fold(0.0, f64::max);
        if rho.is_nan() || rho >= 1.0 {
            return None;
        }
        let ticks = if rho > 0.0 {
            ((18.0 / -rho.ln()).ceil() as usize).clamp(200, 2_000_000)
        } else {
            200
        };
        let y = self.step(ticks);
        let h = 1.0 / self.rate_hz;
        let t: Vec<f64> = (0..ticks).map(|k| k as f64 * h).collect();
        let yf = cl.num.eval(1.0) / cl.den.eval(1.0);
        Some(response::sampled_figures(&t, &y, yf, band.fraction()))
    }
}
