//! The composed two-axis drive: encoders -> profiles -> feedforward + feedback -> wheel mix
//! -> supply compensation -> duty, with the stall guard and a telemetry sample.

use fixed::types::{I16F16, I32F32};

use crate::clamp::narrow;
use crate::encoder::{EncoderState, Encoders};
use crate::feedforward::Feedforward;
use crate::lead::{Lead, LeadState};
use crate::mix::{mix, WheelVolts};
use crate::pd::{Pd, PdState};
use crate::profile::{Move, Profile};
use crate::stall::{StallGuard, StallState};
use crate::supply::{Supply, SupplyState};
use crate::Error;

/// The feedback law of one axis.
///
/// ```
/// use ctrl_core::{Coeff, drive::Feedback, pd::{Derivative, Pd}};
/// use fixed::types::I16F16;
/// const FB: Feedback = Feedback::Pd(Pd::new(Coeff::ONE, Coeff::ZERO, Derivative::OnError, I16F16::lit("6")));
/// assert!(matches!(FB, Feedback::Pd(_)));
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Feedback {
    /// PD position loop; its derivative on measurement uses the axis speed from the encoders.
    Pd(Pd),
    /// Phase-lead position loop.
    Lead(Lead),
}

/// One axis (forward or rotation): feedforward, feedback and stall guard settings.
///
/// Per tick ([`Axis::update`]): the profile steps; the tracking error is
/// `setpoint position - measured position` (both [`I32F32`] counts, subtracted wrapping like
/// the encoder positions, so exact while positions stay within ±2^30 counts, then narrowed
/// with saturation to [`I16F16`]); the output is
/// `feedforward(setpoint speed, setpoint accel) + feedback(error)`, saturating.
///
/// ```
/// use ctrl_core::{Coeff, drive::{Axis, AxisState, Feedback}, feedforward::Feedforward,
///     pd::{Derivative, Pd}, stall::StallGuard};
/// use fixed::types::{I16F16, I32F32};
///
/// static AXIS: Axis = Axis::new(
///     Feedforward::NONE,
///     Feedback::Pd(Pd::new(Coeff::from_bits(1, 1), Coeff::ZERO, Derivative::OnError, I16F16::lit("6"))),
///     StallGuard::OFF,
/// );
/// let mut st = AxisState::new();
/// // Profile at rest at 0, robot measured at -4 counts: error 4, u = 0.5 * 4 = 2 V.
/// let u = AXIS.update(&mut st, I32F32::from_num(-4), I16F16::ZERO);
/// assert_eq!(u, I16F16::from_num(2));
/// assert_eq!(st.sample().error, I16F16::from_num(4));
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Axis {
    feedforward: Feedforward,
    feedback: Feedback,
    stall: StallGuard,
}

/// What one axis did in one tick (for telemetry).
///
/// ```
/// use ctrl_core::drive::AxisSample;
/// assert_eq!(AxisSample::default().error, fixed::types::I16F16::ZERO);
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct AxisSample {
    /// Setpoint position, counts.
    pub setpoint: I32F32,
    /// Setpoint speed, counts/tick.
    pub speed: I16F16,
    /// Tracking error (setpoint - measured), counts.
    pub error: I16F16,
    /// Feedforward voltage.
    pub feedforward: I16F16,
    /// Feedback voltage.
    pub feedback: I16F16,
}

/// State of one axis: its profile (in the encoder frame: setpoint and measured positions are
/// the same kind of number), feedback history, stall guard and the last tick's error and
/// voltages.
///
/// ```
/// use ctrl_core::drive::AxisState;
/// static ST: AxisState = AxisState::new();
/// assert!(!ST.is_stalled());
/// ```
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct AxisState {
    profile: Profile,
    pd: PdState,
    lead: LeadState,
    stall: StallState,
    error: I16F16,
    feedforward: I16F16,
    feedback: I16F16,
}

impl Default for AxisState {
    fn default() -> Self {
        AxisState::new()
    }
}

