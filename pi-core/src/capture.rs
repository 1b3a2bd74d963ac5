//! A record of the loop, filled from the control interrupt (feature `link`).
//!
//! The bench link arms a [`Capture`] from the main loop; the control interrupt
//! calls [`Capture::record`] once per tick, after [`CurrentLoop::tick`]; when
//! the record is full the link reads it out in chunks. Per recorded tick it
//! keeps the setpoint the PI saw, the measured current, the volts the loop
//! asked for, the bus, the drive command and the loop's state ([`Sample`],
//! 24 bytes, copied as they are: no arithmetic in the interrupt), so a capture holds what the host's identification and comparison
//! read from a scope: time (the tick period times the decimation), current,
//! and the terminal voltage as duty times bus.
//!
//! # Triggers
//!
//! * [`Trigger::Immediate`]: the first tick after arming.
//! * [`Trigger::SetpointChange`]: the first tick whose target current differs
//!   from the target when the capture was armed (a step request).
//! * [`Trigger::Excitation`]: the first tick of an open-loop excitation
//!   ([`crate::excitation`]): the samples then start with the waveform, and a
//!   hold that is a multiple of the decimation puts every level change on a
//!   kept sample.
//! * [`Trigger::Level`]: the first tick whose measured current crosses a level
//!   in the stated direction.
//!
//! After the trigger every `decimation`-th tick is recorded, starting with the
//! triggering tick, until `samples` are kept; the capture is then
//! [`CaptureState::Done`] and records nothing more until it is armed again.
//!
//! # Cost
//!
//! Idle or done, a call reads one byte and returns; armed, it compares one
//! value; filling, it counts down the decimation and stores one sample.
//! `benches/target-cost` counts each case against a budget.
//!
//! # Sharing
//!
//! The capture is written by the interrupt and read by the main loop, so the
//! firmware keeps it where both can reach it (an RTIC resource, a
//! `critical_section::Mutex`). Reading a capture that is still filling shows
//! the samples kept so far; [`Capture::samples`] never shows a half-written
//! one, since the interrupt finishes a sample before it counts it.

use crate::current_loop::{CurrentLoop, LoopState, TickInput};
use crate::error::{ConfigError, Requirement};
use crate::output::{Direction, DriveCommand};

/// One recorded tick (24 bytes).
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Sample {
    /// The slewed setpoint the PI saw, amperes.
    pub setpoint_a: f32,
    /// The measured current, amperes.
    pub current_a: f32,
    /// The volts the loop asked for (PI plus feedforward), volts.
    pub commanded_v: f32,
    /// The bus voltage the tick was given, volts.
    pub bus_v: f32,
    /// The duty returned for the next period, 0 to 1 ([`DriveCommand::duty`]).
    pub duty: f32,
    /// Its polarity.
    pub direction: Direction,
    /// Whether the bridge was enabled.
    pub enabled: bool,
    /// The loop's state after the tick.
    pub state: LoopState,
}

impl Default for Sample {
    fn default() -> Self {
        Self::ZERO
    }
}

impl Sample {
    const ZERO: Sample = Sample {
        setpoint_a: 0.0,
        current_a: 0.0,
        commanded_v: 0.0,
        bus_v: 0.0,
        duty: 0.0,
        direction: Direction::Forward,
        enabled: false,
        state: LoopState::Disabled,
    };

    /// The duty with its sign: positive forward, negative reverse, 0 when the
    /// bridge was off ([`DriveCommand::signed_duty`]).
    pub fn signed_duty(&self) -> f32 {
        DriveCommand {
            duty: self.duty,
            direction: self.direction,
            enabled: self.enabled,
        }
        .signed_duty()
    }
}

/// What starts the recording.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Trigger {
    /// The first tick after arming.
    Immediate,
    /// The first tick whose target current differs from the target at arming.
    SetpointChange,
    /// The first tick whose measured current crosses `level_a`: upward when
    /// `rising`, downward otherwise.
    Level {
        /// The level, amperes.
        level_a: f32,
        /// The direction of the crossing.
        rising: bool,
    },
    /// The first tick of an excitation (the loop in its `Exciting` state).
    Excitation,
}

/// How to record: validated by [`CaptureSpec::new`].
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct CaptureSpec {
    trigger: Trigger,
    decimation: u16,
    samples: u16,
}

impl CaptureSpec {
    /// Record `samples` ticks (1 to the capture's capacity `capacity`), one in
    /// every `decimation` (at least 1), from the trigger on. A level must be
    /// finite.
    pub fn new(
        trigger: Trigger,
        decimation: u16,
        samples: u16,
        capacity: usize,
    ) -> Result<Self, ConfigError> {
        if decimation == 0 {
            return Err(ConfigError::new("decimation", 0.0, Requirement::AtLeastOne));
        }
        if samples == 0 || samples as usize > capacity {
            let max = if capacity > u16::MAX as usize {
                u16::MAX as f32
            } else {
                capacity as f32
            };
            return Err(ConfigError::new(
                "samples",
                samples as f32,
                Requirement::Within { min: 1.0, max },
            ));
        }
        if let Trigger::Level { level_a, .. } = trigger
            && !level_a.is_finite()
        {
            return Err(ConfigError::new("level_a", level_a, Requirement::Finite));
        }
        Ok(Self {
            trigger,
            decimation,
            samples,
        })
    }

    /// The trigger.
    pub fn trigger(&self) -> Trigger {
        self.trigger
    }

    /// One tick recorded in this many.
    pub fn decimation(&self) -> u16 {
        self.decimation
    }

    /// Ticks to record.
    pub fn samples(&self) -> u16 {
        self.samples
    }
}

