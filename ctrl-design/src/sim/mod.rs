//! Nonlinear discrete simulation of one axis' loop as the firmware runs it.
//!
//! Each tick: the encoder is read (quantized to whole counts when a count size is given),
//! the loop computes its voltage from the setpoint and the measurement, the voltage is
//! clipped at the supply, held back by the computation delay, and applied to the drive,
//! which is integrated exactly over the tick ([`Drive`]) with its friction bias and any
//! load disturbance.
//!
//! Two loops run in it: [`IdealLoop`] (the design in `f64`) and [`FirmwareLoop`] (the same
//! loop stepped through the `ctrl-core` fixed-point arithmetic the MCU runs), so the effect
//! of quantizing the design is visible.
//!
//! The inner loop allocates nothing and keeps no per-tick record unless a trace is asked
//! for ([`simulate_traced`]).

mod drive;
mod firmware;
mod ideal;
mod metrics;
mod plot;

pub use drive::Drive;
pub use firmware::{
    quantize_axis, quantize_design, quantize_lead, quantize_move, stall_guard, AxisKind,
    AxisQuantization, FirmwareLoop, FirmwareUnits, LeadQuantizationReport, QuantizationReport,
    QuantizeError, Quantized, QuantizedAxis, QuantizedLead, MAX_RELATIVE_ERROR,
};
pub use ideal::{
    AxisDesign, DerivativeForm, Feedforward, IdealLoop, IdealStallGuard, LeadLoopDesign,
    LoopDesign, MoveF64,
};
pub use metrics::Metrics;
pub use plot::plot_svg;

use crate::Plant;
use metrics::MetricsAcc;
use std::fmt;

/// Longest computation delay the simulation holds, ticks.
pub const MAX_DELAY_TICKS: u32 = 16;

/// A position setpoint in plant units.
#[derive(Debug, Clone, Copy, PartialEq, Default, serde::Serialize, serde::Deserialize)]
pub struct Setpoint {
    /// Position, units.
    pub position: f64,
    /// Speed, units/s.
    pub speed: f64,
    /// Acceleration, units/s^2.
    pub accel: f64,
}

/// What the encoder reports this tick.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Measurement {
    /// Whole encoder counts, `floor(position / count_size)` (0 without a count size).
    pub counts: i64,
    /// Measured position, units: `counts * count_size`, or the exact position when the
    /// encoder is not quantized.
    pub position: f64,
}

/// What a loop computes in one tick, in plant units and volts.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LoopOutput {
    /// The setpoint the loop followed this tick.
    pub setpoint: Setpoint,
    /// Feedforward part of the command, V.
    pub feedforward_volts: f64,
    /// Feedback part of the command, V.
    pub feedback_volts: f64,
    /// The voltage the loop commands (its own limits applied), V.
    pub command_volts: f64,
}

/// A position loop the simulation can step: one call per tick.
pub trait Controller {
    /// Computes this tick's command from the measurement.
    fn tick(&mut self, measured: &Measurement) -> LoopOutput;

    /// `true` once the loop's stall guard has tripped (asked after each tick; a loop
    /// without one never trips).
    #[inline]
    fn stalled(&self) -> bool {
        false
    }
}

/// The command the loop follows from rest at position 0.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Command {
    /// The setpoint jumps to `distance` (units, non-zero) at tick 0.
    Step {
        /// Distance, units.
        distance: f64,
    },
    /// A trapezoidal move from rest to rest.
    Move {
        /// Distance, units (non-zero, signed).
        distance: f64,
        /// Cruise speed, units/s (> 0).
        cruise_speed: f64,
        /// Acceleration, units/s^2 (> 0).
        accel: f64,
    },
}

impl Command {
    /// The commanded distance, units.
    pub fn distance(&self) -> f64 {
        match *self {
            Command::Step { distance } | Command::Move { distance, .. } => distance,
        }
    }