impl AxisState {
    /// At rest at position 0, no fault.
    ///
    /// ```
    /// use ctrl_core::drive::AxisState;
    /// let _st = AxisState::new();
    /// ```
    pub const fn new() -> AxisState {
        AxisState {
            profile: Profile::new(),
            pd: PdState::new(),
            lead: LeadState::new(),
            stall: StallState::new(),
            error: I16F16::ZERO,
            feedforward: I16F16::ZERO,
            feedback: I16F16::ZERO,
        }
    }

    /// Starts (or retargets) a move from the current setpoint; see
    /// [`Profile::start`](crate::profile::Profile::start).
    ///
    /// # Errors
    ///
    /// Whatever the profile refuses (for example a zero acceleration).
    ///
    /// ```
    /// use ctrl_core::{drive::AxisState, profile::Move};
    /// use fixed::types::I32F32;
    /// let mut st = AxisState::new();
    /// let mv = Move::new(I32F32::from_num(100), I32F32::from_num(2), I32F32::ZERO, I32F32::from_num(0.05));
    /// assert!(st.start(mv).is_ok());
    /// ```
    pub fn start(&mut self, mv: Move) -> Result<(), Error> {
        self.profile.start(mv)
    }

    /// The profile, read-only.
    ///
    /// ```
    /// use ctrl_core::drive::AxisState;
    /// assert!(AxisState::new().profile().is_done());
    /// ```
    pub fn profile(&self) -> &Profile {
        &self.profile
    }

    /// The profile, for `hold`, `stop` and other commands.
    ///
    /// ```
    /// use ctrl_core::drive::AxisState;
    /// let mut st = AxisState::new();
    /// st.profile_mut().hold();
    /// ```
    pub fn profile_mut(&mut self) -> &mut Profile {
        &mut self.profile
    }

    /// `true` while this axis' stall guard is latched.
    ///
    /// ```
    /// use ctrl_core::drive::AxisState;
    /// assert!(!AxisState::new().is_stalled());
    /// ```
    pub const fn is_stalled(&self) -> bool {
        self.stall.is_tripped()
    }

    /// The last tick's values. Setpoint and speed are read from the profile, so after a
    /// profile command (`start`, `hold`, `stop`, `clear_fault`) they show the new state
    /// until the next tick; error and voltages are the last tick's.
    ///
    /// ```
    /// use ctrl_core::drive::AxisState;
    /// assert_eq!(AxisState::new().sample().feedback, fixed::types::I16F16::ZERO);
    /// ```
    pub const fn sample(&self) -> AxisSample {
        // Setpoint and speed are read back from the profile (it holds them anyway), so the
        // tick only stores what nothing else keeps.
        let sp = self.profile.setpoint();
        AxisSample {
            setpoint: sp.position,
            speed: sp.speed_i16f16(),
            error: self.error,
            feedforward: self.feedforward,
            feedback: self.feedback,
        }
    }

    /// Clears the stall fault and restarts the axis where it stands: the profile is set at
    /// rest at `measured` (so the tracking error is zero there; the next move starts from
    /// it), and the feedback history is reset (no jump when the output comes back).
    ///
    /// ```
    /// use ctrl_core::drive::AxisState;
    /// use fixed::types::I32F32;
    /// let mut st = AxisState::new();
    /// st.clear_fault(I32F32::from_num(12));
    /// assert!(!st.is_stalled());
    /// assert_eq!(st.profile().setpoint().position, I32F32::from_num(12));
    /// assert!(st.profile().is_done());
    /// ```
    pub fn clear_fault(&mut self, measured: I32F32) {
        self.stall.clear();
        self.profile = Profile::at(measured);
        self.error = I16F16::ZERO;
        self.feedforward = I16F16::ZERO;
        self.feedback = I16F16::ZERO;
        self.pd = PdState::new();
        self.lead = LeadState::new();
    }
}