/// Where a capture is.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(u8)]
pub enum CaptureState {
    /// Never armed, or cancelled.
    Idle = 0,
    /// Waiting for the trigger.
    Armed = 1,
    /// Triggered, recording.
    Filling = 2,
    /// Full; the samples stay until the next arming.
    Done = 3,
}

/// A fixed-capacity record of `N` samples (24 bytes each).
#[derive(Clone, Debug)]
pub struct Capture<const N: usize> {
    samples: [Sample; N],
    state: CaptureState,
    filled: u16,
    wanted: u16,
    countdown: u16,
    spec: CaptureSpec,
    armed_target_a: f32,
    last_current_a: f32,
}

impl<const N: usize> Default for Capture<N> {
    fn default() -> Self {
        Self::new()
    }
}

impl<const N: usize> Capture<N> {
    /// An idle capture.
    pub const fn new() -> Self {
        Self {
            samples: [Sample::ZERO; N],
            state: CaptureState::Idle,
            filled: 0,
            wanted: 0,
            countdown: 0,
            // Never armed: nothing wanted. Every byte of a new capture is
            // zero, so a `static` one goes to .bss and costs no flash (an
            // initial image of the samples would be the capture's size).
            spec: CaptureSpec {
                trigger: Trigger::Immediate,
                decimation: 0,
                samples: 0,
            },
            armed_target_a: 0.0,
            last_current_a: 0.0,
        }
    }

    /// Samples it can hold.
    pub const fn capacity(&self) -> usize {
        N
    }

    /// Arms it (from the main loop): the samples of an earlier capture are
    /// dropped. `target_a` and `current_a` are the loop's target and measured
    /// current at arming ([`crate::LoopStatus`]), against which the
    /// setpoint-change and level triggers compare. Refused (nothing changed)
    /// when `spec` asks for more samples than the capacity.
    pub fn arm(&mut self, spec: CaptureSpec, target_a: f32, current_a: f32) -> Result<(), ConfigError> {
        let spec = CaptureSpec::new(spec.trigger, spec.decimation, spec.samples, N)?;
        self.spec = spec;
        self.filled = 0;
        self.wanted = spec.samples;
        self.countdown = 0;
        self.armed_target_a = target_a;
        self.last_current_a = current_a;
        self.state = CaptureState::Armed;
        Ok(())
    }

    /// Stops it; the samples kept so far stay readable.
    pub fn cancel(&mut self) {
        if self.state != CaptureState::Done {
            self.state = CaptureState::Idle;
        }
    }

    /// The record's state.
    pub fn state(&self) -> CaptureState {
        self.state
    }

    /// The spec it was last armed with (0 samples, decimation 0 before the
    /// first arming).
    pub fn spec(&self) -> CaptureSpec {
        self.spec
    }

    /// The samples kept so far, oldest first.
    pub fn samples(&self) -> &[Sample] {
        let n = (self.filled as usize).min(N);
        self.samples.get(..n).unwrap_or(&[])
    }

    /// Copies the samples from index `first` on into `out` (as many as fit);
    /// returns how many: what [`crate::link::Board::read_capture`] asks of a
    /// firmware.
    pub fn read(&self, first: usize, out: &mut [Sample]) -> usize {
        let kept = self.samples().get(first..).unwrap_or(&[]);
        let mut n = 0;
        for (o, s) in out.iter_mut().zip(kept) {
            *o = *s;
            n += 1;
        }
        n
    }

    /// One tick, from the control interrupt, after `cl.tick(input)`.
    #[inline]
    pub fn record(&mut self, cl: &CurrentLoop, input: &TickInput) {
        match self.state {
            CaptureState::Idle | CaptureState::Done => {}
            CaptureState::Armed => self.wait(cl, input),
            CaptureState::Filling => self.fill(cl, input),
        }
    }

    #[inline(never)]
    fn wait(&mut self, cl: &CurrentLoop, input: &TickInput) {
        let fire = match self.spec.trigger {
            Trigger::Immediate => true,
            Trigger::SetpointChange => cl.target_a() != self.armed_target_a,
            Trigger::Excitation => cl.state() == LoopState::Exciting,
            // Only a level needs the last reading: the other triggers leave
            // it alone (one load and one store fewer while they wait).
            Trigger::Level { level_a, rising } => {
                let current_a = cl.last_current_a();
                let crossed = if rising {
                    self.last_current_a < level_a && current_a >= level_a
                } else {
                    self.last_current_a > level_a && current_a <= level_a
                };
                self.last_current_a = current_a;
                crossed
            }
        };
        if fire {
            self.state = CaptureState::Filling;
            self.countdown = 0;
            self.fill(cl, input);
        }
    }

    #[inline(always)]
    fn fill(&mut self, cl: &CurrentLoop, input: &TickInput) {
        if self.countdown > 0 {
            self.countdown -= 1;
            return;
        }
        self.countdown = self.spec.decimation.saturating_sub(1);
        let at = self.filled as usize;
        if let Some(slot) = self.samples.get_mut(at) {
            let command = cl.last_command();
            *slot = Sample {
                setpoint_a: cl.setpoint_a(),
                current_a: cl.last_current_a(),
                commanded_v: cl.commanded_v(),
                bus_v: input.bus_v,
                duty: command.duty,
                direction: command.direction,
                enabled: command.enabled,
                state: cl.state(),
            };
            self.filled += 1;
        }
        if self.filled >= self.wanted {
            self.state = CaptureState::Done;
        }
    }
}

/// The state as the number a [`Sample`] keeps.
pub(crate) fn state_code(state: LoopState) -> u8 {
    match state {
        LoopState::Disabled => 0,
        LoopState::Running => 1,
        LoopState::Faulted => 2,
        LoopState::Exciting => 3,
    }
}

#[cfg(test)]
mod tests;
