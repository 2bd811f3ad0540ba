//! Response figures, gathered tick by tick without storing the response.

/// Figures of one simulated response. Times are seconds from the start of the command;
/// distances are in the plant's units; voltages are the voltage applied to the drive
/// (after supply saturation and computation delay).
///
/// Sampling: positions are taken at the tick instants (a peak between two ticks is not
/// seen). The definitions follow the usual step-response figures on sampled data: rise time
/// from the first sample at or above 10 % of the distance to the first at or above 90 %;
/// settling time is the first sample after which the position stays strictly within the
/// band (the same convention as python-control's `step_info`).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Metrics {
    /// Overshoot beyond the target, percent of the commanded distance (>= 0).
    pub overshoot_pct: f64,
    /// Time of the largest position (in the direction of the command), s.
    pub peak_time_s: f64,
    /// 10-90 % rise time, s; `None` when the position never reaches 90 %.
    pub rise_time_s: Option<f64>,
    /// Settling time to the band, s; `None` when the last sample is outside the band.
    pub settling_time_s: Option<f64>,
    /// Target minus the final position, plant units (positive: stopped short).
    pub final_error: f64,
    /// Largest |setpoint - position| over the run, plant units.
    pub max_tracking_error: f64,
    /// Largest |applied voltage|, V.
    pub peak_volts: f64,
    /// Root-mean-square applied voltage over the run, V.
    pub rms_volts: f64,
    /// Total variation of the applied voltage, `sum of |v[k] - v[k-1]|` with `v[-1] = 0`, V:
    /// the chatter measure (a smooth move gives about twice its peak voltage).
    pub voltage_total_variation: f64,
    /// Ticks in which the commanded voltage was clipped at the supply.
    pub saturated_ticks: u32,
    /// Ticks simulated.
    pub ticks: u32,
    /// The tick in which the loop's stall guard tripped (the firmware's duties are 0 from
    /// that tick's command on); `None` when it never tripped or the loop has none.
    pub stall_tick: Option<u32>,
}

/// Running accumulator behind [`Metrics`]: a handful of compares per tick, no storage.
#[derive(Debug, Clone, Copy)]
pub(crate) struct MetricsAcc {
    target_abs: f64,
    sign: f64,
    band_abs: f64,
    first10: Option<u32>,
    first90: Option<u32>,
    peak_y: f64,
    peak_k: u32,
    last_outside: Option<u32>,
    max_track: f64,
    sum_v2: f64,
    peak_v: f64,
    tv: f64,
    prev_v: f64,
    saturated: u32,
    n: u32,
    last_y: f64,
}

impl MetricsAcc {
    /// `target` is the commanded distance (non-zero), `band` the settling band as a
    /// fraction of |target|.
    pub(crate) fn new(target: f64, band: f64) -> Self {
        MetricsAcc {
            target_abs: target.abs(),
            sign: target.signum(),
            band_abs: band * target.abs(),
            first10: None,
            first90: None,
            peak_y: f64::NEG_INFINITY,
            peak_k: 0,
            last_outside: None,
            max_track: 0.0,
            sum_v2: 0.0,
            peak_v: 0.0,
            tv: 0.0,
            prev_v: 0.0,
            saturated: 0,
            n: 0,
            last_y: 0.0,
        }
    }

    /// One tick: position and setpoint (units), applied voltage, whether it was clipped.
    #[inline]
    pub(crate) fn sample(&mut self, position: f64, setpoint: f64, volts: f64, clipped: bool) {
        let k = self.n;
        let y = position * self.sign;
        if y > self.peak_y {
            self.peak_y = y;
            self.peak_k = k;
        }
        if self.first90.is_none() {
            if self.first10.is_none() && y >= 0.1 * self.target_abs {
                self.first10 = Some(k);
            }
            if y >= 0.9 * self.target_abs {
                self.first90 = Some(k);
            }
        }
        if (y - self.target_abs).abs() >= self.band_abs {
            self.last_outside = Some(k);
        }
        let track = (setpoint - position).abs();
        if track > self.max_track {
            self.max_track = track;
        }
        let va = volts.abs();
        if va > self.peak_v {
            self.peak_v = va;
        }
        self.sum_v2 += volts * volts;
        self.tv += (volts - self.prev_v).abs();
        self.prev_v = volts;
        self.saturated += u32::from(clipped);
        self.last_y = y;
        self.n = k + 1;
    }

    /// The figures, for ticks of `tick_s` seconds.
    pub(crate) fn finish(&self, tick_s: f64) -> Metrics {
        let t = |k: u32| f64::from(k) * tick_s;
        let settling_time_s = match self.last_outside {
            None => Some(0.0),
            Some(k) if k + 1 >= self.n => None,
            Some(k) => Some(t(k + 1)),
        };
        let rise_time_s = match (self.first10, self.first90) {
            (Some(a), Some(b)) => Some(t(b) - t(a)),
            _ => None,
        };
        let n = f64::from(self.n.max(1));
        Metrics {
            overshoot_pct: ((self.peak_y - self.target_abs) / self.target_abs * 100.0).max(0.0),
            peak_time_s: t(self.peak_k),
            rise_time_s,
            settling_time_s,
            final_error: (self.target_abs - self.last_y) * self.sign,
            max_tracking_error: self.max_track,
            peak_volts: self.peak_v,
            rms_volts: (self.sum_v2 / n).sqrt(),
            voltage_total_variation: self.tv,
            saturated_ticks: self.saturated,
            ticks: self.n,
            stall_tick: None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Hand-made sequence; the expected figures are counted by hand from the definitions.
    #[test]
    fn figures_of_a_hand_made_sequence() {
        let mut m = MetricsAcc::new(-10.0, 0.02);
        let ys = [
            0.0, -0.5, -1.0, -5.0, -9.5, -11.0, -10.5, -10.1, -10.0, -10.0,
        ];
        let vs = [1.0, 2.0, -1.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0];
        for (y, v) in ys.iter().zip(vs) {
            m.sample(*y, -10.0, v, v == 2.0);
        }
        let f = m.finish(0.1);
        assert!((f.overshoot_pct - 10.0).abs() < 1e-12);
        assert!((f.peak_time_s - 0.5).abs() < 1e-12);
        // first |y| >= 1 at k=2, first |y| >= 9 at k=4
        assert!((f.rise_time_s.unwrap() - 0.2).abs() < 1e-12);
        // last outside |y - 10| > 0.2 is k=6 (10.5): settles at k=7
        assert!((f.settling_time_s.unwrap() - 0.7).abs() < 1e-12);
        assert_eq!(f.final_error, 0.0);
        assert_eq!(f.max_tracking_error, 10.0);
        assert_eq!(f.peak_volts, 2.0);
        assert!((f.rms_volts - (6.0f64 / 10.0).sqrt()).abs() < 1e-12);
        // |1-0| + |2-1| + |-1-2| + |0+1| = 6
        assert_eq!(f.voltage_total_variation, 6.0);
        assert_eq!(f.saturated_ticks, 1);
    }

    #[test]
    fn never_settled_is_none() {
        let mut m = MetricsAcc::new(1.0, 0.02);
        for y in [0.0, 0.5, 0.7] {
            m.sample(y, 1.0, 0.0, false);
        }
        let f = m.finish(1.0);
        assert_eq!(f.settling_time_s, None);
        assert_eq!(f.rise_time_s, None);
        assert!((f.final_error - 0.3).abs() < 1e-12);
    }
}
