//! The assembled current loop: one call per control tick.
//!
//! [`CurrentLoop::tick`] takes the ADC reading of the current, the measured bus
//! voltage and optionally the speed, and returns the [`DriveCommand`] for the next
//! PWM period. Inside, in this order:
//!
//! 1. calibration: counts to amperes ([`crate::sense`]);
//! 2. supervision: faults detected and latched ([`crate::supervisor`]); anything
//!    latched gives the safe command and resets the PI and the setpoint;
//! 3. setpoint: the requested current, limited and slewed ([`crate::setpoint`]);
//! 4. PI: amperes to volts ([`crate::pi`]), limited to what the bus can give now
//!    minus the feedforward, so anti-windup acts on the real actuator limit
//!    (down to 0 V for a one-direction drive, [`DutyMapping::one_direction`]);
//! 5. feedforward: `R * i_ref + Ke * speed`, limited to what the bus can give,
//!    added to the PI output;
//! 6. volts to duty by the measured bus, limited to the duty range ([`crate::output`]).
//!
//! A running tick with every reading in range (current clear of the rails and
//! within the overcurrent threshold, bus inside its window and at least the duty
//! mapping's `min_bus_v`, speed finite and within its limit), no detector
//! counting and no trip due takes a quiet path: the same steps with the fault
//! check reduced to what such a tick can change. Its result is the full tick's, bit for bit (a property test
//! holds the two side by side); it exists because it is most ticks, and the
//! cheapest (see the README's performance section).
//!
//! # States
//!
//! ```text
//!              enable (nothing latched)
//!   Disabled ---------------------------> Running
//!      ^  ^  <---------------------------   |
//!      |  |            disable              |
//!      |  +-----------------+               | a fault latches (also from Disabled)
//!      |    clear_faults Ok |               v
//!      +------------------ Faulted <--------+
//! ```
//!
//! * `Disabled`: safe command; supervision keeps running, so sensor and bus faults
//!   latch even while idle.
//! * `Running`: closed loop.
//! * `Faulted`: safe command until the faults are cleared; clearing is refused while
//!   a cause is present and leads to `Disabled`, never straight back to `Running`.
//!
//! Leaving `Running` (by disable or fault) resets the PI integrator and sets the
//! setpoint back to 0 A, so a later enable starts from rest and ramps up again.
//!
//! ```
//! use pi_core::prelude::*;
//!
//! # fn main() -> Result<(), pi_core::ConfigError> {
//! let period_s = 50e-6; // 20 kHz
//! let config = LoopConfig::new(
//!     CurrentSense::from_shunt(12, 3.3, 0.010, 20.0, 2048.0)?,
//!     SetpointLimits::new(-4.0, 4.0, 2000.0)?,
//!     SupervisorConfig::new(OvercurrentLimit::new(6.0, 3)?, BusWindow::new(18.0, 30.0)?),
//!     PiConfig::new(PiGains::from_kp_ti(3.0, 1.26e-3)?, period_s, OutputLimits::symmetric(30.0)?)?,
//!     DutyMapping::new(0.95, 12.0)?,
//! )?;
//! let mut cl = CurrentLoop::new(config)?;
//! cl.apply(Command::Enable).unwrap();
//! cl.apply(Command::SetCurrent(1.5)).unwrap();
//! let cmd = cl.tick(&TickInput { current_counts: 2048, bus_v: 24.0, speed_rad_s: None });
//! assert!(cmd.enabled && cmd.direction == Direction::Forward && cmd.duty > 0.0);
//! # Ok(()) }
//! ```

use crate::error::{CommandError, ConfigError, Requirement, non_negative};
use crate::excitation::{Excitation, ExcitationEnd, Generator};
use crate::num::clamp;
use crate::output::{DriveCommand, DutyMapping};
use crate::pi::{PiConfig, PiController, PiGains};
use crate::sense::CurrentSense;
use crate::setpoint::{Acceptance, SetpointLimits, SetpointShaper};
use crate::supervisor::{Fault, FaultSet, Observation, Protections, Supervisor, SupervisorConfig};

