//! Complex numbers, real polynomials and their roots: the small algebra the loop
//! analysis needs (orders up to about six).

use std::ops::{Add, Div, Mul, Neg, Sub};

/// A complex number (`re + j im`), serialised as `{ "re": .., "im": .. }`.
#[derive(Debug, Clone, Copy, PartialEq, Default, serde::Serialize, serde::Deserialize)]
pub struct Complex {
    /// Real part.
    pub re: f64,
    /// Imaginary part.
    pub im: f64,
}

impl Complex {
    /// `re + j im`.
    pub const fn new(re: f64, im: f64) -> Self {
        Complex { re, im }
    }
    /// A real number.
    pub const fn real(re: f64) -> Self {
        Complex { re, im: 0.0 }
    }
    /// `e^{j theta}`.
    pub fn from_angle(theta: f64) -> Self {
        Complex::new(theta.cos(), theta.sin())
    }
    /// Magnitude `|z|`.
    pub fn abs(self) -> f64 {
        self.re.hypot(self.im)
    }
    /// Argument in radians, in (-pi, pi].
    pub fn arg(self) -> f64 {
        self.im.atan2(self.re)
    }
    /// Complex conjugate.
    pub fn conj(self) -> Self {
        Complex::new(self.re, -self.im)
    }
    /// `e^z`.
    pub fn exp(self) -> Self {
        let m = self.re.exp();
        Complex::new(m * self.im.cos(), m * self.im.sin())
    }
}

impl Add for Complex {
    type Output = Complex;
    fn add(self, o: Complex) -> Complex {
        Complex::new(self.re + o.re, self.im + o.im)
    }
}
impl Sub for Complex {
    type Output = Complex;
    fn sub(self, o: Complex) -> Complex {
        Complex::new(self.re - o.re, self.im - o.im)
    }
}
impl Mul for Complex {
    type Output = Complex;
    fn mul(self, o: Complex) -> Complex {
        Complex::new(
            self.re * o.re - self.im * o.im,
            self.re * o.im + self.im * o.re,
        )
    }
}
impl Mul<f64> for Complex {
    type Output = Complex;
    fn mul(self, o: f64) -> Complex {
        Complex::new(self.re * o, self.im * o)
    }
}
impl Div for Complex {
    type Output = Complex;
    fn div(self, o: Complex) -> Complex {
        // Smith's algorithm: no overflow for large parts.
        if o.re.abs() >= o.im.abs() {
            let r = o.im / o.re;
            let d = o.re + o.im * r;
            Complex::new((self.re + self.im * r) / d, (self.im - self.re * r) / d)
        } else {
            let r = o.re / o.im;
            let d = o.re * r + o.im;
            Complex::new((self.re * r + self.im) / d, (self.im * r - self.re) / d)
        }
    }
}
impl Neg for Complex {
    type Output = Complex;
    fn neg(self) -> Complex {
        Complex::new(-self.re, -self.im)
    }
}

/// A real polynomial, coefficients in **ascending** powers: `c[0] + c[1] x + c[2] x^2 + ..`.
#[derive(Debug, Clone, PartialEq)]
pub struct Poly(pub Vec<f64>);

impl Poly {
    /// From ascending coefficients; trailing (highest-power) exact zeros are dropped.
    pub fn new(mut c: Vec<f64>) -> Self {
        while c.len() > 1 && c[c.len() - 1] == 0.0 {
            c.pop();
        }
        if c.is_empty() {
            c.push(0.0);
        }
        Poly(c)
    }
    /// The constant polynomial `k`.
    pub fn constant(k: f64) -> Self {
        Poly(vec![k])
    }
    /// Degree (0 for constants).
    pub fn degree(&self) -> usize {
        self.0.len() - 1
    }
    /// Coefficient of the highest power.
    pub fn leading(&self) -> f64 {
        self.0[self.0.len() - 1]
    }
    /// Value at a real point (Horner).
    pub fn eval(&self, x: f64) -> f64 {
        self.0.iter().rev().fold(0.0, |acc, &c| acc * x + c)
    }
    /// Value at a complex point (Horner).
    pub fn eval_c(&self, z: Complex) -> Complex {
        self.0
            .iter()
            .rev()
            .fold(Complex::default(), |acc, &c| acc * z + Complex::real(c))
    }
    /// Product of two polynomials.
    pub fn mul(&self, o: &Poly) -> Poly {
        let mut c = vec![0.0; self.0.len() + o.0.len() - 1];
        for (i, a) in self.0.iter().enumerate() {
            for (j, b) in o.0.iter().enumerate() {
                c[i + j] += a * b;
            }
        }
        Poly::new(c)
    }
    /// Sum of two polynomials.
    pub fn add(&self, o: &Poly) -> Poly {
        let n = self.0.len().max(o.0.len());
        let c = (0..n)
            .map(|i| self.0.get(i).unwrap_or(&0.0) + o.0.get(i).unwrap_or(&0.0))
            .collect();
        Poly::new(c)
    }
    /// Every coefficient times `k`.
    pub fn scale(&self, k: f64) -> Poly {
        Poly::new(self.0.iter().map(|c| c * k).collect())
    }
    /// Derivative.
    pub fn derivative(&self) -> Poly {
        if self.0.len() == 1 {
            return Poly::constant(0.0);
        }
        Poly::new(
            self.0
                .iter()
                .enumerate()
                .skip(1)
                .map(|(i, c)| c * i as f64)
                .collect(),
        )
    }