    /// Time the setpoint takes to reach the target, s (0 for a step).
    pub fn duration_s(&self) -> f64 {
        match *self {
            Command::Step { .. } => 0.0,
            Command::Move {
                distance,
                cruise_speed,
                accel,
            } => MoveF64::new(distance, cruise_speed, accel).total_time_s(),
        }
    }
}

/// A constant load acting from `start_s` on, given as the drive voltage that balances it
/// (positive pushes forward).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Disturbance {
    /// Load, volts equivalent.
    pub volts: f64,
    /// When it starts, s from the command's start (>= 0).
    pub start_s: f64,
}

/// Everything about one simulated run except the loop.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct SimConfig {
    /// The drive that is really there (may differ from the one the loop was designed for).
    pub plant: Plant,
    /// Loop rate, Hz (> 0).
    pub rate_hz: f64,
    /// Distance per encoder count, units; `None` reads the exact position.
    pub count_size: Option<f64>,
    /// Supply voltage the command is clipped at, V (> 0; infinity for no limit).
    pub supply_volts: f64,
    /// Computation delay, ticks (0 ..= [`MAX_DELAY_TICKS`]): the voltage computed from the
    /// encoder at tick k is applied from tick k + delay.
    pub delay_ticks: u32,
    /// Load disturbance, if any.
    pub disturbance: Option<Disturbance>,
    /// The command.
    pub command: Command,
    /// Ticks to simulate (>= 1).
    pub ticks: u32,
    /// Settling band, fraction of the distance (0 < band < 1; 0.02 for 2 %).
    pub band: f64,
}

/// A simulation input outside its valid range.
#[derive(Debug, Clone, PartialEq)]
pub struct SimError {
    /// The field's name.
    pub field: &'static str,
    /// The value given.
    pub value: f64,
    /// The valid range, in words.
    pub valid: &'static str,
}

impl fmt::Display for SimError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{} = {} is out of range: valid is {}",
            self.field, self.value, self.valid
        )
    }
}

impl std::error::Error for SimError {}

fn check(field: &'static str, value: f64, ok: bool, valid: &'static str) -> Result<(), SimError> {
    if ok && !value.is_nan() {
        Ok(())
    } else {
        Err(SimError {
            field,
            value,
            valid,
        })
    }
}

impl SimConfig {
    /// Checks every field's range (the plant is checked by [`Plant::new`]).
    pub fn check(&self) -> Result<(), SimError> {
        let fin = |v: f64| v.is_finite();
        crate::Plant::new(
            self.plant.gain,
            self.plant.time_constant_s,
            self.plant.bias_volts,
        )
        .map_err(
            |crate::PlantError::OutOfRange {
                 field,
                 value,
                 valid,
             }| SimError {
                field,
                value,
                valid,
            },
        )?;
        check(
            "rate_hz",
            self.rate_hz,
            fin(self.rate_hz) && self.rate_hz > 0.0,
            "finite and > 0 (Hz)",
        )?;
        if let Some(c) = self.count_size {
            check(
                "count_size",
                c,
                fin(c) && c > 0.0,
                "finite and > 0 (units per count)",
            )?;
        }
        check(
            "supply_volts",
            self.supply_volts,
            self.supply_volts > 0.0,
            "> 0 (volts; infinity for no limit)",
        )?;
        check(
            "delay_ticks",
            f64::from(self.delay_ticks),
            self.delay_ticks <= MAX_DELAY_TICKS,
            "0 ..= 16",
        )?;
        if let Some(d) = self.disturbance {
            check("disturbance.volts", d.volts, fin(d.volts), "finite (volts)")?;
            check(
                "disturbance.start_s",
                d.start_s,
                fin(d.start_s) && d.start_s >= 0.0,
                "finite and >= 0 (seconds)",
            )?;
        }
        let dist = self.command.distance();
        check(
            "distance",
            dist,
            fin(dist) && dist != 0.0,
            "finite and non-zero (units)",
        )?;
        if let Command::Move {
            cruise_speed,
            accel,
            ..
        } = self.command
        {
            check(
                "cruise_speed",
                cruise_speed,
                fin(cruise_speed) && cruise_speed > 0.0,
                "finite and > 0 (units/s)",
            )?;
            check(
                "accel",
                accel,
                fin(accel) && accel > 0.0,
                "finite and > 0 (units/s^2)",
            )?;
        }
        check(
            "ticks",
            f64::from(self.ticks),
            self.ticks >= 1,
            ">= 1 (ticks)",
        )?;
        check(
            "band",
            self.band,
            self.band > 0.0 && self.band < 1.0,
            "0 < band < 1 (fraction of the distance)",
        )?;
        Ok(())
    }