/// Validated feedforward terms: `v_ff = R * i_ref + Ke * speed`.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Feedforward {
    resistance_ohm: f32,
    back_emf_v_s_per_rad: f32,
}

impl Feedforward {
    /// No feedforward.
    pub const NONE: Feedforward = Feedforward {
        resistance_ohm: 0.0,
        back_emf_v_s_per_rad: 0.0,
    };

    /// Resistive term `R` (ohm) and back-EMF constant `Ke` (V s/rad), both >= 0;
    /// 0 switches a term off. The speed term is used only on ticks that carry a
    /// speed, and needs a speed limit in the supervisor (see
    /// [`LoopConfig::with_feedforward`]). The sum is limited to the voltage the
    /// bus can give on that tick, so the feedforward alone never asks for more.
    pub fn new(resistance_ohm: f32, back_emf_v_s_per_rad: f32) -> Result<Self, ConfigError> {
        Ok(Self {
            resistance_ohm: non_negative("resistance_ohm", resistance_ohm)?,
            back_emf_v_s_per_rad: non_negative("back_emf_v_s_per_rad", back_emf_v_s_per_rad)?,
        })
    }

    /// The resistive term `R`, ohms.
    pub fn resistance_ohm(&self) -> f32 {
        self.resistance_ohm
    }

    /// The back-EMF constant `Ke`, V s/rad.
    pub fn back_emf_v_s_per_rad(&self) -> f32 {
        self.back_emf_v_s_per_rad
    }
}

/// Everything the assembled loop needs, validated together.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LoopConfig {
    sense: CurrentSense,
    setpoint: SetpointLimits,
    supervisor: SupervisorConfig,
    pi: PiConfig,
    duty: DutyMapping,
    feedforward: Feedforward,
}

impl LoopConfig {
    /// Checks the parts against each other: the largest setpoint must be below the
    /// overcurrent threshold (or a valid setpoint would trip the loop), and the
    /// threshold must be below the largest current the sensor reads before a rail
    /// (or overcurrent would show up as a sensor fault).
    pub fn new(
        sense: CurrentSense,
        setpoint: SetpointLimits,
        supervisor: SupervisorConfig,
        pi: PiConfig,
        duty: DutyMapping,
    ) -> Result<Self, ConfigError> {
        let threshold = supervisor.overcurrent().threshold_a();
        if setpoint.max_magnitude_a() >= threshold {
            return Err(ConfigError::new(
                "setpoint_max_a",
                setpoint.max_magnitude_a(),
                Requirement::Below("the overcurrent threshold_a"),
            ));
        }
        check_readable(threshold, &sense, &duty)?;
        if !duty.reverses() && setpoint.min_a() < 0.0 {
            return Err(ConfigError::new(
                "setpoint_min_a",
                setpoint.min_a(),
                Requirement::Within {
                    min: 0.0,
                    max: f32::MAX,
                },
            ));
        }
        Ok(Self {
            sense,
            setpoint,
            supervisor,
            pi,
            duty,
            feedforward: Feedforward::NONE,
        })
    }

    /// The same configuration with feedforward. A back-EMF term (`Ke > 0`) is
    /// refused unless the supervisor has a speed limit
    /// ([`crate::supervisor::SupervisorConfig::with_speed_limit`]): the error names
    /// `max_speed_rad_s`.
    pub fn with_feedforward(self, feedforward: Feedforward) -> Result<Self, ConfigError> {
        if feedforward.back_emf_v_s_per_rad > 0.0 && self.supervisor.speed_limit().is_none() {
            return Err(ConfigError::new(
                "max_speed_rad_s",
                0.0,
                Requirement::Required("the back-EMF feedforward is on"),
            ));
        }
        Ok(Self { feedforward, ..self })
    }

    /// Which protections the loop has on ([`Protections::off`] lists the rest).
    pub fn protections(&self) -> Protections {
        self.supervisor.protections()
    }

    /// The supervisor's configuration.
    pub fn supervisor(&self) -> &SupervisorConfig {
        &self.supervisor
    }

