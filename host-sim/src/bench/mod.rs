//! The bench: captures read from CSV ([`capture`]) and the load identified
//! from them: a held rotor or any R-L load ([`identify`]), its inductance at
//! each current level ([`levels`]), a free rotor with
//! its speed ([`rotor`]) or, its inertia given, from the current alone
//! ([`rotor_current`]), both refined by the one Levenberg-Marquardt fit
//! ([`refine`]). No control math here beyond pi-core's least-squares
//! identification and the fits' quality figures.
//!
//! The bench link: [`link`] the host side (requests, replies, a board's
//! capture as CSV), [`virtual_board`] a board made of the simulator with the
//! real pi-core handler, capture and loop.

pub mod capture;
pub mod identify;
pub mod levels;
pub mod link;
pub mod refine;
pub mod rotor;
pub mod rotor_current;
pub mod virtual_board;
