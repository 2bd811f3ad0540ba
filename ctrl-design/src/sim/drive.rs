//! The nonlinear drive model, stepped exactly over one tick.
//!
//! Between ticks the applied voltage is held (zero-order hold), so the first-order speed
//! equation of [`Plant`] has a closed-form solution over the tick. While the wheel turns,
//! friction takes `bias` volts off the drive in the direction of motion; a stopped wheel
//! stays stopped while `|v| <= bias`. A tick in which the speed reaches zero is split at
//! the instant it stops: the wheel then stays stopped or starts the other way for the rest
//! of the tick. Nothing is approximated except f64 rounding.

use crate::Plant;

/// Exact per-tick state of one axis' drive, in the plant's units (position in units, speed
/// in units/s).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Drive {
    gain: f64,
    time_constant_s: f64,
    bias_volts: f64,
    tick_s: f64,
    /// `exp(-tick / T)`: the speed's decay over one tick.
    decay: f64,
    /// `T * (1 - decay)`: the position gained per unit of initial speed excess.
    lag_s: f64,
    /// Position, plant units.
    pub position: f64,
    /// Speed, plant units per second.
    pub speed: f64,
}

impl Drive {
    /// A drive at rest at position 0, stepped `tick_s` seconds at a time.
    ///
    /// `tick_s` must be finite and > 0 (the caller checks it; see
    /// [`SimConfig::check`](super::SimConfig::check)).
    pub fn new(plant: &Plant, tick_s: f64) -> Self {
        let decay = (-tick_s / plant.time_constant_s).exp();
        Drive {
            gain: plant.gain,
            time_constant_s: plant.time_constant_s,
            bias_volts: plant.bias_volts,
            tick_s,
            decay,
            lag_s: plant.time_constant_s * (1.0 - decay),
            position: 0.0,
            speed: 0.0,
        }
    }

    /// Steady speed the drive tends to under `volts` while moving in direction `dir`
    /// (`+1` or `-1`).
    #[inline]
    fn target_speed(&self, volts: f64, dir: f64) -> f64 {
        self.gain * (volts - self.bias_volts * dir)
    }

    /// Advances one tick with `volts` held (the drive voltage plus any load disturbance,
    /// expressed as the voltage that balances it).
    #[inline]
    pub fn step(&mut self, volts: f64) {
        let w0 = self.speed;
        if w0 == 0.0 {
            if volts.abs() <= self.bias_volts {
                return;
            }
            // Starting from rest the speed moves monotonically towards the target: no stop.
            let wss = self.target_speed(volts, volts.signum());
            self.position += wss * self.tick_s - wss * self.lag_s;
            self.speed = wss - wss * self.decay;
            return;
        }
        let dir = w0.signum();
        let wss = self.target_speed(volts, dir);
        let w1 = wss + (w0 - wss) * self.decay;
        if w1 * dir > 0.0 {
            self.position += wss * self.tick_s + (w0 - wss) * self.lag_s;
            self.speed = w1;
            return;
        }
        self.stop_within_tick(volts, w0, wss);
    }

    /// The rare tick in which the wheel comes to rest: split the tick at the stop.
    #[cold]
    fn stop_within_tick(&mut self, volts: f64, w0: f64, wss: f64) {
        // w(t) = wss + (w0 - wss) e^{-t/T} = 0  =>  e^{-t0/T} = r, with decay <= r < 1.
        let r = -wss / (w0 - wss);
        let t0 = -self.time_constant_s * r.ln();
        self.position += wss * t0 + (w0 - wss) * self.time_constant_s * (1.0 - r);
        self.speed = 0.0;
        if volts.abs() <= self.bias_volts {
            return;
        }
        let rest_s = (self.tick_s - t0).max(0.0);
        let decay_rest = self.decay / r;
        let wss2 = self.target_speed(volts, volts.signum());
        self.position += wss2 * rest_s - wss2 * self.time_constant_s * (1.0 - decay_rest);
        self.speed = wss2 * (1.0 - decay_rest);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn plant(bias: f64) -> Plant {
        Plant::new(180.0, 0.09, bias).unwrap()
    }

    // First-order step response (any control text, from memory):
    // w(t) = K u (1 - e^{-t/T}), x(t) = K u (t - T (1 - e^{-t/T})).
    #[test]
    fn linear_step_matches_the_first_order_formula() {
        let p = plant(0.0);
        let mut d = Drive::new(&p, 0.002);
        for _ in 0..250 {
            d.step(2.0);
        }
        let t: f64 = 0.5;
        let w = 360.0 * (1.0 - (-t / 0.09).exp());
        let x = 360.0 * (t - 0.09 * (1.0 - (-t / 0.09).exp()));
        assert!((d.speed - w).abs() < 1e-9 * w, "{} vs {w}", d.speed);
        assert!((d.position - x).abs() < 1e-9 * x, "{} vs {x}", d.position);
    }

    #[test]
    fn stopped_wheel_stays_stopped_below_bias() {
        let mut d = Drive::new(&plant(0.7), 0.002);
        for _ in 0..100 {
            d.step(0.69);
            d.step(-0.7);
        }
        assert_eq!((d.position, d.speed), (0.0, 0.0));
    }

    #[test]
    fn bias_subtracts_from_the_drive_while_moving() {
        let p = plant(0.7);
        let mut d = Drive::new(&p, 0.002);
        for _ in 0..2000 {
            d.step(2.7);
        }
        assert!((d.speed - 360.0).abs() < 1e-6);
    }

    // Coasting with v = 0 the speed decays under the friction bias: with wss = -K bias
    // the wheel stops at t0 = T ln(1 + w0 / (K bias)) and has travelled
    // T (w0 - K bias ln(1 + w0/(K bias))) (integrating the same first-order equation).
    #[test]
    fn coasting_stops_at_the_closed_form_distance() {
        let p = plant(0.7);
        let mut d = Drive::new(&p, 0.002);
        d.speed = 300.0;
        for _ in 0..500 {
            d.step(0.0);
        }
        let kb: f64 = 180.0 * 0.7;
        let x = 0.09 * (300.0 - kb * (1.0 + 300.0 / kb).ln());
        assert_eq!(d.speed, 0.0);
        assert!((d.position - x).abs() < 1e-9 * x, "{} vs {x}", d.position);
    }

    #[test]
    fn reversal_within_a_tick_restarts_the_other_way() {
        let p = plant(0.5);
        let mut d = Drive::new(&p, 0.01);
        d.speed = 1.0;
        d.step(-6.0);
        assert!(d.speed < 0.0);
    }
}