    /// The current-sense calibration.
    pub fn sense(&self) -> &CurrentSense {
        &self.sense
    }

    /// The setpoint limits.
    pub fn setpoint(&self) -> &SetpointLimits {
        &self.setpoint
    }

    /// The PI configuration.
    pub fn pi(&self) -> &PiConfig {
        &self.pi
    }

    /// The volts-to-duty mapping.
    pub fn duty(&self) -> &DutyMapping {
        &self.duty
    }

    /// The feedforward terms ([`Feedforward::NONE`] when off).
    pub fn feedforward(&self) -> &Feedforward {
        &self.feedforward
    }

    /// The PI configuration the loop runs: the configured one, with the
    /// lower output limit at 0 V for a one-direction drive (where the
    /// drive's floor is, so the PI's anti-windup acts there).
    pub(crate) fn pi_as_run(&self) -> PiConfig {
        if self.duty.reverses() {
            self.pi
        } else {
            self.pi.with_floor(0.0)
        }
    }

    /// The control period, seconds (the PI's).
    pub fn period_s(&self) -> f32 {
        self.pi.period_s()
    }
}

/// The overcurrent threshold must be readable before the sensor reaches a rail:
/// both ways, or forward only for a one-direction drive (a negative reading
/// beyond the sensor's range reads a rail, which faults in any case).
fn check_readable(threshold_a: f32, sense: &CurrentSense, duty: &DutyMapping) -> Result<(), ConfigError> {
    let readable = if duty.reverses() {
        sense.readable_a()
    } else {
        sense.readable_forward_a()
    };
    if threshold_a >= readable {
        return Err(ConfigError::new(
            "threshold_a",
            threshold_a,
            Requirement::Below("the largest current the sensor reads before a rail"),
        ));
    }
    Ok(())
}

/// The loop's state; see the module notes for the transitions.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum LoopState {
    /// Bridge off, supervision running.
    Disabled,
    /// Closed loop.
    Running,
    /// Bridge off until the faults are cleared.
    Faulted,
    /// Open loop: an excitation's voltages through the duty mapping, the
    /// supervisor active ([`crate::excitation`]); back to `Disabled` when it
    /// ends, to `Faulted` on a fault.
    Exciting,
}

/// The state machine's rules, written once for the float and the fixed-point
/// loops (see the module notes).
impl LoopState {
    /// Whether a new setpoint may be taken: refused while faulted (with the
    /// latched causes) or exciting.
    pub(crate) fn takes_setpoint(self, latched: FaultSet) -> Result<(), CommandError> {
        match self {
            LoopState::Faulted => Err(CommandError::Faulted(latched)),
            LoopState::Exciting => Err(CommandError::Exciting),
            _ => Ok(()),
        }
    }

    /// The state after an enable: refused while anything is latched or an
    /// excitation runs; `Running`, and whether the PI starts from rest (it
    /// does unless the loop was running already).
    pub(crate) fn enabled(self, latched: FaultSet) -> Result<(LoopState, bool), CommandError> {
        if !latched.is_empty() {
            return Err(CommandError::Faulted(latched));
        }
        match self {
            LoopState::Exciting => Err(CommandError::Exciting),
            LoopState::Running => Ok((LoopState::Running, false)),
            _ => Ok((LoopState::Running, true)),
        }
    }

    /// The state after the supervisor accepted a clear: `Faulted` becomes
    /// `Disabled`, never straight `Running`.
    pub(crate) fn cleared(self) -> LoopState {
        if self == LoopState::Faulted {
            LoopState::Disabled
        } else {
            self
        }
    }
}

/// The inputs of one control tick.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TickInput {
    /// The current-sense ADC reading for this period.
    pub current_counts: u16,
    /// Measured bus voltage, volts.
    pub bus_v: f32,
    /// Measured speed, rad/s (positive = forward), if available.
    pub speed_rad_s: Option<f32>,
}

