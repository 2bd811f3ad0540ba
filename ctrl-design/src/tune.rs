//! Loop design from intuitive targets: PD by pole placement, PD gains that meet targets
//! in the actual discrete loop, phase lead from crossover and phase margin, PI speed loop
//! from bandwidth and damping, feedforward and supply limits, move shapes, and loop-rate
//! and encoder checks.
//!
//! Units follow the plant's: with distance in "units" (mm, rad, counts), `kp` is V per
//! unit, `kd` V per unit/s, `kv` V per unit/s, `ka` V per unit/s^2. Every design is in
//! `f64`; quantising for the firmware is [`crate::emit`]'s job.

use std::fmt;

use crate::analysis::{self, lead_tustin};
pub use crate::analysis::{DerivativeOn, LeadCoeffs, SettlingBand, StepFigures};
use crate::plant::Plant;

/// Why a design was refused: the offending value and the range that would work.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum DesignError {
    /// A value is NaN, infinite or outside the range the formulas accept.
    OutOfRange {
        /// The input's name (as in the CLI flag / API parameter).
        field: &'static str,
        /// The value given.
        value: f64,
        /// The valid range, in words with units.
        valid: String,
    },
    /// The request is well-formed but no design meets it.
    Infeasible {
        /// The input that cannot be met.
        field: &'static str,
        /// The value given.
        value: f64,
        /// Why not.
        reason: String,
        /// The range that can be met, in words with units.
        valid: String,
    },
}

impl fmt::Display for DesignError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            DesignError::OutOfRange {
                field,
                value,
                valid,
            } => write!(f, "{field} = {value} is out of range: valid is {valid}"),
            DesignError::Infeasible {
                field,
                value,
                reason,
                valid,
            } => write!(
                f,
                "{field} = {value} cannot be met: {reason}; valid is {valid}"
            ),
        }
    }
}

impl std::error::Error for DesignError {}

fn check(field: &'static str, value: f64, ok: bool, valid: &str) -> Result<(), DesignError> {
    if value.is_finite() && ok {
        Ok(())
    } else {
        Err(DesignError::OutOfRange {
            field,
            value,
            valid: valid.to_string(),
        })
    }
}

fn check_plant(plant: &Plant) -> Result<(), DesignError> {
    check(
        "plant_gain",
        plant.gain,
        plant.gain > 0.0,
        "finite and > 0 (units/s per volt)",
    )?;
    check(
        "time_constant_s",
        plant.time_constant_s,
        plant.time_constant_s > 0.0,
        "finite and > 0 (s)",
    )?;
    check(
        "bias_volts",
        plant.bias_volts,
        plant.bias_volts >= 0.0,
        "finite and >= 0 (V)",
    )
}

fn check_rate(rate_hz: f64) -> Result<(), DesignError> {
    check(
        "rate_hz",
        rate_hz,
        rate_hz > 0.0 && rate_hz <= 1e6,
        "in (0, 1e6] Hz",
    )
}

fn check_band(band: SettlingBand) -> Result<(), DesignError> {
    check(
        "band_pct",
        band.percent,
        band.percent > 0.0 && band.percent < 50.0,
        "in (0, 50) percent",
    )
}

/// Damping ratios accepted by the designs.
pub const DAMPING_RANGE: (f64, f64) = (0.05, 10.0);

fn check_damping(zeta: f64) -> Result<(), DesignError> {
    check(
        "damping",
        zeta,
        (DAMPING_RANGE.0..=DAMPING_RANGE.1).contains(&zeta),
        "in [0.05, 10]",
    )
}

/// Textbook overshoot (percent) of the second-order step response without a zero:
/// `100 exp(-zeta pi / sqrt(1 - zeta^2))`, zero for `zeta >= 1` (Ogata, "Modern Control
/// Engineering", ch. 5 transient-response specifications, from memory).
pub fn second_order_overshoot_pct(zeta: f64) -> f64 {
    if zeta >= 1.0 {
        0.0
    } else {
        100.0 * (-zeta * std::f64::consts::PI / (1.0 - zeta * zeta).sqrt()).exp()
    }
}

/// The damping ratio whose textbook second-order overshoot is `overshoot_pct`:
/// `zeta = -ln(OS) / sqrt(pi^2 + ln(OS)^2)`; 1 for zero overshoot.
pub fn damping_for_overshoot(overshoot_pct: f64) -> f64 {
    if overshoot_pct <= 0.0 {
        return 1.0;
    }
    let l = (overshoot_pct / 100.0).ln();
    -l / (std::f64::consts::PI * std::f64::consts::PI + l * l).sqrt()
}

/// A PD position loop from pole placement.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct PdDesign {
    /// Proportional gain, V per unit of position error.
    pub kp: f64,
    /// Derivative gain, V per unit/s.
    pub kd: f64,
    /// Closed-loop natural frequency `wn`, rad/s.
    pub natural_frequency: f64,
    /// Requested damping ratio.
    pub damping: f64,
    /// Requested settling time, s.
    pub settling_time_s: f64,
    /// Settling band, percent.
    pub band_pct: f64,
    /// Settling-time factor `c` used in `wn = c / (zeta t_s)`.
    pub settling_factor: f64,
    /// Longest settling time that keeps `kd >= 0`: `2 c T`, s.
    pub longest_settling_time_s: f64,
    /// The PD zero `-kp / kd` (rad/s, negative real), `None` when `kd = 0`.
    pub zero_rad_s: Option<f64>,
    /// Textbook overshoot of the designed poles without the zero, percent.
    pub second_order_overshoot_pct: f64,
}

impl PdDesign {
    /// Derivative gain per tick as the firmware uses it (`kd * rate`), V per unit of
    /// position change per tick.
    pub fn kd_per_tick(&self, rate_hz: f64) -> f64 {
        self.kd * rate_hz
    }
}

