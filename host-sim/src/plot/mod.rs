//! Pictures of a run, as SVG: one file per picture.

pub mod step_response;
pub mod svg;

pub use step_response::{StepPlot, step_response_svg};
