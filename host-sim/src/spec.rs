//! The limits a step should meet and a predicted step: the shapes shared by
//! the scenario (which reads the limits), the design (which predicts against
//! them) and the results (which measure against them). A leaf: it imports
//! nothing of this crate.

use pi_core::design::step;

/// A step predicted by the design's linear analysis of the sampled loop (no
/// saturation), for a unit request.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct PredictedStep {
    /// 10-90 % rise time, s.
    pub rise_time_s: Option<f64>,
    /// Overshoot, percent.
    pub overshoot_pct: f64,
    /// 2 % settling time, s.
    pub settling_time_s: Option<f64>,
}

impl From<step::StepMetrics<f64>> for PredictedStep {
    fn from(m: step::StepMetrics<f64>) -> Self {
        Self {
            rise_time_s: m.rise_time_s,
            overshoot_pct: m.overshoot * 100.0,
            settling_time_s: m.settling_time_s,
        }
    }
}

/// Limits a step response should meet; each one is optional.
#[derive(Clone, Copy, Debug, PartialEq, Default, serde::Serialize)]
pub struct Spec {
    /// Largest 10-90 % rise time, seconds.
    pub rise_time_s: Option<f64>,
    /// Largest overshoot, percent.
    pub overshoot_pct: Option<f64>,
    /// Largest 2 % settling time, seconds.
    pub settling_time_s: Option<f64>,
    /// Largest steady-state error magnitude, amperes.
    pub steady_state_error_a: Option<f64>,
}

/// What a run must (not) do, besides its steps meeting the spec: the checks a
/// CI job asserts on a scenario (its `[expect]` section). Each is optional.
#[derive(Clone, Copy, Debug, Default, PartialEq, serde::Serialize)]
pub struct Expectations {
    /// The run must trip on this cause (a `pi_core::Fault`), within the window
    /// below if one is given.
    #[serde(skip)]
    pub trip: Option<pi_core::Fault>,
    /// The trip must come at or after this time, s.
    pub trip_after_s: Option<f64>,
    /// The trip must come at or before this time, s.
    pub trip_before_s: Option<f64>,
    /// No fault may latch at all.
    pub no_trip: bool,
    /// The winding stays below this temperature, C.
    pub max_winding_c: Option<f64>,
    /// The true current stays below this magnitude, A (default: the
    /// overcurrent threshold).
    pub max_current_a: Option<f64>,
    /// After this time the duty never sits at its limit (the PI works inside
    /// its range), s.
    pub unsaturated_after_s: Option<f64>,
}