/// PD gains by pole placement: closed-loop characteristic `s^2 + 2 zeta wn s + wn^2`
/// with `wn = c / (zeta t_s)` (`c` from the band, see [`SettlingBand::factor`]):
/// `Kp = wn^2 T / K`, `Kd = (2 zeta wn T - 1) / K`.
///
/// A settling time longer than `2 c T` would need `Kd < 0` and is refused, naming that
/// longest settling time.
///
/// ```
/// use ctrl_design::{Plant, tune::{design_pd, SettlingBand}};
/// let p = Plant::new(180.0, 0.09, 0.7).unwrap();
/// let d = design_pd(&p, 0.8, 0.3, SettlingBand::TWO_PERCENT).unwrap();
/// assert!((d.natural_frequency - 4.0 / (0.8 * 0.3)).abs() < 1e-12);
/// assert!(design_pd(&p, 0.8, 0.9, SettlingBand::TWO_PERCENT).is_err()); // > 8 T = 0.72 s
/// ```
pub fn design_pd(
    plant: &Plant,
    damping: f64,
    settling_time_s: f64,
    band: SettlingBand,
) -> Result<PdDesign, DesignError> {
    check_plant(plant)?;
    check_damping(damping)?;
    check_band(band)?;
    check(
        "settling_time_s",
        settling_time_s,
        settling_time_s > 0.0,
        "finite and > 0 (s)",
    )?;
    let (k, t) = (plant.gain, plant.time_constant_s);
    let c = band.factor();
    let longest = 2.0 * c * t;
    if settling_time_s > longest {
        return Err(DesignError::Infeasible {
            field: "settling_time_s",
            value: settling_time_s,
            reason: format!(
                "the derivative gain would be negative (Kd = (2 zeta wn T - 1) / K with wn = {c} / (zeta t_s)); \
                 the plant's own damping 1/T already exceeds the 2 zeta wn that slow a response asks for"
            ),
            valid: format!("0 < settling time <= 2 * {c} * T = {longest} s"),
        });
    }
    let wn = c / (damping * settling_time_s);
    let kp = wn * wn * t / k;
    let kd = ((2.0 * damping * wn * t - 1.0) / k).max(0.0);
    Ok(PdDesign {
        kp,
        kd,
        natural_frequency: wn,
        damping,
        settling_time_s,
        band_pct: band.percent,
        settling_factor: c,
        longest_settling_time_s: longest,
        zero_rad_s: (kd > 0.0).then(|| -kp / kd),
        second_order_overshoot_pct: second_order_overshoot_pct(damping),
    })
}

/// PD gains from pole-placement parameters, without range checks (used by the search).
fn pd_gains(plant: &Plant, zeta: f64, wn: f64) -> (f64, f64) {
    let (k, t) = (plant.gain, plant.time_constant_s);
    (wn * wn * t / k, (2.0 * zeta * wn * t - 1.0) / k)
}

/// Result of the target-meeting search.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct TargetDesign {
    /// Proportional gain, V per unit.
    pub kp: f64,
    /// Derivative gain, V per unit/s.
    pub kd: f64,
    /// `kd * rate`, V per unit per tick.
    pub kd_per_tick: f64,
    /// Requested overshoot, percent.
    pub target_overshoot_pct: f64,
    /// Requested settling time, s.
    pub target_settling_time_s: f64,
    /// Figures of the discrete loop with these gains.
    pub achieved: StepFigures,
    /// Pole-placement parameters these gains correspond to (`zeta`, `wn` rad/s).
    pub equivalent_damping: f64,
    /// See `equivalent_damping`.
    pub equivalent_natural_frequency: f64,
    /// Pole placement with the textbook damping for the overshoot and the requested
    /// settling time, `None` when that request is itself infeasible.
    pub pole_placement: Option<PdDesign>,
    /// Figures of the discrete loop with the pole-placement gains.
    pub pole_placement_achieved: Option<StepFigures>,
    /// Pole-placement overshoot minus the target, percentage points.
    pub pole_placement_overshoot_miss_pct: Option<f64>,
    /// Pole-placement settling time minus the target, s.
    pub pole_placement_settling_miss_s: Option<f64>,
}

fn discrete_step_figures(
    plant: &Plant,
    kp: f64,
    kd: f64,
    derivative: DerivativeOn,
    rate_hz: f64,
    delayed: bool,
    band: SettlingBand,
) -> Option<StepFigures> {
    let lp = analysis::pd_discrete(plant, kp, kd, derivative, rate_hz, delayed);
    lp.step_figures(band)
}

/// PD gains whose **actual** discrete response (ZOH plant at `rate_hz`, derivative as a
/// backward difference, optional one-tick delay) has at most `overshoot_pct` overshoot
/// and settles within `settling_time_s`, with the least aggressive gains that do.
///
/// Method: the gains are parametrised as pole placement `(zeta, wn)`. For each `wn` on a
/// logarithmic grid the smallest `zeta` (least derivative) whose actual overshoot is at
/// most the target is found by scan and bisection; then the smallest `wn` whose actual
/// settling time is within the target, by scan and bisection. The result is compared
/// with plain pole placement at the textbook damping for the overshoot.
pub fn meet_targets(
    plant: &Plant,
    overshoot_pct: f64,
    settling_time_s: f64,
    rate_hz: f64,
    band: SettlingBand,
    delayed: bool,
    derivative: DerivativeOn,
) -> Result<TargetDesign, DesignError> {
    check_plant(plant)?;
    check_rate(rate_hz)?;
    check_band(band)?;
    check(
        "overshoot_pct",
        overshoot_pct,
        (0.0..100.0).contains(&overshoot_pct),
        "in [0, 100) percent",
    )?;
    let h = 1.0 / rate_hz;
    check(
        "settling_time_s",
        settling_time_s,
        settling_time_s > 2.0 * h,
        &format!("finite and > 2 ticks = {} s", 2.0 * h),
    )?;
    let t = plant.time_constant_s;
    let c = band.factor();
    let eval = |zeta: f64, wn: f64| {
        let (kp, kd) = pd_gains(plant, zeta, wn);
        discrete_step_figures(plant, kp, kd.max(0.0), derivative, rate_hz, delayed, band)
    };
    let os_ok = |f: &Option<StepFigures>| matches!(f, Some(StepFigures { overshoot_pct: Some(o), settling_time_s: Some(_), .. }) if *o <= overshoot_pct);
    // Smallest zeta meeting the overshoot at this wn.
    let solve_zeta = |wn: f64| -> Option<(f64, StepFigures)> {
        let z_lo = (1.0 / (2.0 * wn * t)).max(0.02);
        let z_hi = 20.0f64.max(z_lo * 2.0);
        let n = 40;
        let r = (z_hi / z_lo).ln() / n as f64;
        let mut prev = z_lo;
        let first = eval(z_lo, wn);
        if os_ok(&first) {
            return first.map(|f| (z_lo, f));
        }
        for i in 1..=n {
            let z = z_lo * (r * i as f64).exp();
            let f = eval(z, wn);
            if os_ok(&f) {
                let (mut a, mut b, mut fb) = (prev, z, f);
                for _ in 0..30 {
                    let m = (a * b).sqrt();
                    let fm = eval(m, wn);
                    if os_ok(&fm) {
                        b = m;
                        fb = fm;
                    } else {
                        a = m;
                    }
                }
                return fb.map(|f| (b, f));
            }
            prev = z;
        }
        None
    };
    let settles = |s: &Option<(f64, StepFigures)>| match s {
        Some((_, f)) => f.settling_time_s.is_some_and(|ts| ts <= settling_time_s),
        None => false,
    };
    // wn grid around the textbook value for the targets.
    let wn_nominal = c / (damping_for_overshoot(overshoot_pct) * settling_time_s);
    let nyq = std::f64::consts::PI * rate_hz;
    let wn_lo = wn_nominal / 10.0;
    let wn_hi = (wn_nominal * 10.0).min(nyq);
    let n = 48;
    let r = (wn_hi / wn_lo).ln() / n as f64;
    let mut best_settle = f64::INFINITY;
    let mut any_os = false;
    let mut found = None;
    let mut prev = wn_lo;
    for i in 0..=n {
        let wn = wn_lo * (r * i as f64).exp();
        let s = solve_zeta(wn);
        if let Some((_, f)) = &s {
            any_os = true;
            if let Some(ts) = f.settling_time_s {
                best_settle = best_settle.min(ts);
            }
        }
        if settles(&s) {
            let (mut a, mut b, mut sb) = (prev, wn, s);
            if i > 0 {
                for _ in 0..30 {
                    let m = (a * b).sqrt();
                    let sm = solve_zeta(m);
                    if settles(&sm) {
                        b = m;
                        sb = sm;
                    } else {
                        a = m;
                    }
                }
            }
            found = sb.map(|(z, f)| (z, b, f));
            break;
        }
        prev = wn;
    }
    let Some((zeta, wn, achieved)) = found else {
        if !any_os {
            return Err(DesignError::Infeasible {
                field: "overshoot_pct",
                value: overshoot_pct,
                reason: format!("no PD gains near the request keep the discrete loop at {rate_hz} Hz within that overshoot"),
                valid: "a larger overshoot, or a faster loop rate".to_string(),
            });
        }
        return Err(DesignError::Infeasible {
            field: "settling_time_s",
            value: settling_time_s,
            reason: format!(
                "no PD gains found that settle that fast with at most {overshoot_pct} % overshoot at {rate_hz} Hz{}",
                if delayed { " with one tick of delay" } else { "" }
            ),
            valid: if best_settle.is_finite() {
                format!(">= {best_settle} s (the shortest found)")
            } else {
                "a longer settling time".to_string()
            },
        });
    };
    let (kp, kd) = pd_gains(plant, zeta, wn);
    let kd = kd.max(0.0);
    let pp = design_pd(
        plant,
        damping_for_overshoot(overshoot_pct).max(DAMPING_RANGE.0),
        settling_time_s,
        band,
    )
    .ok();
    let pp_fig = pp
        .as_ref()
        .and_then(|d| discrete_step_figures(plant, d.kp, d.kd, derivative, rate_hz, delayed, band));
    Ok(TargetDesign {
        kp,
        kd,
        kd_per_tick: kd * rate_hz,
        target_overshoot_pct: overshoot_pct,
        target_settling_time_s: settling_time_s,
        achieved,
        equivalent_damping: zeta,
        equivalent_natural_frequency: wn,
        pole_placement_overshoot_miss_pct: pp_fig
            .and_then(|f| f.overshoot_pct)
            .map(|o| o - overshoot_pct),
        pole_placement_settling_miss_s: pp_fig
            .and_then(|f| f.settling_time_s)
            .map(|s| s - settling_time_s),
        pole_placement: pp,
        pole_placement_achieved: pp_fig,
    })
}