/// A request from the main loop, usually passed through a queue (see [`crate::handoff`]).
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Command {
    /// New target current, amperes; limited and slewed. Refused while faulted.
    SetCurrent(f32),
    /// New gains, applied bumplessly at the next tick.
    Retune(PiGains),
    /// Start closed-loop control; refused while faults are latched.
    Enable,
    /// Stop: safe command, PI reset, setpoint 0 A.
    Disable,
    /// Clear latched faults (refused while a cause is present); leads to `Disabled`.
    ClearFaults,
    /// Run an open-loop excitation; only from `Disabled` (refused while
    /// running, exciting or faulted).
    Excite(Excitation),
}

/// A snapshot of the loop for telemetry.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LoopStatus {
    /// State after the last tick or command.
    pub state: LoopState,
    /// Latched fault causes.
    pub latched: FaultSet,
    /// First cause since the last clear.
    pub first_fault: Option<Fault>,
    /// The slewed setpoint the PI saw, amperes.
    pub setpoint_a: f32,
    /// The target being approached, amperes.
    pub target_a: f32,
    /// The last measured current, amperes.
    pub current_a: f32,
    /// The last PI output plus feedforward, volts.
    pub commanded_v: f32,
    /// The last drive command.
    pub command: DriveCommand,
    /// Normalised I^2t heat (1 = rated steady state), 0 without a thermal model.
    pub heat: f32,
    /// How the last excitation ended (`None` while one runs, or before the first).
    pub excitation_end: Option<ExcitationEnd>,
}

/// The assembled current loop.
#[derive(Clone, Debug)]
pub struct CurrentLoop {
    config: LoopConfig,
    sense: CurrentSense,
    setpoint: SetpointShaper,
    supervisor: Supervisor,
    pi: PiController,
    state: LoopState,
    last: DriveCommand,
    last_current_a: f32,
    last_volts: f32,
    /// The excitation running (state `Exciting`).
    excitation: Option<Generator>,
    /// How the last excitation ended.
    excitation_end: Option<ExcitationEnd>,
    /// No feedforward, and the PI's configured limits hold the bus's whole
    /// window: the bus alone sets the PI's limits each tick.
    bus_sets_limits: bool,
    /// Running with the supervisor settled, and the quiet path possible at all:
    /// a tick may take the quiet path.
    quiet: bool,
    /// What the quiet path accepts; `None` when it accepts nothing.
    quiet_window: Option<QuietWindow>,
    /// A copy of `quiet_window` for the quiet path, which runs only while
    /// `quiet` is set, hence only while the window exists.
    window: QuietWindow,
}

/// The readings a tick may take the quiet path with.
#[derive(Clone, Copy, Debug, PartialEq)]
struct QuietWindow {
    /// Current readings clear of both rails whose current is within the
    /// overcurrent threshold: `c` is one exactly when
    /// `c.wrapping_sub(counts_low) <= counts_span`.
    counts_low: u16,
    counts_span: u16,
    /// Bus readings inside the supervisor's window and at least the duty
    /// mapping's `min_bus_v`, as bit patterns: `b` is one exactly when
    /// `b.to_bits().wrapping_sub(bus_low_bits) <= bus_span_bits` (for
    /// non-negative floats the patterns order as the values do; a negative, NaN
    /// or infinite bus falls outside).
    bus_low_bits: u32,
    bus_span_bits: u32,
    /// The largest speed magnitude the supervisor takes as plausible (`f32::MAX`
    /// without a limit, so that only non-finite speeds fall outside).
    max_speed_rad_s: f32,
}

impl QuietWindow {
    /// A stand-in for a window that accepts nothing (never used: `quiet` stays
    /// clear without a window).
    const NONE: QuietWindow = QuietWindow {
        counts_low: 0,
        counts_span: 0,
        bus_low_bits: 0,
        bus_span_bits: 0,
        max_speed_rad_s: 0.0,
    };