impl Axis {
    /// An axis from its parts.
    ///
    /// ```
    /// use ctrl_core::{Coeff, drive::{Axis, Feedback}, feedforward::Feedforward, lead::Lead, stall::StallGuard};
    /// use fixed::types::I16F16;
    /// const A: Axis = Axis::new(
    ///     Feedforward::NONE,
    ///     Feedback::Lead(Lead::new(Coeff::ONE, Coeff::ZERO, Coeff::ZERO, I16F16::lit("6"))),
    ///     StallGuard::OFF,
    /// );
    /// assert_eq!(A.stall_guard(), StallGuard::OFF);
    /// ```
    pub const fn new(feedforward: Feedforward, feedback: Feedback, stall: StallGuard) -> Axis {
        Axis {
            feedforward,
            feedback,
            stall,
        }
    }

    /// The feedforward settings.
    ///
    /// ```
    /// use ctrl_core::{Coeff, drive::{Axis, Feedback}, feedforward::Feedforward, lead::Lead, stall::StallGuard};
    /// use fixed::types::I16F16;
    /// let a = Axis::new(Feedforward::NONE, Feedback::Lead(Lead::new(Coeff::ONE, Coeff::ZERO, Coeff::ZERO, I16F16::ONE)), StallGuard::OFF);
    /// assert_eq!(a.feedforward(), Feedforward::NONE);
    /// ```
    pub const fn feedforward(&self) -> Feedforward {
        self.feedforward
    }

    /// The feedback settings.
    ///
    /// ```
    /// use ctrl_core::{Coeff, drive::{Axis, Feedback}, feedforward::Feedforward, lead::Lead, stall::StallGuard};
    /// use fixed::types::I16F16;
    /// let a = Axis::new(Feedforward::NONE, Feedback::Lead(Lead::new(Coeff::ONE, Coeff::ZERO, Coeff::ZERO, I16F16::ONE)), StallGuard::OFF);
    /// assert!(matches!(a.feedback(), Feedback::Lead(_)));
    /// ```
    pub const fn feedback(&self) -> Feedback {
        self.feedback
    }

    /// The stall guard settings.
    ///
    /// ```
    /// use ctrl_core::{Coeff, drive::{Axis, Feedback}, feedforward::Feedforward, lead::Lead, stall::StallGuard};
    /// use fixed::types::I16F16;
    /// let a = Axis::new(Feedforward::NONE, Feedback::Lead(Lead::new(Coeff::ONE, Coeff::ZERO, Coeff::ZERO, I16F16::ONE)), StallGuard::OFF);
    /// assert_eq!(a.stall_guard(), StallGuard::OFF);
    /// ```
    pub const fn stall_guard(&self) -> StallGuard {
        self.stall
    }

    /// One tick: steps the profile and returns the axis voltage (feedforward + feedback).
    /// `measured` is the axis position in counts (encoder frame), `measured_speed` its change
    /// this tick in counts/tick. The stall guard is updated but the output is **not** zeroed
    /// here; [`TwoAxisDrive::tick`] zeroes both wheels when either axis is stalled.
    ///
    /// ```
    /// use ctrl_core::{Coeff, drive::{Axis, AxisState, Feedback}, feedforward::Feedforward,
    ///     lead::Lead, stall::StallGuard};
    /// use fixed::types::{I16F16, I32F32};
    /// let a = Axis::new(
    ///     Feedforward::NONE,
    ///     Feedback::Lead(Lead::new(Coeff::from_bits(2, 0), Coeff::ZERO, Coeff::ZERO, I16F16::lit("6"))),
    ///     StallGuard::new(I16F16::lit("1"), 1),
    /// );
    /// let mut st = AxisState::new();
    /// assert_eq!(a.update(&mut st, I32F32::from_num(1.5), I16F16::ZERO), I16F16::from_num(-3));
    /// assert!(st.is_stalled()); // |error| 1.5 > 1 for 1 tick
    /// ```
    #[inline(always)]
    pub fn update(
        &self,
        state: &mut AxisState,
        measured: I32F32,
        measured_speed: I16F16,
    ) -> I16F16 {
        let sp = state.profile.step();
        // Wrapping, like the encoder positions: exact while |positions| < 2^30 counts.
        let error = narrow(sp.position.wrapping_sub(measured));
        // In I16F16 range by the profile's guarantee (see `Setpoint`): a shift, no saturation.
        let ff = self.feedforward.volts(sp.speed_i16f16(), sp.accel_i16f16());
        let fb = match &self.feedback {
            Feedback::Pd(pd) => pd.update(&mut state.pd, error, measured_speed),
            Feedback::Lead(lead) => lead.update(&mut state.lead, error),
        };
        self.stall.update(&mut state.stall, error);
        state.error = error;
        state.feedforward = ff;
        state.feedback = fb;
        ff.saturating_add(fb)
    }
}

