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