    fn new(sense: &CurrentSense, supervisor: &SupervisorConfig, duty: &DutyMapping) -> Option<Self> {
        let (counts_low, counts_span) = quiet_band(sense, supervisor.overcurrent().threshold_a())?;
        let bus = supervisor.bus();
        let low = if duty.min_bus_v() > bus.min_v() {
            duty.min_bus_v()
        } else {
            bus.min_v()
        };
        if low > bus.max_v() {
            return None;
        }
        Some(Self {
            counts_low,
            counts_span,
            bus_low_bits: low.to_bits(),
            bus_span_bits: bus.max_v().to_bits() - low.to_bits(),
            max_speed_rad_s: supervisor.max_speed_rad_s(),
        })
    }

    #[inline(always)]
    fn accepts(&self, counts: u16, bus_v: f32) -> bool {
        counts.wrapping_sub(self.counts_low) <= self.counts_span
            && bus_v.to_bits().wrapping_sub(self.bus_low_bits) <= self.bus_span_bits
    }

    /// Whether a speed reading is finite and within the limit (a NaN fails the
    /// comparison, an infinity is above `f32::MAX`).
    #[inline(always)]
    fn accepts_speed(&self, speed_rad_s: Option<f32>) -> bool {
        match speed_rad_s {
            Some(w) => w.abs() <= self.max_speed_rad_s,
            None => true,
        }
    }
}

/// The readings that are clear of both rails and whose current is within the
/// overcurrent threshold, as `(lowest, span)`: reading `c` is one of them exactly
/// when `c.wrapping_sub(lowest) <= span`. `None` when there are none.
///
/// `|to_amperes(c)|` is V-shaped in `c` (rounding keeps each side monotonic), so
/// the readings form one interval around the offset; each edge is found by
/// bisection with the very expressions the full check evaluates.
pub(crate) fn quiet_band(sense: &CurrentSense, threshold_a: f32) -> Option<(u16, u16)> {
    count_band(sense, |c| {
        !sense.at_rail(c) && sense.to_amperes(c).abs() <= threshold_a
    })
}

/// The readings `c` around the sensor's offset for which `ok(c)` holds, as
/// `(lowest, span)`, for an `ok` that is false, then true, then false over
/// the ADC's range (one interval); `None` when the offset's reading fails it.
pub(crate) fn count_band(sense: &CurrentSense, ok: impl Fn(u16) -> bool) -> Option<(u16, u16)> {
    let fs = sense.full_scale_counts();
    let centre = libm::roundf(sense.offset_counts());
    let centre = if centre < 0.0 {
        0
    } else if centre > fs as f32 {
        fs
    } else {
        centre as u16
    };
    if !ok(centre) {
        return None;
    }
    // Lowest: `ok` is false then true on [0, centre].
    let (mut lo, mut hi) = (0u16, centre);
    while lo < hi {
        let mid = lo + (hi - lo) / 2;
        if ok(mid) {
            hi = mid;
        } else {
            lo = mid + 1;
        }
    }
    let lowest = lo;
    // Highest: `ok` is true then false on [centre, fs].
    let (mut lo, mut hi) = (centre, fs);
    while lo < hi {
        let mid = hi - (hi - lo) / 2;
        if ok(mid) {
            lo = mid;
        } else {
            hi = mid - 1;
        }
    }
    Some((lowest, lo - lowest))
}

impl CurrentLoop {
    /// A disabled loop with nothing latched.
    pub fn new(config: LoopConfig) -> Result<Self, ConfigError> {
        let period_s = config.pi.period_s();
        // The most the bus window can ever make available; a bus inside the window
        // gives at most this (rounding is monotonic).
        let widest_v = config.duty.available_v(config.supervisor.bus().max_v());
        let limits = config.pi.limits();
        // (A one-direction drive takes the general branch, which knows its floor.)
        let bus_sets_limits = config.feedforward == Feedforward::NONE
            && config.duty.reverses()
            && limits.min_v() <= -widest_v
            && limits.max_v() >= widest_v;
        let quiet_window = QuietWindow::new(&config.sense, &config.supervisor, &config.duty);
        Ok(Self {
            sense: config.sense,
            setpoint: SetpointShaper::new(config.setpoint, period_s),
            supervisor: Supervisor::new(config.supervisor, period_s)?,
            pi: PiController::new(config.pi_as_run()),
            config,
            state: LoopState::Disabled,
            last: DriveCommand::SAFE,
            last_current_a: 0.0,
            last_volts: 0.0,
            excitation: None,
            excitation_end: None,
            bus_sets_limits,
            quiet: false,
            window: quiet_window.unwrap_or(QuietWindow::NONE),
            quiet_window,
        })
    }

