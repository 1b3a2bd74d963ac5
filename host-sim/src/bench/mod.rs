//! The bench: captures read from CSV ([`capture`]) and the load identified
//! from them ([`identify`]). No control math here beyond pi-core's
//! least-squares identification and the fit's quality figures.

pub mod capture;
pub mod identify;
pub mod refine;
