//! Running the real controller against the plant: [`runner`] steps the blocks
//! PWM period by PWM period and calls the controller (`pi_core::CurrentLoop`,
//! the firmware's own code) at each sampling instant; [`trace`] is what a run
//! leaves; [`charger`] is a charger's main loop around pi-core's charge limit.

pub mod charger;
pub mod controller;
pub mod runner;
pub mod trace;