/// Largest phase lead one lead stage is asked to give, degrees. Beyond it the design is
/// refused (alpha would be below 0.05 and the stage amplifies noise by 1/alpha > 20);
/// common practice puts the practical limit of one stage near 60-65 deg (common
/// practice, no source).
pub const MAX_LEAD_DEG: f64 = 65.0;
/// Lead above this is allowed with a warning (marginal: noise gain above 1/alpha ~ 10).
pub const MARGINAL_LEAD_DEG: f64 = 55.0;

/// A phase-lead position loop `C(s) = Kc (T1 s + 1) / (alpha T1 s + 1)`.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct LeadDesign {
    /// Gain, V per unit.
    pub kc: f64,
    /// Pole/zero ratio, in (0, 1).
    pub alpha: f64,
    /// Zero time constant, s.
    pub t1: f64,
    /// Phase lead the stage gives at the crossover, degrees.
    pub lead_deg: f64,
    /// Requested crossover, rad/s.
    pub crossover_rad_s: f64,
    /// Requested phase margin, degrees.
    pub phase_margin_deg: f64,
    /// Plant phase at the crossover, degrees.
    pub plant_phase_deg: f64,
    /// Warnings (marginal lead).
    pub warnings: Vec<String>,
}

impl LeadDesign {
    /// Tustin coefficients pre-warped at the crossover, for
    /// `u[k] = b0 e[k] + b1 e[k-1] - a1 u[k-1]`. The crossover must be below the
    /// Nyquist frequency `pi * rate`.
    pub fn discretize(&self, rate_hz: f64) -> Result<LeadCoeffs, DesignError> {
        check_rate(rate_hz)?;
        let nyq = std::f64::consts::PI * rate_hz;
        if self.crossover_rad_s >= nyq {
            return Err(DesignError::Infeasible {
                field: "rate_hz",
                value: rate_hz,
                reason: format!(
                    "the crossover {} rad/s is at or above the Nyquist frequency",
                    self.crossover_rad_s
                ),
                valid: format!(
                    "> crossover / pi = {} Hz",
                    self.crossover_rad_s / std::f64::consts::PI
                ),
            });
        }
        Ok(lead_tustin(
            self.kc,
            self.alpha,
            self.t1,
            rate_hz,
            Some(self.crossover_rad_s),
        ))
    }
}

/// Lead design from crossover `wc` and phase margin: the needed lead is
/// `phi = PM - 180 - angle P(j wc) = PM - 90 + atan(wc T)`,
/// `alpha = (1 - sin phi) / (1 + sin phi)`, `T1 = 1 / (wc sqrt(alpha))` (the maximum lead
/// sits at the crossover), `Kc = sqrt(alpha) / |P(j wc)|` (Ogata, "Modern Control
/// Engineering", frequency-response lead compensation, from memory).
///
/// Refused when the lead needed exceeds [`MAX_LEAD_DEG`] or is not positive (a plain
/// gain already gives that margin at that crossover); warned above [`MARGINAL_LEAD_DEG`].
pub fn design_lead(
    plant: &Plant,
    crossover_rad_s: f64,
    phase_margin_deg: f64,
) -> Result<LeadDesign, DesignError> {
    check_plant(plant)?;
    check(
        "crossover_rad_s",
        crossover_rad_s,
        crossover_rad_s > 0.0,
        "finite and > 0 (rad/s)",
    )?;
    check(
        "phase_margin_deg",
        phase_margin_deg,
        phase_margin_deg > 0.0 && phase_margin_deg < 90.0,
        "in (0, 90) degrees",
    )?;
    let (k, t) = (plant.gain, plant.time_constant_s);
    let wt = crossover_rad_s * t;
    let plant_phase = -90.0 - wt.atan().to_degrees();
    let plain = 180.0 + plant_phase;
    let phi = phase_margin_deg - plain;
    if phi <= 0.0 {
        return Err(DesignError::Infeasible {
            field: "phase_margin_deg",
            value: phase_margin_deg,
            reason: format!(
                "a plain gain already gives {plain} deg at {crossover_rad_s} rad/s: no lead is needed"
            ),
            valid: format!("({plain}, {}] deg at this crossover", plain + MAX_LEAD_DEG),
        });
    }
    if phi > MAX_LEAD_DEG {
        return Err(DesignError::Infeasible {
            field: "phase_margin_deg",
            value: phase_margin_deg,
            reason: format!(
                "it needs {phi} deg of lead at {crossover_rad_s} rad/s, more than one stage gives ({MAX_LEAD_DEG} deg)"
            ),
            valid: format!(
                "({plain}, {}] deg at this crossover, or a lower crossover",
                plain + MAX_LEAD_DEG
            ),
        });
    }
    let mut warnings = Vec::new();
    if phi > MARGINAL_LEAD_DEG {
        warnings.push(format!(
            "lead of {phi:.1} deg is marginal for one stage (above {MARGINAL_LEAD_DEG} deg): high-frequency gain 1/alpha amplifies encoder noise"
        ));
    }
    let s = phi.to_radians().sin();
    let alpha = (1.0 - s) / (1.0 + s);
    let t1 = 1.0 / (crossover_rad_s * alpha.sqrt());
    let plant_mag = k / (crossover_rad_s * (1.0 + wt * wt).sqrt());
    let kc = alpha.sqrt() / plant_mag;
    Ok(LeadDesign {
        kc,
        alpha,
        t1,
        lead_deg: phi,
        crossover_rad_s,
        phase_margin_deg,
        plant_phase_deg: plant_phase,
        warnings,
    })
}

