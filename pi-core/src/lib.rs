//! # pi-core: a windup-safe PI current loop for microcontrollers
//!
//! `pi-core` closes a current loop around a resistive-inductive load (brushed DC
//! motor, solenoid, voice coil, LED string, charger) driven by an H-bridge or a
//! one-direction switch ([`DutyMapping::one_direction`]). It is
//! `no_std`, allocates nothing, has no `unsafe`, and nothing in the control path
//! panics or blocks.
//!
//! ## One control tick
//!
//! Firmware normally uses one thing: [`CurrentLoop`], called once per control
//! period from the interrupt that fires when the current sample is ready. A tick
//! runs left to right and nothing flows back:
//!
//! ```text
//! ADC counts --sense--> amperes ---------------------------+
//!                          |                               |
//!                          v                               v
//!            supervisor (faults, latch) <-- bus V    setpoint (limit, slew)
//!                          |  ok / faulted -> safe          |
//!                          v                               v
//!                   pi: setpoint - current -> volts (anti-windup, setpoint weight)
//!                          |
//!                   output: + feedforward, / bus volts -> duty, direction, enable
//!                          |
//!                   hal: SetDutyCycle / OutputPin
//! ```
//!
//! * [`sense`]: ADC counts to amperes; zero-offset and two-point calibration.
//! * [`supervisor`]: overcurrent, I^2t overload (IEC 60947-4-1 trip classes),
//!   invalid, railed or stuck readings, bus window, implausible speed; latched
//!   with the first cause. [`LoopConfig::protections`] says which are on.
//! * [`setpoint`]: current limits and slew rate.
//! * [`pi`]: the bare PI; usable alone when you already have amperes.
//! * [`output`]: volts to duty by the measured bus, duty limits.
//! * [`current_loop`]: the pieces in tick order and the disabled / running /
//!   faulted state machine; [`current_loop::fixed`] the same loop on integers
//!   for cores without an FPU.
//! * [`charge`]: a charger's outer voltage limit that feeds the loop's setpoint.
//! * [`handoff`]: commands from the main loop to the interrupt through a lock-free
//!   queue, with a control-interrupt skeleton.
//! * [`hal`]: embedded-hal 1.0 adapters for sign-magnitude and two-PWM bridges.
//!
//! Underneath, two leaves that import nothing from the rest of the crate:
//! [`fault`] (the fault causes and sets of them) and [`num`] (the panic-free
//! `clamp`, and the `Real` number type of the design math); [`error`] holds the
//! typed errors and imports only [`fault`].
//!
//! Off the tick path, [`design`] turns a winding, a sampling description and a
//! spec into gains (root locus, pole-zero cancellation, modulus optimum, direct
//! discrete placement) and analyses any gains on the sampled loop; it is generic
//! over `f32` (on the device, for a retune from a bench command) and `f64` (the
//! host's `ampwright design`), and never runs inside the control interrupt.
//! [`excitation`] drives the load open loop (voltage steps, PRBS, chirp)
//! through the same duty mapping with the supervisor on, for identifying it.
//! [`identify`] fits an R-L load's resistance and inductance to samples of
//! voltage and current by recursive least squares with a fixed-size state, so
//! a board can measure its own winding during an excitation.
//!
//! ## Conventions
//!
//! SI units everywhere, named in identifiers (`_a`, `_v`, `_ohm`, `_h`, `_s`,
//! `_hz`). Positive current and voltage mean the forward direction of the load.
//! Every configuration type is built by a constructor that validates it and returns
//! [`ConfigError`] naming the field; once built it is known good. A bad reading
//! faults the loop into the safe state ([`DriveCommand::SAFE`]); a bad command is
//! refused with [`CommandError`] and changes nothing.
//!
//! ## Features
//!
//! * `defmt`: `defmt::Format` for the public types, for logging on the target.
//! * `link`: the bench link. `capture` is a fixed-capacity record the control
//!   interrupt fills after each tick (armed by a message, triggered at once, by
//!   a setpoint change or by a level, with decimation); `link` holds the
//!   messages (`link::wire`, postcard), their framing (`link::frame`: COBS
//!   with a CRC-16) and the main-loop handler (`link::Link`), which reaches
//!   the loop through the firmware's `link::Board`. Adds `serde`, `postcard`,
//!   `cobs` and `crc`, none of which needs std or atomics.
//!
//! MSRV: Rust 1.88 (edition 2024).

#![no_std]
#![forbid(unsafe_code)]
#![warn(missing_docs)]

#[cfg(test)]
extern crate std;

#[cfg(feature = "link")]
pub mod capture;
pub mod charge;
pub mod current_loop;
pub mod design;
pub mod error;
pub mod excitation;
pub mod fault;
pub mod hal;
pub mod handoff;
pub mod identify;
#[cfg(feature = "link")]
pub mod link;
pub mod num;
pub mod output;
pub mod pi;
pub mod sense;
pub mod setpoint;
pub mod supervisor;

pub use heapless;

pub use current_loop::{Command, CurrentLoop, Feedforward, LoopConfig, LoopState, LoopStatus, TickInput};
pub use error::{ClearRefused, CommandError, ConfigError, Requirement};
pub use output::{Direction, DriveCommand, DutyMapping};
pub use pi::{AntiWindup, IntegratorRule, OutputLimits, PiConfig, PiController, PiGains, Saturation};
pub use sense::{CurrentSense, OffsetCalibration, OffsetProgress};
pub use setpoint::{Acceptance, SetpointLimits, SetpointShaper};
pub use supervisor::{
    BusWindow, Fault, FaultSet, Observation, OvercurrentLimit, Protection, Protections, SpeedLimit,
    StuckDetection, Supervisor, SupervisorConfig, ThermalConfig, ThermalModel, TripClass,
};

/// The README's code blocks, compiled and run as doctests.
#[cfg(doctest)]
#[doc = include_str!("../../README.md")]
pub struct ReadmeDoctests;

/// Everything a firmware's control module usually needs, in one `use`.
pub mod prelude {
    pub use crate::hal::{DriveOutput, NoPin, SignMagnitude, TwoPwm};
    pub use crate::{
        Acceptance, AntiWindup, BusWindow, Command, CurrentLoop, CurrentSense, Direction, DriveCommand,
        DutyMapping, Feedforward, IntegratorRule, LoopConfig, LoopState, OutputLimits, OvercurrentLimit,
        PiConfig, PiController, PiGains, SetpointLimits, SpeedLimit, StuckDetection, SupervisorConfig,
        ThermalConfig, TickInput, TripClass,
    };
}
