//! Pictures of a run, as SVG: one file per picture.

pub mod fit;
pub mod frequency_response;
pub mod load_run;
pub mod long_run;
pub mod root_locus;
pub mod step_response;
pub mod svg;
pub mod sweep;

pub use fit::{fit_svg, overlay_svg};
pub use frequency_response::frequency_response_svg;
pub use load_run::{Level, LoadPlot, load_run_svg};
pub use long_run::long_run_svg;
pub use root_locus::root_locus_svg;
pub use step_response::{PlotEvent, StepPlot, step_response_svg};
pub use sweep::{sweep_histograms_svg, sweep_scatter_svg};
