//! # host-sim: the host side of Ampwright
//!
//! The simulator runs the real `pi-core` code against models of the load and the
//! drive chain, on an ordinary computer, so that a current loop can be checked on
//! every commit without hardware.
//!
//! The pieces so far:
//!
//! * [`rl_load`]: a resistive-inductive load with a back-EMF source, stepped with the
//!   exact solution of its linear equation over each interval, so a simulated step
//!   response carries no integration error of its own.
//!
//! * [`demo`]: the built-in demo machine and board (invented values).
//! * [`runner`]: an averaged bridge and an ideal ADC around the real
//!   [`pi_core::CurrentLoop`], with the one-sample computation delay of a real
//!   firmware.
//!
//! Plant blocks know nothing about the controller: the runner reads the load's
//! current, turns it into ADC counts, calls [`pi_core::CurrentLoop::tick`] and
//! applies the returned duty to the load.

pub mod demo;
pub mod rl_load;
pub mod runner;

pub use rl_load::RlLoad;
pub use runner::{ClosedLoop, IdealAdc, TickRecord};