/// A PI speed loop `C(s) = Kp + Ki / s`.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct PiDesign {
    /// Proportional gain, V per unit/s of speed error.
    pub kp: f64,
    /// Integral gain, V per unit/s per s.
    pub ki: f64,
    /// Closed-loop natural frequency, rad/s.
    pub natural_frequency: f64,
    /// Damping ratio of the closed-loop poles.
    pub damping: f64,
    /// Target (and achieved, continuous) -3 dB closed-loop bandwidth, rad/s.
    pub bandwidth_rad_s: f64,
    /// The PI zero `-ki / kp`, rad/s (`None` when `kp = 0`).
    pub zero_rad_s: Option<f64>,
}

impl PiDesign {
    /// Integral gain per tick (`ki / rate`), V per unit/s of speed error per tick.
    pub fn ki_per_tick(&self, rate_hz: f64) -> f64 {
        self.ki / rate_hz
    }

    /// The difference equation the firmware runs at `rate_hz`
    /// ([`FirstOrderSection::pi`] with `kp` and [`PiDesign::ki_per_tick`]).
    pub fn section(&self, rate_hz: f64) -> FirstOrderSection {
        FirstOrderSection::pi(self.kp, self.ki_per_tick(rate_hz))
    }
}

/// -3 dB bandwidth of the PI speed loop with poles `s^2 + 2 zeta wn s + wn^2`:
/// `T(s) = (b1 s + wn^2) / (s^2 + a1 s + wn^2)`, `a1 = 2 zeta wn`, `b1 = a1 - 1/T`;
/// `|T(jw)|^2 = g^2` with `g = 10^(-3/20)` is a quadratic in `x = w^2`:
/// `g^2 x^2 + (g^2 a1^2 - 2 g^2 b0 - b1^2) x + (g^2 - 1) b0^2 = 0`.
fn pi_bandwidth(zeta: f64, wn: f64, t: f64) -> f64 {
    let g2 = analysis::BANDWIDTH_DROP * analysis::BANDWIDTH_DROP;
    let a1 = 2.0 * zeta * wn;
    let b1 = a1 - 1.0 / t;
    let b0 = wn * wn;
    let qa = g2;
    let qb = g2 * a1 * a1 - 2.0 * g2 * b0 - b1 * b1;
    let qc = (g2 - 1.0) * b0 * b0;
    let x = (-qb + (qb * qb - 4.0 * qa * qc).sqrt()) / (2.0 * qa);
    x.sqrt()
}

/// PI speed-loop gains for a closed-loop -3 dB bandwidth and damping ratio: the poles are
/// placed at `s^2 + 2 zeta wn s + wn^2` (`Kp = (2 zeta wn T - 1) / K`, `Ki = wn^2 T / K`),
/// and `wn` is solved (bisection) so the closed loop, zero included, has the requested
/// bandwidth. Refused when that needs `Kp < 0`, naming the smallest bandwidth allowed.
pub fn design_pi(
    plant: &Plant,
    bandwidth_rad_s: f64,
    damping: f64,
) -> Result<PiDesign, DesignError> {
    check_plant(plant)?;
    check_damping(damping)?;
    check(
        "bandwidth_rad_s",
        bandwidth_rad_s,
        bandwidth_rad_s > 0.0,
        "finite and > 0 (rad/s)",
    )?;
    let (k, t) = (plant.gain, plant.time_constant_s);
    let wn_min = 1.0 / (2.0 * damping * t);
    let bw_min = pi_bandwidth(damping, wn_min, t);
    if bandwidth_rad_s < bw_min {
        return Err(DesignError::Infeasible {
            field: "bandwidth_rad_s",
            value: bandwidth_rad_s,
            reason: "the proportional gain would be negative (the plant's own damping 1/T already exceeds the 2 zeta wn asked for)"
                .to_string(),
            valid: format!(">= {bw_min} rad/s at damping {damping}"),
        });
    }
    // Bandwidth grows with wn: bracket and bisect.
    let (mut a, mut b) = (wn_min, wn_min.max(bandwidth_rad_s));
    while pi_bandwidth(damping, b, t) < bandwidth_rad_s {
        b *= 2.0;
    }
    for _ in 0..200 {
        let m = 0.5 * (a + b);
        if m <= a || m >= b {
            break;
        }
        if pi_bandwidth(damping, m, t) < bandwidth_rad_s {
            a = m;
        } else {
            b = m;
        }
    }
    let wn = 0.5 * (a + b);
    let kp = ((2.0 * damping * wn * t - 1.0) / k).max(0.0);
    let ki = wn * wn * t / k;
    Ok(PiDesign {
        kp,
        ki,
        natural_frequency: wn,
        damping,
        bandwidth_rad_s,
        zero_rad_s: (kp > 0.0).then(|| -ki / kp),
    })
}

/// Feedforward terms from the plant: `v = bias sign(speed) + kv speed + ka accel`.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Feedforward {
    /// Speed term `1 / K`, V per unit/s.
    pub kv: f64,
    /// Acceleration term `T / K`, V per unit/s^2.
    pub ka: f64,
    /// Friction bias, V (applied with the sign of the commanded speed).
    pub bias: f64,
}