    /// One control tick; call it once per control period from the interrupt.
    /// Never panics, allocates or blocks.
    ///
    /// A running tick whose readings are all in range, with no detector counting
    /// and no thermal trip coming, takes a quiet path that skips the full fault
    /// check and gives exactly the result the full tick would; everything else
    /// takes the full tick.
    #[inline]
    pub fn tick(&mut self, input: &TickInput) -> DriveCommand {
        match self.quiet_tick(input) {
            Some(command) => command,
            None => self.full_tick(input),
        }
    }

    /// The quiet path, or `None` (and nothing changed) when the tick needs the
    /// full one.
    #[inline(always)]
    fn quiet_tick(&mut self, input: &TickInput) -> Option<DriveCommand> {
        if !self.quiet {
            return None;
        }
        let counts = input.current_counts;
        if !self.window.accepts(counts, input.bus_v) {
            return None;
        }
        if !self.window.accepts_speed(input.speed_rad_s) {
            return None;
        }
        let current_a = self.sense.to_amperes(counts);
        let drive = self.drive();
        if !self.supervisor.quiet_tick(current_a, counts, drive) {
            return None;
        }
        self.last_current_a = current_a;
        let command = self.run::<true>(current_a, input);
        self.last = command;
        Some(command)
    }

    /// The full tick: every fault cause checked, the state machine stepped.
    #[inline(never)]
    fn full_tick(&mut self, input: &TickInput) -> DriveCommand {
        let current_a = self.sense.to_amperes(input.current_counts);
        let obs = Observation {
            current_a,
            counts: input.current_counts,
            at_rail: self.sense.at_rail(input.current_counts),
            bus_v: input.bus_v,
            speed_rad_s: input.speed_rad_s,
            drive: self.drive(),
        };
        let latched = self.supervisor.check(&obs);
        self.last_current_a = current_a;
        let command = if !latched.is_empty() {
            if self.state != LoopState::Faulted {
                self.stop();
                if self.state == LoopState::Exciting {
                    self.end_excitation(ExcitationEnd::Fault);
                }
                self.state = LoopState::Faulted;
            }
            DriveCommand::SAFE
        } else if self.state == LoopState::Running {
            self.run::<false>(current_a, input)
        } else if self.state == LoopState::Exciting {
            self.excite(current_a, input.bus_v)
        } else {
            DriveCommand::SAFE
        };
        self.last = command;
        self.refresh_quiet();
        command
    }

    /// The magnitude of the duty applied during the period just measured: the
    /// last command's duty, since the only disabled command the loop issues is
    /// [`DriveCommand::SAFE`], whose duty is 0.
    #[inline(always)]
    fn drive(&self) -> f32 {
        self.last.duty
    }

    /// Whether the next tick may take the quiet path.
    fn refresh_quiet(&mut self) {
        self.quiet =
            self.state == LoopState::Running && self.supervisor.settled() && self.quiet_window.is_some();
    }