/// The two-axis drive settings: encoders, forward and rotation axes, supply compensation and
/// the wheel voltage limit.
///
/// [`tick`](TwoAxisDrive::tick) runs, in order: encoder update -> each axis (profile step,
/// feedforward, feedback, stall guard) -> wheel mix limited to
/// `min(max_volts, battery volts)` with rotation priority -> supply compensation -> duty
/// `[left, right]` in `[-1, 1]`, forced to `[0, 0]` while either stall guard is latched or
/// before the first battery reading. No division, no panic.
///
/// ```
/// use ctrl_core::{Coeff, drive::{Axis, DriveState, Feedback, TwoAxisDrive}, encoder::Encoders,
///     feedforward::Feedforward, pd::{Derivative, Pd}, profile::Move, stall::StallGuard,
///     supply::Supply};
/// use fixed::types::{I16F16, I32F32};
///
/// const PD: Pd = Pd::new(Coeff::from_bits(1, 0), Coeff::from_bits(4, 0), Derivative::OnError, I16F16::lit("8"));
/// static DRIVE: TwoAxisDrive = TwoAxisDrive::new(
///     Encoders::new(false, false),
///     Axis::new(Feedforward::NONE, Feedback::Pd(PD), StallGuard::new(I16F16::lit("50"), 100)),
///     Axis::new(Feedforward::NONE, Feedback::Pd(PD), StallGuard::new(I16F16::lit("50"), 100)),
///     Supply::new(I16F16::lit("6.4")),
///     I16F16::lit("8.4"),
/// );
/// let mut st = DriveState::new();
/// DRIVE.set_battery(&mut st, I16F16::lit("8"));
/// assert_eq!(DRIVE.tick(&mut st, 1000, 2000), [I16F16::ZERO; 2]); // at rest, on target
/// st.forward_mut()
///     .start(Move::new(I32F32::from_num(200), I32F32::from_num(2), I32F32::ZERO, I32F32::from_num(0.05)))
///     .unwrap();
/// let duty = DRIVE.tick(&mut st, 1000, 2000);
/// assert!(duty[0] > I16F16::ZERO && duty[1] > I16F16::ZERO); // both wheels pushed forward
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TwoAxisDrive {
    encoders: Encoders,
    forward: Axis,
    rotation: Axis,
    supply: Supply,
    max_volts: I16F16,
}

/// One tick of the whole drive (for telemetry).
///
/// ```
/// use ctrl_core::drive::DriveSample;
/// assert_eq!(DriveSample::default().tick, 0);
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DriveSample {
    /// Tick counter (wraps at `u32::MAX`, about 99 days at 500 Hz).
    pub tick: u32,
    /// Forward axis values.
    pub forward: AxisSample,
    /// Rotation axis values.
    pub rotation: AxisSample,
    /// Wheel voltages after the mix.
    pub volts: WheelVolts,
    /// Duty `[left, right]` as output.
    pub duty: [I16F16; 2],
    /// Either stall guard latched (output forced to zero).
    pub stalled: bool,
    /// Low-supply flag.
    pub low_supply: bool,
}

/// State of the whole drive.
///
/// ```
/// use ctrl_core::drive::DriveState;
/// static ST: DriveState = DriveState::new();
/// assert!(!ST.is_stalled());
/// ```
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct DriveState {
    encoders: EncoderState,
    forward: AxisState,
    rotation: AxisState,
    supply: SupplyState,
    tick: u32,
    volts: WheelVolts,
    duty: [I16F16; 2],
    stalled: bool,
}