    /// All complex roots (Aberth-Ehrlich iteration, then Newton polishing on the
    /// original polynomial). Exact zero roots are split off first. Simple roots come out
    /// to about machine precision relative to their size; a double root to about
    /// `sqrt(eps)`. Conjugate pairs are made exactly conjugate, and roots are sorted by
    /// decreasing magnitude.
    pub fn roots(&self) -> Vec<Complex> {
        let mut c = self.0.clone();
        while c.len() > 1 && c[c.len() - 1] == 0.0 {
            c.pop();
        }
        let mut out = Vec::new();
        while c.len() > 1 && c[0] == 0.0 {
            c.remove(0);
            out.push(Complex::default());
        }
        let n = c.len() - 1;
        if n == 0 {
            return out;
        }
        let lead = c[n];
        let monic: Vec<f64> = c.iter().map(|x| x / lead).collect();
        let p = Poly(monic.clone());
        let dp = p.derivative();
        if n == 1 {
            out.push(Complex::real(-monic[0]));
            return sort_roots(out);
        }
        if n == 2 {
            // Quadratic formula in the cancellation-free form.
            let (b, cc) = (monic[1], monic[0]);
            let disc = b * b - 4.0 * cc;
            if disc >= 0.0 {
                let q = -0.5 * (b + b.signum() * disc.sqrt());
                let q = if q == 0.0 { -0.5 * disc.sqrt() } else { q };
                let r1 = q;
                let r2 = if q != 0.0 { cc / q } else { 0.0 };
                out.push(Complex::real(r1));
                out.push(Complex::real(r2));
            } else {
                let re = -0.5 * b;
                let im = 0.5 * (-disc).sqrt();
                out.push(Complex::new(re, im));
                out.push(Complex::new(re, -im));
            }
            return sort_roots(out);
        }
        // Cauchy bound for the initial circle.
        let radius = 1.0 + monic[..n].iter().fold(0.0f64, |m, x| m.max(x.abs()));
        let r0 = {
            // Geometric mean of the root magnitudes is |c0|^(1/n): a better start radius.
            let g = monic[0].abs().powf(1.0 / n as f64);
            if g > 0.0 && g.is_finite() {
                g.min(radius)
            } else {
                radius
            }
        };
        let mut z: Vec<Complex> = (0..n)
            .map(|k| {
                let th = 2.0 * std::f64::consts::PI * k as f64 / n as f64 + 0.4;
                Complex::from_angle(th) * r0
            })
            .collect();
        for _ in 0..500 {
            let mut max_step = 0.0f64;
            for i in 0..n {
                let pz = p.eval_c(z[i]);
                let dpz = dp.eval_c(z[i]);
                if pz.abs() == 0.0 {
                    continue;
                }
                let ratio = pz / dpz;
                let mut s = Complex::default();
                for j in 0..n {
                    if j != i {
                        s = s + Complex::real(1.0) / (z[i] - z[j]);
                    }
                }
                let w = ratio / (Complex::real(1.0) - ratio * s);
                if w.re.is_finite() && w.im.is_finite() {
                    z[i] = z[i] - w;
                    max_step = max_step.max(w.abs() / z[i].abs().max(1e-300));
                }
            }
            if max_step < 1e-15 {
                break;
            }
        }
        // Newton polishing on the (non-monic) original.
        for zi in z.iter_mut() {
            for _ in 0..3 {
                let pz = p.eval_c(*zi);
                let dpz = dp.eval_c(*zi);
                let step = pz / dpz;
                if step.re.is_finite()
                    && step.im.is_finite()
                    && step.abs() < 1e-3 * zi.abs().max(1e-12)
                {
                    *zi = *zi - step;
                }
            }
        }
        // Clean near-real roots and pair conjugates.
        let scale = z.iter().fold(0.0f64, |m, r| m.max(r.abs())).max(1e-300);
        for zi in z.iter_mut() {
            if zi.im.abs() < 1e-12 * scale.max(zi.abs()) {
                zi.im = 0.0;
            }
        }
        let mut used = vec![false; n];
        for i in 0..n {
            if used[i] || z[i].im == 0.0 {
                continue;
            }
            // Find its closest conjugate partner and average the pair.
            let mut best = None;
            let mut best_d = f64::INFINITY;
            for j in 0..n {
                if j != i && !used[j] {
                    let d = (z[j] - z[i].conj()).abs();
                    if d < best_d {
                        best_d = d;
                        best = Some(j);
                    }
                }
            }
            if let Some(j) = best {
                if best_d < 1e-6 * z[i].abs().max(1e-300) {
                    let re = 0.5 * (z[i].re + z[j].re);
                    let im = 0.5 * (z[i].im.abs() + z[j].im.abs());
                    z[i] = Complex::new(re, im);
                    z[j] = Complex::new(re, -im);
                    used[i] = true;
                    used[j] = true;
                }
            }
        }
        out.extend(z);
        sort_roots(out)
    }
}

