//! Demo firmware for the invented greenhouse-bench rover.
//!
//! The constants come from `examples/greenhouse-rover/rover.toml` through `build.rs`
//! (`ctrl_design::emit::build_script`): a design that fails its checks does not build.
//!
//! The firmware runs the two-axis loop of `ctrl-core` at the design's loop rate against a
//! simulated drive on the target itself (the design's first-order plant with friction bias,
//! stepped in fixed point, read through two quantized 16-bit wheel encoders), drives a short
//! route of moves and turns, and writes one line per move over semihosting:
//!
//! ```text
//! MOVE 1 axis=forward distance=500 unit=mm ticks=1234 final_error_counts=0.25 peak_duty=0.471 stalled=0 expect_stall=0 ok=1
//! ```
//!
//! then `ROUTE ok=1` and exits with status 0 when every move ended as expected, 1 otherwise.
//! One move on the route runs into an obstacle on purpose: its stall guard must trip.
#![no_std]
#![no_main]
#![forbid(unsafe_code)]

use cortex_m as _; // links its single-core critical section, which semihosting needs
use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hprintln};

use ctrl_core::drive::DriveState;
use ctrl_core::profile::Move;
use ctrl_core::Coeff;
use fixed::types::{I16F16, I32F32};

/// The generated constants (`DRIVE`, `FORWARD_AXIS`, ... ; see the file's header).
#[allow(dead_code)]
mod constants {
    include!(concat!(env!("OUT_DIR"), "/constants.rs"));
}

use constants::*;

/// Battery voltage of the simulated robot, V (between the design's lowest and highest).
const BATTERY_VOLTS: I16F16 = I16F16::lit("7.4");
/// Ticks to wait after each move's profile has finished before reading its final error.
const SETTLE_TICKS: u32 = 300;
/// Largest |final error| a free move may end with, counts (one count: the encoders'
/// resolution; a half count shows up on the axes as the wheels' mean).
const FINAL_ERROR_LIMIT: I16F16 = I16F16::lit("1");
/// Raw value of both encoder counters at power-up, near the top so the route wraps them.
const ENCODER_START: i32 = 65_000;

/// One axis of the simulated drive, in that axis' counts and ticks.
///
/// Per tick, with the voltage `v` held over the tick (the exact first-order step, the same
/// model as `ctrl_design::sim::Drive`): while turning in direction `dir`, the speed tends to
/// `w_ss = gain * (v - bias * dir)`: `w1 = w_ss + decay * (w0 - w_ss)` and the position
/// gains `w_ss + lag * (w0 - w_ss)` counts; a stopped wheel stays stopped while
/// `|v| <= bias`. A tick in which the speed would cross zero ends at rest (the split of the
/// tick at the stop is not modelled; its effect is below a count).
struct SimAxis {
    gain: Coeff,
    decay: Coeff,
    lag: Coeff,
    bias: I16F16,
    /// Position, counts.
    position: I32F32,
    /// Speed, counts/tick.
    speed: I16F16,
    /// An obstacle: the axis cannot pass this position (counts) while set.
    wall: Option<I32F32>,
}

impl SimAxis {
    const fn new(gain: Coeff, decay: Coeff, lag: Coeff, bias: I16F16) -> SimAxis {
        SimAxis {
            gain,
            decay,
            lag,
            bias,
            position: I32F32::ZERO,
            speed: I16F16::ZERO,
            wall: None,
        }
    }

    fn step(&mut self, volts: I16F16) {
        let w0 = self.speed;
        let dir = if w0 > I16F16::ZERO {
            I16F16::ONE
        } else if w0 < I16F16::ZERO {
            -I16F16::ONE
        } else if volts.saturating_abs() <= self.bias {
            return;
        } else {
            volts.signum()
        };
        let wss = self
            .gain
            .saturating_mul(volts.saturating_sub(self.bias.saturating_mul(dir)));
        let excess = w0.saturating_sub(wss);
        let w1 = wss.saturating_add(self.decay.saturating_mul(excess));
        let advance = wss.saturating_add(self.lag.saturating_mul(excess));
        self.position = self.position.saturating_add(I32F32::from_num(advance));
        self.speed = if w0 != I16F16::ZERO && w1.signum() != dir {
            I16F16::ZERO
        } else {
            w1
        };
        if let Some(wall) = self.wall {
            if self.position > wall {
                self.position = wall;
                self.speed = I16F16::ZERO;
            }
        }
    }
}

/// The simulated robot: both axes and the two wheel encoders.
struct Robot {
    forward: SimAxis,
    rotation: SimAxis,
}

impl Robot {
    /// Raw 16-bit counter readings `[left, right]`: each wheel's whole counts
    /// (left = forward - rotation, right = forward + rotation), wrapping.
    fn encoders(&self) -> (u16, u16) {
        let f = self.forward.position;
        let r = self.rotation.position;
        let raw = |x: I32F32| -> u16 {
            let counts = x.floor().saturating_to_num::<i32>();
            ENCODER_START.wrapping_add(counts) as u16
        };
        (raw(f.saturating_sub(r)), raw(f.saturating_add(r)))
    }

    /// Applies the wheel duties for one tick: duty times battery volts per wheel, then
    /// the axis voltages `(l + r) / 2` and `(r - l) / 2`.
    fn step(&mut self, duty: [I16F16; 2]) {
        let l = duty[0].saturating_mul(BATTERY_VOLTS);
        let r = duty[1].saturating_mul(BATTERY_VOLTS);
        self.forward.step(l.saturating_add(r) >> 1);
        self.rotation.step(r.saturating_sub(l) >> 1);
    }
}

#[derive(Clone, Copy, PartialEq)]
enum Which {
    Forward,
    Rotation,
}