impl Default for DriveState {
    fn default() -> Self {
        DriveState::new()
    }
}

impl DriveState {
    /// At rest, no battery reading yet (so duty is zero until
    /// [`TwoAxisDrive::set_battery`]).
    ///
    /// ```
    /// use ctrl_core::drive::DriveState;
    /// let _st = DriveState::new();
    /// ```
    pub const fn new() -> DriveState {
        DriveState {
            encoders: EncoderState::new(),
            forward: AxisState::new(),
            rotation: AxisState::new(),
            supply: SupplyState::new(),
            tick: 0,
            volts: WheelVolts {
                left: I16F16::ZERO,
                right: I16F16::ZERO,
            },
            duty: [I16F16::ZERO; 2],
            stalled: false,
        }
    }

    /// The forward axis.
    ///
    /// ```
    /// use ctrl_core::drive::DriveState;
    /// assert!(DriveState::new().forward().profile().is_done());
    /// ```
    pub fn forward(&self) -> &AxisState {
        &self.forward
    }

    /// The forward axis, to start moves.
    ///
    /// ```
    /// use ctrl_core::drive::DriveState;
    /// let mut st = DriveState::new();
    /// st.forward_mut().profile_mut().stop();
    /// ```
    pub fn forward_mut(&mut self) -> &mut AxisState {
        &mut self.forward
    }

    /// The rotation axis.
    ///
    /// ```
    /// use ctrl_core::drive::DriveState;
    /// assert!(DriveState::new().rotation().profile().is_done());
    /// ```
    pub fn rotation(&self) -> &AxisState {
        &self.rotation
    }

    /// The rotation axis, to start turns.
    ///
    /// ```
    /// use ctrl_core::drive::DriveState;
    /// let mut st = DriveState::new();
    /// st.rotation_mut().profile_mut().hold();
    /// ```
    pub fn rotation_mut(&mut self) -> &mut AxisState {
        &mut self.rotation
    }

    /// Encoder positions.
    ///
    /// ```
    /// use ctrl_core::drive::DriveState;
    /// assert_eq!(DriveState::new().encoders().left(), 0);
    /// ```
    pub const fn encoders(&self) -> &EncoderState {
        &self.encoders
    }

    /// Supply reading and low flag.
    ///
    /// ```
    /// use ctrl_core::drive::DriveState;
    /// assert!(DriveState::new().supply().is_low());
    /// ```
    pub const fn supply(&self) -> &SupplyState {
        &self.supply
    }

    /// `true` while either axis' stall guard is latched (duty forced to zero).
    ///
    /// ```
    /// use ctrl_core::drive::DriveState;
    /// assert!(!DriveState::new().is_stalled());
    /// ```
    pub const fn is_stalled(&self) -> bool {
        self.forward.is_stalled() || self.rotation.is_stalled()
    }

    /// Clears a stall fault on both axes and restarts them where the robot stands (see
    /// [`AxisState::clear_fault`]).
    ///
    /// ```
    /// use ctrl_core::drive::DriveState;
    /// let mut st = DriveState::new();
    /// st.clear_fault();
    /// assert!(!st.is_stalled());
    /// ```
    pub fn clear_fault(&mut self) {
        let (f, r) = (self.encoders.forward(), self.encoders.rotation());
        self.forward.clear_fault(f);
        self.rotation.clear_fault(r);
    }

    /// The last tick's telemetry sample; push it into a
    /// [`Telemetry`](crate::telemetry::Telemetry) ring.
    ///
    /// ```
    /// use ctrl_core::{drive::{DriveSample, DriveState}, telemetry::Telemetry};
    /// let st = DriveState::new();
    /// let mut ring: Telemetry<DriveSample, 8> = Telemetry::new();
    /// assert!(ring.push(st.sample()));
    /// ```
    pub const fn sample(&self) -> DriveSample {
        DriveSample {
            tick: self.tick,
            forward: self.forward.sample(),
            rotation: self.rotation.sample(),
            volts: self.volts,
            duty: self.duty,
            stalled: self.stalled,
            low_supply: self.supply.is_low(),
        }
    }
}