    /// The running tick, reached with nothing latched. `BUS_CHECKED` says the
    /// caller has found the bus at least the duty mapping's `min_bus_v` (the
    /// quiet path has); otherwise the mapping checks it.
    #[inline(always)]
    fn run<const BUS_CHECKED: bool>(&mut self, current_a: f32, input: &TickInput) -> DriveCommand {
        let i_ref = self.setpoint.advance();
        let duty = &self.config.duty;
        let bus_v = input.bus_v;
        let available = if BUS_CHECKED {
            duty.available_on_good_bus(bus_v)
        } else {
            duty.available_v(bus_v)
        };
        let volts = if self.bus_sets_limits {
            // No feedforward, a reversing drive: the PI's output is the whole voltage.
            self.pi.update_inside(i_ref, current_a, -available, available)
        } else {
            let ff = &self.config.feedforward;
            let speed_term = match input.speed_rad_s {
                Some(w) => ff.back_emf_v_s_per_rad * w,
                None => 0.0,
            };
            // Limited to what the bus gives, so the PI's range below is never
            // empty and the sum stays within the bus. (A NaN cannot reach here:
            // a non-finite speed latches a fault first.)
            // (The configured limits give a one-direction drive's PI its 0 V
            // floor; the feedforward is held to it here.)
            let lowest = duty.lowest_v(available);
            let v_ff = clamp(ff.resistance_ohm * i_ref + speed_term, lowest, available);
            let v_pi = self
                .pi
                .update_within(i_ref, current_a, -available - v_ff, available - v_ff);
            // At a 0 V floor a -0 from the PI becomes +0 here (v_ff is +0 or
            // above), so a one-direction drive is never told to reverse.
            v_pi + v_ff
        };
        self.last_volts = volts;
        if BUS_CHECKED {
            duty.command_on_good_bus(volts, bus_v)
        } else {
            duty.command_within_range(volts, bus_v)
        }
    }

    /// An excitation's tick: its next voltage within the PI's limits and the
    /// bus, through the duty mapping; or its end (current limit, duration).
    fn excite(&mut self, current_a: f32, bus_v: f32) -> DriveCommand {
        let Some(generator) = self.excitation.as_mut() else {
            self.state = LoopState::Disabled;
            return DriveCommand::SAFE;
        };
        // A NaN ends it too (the supervisor latches one first in any case).
        if current_a.abs() > generator.current_limit_a() || current_a.is_nan() {
            self.end_excitation(ExcitationEnd::CurrentLimit);
            return DriveCommand::SAFE;
        }
        let Some(v) = generator.next() else {
            self.end_excitation(ExcitationEnd::Completed);
            return DriveCommand::SAFE;
        };
        let limits = self.config.pi.limits();
        let available = self.config.duty.available_v(bus_v);
        let lowest = self.config.duty.lowest_v(available);
        let v = clamp(clamp(v, limits.min_v(), limits.max_v()), lowest, available);
        self.last_volts = v;
        self.config.duty.command(v, bus_v)
    }

    /// Ends the excitation: `Disabled` (unless a fault is taking the loop to
    /// `Faulted`), safe output.
    fn end_excitation(&mut self, why: ExcitationEnd) {
        self.excitation = None;
        self.excitation_end = Some(why);
        self.last_volts = 0.0;
        if self.state == LoopState::Exciting {
            self.state = LoopState::Disabled;
        }
    }

    fn stop(&mut self) {
        self.pi.reset();
        self.setpoint.reset();
        self.last_volts = 0.0;
    }

    /// Carries out a command from the main loop. On error nothing changed.
    pub fn apply(&mut self, command: Command) -> Result<Acceptance, CommandError> {
        let reply = self.carry_out(command);
        self.refresh_quiet();
        reply
    }

    fn carry_out(&mut self, command: Command) -> Result<Acceptance, CommandError> {
        match command {
            Command::SetCurrent(a) => {
                self.state.takes_setpoint(self.supervisor.latched())?;
                self.setpoint.request(a)
            }
            Command::Retune(gains) => {
                self.pi.retune(gains);
                Ok(Acceptance::Exact)
            }
            Command::Enable => {
                let (state, from_rest) = self.state.enabled(self.supervisor.latched())?;
                if from_rest {
                    self.pi.reset();
                }
                self.state = state;
                Ok(Acceptance::Exact)
            }
            Command::Disable => {
                if self.state == LoopState::Running {
                    self.stop();
                    self.state = LoopState::Disabled;
                    self.last = DriveCommand::SAFE;
                } else if self.state == LoopState::Exciting {
                    self.end_excitation(ExcitationEnd::Disabled);
                    self.last = DriveCommand::SAFE;
                }
                Ok(Acceptance::Exact)
            }
            Command::Excite(excitation) => {
                let latched = self.supervisor.latched();
                if !latched.is_empty() {
                    return Err(CommandError::Faulted(latched));
                }
                match self.state {
                    LoopState::Running => return Err(CommandError::NotWhileRunning),
                    LoopState::Exciting => return Err(CommandError::Exciting),
                    _ => {}
                }
                self.stop();
                self.excitation = Some(Generator::new(excitation, self.config.pi.period_s()));
                self.excitation_end = None;
                self.state = LoopState::Exciting;
                Ok(Acceptance::Exact)
            }
            Command::ClearFaults => {
                self.supervisor.clear()?;
                self.state = self.state.cleared();
                Ok(Acceptance::Exact)
            }
        }
    }