    /// Tick length, s.
    pub fn tick_s(&self) -> f64 {
        1.0 / self.rate_hz
    }
}

/// The per-tick record of a run, for plots (plant units, volts, seconds).
#[derive(Debug, Clone, Default, PartialEq, serde::Serialize)]
pub struct Trace {
    /// Tick instants, s.
    pub time_s: Vec<f64>,
    /// Setpoint position, units.
    pub setpoint_position: Vec<f64>,
    /// True position, units.
    pub position: Vec<f64>,
    /// Setpoint speed, units/s.
    pub setpoint_speed: Vec<f64>,
    /// True speed, units/s.
    pub speed: Vec<f64>,
    /// Feedforward part of the command, V.
    pub feedforward_volts: Vec<f64>,
    /// Feedback part of the command, V.
    pub feedback_volts: Vec<f64>,
    /// Voltage applied to the drive (clipped and delayed), V.
    pub applied_volts: Vec<f64>,
}

trait Recorder {
    fn record(&mut self, t: f64, drive: &Drive, out: &LoopOutput, applied: f64);
}

struct NoRecord;

impl Recorder for NoRecord {
    #[inline(always)]
    fn record(&mut self, _: f64, _: &Drive, _: &LoopOutput, _: f64) {}
}

impl Recorder for Trace {
    fn record(&mut self, t: f64, drive: &Drive, out: &LoopOutput, applied: f64) {
        self.time_s.push(t);
        self.setpoint_position.push(out.setpoint.position);
        self.position.push(drive.position);
        self.setpoint_speed.push(out.setpoint.speed);
        self.speed.push(drive.speed);
        self.feedforward_volts.push(out.feedforward_volts);
        self.feedback_volts.push(out.feedback_volts);
        self.applied_volts.push(applied);
    }
}

/// Runs `config` with `controller` and returns the response figures. The caller checks
/// `config` first ([`SimConfig::check`]); out-of-range values give meaningless figures but
/// never panic.
pub fn simulate<C: Controller>(config: &SimConfig, controller: &mut C) -> Metrics {
    run(config, controller, &mut NoRecord)
}

/// As [`simulate`], and also returns the per-tick record.
pub fn simulate_traced<C: Controller>(config: &SimConfig, controller: &mut C) -> (Metrics, Trace) {
    let mut trace = Trace::default();
    let m = run(config, controller, &mut trace);
    (m, trace)
}

/// One run's state between ticks (everything but the loop).
struct Lane {
    tick_s: f64,
    drive: Drive,
    acc: MetricsAcc,
    supply: f64,
    delay: usize,
    line: [f64; MAX_DELAY_TICKS as usize],
    head: usize,
    load: f64,
    load_from: u64,
    inv_count: Option<f64>,
    count_size: f64,
    stall_tick: Option<u32>,
}