impl TwoAxisDrive {
    /// The drive from its parts; `max_volts` (a magnitude) caps each wheel's voltage below
    /// the battery (for a motor rated lower than the pack).
    ///
    /// ```
    /// use ctrl_core::{Coeff, drive::{Axis, Feedback, TwoAxisDrive}, encoder::Encoders,
    ///     feedforward::Feedforward, pd::{Derivative, Pd}, stall::StallGuard, supply::Supply};
    /// use fixed::types::I16F16;
    /// const AXIS: Axis = Axis::new(Feedforward::NONE,
    ///     Feedback::Pd(Pd::new(Coeff::ONE, Coeff::ZERO, Derivative::OnError, I16F16::lit("6"))),
    ///     StallGuard::OFF);
    /// const DRIVE: TwoAxisDrive = TwoAxisDrive::new(Encoders::new(false, true), AXIS, AXIS,
    ///     Supply::new(I16F16::lit("6.4")), I16F16::lit("6"));
    /// assert_eq!(DRIVE.max_volts(), I16F16::lit("6"));
    /// ```
    pub const fn new(
        encoders: Encoders,
        forward: Axis,
        rotation: Axis,
        supply: Supply,
        max_volts: I16F16,
    ) -> TwoAxisDrive {
        TwoAxisDrive {
            encoders,
            forward,
            rotation,
            supply,
            max_volts: crate::clamp::abs_sat(max_volts),
        }
    }

    /// The wheel voltage cap, volts.
    ///
    /// ```
    /// use ctrl_core::{Coeff, drive::{Axis, Feedback, TwoAxisDrive}, encoder::Encoders,
    ///     feedforward::Feedforward, pd::{Derivative, Pd}, stall::StallGuard, supply::Supply};
    /// use fixed::types::I16F16;
    /// let axis = Axis::new(Feedforward::NONE,
    ///     Feedback::Pd(Pd::new(Coeff::ONE, Coeff::ZERO, Derivative::OnError, I16F16::ONE)), StallGuard::OFF);
    /// let d = TwoAxisDrive::new(Encoders::new(false, false), axis, axis, Supply::new(I16F16::ONE), I16F16::lit("-3"));
    /// assert_eq!(d.max_volts(), I16F16::lit("3"));
    /// ```
    pub const fn max_volts(&self) -> I16F16 {
        self.max_volts
    }

    /// The forward axis settings.
    ///
    /// ```
    /// use ctrl_core::{Coeff, drive::{Axis, Feedback, TwoAxisDrive}, encoder::Encoders,
    ///     feedforward::Feedforward, pd::{Derivative, Pd}, stall::StallGuard, supply::Supply};
    /// use fixed::types::I16F16;
    /// let axis = Axis::new(Feedforward::NONE,
    ///     Feedback::Pd(Pd::new(Coeff::ONE, Coeff::ZERO, Derivative::OnError, I16F16::ONE)), StallGuard::OFF);
    /// let d = TwoAxisDrive::new(Encoders::new(false, false), axis, axis, Supply::new(I16F16::ONE), I16F16::ONE);
    /// assert_eq!(d.forward(), axis);
    /// ```
    pub const fn forward(&self) -> Axis {
        self.forward
    }

    /// The rotation axis settings.
    ///
    /// ```
    /// use ctrl_core::{Coeff, drive::{Axis, Feedback, TwoAxisDrive}, encoder::Encoders,
    ///     feedforward::Feedforward, pd::{Derivative, Pd}, stall::StallGuard, supply::Supply};
    /// use fixed::types::I16F16;
    /// let axis = Axis::new(Feedforward::NONE,
    ///     Feedback::Pd(Pd::new(Coeff::ONE, Coeff::ZERO, Derivative::OnError, I16F16::ONE)), StallGuard::OFF);
    /// let d = TwoAxisDrive::new(Encoders::new(false, false), axis, axis, Supply::new(I16F16::ONE), I16F16::ONE);
    /// assert_eq!(d.rotation(), axis);
    /// ```
    pub const fn rotation(&self) -> Axis {
        self.rotation
    }