impl Feedforward {
    /// Feedforward voltage for a commanded speed and acceleration.
    pub fn volts(&self, speed: f64, accel: f64) -> f64 {
        let b = if speed > 0.0 {
            self.bias
        } else if speed < 0.0 {
            -self.bias
        } else {
            0.0
        };
        b + self.kv * speed + self.ka * accel
    }
}

/// Feedforward that inverts the plant: `kv = 1 / K`, `ka = T / K`, `bias`.
pub fn feedforward(plant: &Plant) -> Feedforward {
    Feedforward {
        kv: 1.0 / plant.gain,
        ka: plant.time_constant_s / plant.gain,
        bias: plant.bias_volts,
    }
}

/// Peak feedforward voltage of a move: at the end of the acceleration, at cruise speed
/// with full acceleration still applied: `bias + cruise / K + accel T / K` (magnitudes).
pub fn move_peak_volts(plant: &Plant, cruise_speed: f64, accel: f64) -> f64 {
    let ff = feedforward(plant);
    ff.bias + ff.kv * cruise_speed.abs() + ff.ka * accel.abs()
}

/// The voltage a move needs against the lowest supply.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct MoveVoltage {
    /// Peak feedforward voltage, V.
    pub peak_volts: f64,
    /// Lowest supply voltage, V.
    pub supply_min_volts: f64,
    /// Supply left for feedback at the peak, V.
    pub headroom_volts: f64,
}

/// [`move_peak_volts`] checked against the lowest supply: refused when the move needs
/// more, naming the largest cruise speed that fits at this acceleration.
pub fn check_move_voltage(
    plant: &Plant,
    cruise_speed: f64,
    accel: f64,
    supply_min_volts: f64,
) -> Result<MoveVoltage, DesignError> {
    check_plant(plant)?;
    check(
        "cruise_speed",
        cruise_speed,
        cruise_speed > 0.0,
        "finite and > 0 (units/s)",
    )?;
    check("accel", accel, accel > 0.0, "finite and > 0 (units/s^2)")?;
    check(
        "supply_min_volts",
        supply_min_volts,
        supply_min_volts > 0.0,
        "finite and > 0 (V)",
    )?;
    let peak = move_peak_volts(plant, cruise_speed, accel);
    if peak > supply_min_volts {
        let ff = feedforward(plant);
        let max_cruise = (supply_min_volts - ff.bias - ff.ka * accel) / ff.kv;
        return Err(DesignError::Infeasible {
            field: "cruise_speed",
            value: cruise_speed,
            reason: format!(
                "the move needs {peak} V at its peak (bias + cruise/K + accel T/K) but the lowest supply is {supply_min_volts} V"
            ),
            valid: if max_cruise > 0.0 {
                format!("<= {max_cruise} units/s at accel {accel}")
            } else {
                format!("none at accel {accel}: lower the acceleration")
            },
        });
    }
    Ok(MoveVoltage {
        peak_volts: peak,
        supply_min_volts,
        headroom_volts: supply_min_volts - peak,
    })
}

/// Shape of a move's speed profile.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Shape {
    /// Accelerate, cruise, decelerate.
    Trapezoid,
    /// The cruise speed is never reached: accelerate then decelerate.
    Triangle,
}

/// Timing of one move.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct ProfileShape {
    /// Trapezoid or triangle.
    pub shape: Shape,
    /// Highest speed reached, units/s.
    pub peak_speed: f64,
    /// Time from the start to the peak speed, s.
    pub time_to_peak_s: f64,
    /// Time at cruise speed, s (0 for a triangle).
    pub cruise_time_s: f64,
    /// Time from the peak speed to the end speed, s.
    pub decel_time_s: f64,
    /// Total time, s.
    pub total_time_s: f64,
}

/// Shape and timing of a move over `distance` with symmetric acceleration `accel`, from
/// `start_speed` to `end_speed` (both in `[0, cruise]`).
///
/// `distance` may be negative (a move backwards) or zero: the shape and times depend only on
/// `|distance|`, and every speed here (inputs and `peak_speed`) is a magnitude along the
/// direction of motion, as in `ctrl-core`'s `Move`. A zero distance is feasible only when the
/// end speed equals the start speed (0 s).
///
/// Trapezoid when `distance >= (vc^2 - v0^2) / 2a + (vc^2 - v1^2) / 2a`, else triangle with
/// peak `sqrt(a d + (v0^2 + v1^2) / 2)`. An end speed outside
/// `[sqrt(max(v0^2 - 2 a d, 0)), min(vc, sqrt(v0^2 + 2 a d))]` cannot be reached in the
/// distance and is refused with that range.
pub fn profile_shape(
    distance: f64,
    cruise_speed: f64,
    accel: f64,
    start_speed: f64,
    end_speed: f64,
) -> Result<ProfileShape, DesignError> {
    check(
        "distance",
        distance,
        true,
        "finite (units; the sign is the direction)",
    )?;
    check(
        "cruise_speed",
        cruise_speed,
        cruise_speed > 0.0,
        "finite and > 0 (units/s)",
    )?;
    check("accel", accel, accel > 0.0, "finite and > 0 (units/s^2)")?;
    check(
        "start_speed",
        start_speed,
        (0.0..=cruise_speed).contains(&start_speed),
        &format!("in [0, cruise speed = {cruise_speed}] units/s"),
    )?;
    let (v0, vc, a, d) = (start_speed, cruise_speed, accel, distance.abs());
    let lo = (v0 * v0 - 2.0 * a * d).max(0.0).sqrt();
    let hi = vc.min((v0 * v0 + 2.0 * a * d).sqrt());
    if !(end_speed.is_finite() && end_speed >= lo && end_speed <= hi) {
        return Err(DesignError::Infeasible {
            field: "end_speed",
            value: end_speed,
            reason: format!(
                "from {v0} units/s at {a} units/s^2 over {d} units (cruise {vc} units/s) it cannot be reached"
            ),
            valid: format!("[{lo}, {hi}] units/s"),
        });
    }
    let v1 = end_speed;
    let d_acc = (vc * vc - v0 * v0) / (2.0 * a);
    let d_dec = (vc * vc - v1 * v1) / (2.0 * a);
    if d_acc + d_dec <= d {
        let t_acc = (vc - v0) / a;
        let t_dec = (vc - v1) / a;
        let t_cruise = (d - d_acc - d_dec) / vc;
        Ok(ProfileShape {
            shape: Shape::Trapezoid,
            peak_speed: vc,
            time_to_peak_s: t_acc,
            cruise_time_s: t_cruise,
            decel_time_s: t_dec,
            total_time_s: t_acc + t_cruise + t_dec,
        })
    } else {
        let vp = (a * d + 0.5 * (v0 * v0 + v1 * v1)).sqrt();
        let t_acc = ((vp - v0) / a).max(0.0);
        let t_dec = ((vp - v1) / a).max(0.0);
        Ok(ProfileShape {
            shape: Shape::Triangle,
            peak_speed: vp,
            time_to_peak_s: t_acc,
            cruise_time_s: 0.0,
            decel_time_s: t_dec,
            total_time_s: t_acc + t_dec,
        })
    }
}