/// One leg of the route, in user units.
struct Leg {
    which: Which,
    /// mm (forward) or milliradians (rotation).
    distance: i32,
    /// Obstacle this far into the move (same unit), or none.
    obstacle: Option<i32>,
}

/// The route of the invented demo: along a bench, turn, on, turn back, reverse, a pot in the
/// way, and a half turn.
const ROUTE: [Leg; 7] = [
    Leg {
        which: Which::Forward,
        distance: 500,
        obstacle: None,
    },
    Leg {
        which: Which::Rotation,
        distance: 1571,
        obstacle: None,
    },
    Leg {
        which: Which::Forward,
        distance: 300,
        obstacle: None,
    },
    Leg {
        which: Which::Rotation,
        distance: -1571,
        obstacle: None,
    },
    Leg {
        which: Which::Forward,
        distance: -200,
        obstacle: None,
    },
    Leg {
        which: Which::Forward,
        distance: 400,
        obstacle: Some(150),
    },
    Leg {
        which: Which::Rotation,
        distance: 3142,
        obstacle: None,
    },
];

#[entry]
fn main() -> ! {
    let mut robot = Robot {
        forward: SimAxis::new(
            FORWARD_PLANT_GAIN,
            FORWARD_PLANT_DECAY,
            FORWARD_PLANT_LAG_TICKS,
            FORWARD_AXIS.feedforward().bias_volts(),
        ),
        rotation: SimAxis::new(
            ROTATION_PLANT_GAIN,
            ROTATION_PLANT_DECAY,
            ROTATION_PLANT_LAG_TICKS,
            ROTATION_AXIS.feedforward().bias_volts(),
        ),
    };
    let mut st = DriveState::new();
    DRIVE.set_battery(&mut st, BATTERY_VOLTS);
    let (l, r) = robot.encoders();
    DRIVE.tick(&mut st, l, r); // first reading: the encoders' reference

    hprintln!(
        "ROUTE start loop_rate_hz={} battery_volts={} moves={}",
        LOOP_RATE_HZ,
        BATTERY_VOLTS,
        ROUTE.len()
    );
    let mut all_ok = true;
    for (i, leg) in ROUTE.iter().enumerate() {
        let (scale, cruise, accel, unit, name) = match leg.which {
            Which::Forward => (
                COUNTS_PER_MM,
                FORWARD_CRUISE_SPEED,
                FORWARD_ACCEL,
                "mm",
                "forward",
            ),
            Which::Rotation => (
                COUNTS_PER_RAD / 1000,
                ROTATION_CRUISE_SPEED,
                ROTATION_ACCEL,
                "mrad",
                "rotation",
            ),
        };
        let distance = scale.saturating_mul_int(i64::from(leg.distance));
        let axis_sim = match leg.which {
            Which::Forward => &mut robot.forward,
            Which::Rotation => &mut robot.rotation,
        };
        axis_sim.wall = leg.obstacle.map(|o| {
            axis_sim
                .position
                .saturating_add(scale.saturating_mul_int(i64::from(o)))
        });
        let mv = Move::new(distance, cruise, I32F32::ZERO, accel);
        let started = match leg.which {
            Which::Forward => st.forward_mut().start(mv),
            Which::Rotation => st.rotation_mut().start(mv),
        };
        if started.is_err() {
            hprintln!("MOVE {} axis={} refused by the profile", i + 1, name);
            all_ok = false;
            continue;
        }
        let mut ticks: u32 = 0;
        let mut settle: u32 = 0;
        let mut peak_duty = I16F16::ZERO;
        let mut stalled = false;
        while settle < SETTLE_TICKS {
            let (l, r) = robot.encoders();
            let duty = DRIVE.tick(&mut st, l, r);
            robot.step(duty);
            ticks += 1;
            for d in duty {
                if d.saturating_abs() > peak_duty {
                    peak_duty = d.saturating_abs();
                }
            }
            stalled |= st.is_stalled();
            let done = match leg.which {
                Which::Forward => st.forward().profile().is_done(),
                Which::Rotation => st.rotation().profile().is_done(),
            };
            if done || stalled {
                settle += 1;
            }
        }
        let sample = st.sample();
        let error = match leg.which {
            Which::Forward => sample.forward.error,
            Which::Rotation => sample.rotation.error,
        };
        let expect_stall = leg.obstacle.is_some();
        let ok = if expect_stall {
            stalled
        } else {
            !stalled && error.saturating_abs() <= FINAL_ERROR_LIMIT
        };
        all_ok &= ok;
        hprintln!(
            "MOVE {} axis={} distance={} unit={} ticks={} final_error_counts={} peak_duty={} stalled={} expect_stall={} ok={}",
            i + 1,
            name,
            leg.distance,
            unit,
            ticks,
            error,
            peak_duty,
            u8::from(stalled),
            u8::from(expect_stall),
            u8::from(ok)
        );
        if stalled {
            // Back off the obstacle and carry on from where the robot stands.
            let axis_sim = match leg.which {
                Which::Forward => &mut robot.forward,
                Which::Rotation => &mut robot.rotation,
            };
            axis_sim.wall = None;
            st.clear_fault();
        }
    }
    hprintln!("ROUTE ok={}", u8::from(all_ok));
    debug::exit(if all_ok {
        debug::EXIT_SUCCESS
    } else {
        debug::EXIT_FAILURE
    });
    loop {
        cortex_m::asm::wfi();
    }
}

#[panic_handler]
fn panic(info: &core::panic::PanicInfo) -> ! {
    hprintln!("PANIC {}", info);
    debug::exit(debug::EXIT_FAILURE);
    loop {
        cortex_m::asm::wfi();
    }
}