    /// Takes a new battery reading (volts); see [`Supply::set_battery`].
    ///
    /// ```
    /// use ctrl_core::{Coeff, drive::{Axis, DriveState, Feedback, TwoAxisDrive}, encoder::Encoders,
    ///     feedforward::Feedforward, pd::{Derivative, Pd}, stall::StallGuard, supply::Supply};
    /// use fixed::types::I16F16;
    /// let axis = Axis::new(Feedforward::NONE,
    ///     Feedback::Pd(Pd::new(Coeff::ONE, Coeff::ZERO, Derivative::OnError, I16F16::ONE)), StallGuard::OFF);
    /// let d = TwoAxisDrive::new(Encoders::new(false, false), axis, axis, Supply::new(I16F16::lit("6.4")), I16F16::lit("8"));
    /// let mut st = DriveState::new();
    /// d.set_battery(&mut st, I16F16::lit("7.4"));
    /// assert!(!st.supply().is_low());
    /// ```
    pub fn set_battery(&self, state: &mut DriveState, volts: I16F16) {
        self.supply.set_battery(&mut state.supply, volts);
    }

    /// One control tick from the raw 16-bit encoder counters; returns duty `[left, right]`
    /// in `[-1, 1]`. The telemetry sample of this tick is then in [`DriveState::sample`].
    ///
    /// ```
    /// use ctrl_core::{Coeff, drive::{Axis, DriveState, Feedback, TwoAxisDrive}, encoder::Encoders,
    ///     feedforward::Feedforward, pd::{Derivative, Pd}, stall::StallGuard, supply::Supply};
    /// use fixed::types::I16F16;
    /// let axis = Axis::new(Feedforward::NONE,
    ///     Feedback::Pd(Pd::new(Coeff::ONE, Coeff::ZERO, Derivative::OnError, I16F16::lit("8"))),
    ///     StallGuard::OFF);
    /// let d = TwoAxisDrive::new(Encoders::new(false, false), axis, axis, Supply::new(I16F16::lit("6.4")), I16F16::lit("8"));
    /// let mut st = DriveState::new();
    /// d.set_battery(&mut st, I16F16::lit("8"));
    /// d.tick(&mut st, 0, 0);
    /// // Left wheel pushed 2 counts forward, right 2 back: forward error 0, rotation error
    /// // (R - L)/2 = -2 -> setpoint 0 - (-2) = +2, rotation volts 2 -> left -2 V, right +2 V.
    /// let duty = d.tick(&mut st, 2, 65534);
    /// assert_eq!(duty, [I16F16::lit("-0.25"), I16F16::lit("0.25")]);
    /// ```
    #[inline]
    pub fn tick(&self, state: &mut DriveState, left_raw: u16, right_raw: u16) -> [I16F16; 2] {
        let d = self
            .encoders
            .update(&mut state.encoders, left_raw, right_raw);
        let fv = self
            .forward
            .update(&mut state.forward, state.encoders.forward(), d.forward());
        let rv = self
            .rotation
            .update(&mut state.rotation, state.encoders.rotation(), d.rotation());
        let battery = state.supply.battery_volts();
        let limit = if battery < self.max_volts {
            battery
        } else {
            self.max_volts
        };
        let volts = mix(fv, rv, limit);
        let stalled = state.is_stalled();
        let duty = if stalled {
            [I16F16::ZERO; 2]
        } else {
            [
                state.supply.duty(volts.left),
                state.supply.duty(volts.right),
            ]
        };
        state.tick = state.tick.wrapping_add(1);
        state.volts = volts;
        state.duty = duty;
        state.stalled = stalled;
        duty
    }
}