/// Loop rate should be at least this many times the closed-loop bandwidth (in Hz)
/// (common practice, no source).
pub const MIN_RATE_PER_BANDWIDTH: f64 = 10.0;
/// Largest voltage step one encoder count may cause through the derivative term, as a
/// share of the lowest supply (a project choice: above it the drive audibly chatters).
pub const MAX_DERIVATIVE_STEP_SHARE: f64 = 0.1;

/// Inputs of [`check_rate_and_encoder`].
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct LoopCheckInput {
    /// Closed-loop -3 dB bandwidth, rad/s.
    pub bandwidth_rad_s: f64,
    /// Loop rate, Hz.
    pub rate_hz: f64,
    /// Cruise speed of the fastest move, units/s.
    pub cruise_speed: f64,
    /// Size of one encoder count, units.
    pub count_size: f64,
    /// Proportional gain, V per unit.
    pub kp: f64,
    /// Derivative gain, V per unit/s.
    pub kd: f64,
    /// Lowest supply voltage, V.
    pub supply_min_volts: f64,
    /// Loop crossover, rad/s, to state the phase the suggested filter costs there.
    pub crossover_rad_s: Option<f64>,
}

/// A derivative filter that brings the per-count voltage step down: the PD with a
/// first-order filter on the derivative, `Kp + Kd s / (tau s + 1)`, which is the lead
/// `Kc (T1 s + 1) / (alpha T1 s + 1)` with `Kc = Kp`, `T1 = tau + Kd / Kp`,
/// `alpha = tau / T1`.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct DerivativeFilter {
    /// Filter time constant, s.
    pub time_constant_s: f64,
    /// Lead gain, V per unit.
    pub kc: f64,
    /// Lead pole/zero ratio.
    pub alpha: f64,
    /// Lead zero time constant, s.
    pub t1: f64,
    /// Voltage step per count of the discretised lead (`b0 * count`), V.
    pub step_volts: f64,
    /// Phase given up at the crossover compared with the unfiltered PD, degrees.
    pub phase_cost_deg: Option<f64>,
}

/// Result of [`check_rate_and_encoder`].
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct LoopCheck {
    /// Loop rate divided by the closed-loop bandwidth in Hz.
    pub rate_per_bandwidth: f64,
    /// Distance per tick at cruise speed, units.
    pub distance_per_tick: f64,
    /// Encoder counts per tick at cruise speed.
    pub counts_per_tick: f64,
    /// Voltage step one count causes through the derivative: `Kd * rate * count`, V.
    pub derivative_step_volts: f64,
    /// That step as a share of the lowest supply.
    pub derivative_step_share: f64,
    /// A filter that brings the step within [`MAX_DERIVATIVE_STEP_SHARE`], when needed and possible.
    pub suggested_filter: Option<DerivativeFilter>,
    /// Warnings, in words.
    pub warnings: Vec<String>,
}

/// Loop-rate and encoder checks: rate vs closed-loop bandwidth (warn below
/// [`MIN_RATE_PER_BANDWIDTH`]), distance per tick at cruise (warn below one count per
/// tick: the speed reading is then coarser than the speed), and the voltage step per
/// encoder count through the derivative (warn above [`MAX_DERIVATIVE_STEP_SHARE`] of the
/// supply, and suggest the derivative filter whose discretised step per count is at that
/// share).
pub fn check_rate_and_encoder(input: &LoopCheckInput) -> Result<LoopCheck, DesignError> {
    let i = input;
    let rate = check_loop_rate(i.bandwidth_rad_s, i.rate_hz)?;
    check_cruise_and_count(i.cruise_speed, i.count_size)?;
    check("kp", i.kp, i.kp > 0.0, "finite and > 0 (V per unit)")?;
    check("kd", i.kd, i.kd >= 0.0, "finite and >= 0 (V per unit/s)")?;
    check(
        "supply_min_volts",
        i.supply_min_volts,
        i.supply_min_volts > 0.0,
        "finite and > 0 (V)",
    )?;
    let mut warnings: Vec<String> = rate.warning.into_iter().collect();
    let ratio = rate.rate_per_bandwidth;
    let (dpt, cpt) = cruise_resolution(i.cruise_speed, i.rate_hz, i.count_size, &mut warnings);
    // The derivative term alone, `kd rate (e[k] - e[k-1])`: its first-tick jump per count is
    // `kd rate count` (the proportional part is not counted here; see [`count_step`]).
    let derivative = FirstOrderSection::pd_derivative(i.kd, i.rate_hz);
    let step = count_step(&derivative, i.count_size, i.supply_min_volts).step_volts;
    let share = step / i.supply_min_volts;
    let mut suggested = None;
    if share > MAX_DERIVATIVE_STEP_SHARE {
        let limit = MAX_DERIVATIVE_STEP_SHARE * i.supply_min_volts / i.count_size;
        warnings.push(format!(
            "one encoder count moves the derivative term by {step:.3} V ({:.0} % of the {} V supply, above {:.0} %): the drive will chatter",
            share * 100.0,
            i.supply_min_volts,
            MAX_DERIVATIVE_STEP_SHARE * 100.0
        ));
        if limit > i.kp {
            // b0 = Kp + Kd c / (tau c + 1) (Tustin, c = 2 rate, or pre-warped) <= limit.
            let c = match i.crossover_rad_s {
                Some(w) if w < std::f64::consts::PI * i.rate_hz => {
                    w / (w / (2.0 * i.rate_hz)).tan()
                }
                _ => 2.0 * i.rate_hz,
            };
            let tau = (i.kd / (limit - i.kp) - 1.0 / c).max(0.0);
            let t1 = tau + i.kd / i.kp;
            let alpha = tau / t1;
            let coeffs = lead_tustin(
                i.kp,
                alpha,
                t1,
                i.rate_hz,
                i.crossover_rad_s
                    .filter(|w| *w < std::f64::consts::PI * i.rate_hz),
            );
            let phase_cost = i.crossover_rad_s.map(|w| {
                let pd = (w * i.kd / i.kp).atan();
                let lead = (w * t1).atan() - (w * alpha * t1).atan();
                (pd - lead).to_degrees()
            });
            suggested = Some(DerivativeFilter {
                time_constant_s: tau,
                kc: i.kp,
                alpha,
                t1,
                step_volts: coeffs.b0 * i.count_size,
                phase_cost_deg: phase_cost,
            });
        } else {
            warnings.push(format!(
                "the proportional term alone moves {:.3} V per count: no derivative filter helps; use a finer encoder or a lower kp",
                i.kp * i.count_size
            ));
        }
    }
    Ok(LoopCheck {
        rate_per_bandwidth: ratio,
        distance_per_tick: dpt,
        counts_per_tick: cpt,
        derivative_step_volts: step,
        derivative_step_share: share,
        suggested_filter: suggested,
        warnings,
    })
}

