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

/// The time axis of a run's picture: from 0 to the last point's time
/// (`empty_s` for a trace without points), across `left..right` pixels.
pub fn time_axis(pts: &[crate::sim::trace::TracePoint], empty_s: f64, left: f64, right: f64) -> svg::Axis {
    svg::Axis {
        lo: 0.0,
        hi: pts.last().map_or(empty_s, |p| p.t_s).max(1e-9),
        px_lo: left,
        px_hi: right,
    }
}
