//! The plant: models of the load and the drive chain, one block per file, each
//! stepped over an interval with its inputs held. None of them knows the
//! controller, the scenario format, the results or the plots: the scenario
//! builds them and the runner steps them.
//!
//! * [`load`]: what the runner needs of a load; the loads implement it.
//! * [`motor`]: `L di/dt = v - R i - Ke w`, `J dw/dt = Kt i - B w - Tc - T_load`,
//!   copper heating; the linear part is advanced with its exact solution
//!   ([`linear`]), so an RL step carries no integration error.
//! * [`rl`]: `L di/dt = v - R i - E`, a winding with a constant counter-voltage.
//! * [`led`]: a string of diodes (Shockley with series resistance) behind its inductor.
//! * [`battery`]: an open-circuit voltage by the state of charge, a series resistance and one R-C pair, behind the charger's inductor.
//! * [`solenoid`]: a coil whose inductance follows its plunger's air gap, on a spring between stops.
//! * [`bridge`]: sign-magnitude H-bridge with centre-aligned PWM, dead time,
//!   switch and diode drops, slow or fast decay, a soft supply; averaged or
//!   edge by edge.
//! * [`sense_chain`]: shunt, amplifier with offset error, RC or second-order
//!   filter, ADC with seeded noise ([`noise`]) and quantisation.
//! * [`faults`]: injectors between blocks: sensor open, shorted or stuck, a bus
//!   dip or surge, a locked rotor, a load step.
//! * [`timing`]: when the firmware samples, how long it computes, when the new
//!   duty reaches the PWM.

pub mod battery;
pub mod bridge;
pub mod faults;
pub mod led;
pub mod linear;
pub mod load;
pub mod motor;
pub mod noise;
pub mod rl;
pub mod saturation;
pub mod sense_chain;
pub mod solenoid;
pub mod timing;