/// Result of [`check_loop_rate`].
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct RateCheck {
    /// Closed-loop -3 dB bandwidth, Hz.
    pub bandwidth_hz: f64,
    /// Loop rate divided by the closed-loop bandwidth in Hz.
    pub rate_per_bandwidth: f64,
    /// The warning when the ratio is below [`MIN_RATE_PER_BANDWIDTH`].
    pub warning: Option<String>,
}

/// Loop rate against the closed-loop bandwidth: warns when `rate < MIN_RATE_PER_BANDWIDTH *
/// bandwidth / (2 pi)` (common practice, no source). Any loop form.
pub fn check_loop_rate(bandwidth_rad_s: f64, rate_hz: f64) -> Result<RateCheck, DesignError> {
    check(
        "bandwidth_rad_s",
        bandwidth_rad_s,
        bandwidth_rad_s > 0.0,
        "finite and > 0 (rad/s)",
    )?;
    check_rate(rate_hz)?;
    let bw_hz = bandwidth_rad_s / (2.0 * std::f64::consts::PI);
    let ratio = rate_hz / bw_hz;
    let warning = (ratio < MIN_RATE_PER_BANDWIDTH).then(|| {
        format!(
            "loop rate {rate_hz} Hz is only {ratio:.1} x the closed-loop bandwidth {bw_hz:.2} Hz (common practice: at least {MIN_RATE_PER_BANDWIDTH} x); expect less margin than the continuous design"
        )
    });
    Ok(RateCheck {
        bandwidth_hz: bw_hz,
        rate_per_bandwidth: ratio,
        warning,
    })
}

fn check_cruise_and_count(cruise_speed: f64, count_size: f64) -> Result<(), DesignError> {
    check(
        "cruise_speed",
        cruise_speed,
        cruise_speed >= 0.0,
        "finite and >= 0 (units/s)",
    )?;
    check(
        "count_size",
        count_size,
        count_size > 0.0,
        "finite and > 0 (units)",
    )
}

/// Distance and counts per tick at cruise; warns below one count per tick.
fn cruise_resolution(
    cruise_speed: f64,
    rate_hz: f64,
    count_size: f64,
    warnings: &mut Vec<String>,
) -> (f64, f64) {
    let dpt = cruise_speed / rate_hz;
    let cpt = dpt / count_size;
    if cruise_speed > 0.0 && cpt < 1.0 {
        warnings.push(format!(
            "at cruise the wheel moves {cpt:.2} counts per tick: the per-tick speed reading is coarser than the speed"
        ));
    }
    (dpt, cpt)
}

/// A first-order difference equation `u[k] = b0 e[k] + b1 e[k-1] - a1 u[k-1]`, that is
/// `C(z) = (b0 + b1 z^-1) / (1 + a1 z^-1)`: the form in which the firmware runs the lead
/// ([`LeadCoeffs`]), the PI speed loop ([`FirstOrderSection::pi`]) and the PD's derivative
/// term ([`FirstOrderSection::pd_derivative`]).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct FirstOrderSection {
    /// Weight of the present input, V per input unit.
    pub b0: f64,
    /// Weight of the previous input, V per input unit.
    pub b1: f64,
    /// Weight of the previous output (enters with a minus sign).
    pub a1: f64,
}

impl FirstOrderSection {
    /// The discrete lead `u[k] = b0 e[k] + b1 e[k-1] - a1 u[k-1]`.
    pub fn from_lead(c: &LeadCoeffs) -> Self {
        FirstOrderSection {
            b0: c.b0,
            b1: c.b1,
            a1: c.a1,
        }
    }

    /// `ctrl-core`'s PI, `I[k] = I[k-1] + ki_per_tick e[k]`, `u[k] = kp e[k] + I[k]`: with
    /// `u[k] - u[k-1] = (kp + ki_per_tick) e[k] - kp e[k-1]` it is `b0 = kp + ki_per_tick`,
    /// `b1 = -kp`, `a1 = -1` (the integrator's pole at `z = 1`).
    pub fn pi(kp: f64, ki_per_tick: f64) -> Self {
        FirstOrderSection {
            b0: kp + ki_per_tick,
            b1: -kp,
            a1: -1.0,
        }
    }

    /// The PD's derivative term alone, `kd rate (e[k] - e[k-1])`: `b0 = kd rate`,
    /// `b1 = -kd rate`, `a1 = 0`.
    pub fn pd_derivative(kd: f64, rate_hz: f64) -> Self {
        let g = kd * rate_hz;
        FirstOrderSection {
            b0: g,
            b1: -g,
            a1: 0.0,
        }
    }

    /// The output's jump on the first tick of a unit step of the input, from rest: `|b0|`
    /// (initial-value theorem of the z-transform, `u[0] = lim_{z -> inf} C(z) E(z)` with
    /// `E(z) = 1 / (1 - z^-1)`; Ogata, "Discrete-Time Control Systems", z-transform
    /// theorems, from memory; or directly: `e[-1] = u[-1] = 0` leave `u[0] = b0 e[0]`).
    pub fn first_tick_gain(&self) -> f64 {
        self.b0.abs()
    }

    /// Gain at the Nyquist frequency: `|C(z = -1)| = |b0 - b1| / |1 - a1|`, since
    /// `z = e^{j w h} = -1` at `w = pi / h` (frequency response of a discrete transfer
    /// function; Franklin, Powell and Workman, "Digital Control of Dynamic Systems", from
    /// memory). It is the tick-to-tick swing per unit when the input toggles between two
    /// values every tick. Infinite for a pole at `z = -1` (`a1 = 1`). For a Tustin-mapped
    /// lead it is the continuous lead's high-frequency gain `Kc / alpha` exactly (Tustin maps
    /// `s = inf` to `z = -1`).
    pub fn high_frequency_gain(&self) -> f64 {
        let d = (1.0 - self.a1).abs();
        if d == 0.0 {
            f64::INFINITY
        } else {
            (self.b0 - self.b1).abs() / d
        }
    }
}

impl From<&LeadCoeffs> for FirstOrderSection {
    fn from(c: &LeadCoeffs) -> Self {
        FirstOrderSection::from_lead(c)
    }
}

/// The voltage one measurement quantum causes at a [`FirstOrderSection`]'s output.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct CountStep {
    /// The measurement quantum: one encoder count (position loops, units) or one count per
    /// tick (speed loops, units/s).
    pub quantum: f64,
    /// First-tick jump for a one-quantum step of the reading: `|b0| * quantum`, V.
    pub step_volts: f64,
    /// That jump as a share of the lowest supply.
    pub step_share: f64,
    /// Largest jump accepted: [`MAX_DERIVATIVE_STEP_SHARE`] x the lowest supply, V.
    pub step_limit_volts: f64,
    /// `|C(-1)|` ([`FirstOrderSection::high_frequency_gain`]), V per input unit.
    pub high_frequency_gain: f64,
    /// `|C(-1)| * quantum`: the tick-to-tick swing when the reading toggles between two
    /// adjacent counts every tick, V (reported, not judged).
    pub toggle_volts: f64,
    /// `step_share > MAX_DERIVATIVE_STEP_SHARE`: the drive will chatter.
    pub chatters: bool,
}