    /// Replaces the current-sense calibration (for example after an offset
    /// calibration). Refused while running, since it would step the measurement.
    pub fn set_sense(&mut self, sense: CurrentSense) -> Result<(), CommandError> {
        if self.state == LoopState::Running {
            return Err(CommandError::NotWhileRunning);
        }
        let threshold = self.config.supervisor.overcurrent().threshold_a();
        check_readable(threshold, &sense, &self.config.duty)?;
        self.sense = sense;
        self.config.sense = sense;
        self.quiet_window = QuietWindow::new(&sense, &self.config.supervisor, &self.config.duty);
        self.window = self.quiet_window.unwrap_or(QuietWindow::NONE);
        Ok(())
    }

    /// The present state.
    pub fn state(&self) -> LoopState {
        self.state
    }

    /// A telemetry snapshot.
    pub fn status(&self) -> LoopStatus {
        LoopStatus {
            state: self.state,
            latched: self.supervisor.latched(),
            first_fault: self.supervisor.first(),
            setpoint_a: self.setpoint.value_a(),
            target_a: self.setpoint.target_a(),
            current_a: self.last_current_a,
            commanded_v: self.last_volts,
            command: self.last,
            heat: self.supervisor.thermal().map_or(0.0, |t| t.heat()),
            excitation_end: self.excitation_end,
        }
    }

    /// The PI controller (read-only: integrator, saturation, gains).
    pub fn pi(&self) -> &PiController {
        &self.pi
    }

    /// The supervisor (read-only: present and latched causes, thermal state).
    pub fn supervisor(&self) -> &Supervisor {
        &self.supervisor
    }

    /// The supervisor, for setting the thermal model's heat after a reset.
    pub fn supervisor_mut(&mut self) -> &mut Supervisor {
        // Whatever changes here, the next tick takes the full path and sees it.
        self.quiet = false;
        &mut self.supervisor
    }

    /// The current-sense calibration in use.
    pub fn sense(&self) -> &CurrentSense {
        &self.sense
    }

    /// The configuration in use.
    pub fn config(&self) -> &LoopConfig {
        &self.config
    }

    /// The current measured at the last tick, amperes.
    #[inline(always)]
    pub fn last_current_a(&self) -> f32 {
        self.last_current_a
    }

    /// The target current the setpoint is approaching, amperes.
    #[inline(always)]
    pub fn target_a(&self) -> f32 {
        self.setpoint.target_a()
    }

    /// How the last excitation ended (`None` while one runs, or before the
    /// first).
    pub fn excitation_end(&self) -> Option<ExcitationEnd> {
        self.excitation_end
    }

    /// The slewed setpoint the PI saw at the last tick, amperes.
    #[inline(always)]
    pub fn setpoint_a(&self) -> f32 {
        self.setpoint.value_a()
    }

    /// The volts the loop asked for at the last tick (PI plus feedforward).
    #[inline(always)]
    pub fn commanded_v(&self) -> f32 {
        self.last_volts
    }

    /// The drive command the last tick returned.
    #[inline(always)]
    pub fn last_command(&self) -> DriveCommand {
        self.last
    }
}

pub mod fixed;

#[cfg(test)]
mod one_direction_tests;
#[cfg(test)]
mod quiet_path_tests;
