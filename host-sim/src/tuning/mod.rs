//! PI design for a scenario's winding, sampling and spec, without knowing the
//! scenario file: [`basis`] (what the design works from, derived values computed
//! from the parameters when asked), [`survey`](mod@survey) (every method of
//! `pi_core::design` applied, analysed, judged by the one strict rule, chosen
//! by stability margin, and the nearest feasible spec), [`figures`](mod@figures)
//! (one set of gains' stability, margins and largest stable period) and
//! [`table`] (the survey as a table, JSON and Rust constants).
//!
//! This module never imports `scenario/`; [`crate::prepare`] joins the two.
//! The designs run in f64 here and in f32 on the device, through the same code.

pub mod basis;
pub mod figures;
pub mod locus;
pub mod survey;
pub mod table;

pub use basis::{Basis, Inputs};
pub use figures::{LoopFigures, figures};
pub use survey::{MethodResult, Survey, predict, survey};
pub use table::DesignReport;
