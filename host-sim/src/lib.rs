//! # host-sim: the host side of Ampwright
//!
//! The simulator runs the real `pi-core` current loop against models of the
//! motor and the drive chain, on an ordinary computer, so that a current loop can
//! be checked on every commit without hardware.
//!
//! ```text
//! scenario (TOML) -> validated blocks -> runner ----tick----> pi_core::CurrentLoop (the real one)
//!                                          |  ^
//!                  bridge -> motor -> sense chain (+ fault injectors between blocks)
//!                                          |
//!                                        trace -> metrics -> report (table, JSON) / plot (SVG) / CSV
//! ```
//!
//! **Plant blocks**, one file each, each stepped over an interval with its inputs
//! held; none of them knows the controller, the scenario format or the plots:
//!
//! * [`motor`]: `L di/dt = v - R i - Ke w`, `J dw/dt = Kt i - B w - Tc - T_load`,
//!   copper heating; the linear part is advanced with its exact solution
//!   ([`linear`]), so an RL step carries no integration error.
//! * [`bridge`]: sign-magnitude H-bridge with centre-aligned PWM, dead time,
//!   switch and diode drops, slow or fast decay, a soft supply; averaged or
//!   edge-by-edge.
//! * [`sense_chain`]: shunt, amplifier with offset error, RC or second-order
//!   filter, ADC with seeded noise ([`noise`]) and quantisation.
//! * [`faults`]: injectors between blocks: sensor open, shorted or stuck, a bus
//!   dip or surge, a locked rotor, a load step.
//! * [`timing`]: when the firmware samples, how long it computes, when the new
//!   duty reaches the PWM.
//!
//! **Running and reporting:** [`runner`] steps the blocks PWM period by PWM
//! period and calls the controller at each sampling instant; [`trace`] is what a
//! run leaves; [`metrics`] measures steps (rise, overshoot, settling, error, IAE)
//! and checks a spec; [`report`] runs a [`scenario`] and makes the table and the
//! JSON; [`design_report`] applies `pi_core::design` to a scenario; [`plot`]
//! draws SVG (step response, root locus, frequency response); [`cli`] is the
//! `ampwright` command (`simulate`, `design`); [`demo`] is the built-in invented
//! machine and board.
//!
//! Model parameters that are out of range are refused with a [`ModelError`]
//! naming the field.

pub mod cli;
pub mod demo;
pub mod model_error;
pub mod plant;
pub mod plot;
pub mod prepare;
pub mod results;
pub mod scenario;
pub mod sim;
pub mod spec;
pub mod tuning;

pub use model_error::ModelError;
pub use scenario::{Scenario, ScenarioError};
pub use sim::runner::{Controller, DriveChain, Event, LinearPi, Runner};
pub use sim::trace::{Trace, TracePoint};