/// One measurement quantum through a section: the first-tick jump `|b0| quantum` against
/// [`MAX_DERIVATIVE_STEP_SHARE`] of the lowest supply, the same limit the PD's derivative
/// check uses (and the same measure its suggested derivative filter is sized by: `b0 *
/// count`). The inputs are not range-checked here; [`check_section_rate_and_encoder`] and
/// [`check_rate_and_encoder`] do that.
pub fn count_step(section: &FirstOrderSection, quantum: f64, supply_min_volts: f64) -> CountStep {
    let step = section.first_tick_gain() * quantum;
    let share = step / supply_min_volts;
    let hf = section.high_frequency_gain();
    CountStep {
        quantum,
        step_volts: step,
        step_share: share,
        step_limit_volts: MAX_DERIVATIVE_STEP_SHARE * supply_min_volts,
        high_frequency_gain: hf,
        toggle_volts: hf * quantum,
        chatters: share > MAX_DERIVATIVE_STEP_SHARE,
    }
}

/// What a loop measures, which sets its measurement quantum.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Measured {
    /// A position loop (PD, lead): the quantum is one count, `count_size` units.
    Position,
    /// A speed loop (PI) reading the speed as counts per tick: the quantum is one count per
    /// tick, `count_size * rate` units/s.
    Speed,
}

/// Inputs of [`check_section_rate_and_encoder`].
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct SectionCheckInput {
    /// Closed-loop -3 dB bandwidth, rad/s.
    pub bandwidth_rad_s: f64,
    /// Loop rate, Hz.
    pub rate_hz: f64,
    /// Cruise speed of the fastest move, units/s (0: no per-tick check).
    pub cruise_speed: f64,
    /// Size of one encoder count, units.
    pub count_size: f64,
    /// Position or speed loop.
    pub measured: Measured,
    /// The controller's difference equation, V per unit (position) or per unit/s (speed).
    pub section: FirstOrderSection,
    /// Lowest supply voltage, V.
    pub supply_min_volts: f64,
}

/// Result of [`check_section_rate_and_encoder`].
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct SectionCheck {
    /// Loop rate divided by the closed-loop bandwidth in Hz.
    pub rate_per_bandwidth: f64,
    /// Distance per tick at cruise speed, units.
    pub distance_per_tick: f64,
    /// Encoder counts per tick at cruise speed.
    pub counts_per_tick: f64,
    /// Position or speed loop.
    pub measured: Measured,
    /// The voltage one quantum causes.
    pub count_step: CountStep,
    /// Factor on every gain of the section that puts the step at the limit
    /// (`limit / step`; below 1 when it chatters).
    pub gain_scale_to_limit: f64,
    /// Largest count size at which these gains step within the limit, units.
    pub largest_count_size: f64,
    /// Warnings, in words.
    pub warnings: Vec<String>,
}

/// The loop-rate and encoder checks of [`check_rate_and_encoder`] for a loop given by its
/// difference equation (the lead, the PI): rate vs closed-loop bandwidth, counts per tick at
/// cruise, and the first-tick voltage jump of one measurement quantum against
/// [`MAX_DERIVATIVE_STEP_SHARE`] of the lowest supply ([`count_step`]), with the gain
/// scale and the count size that would bring it within the limit.
///
/// ```
/// use ctrl_design::tune::{check_section_rate_and_encoder, FirstOrderSection, Measured, SectionCheckInput};
/// // A PI with kp 0.02 V/(mm/s) reading 0.5 mm counts once per tick at 500 Hz: one count per
/// // tick is 250 mm/s, so the first tick jumps (0.02 + 0.001) * 250 = 5.25 V.
/// let c = check_section_rate_and_encoder(&SectionCheckInput {
///     bandwidth_rad_s: 60.0, rate_hz: 500.0, cruise_speed: 0.0, count_size: 0.5,
///     measured: Measured::Speed, section: FirstOrderSection::pi(0.02, 0.001),
///     supply_min_volts: 6.4,
/// }).unwrap();
/// assert!((c.count_step.step_volts - 5.25).abs() < 1e-12);
/// assert!(c.count_step.chatters);
/// ```
pub fn check_section_rate_and_encoder(
    input: &SectionCheckInput,
) -> Result<SectionCheck, DesignError> {
    let i = input;
    let rate = check_loop_rate(i.bandwidth_rad_s, i.rate_hz)?;
    check_cruise_and_count(i.cruise_speed, i.count_size)?;
    for (field, v) in [
        ("b0", i.section.b0),
        ("b1", i.section.b1),
        ("a1", i.section.a1),
    ] {
        check(field, v, true, "finite")?;
    }
    check(
        "supply_min_volts",
        i.supply_min_volts,
        i.supply_min_volts > 0.0,
        "finite and > 0 (V)",
    )?;
    let mut warnings: Vec<String> = rate.warning.into_iter().collect();
    let (dpt, cpt) = cruise_resolution(i.cruise_speed, i.rate_hz, i.count_size, &mut warnings);
    let quantum = match i.measured {
        Measured::Position => i.count_size,
        Measured::Speed => i.count_size * i.rate_hz,
    };
    let step = count_step(&i.section, quantum, i.supply_min_volts);
    let scale = step.step_limit_volts / step.step_volts;
    let largest_count = i.count_size * scale;
    if step.chatters {
        let what = match i.measured {
            Measured::Position => format!("one encoder count ({} units)", i.count_size),
            Measured::Speed => format!(
                "one count per tick of speed reading ({quantum:.4} units/s = {} units x {} Hz)",
                i.count_size, i.rate_hz
            ),
        };
        warnings.push(format!(
            "{what} moves the output by {:.3} V on the first tick ({:.0} % of the {} V supply, above {:.0} %): the drive will chatter",
            step.step_volts,
            step.step_share * 100.0,
            i.supply_min_volts,
            MAX_DERIVATIVE_STEP_SHARE * 100.0
        ));
        warnings.push(format!(
            "to bring it within {:.0} %: scale the gains by {scale:.3} (a slower loop) or use a count of at most {largest_count:.4} units",
            MAX_DERIVATIVE_STEP_SHARE * 100.0
        ));
    }
    Ok(SectionCheck {
        rate_per_bandwidth: rate.rate_per_bandwidth,
        distance_per_tick: dpt,
        counts_per_tick: cpt,
        measured: i.measured,
        count_step: step,
        gain_scale_to_limit: scale,
        largest_count_size: largest_count,
        warnings,
    })
}