impl Lane {
    #[inline(always)]
    fn new(cfg: &SimConfig) -> Lane {
        let tick_s = cfg.tick_s();
        let (load, load_from) = match cfg.disturbance {
            Some(d) => (d.volts, (d.start_s * cfg.rate_hz).ceil().max(0.0) as u64),
            None => (0.0, u64::MAX),
        };
        Lane {
            tick_s,
            drive: Drive::new(&cfg.plant, tick_s),
            acc: MetricsAcc::new(cfg.command.distance(), cfg.band),
            supply: cfg.supply_volts,
            delay: cfg.delay_ticks.min(MAX_DELAY_TICKS) as usize,
            line: [0.0f64; MAX_DELAY_TICKS as usize],
            head: 0,
            load,
            load_from,
            inv_count: cfg.count_size.map(|c| 1.0 / c),
            count_size: cfg.count_size.unwrap_or(0.0),
            stall_tick: None,
        }
    }

    /// Tick `k`: read the encoder, run the loop, clip, delay, record, step the drive.
    #[inline(always)]
    fn tick<C: Controller, R: Recorder>(&mut self, k: u32, ctrl: &mut C, rec: &mut R) {
        let measured = match self.inv_count {
            Some(inv) => {
                let counts = floor(self.drive.position * inv);
                Measurement {
                    counts: counts as i64,
                    position: counts * self.count_size,
                }
            }
            None => Measurement {
                counts: 0,
                position: self.drive.position,
            },
        };
        let out = ctrl.tick(&measured);
        if self.stall_tick.is_none() && ctrl.stalled() {
            self.stall_tick = Some(k);
        }
        let cmd = out.command_volts;
        let supply = self.supply;
        let clipped = cmd.abs() > supply;
        let v = cmd.max(-supply).min(supply);
        let applied = if self.delay == 0 {
            v
        } else {
            let a = self.line[self.head];
            self.line[self.head] = v;
            self.head += 1;
            if self.head == self.delay {
                self.head = 0;
            }
            a
        };
        self.acc
            .sample(self.drive.position, out.setpoint.position, applied, clipped);
        rec.record(f64::from(k) * self.tick_s, &self.drive, &out, applied);
        let d = if u64::from(k) >= self.load_from {
            self.load
        } else {
            0.0
        };
        self.drive.step(applied + d);
    }

    #[inline(always)]
    fn finish(&self) -> Metrics {
        let mut m = self.acc.finish(self.tick_s);
        m.stall_tick = self.stall_tick;
        m
    }
}

#[inline(always)]
fn run<C: Controller, R: Recorder>(cfg: &SimConfig, ctrl: &mut C, rec: &mut R) -> Metrics {
    let mut lane = Lane::new(cfg);
    for k in 0..cfg.ticks {
        lane.tick(k, ctrl, rec);
    }
    lane.finish()
}

/// Two runs stepped in lockstep, tick by tick in one loop: exactly the figures of two
/// [`simulate`] calls (each lane does the same operations in the same order), but the
/// processor can overlap the two runs' long serial chains of dependent operations (one
/// tick needs the previous tick's position), which roughly halves the time per tick on an
/// out-of-order core. Both configurations must have the same `ticks`; with different ones
/// this falls back to two plain runs.
pub fn simulate_pair<C: Controller>(
    configs: [&SimConfig; 2],
    controllers: [&mut C; 2],
) -> [Metrics; 2] {
    let [ca, cb] = configs;
    let [la, lb] = controllers;
    if ca.ticks != cb.ticks {
        return [simulate(ca, la), simulate(cb, lb)];
    }
    let (mut a, mut b) = (Lane::new(ca), Lane::new(cb));
    for k in 0..ca.ticks {
        a.tick(k, la, &mut NoRecord);
        b.tick(k, lb, &mut NoRecord);
    }
    [a.finish(), b.finish()]
}

/// `x.floor()` without the library call (x86-64's baseline has no rounding instruction):
/// exact for |x| < 2^63, saturating beyond like the cast.
#[inline(always)]
fn floor(x: f64) -> f64 {
    let t = x as i64 as f64;
    if t > x {
        t - 1.0
    } else {
        t
    }
}
