//! The linear loop's figures for one set of gains on one design basis:
//! stability, margins and the largest stable period. The survey states them
//! for each method; a sweep states them for each perturbed plant.

use pi_core::design::Gains;
use pi_core::design::analysis::{self, OpenLoop};

use super::Basis;
use super::survey::GRID_POINTS;
use crate::model_error::ModelError;

/// The sampled loop's figures.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct LoopFigures {
    /// Whether the sampled loop is stable.
    pub stable: bool,
    /// Phase margin, degrees (`None`: no gain crossover).
    pub phase_margin_deg: Option<f64>,
    /// Gain margin, dB (`None`: the phase never reaches -180 degrees).
    pub gain_margin_db: Option<f64>,
    /// Modulus margin, min |1 + L|.
    pub modulus_margin: f64,
    /// Gain crossover, Hz.
    pub crossover_hz: Option<f64>,
    /// The longest control period the loop stays stable at, s.
    pub largest_stable_period_s: Option<f64>,
}

/// The figures of `gains` on `b`'s plant and sampling.
pub fn figures(b: &Basis, gains: &Gains<f64>) -> Result<LoopFigures, ModelError> {
    let plant = b.plant()?;
    let sampling = b.sampling()?;
    let open = OpenLoop::new(&plant, &sampling, gains);
    let m = analysis::margins(&open, b.period_s, GRID_POINTS);
    Ok(LoopFigures {
        stable: open.is_stable(),
        phase_margin_deg: m.phase_margin_deg,
        gain_margin_db: m.gain_margin_db(),
        modulus_margin: m.modulus_margin,
        crossover_hz: m.crossover_hz,
        largest_stable_period_s: analysis::largest_stable_period(&plant, &sampling, gains),
    })
}