fn sort_roots(mut r: Vec<Complex>) -> Vec<Complex> {
    r.sort_by(|a, b| {
        b.abs()
            .partial_cmp(&a.abs())
            .unwrap_or(std::cmp::Ordering::Equal)
            .then(b.im.partial_cmp(&a.im).unwrap_or(std::cmp::Ordering::Equal))
    });
    r
}

/// A rational function `num / den` (a transfer function in `s` or in `z`).
#[derive(Debug, Clone, PartialEq)]
pub struct Rational {
    /// Numerator.
    pub num: Poly,
    /// Denominator.
    pub den: Poly,
}

impl Rational {
    /// `num / den`.
    pub fn new(num: Poly, den: Poly) -> Self {
        Rational { num, den }
    }
    /// Value at a complex point.
    pub fn eval_c(&self, x: Complex) -> Complex {
        self.num.eval_c(x) / self.den.eval_c(x)
    }
    /// Product.
    pub fn mul(&self, o: &Rational) -> Rational {
        Rational::new(self.num.mul(&o.num), self.den.mul(&o.den))
    }
    /// Unity negative feedback around `self` as the forward path: `G / (1 + G)`.
    pub fn unity_feedback(&self) -> Rational {
        Rational::new(self.num.clone(), self.den.add(&self.num))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn roots_of_known_cubic() {
        // (x - 1)(x + 2)(x - 3) = x^3 - 2x^2 - 5x + 6
        let r = Poly::new(vec![6.0, -5.0, -2.0, 1.0]).roots();
        let mut re: Vec<f64> = r.iter().map(|z| z.re).collect();
        re.sort_by(|a, b| a.partial_cmp(b).unwrap());
        for (got, want) in re.iter().zip([-2.0, 1.0, 3.0]) {
            assert!((got - want).abs() < 1e-13, "{got} vs {want}");
        }
        assert!(r.iter().all(|z| z.im == 0.0));
    }

    #[test]
    fn roots_of_complex_quartic() {
        // (x^2 + 2x + 5)(x^2 - 0.5x + 0.3): roots -1 +- 2j and 0.25 +- j sqrt(0.2375)
        let a = Poly::new(vec![5.0, 2.0, 1.0]);
        let b = Poly::new(vec![0.3, -0.5, 1.0]);
        let r = a.mul(&b).roots();
        let w = 0.2375f64.sqrt();
        for want in [
            Complex::new(-1.0, 2.0),
            Complex::new(-1.0, -2.0),
            Complex::new(0.25, w),
            Complex::new(0.25, -w),
        ] {
            assert!(
                r.iter().any(|z| (*z - want).abs() < 1e-12),
                "{want:?} in {r:?}"
            );
        }
    }
}
