//! The scenario: a motor or R-L load, a board, a controller, what happens and
//! when. A scenario is TOML; every quantity is in SI units and its unit is in
//! its name (`_ohm`, `_h`, `_v`, `_a`, `_s`, `_hz`, `_n_m`, `_kg_m2`, `_c` for
//! degrees Celsius, `_pct` for percent). Unknown fields are refused, and so are
//! values out of range: the error names the field and what it needs, in one
//! sentence. The annotated example is `host-sim/scenarios/carousel_step.toml`.
//!
//! * `file` (private): the TOML shapes; `convert` (private): file to params.
//! * [`params`]: [`Params`], the validated parameter set with optional gains:
//!   what overrides, sweeps and identification change.
//! * [`build`]: params to blocks and the firmware's `LoopConfig` ([`Scenario`]);
//!   never designs.
//! * [`tolerances`]: what a sweep varies, drawn and applied to [`Params`].
//! * `names` (private): the one map from pi-core field names to the paths
//!   and units the user wrote.
//!
//! This module never imports `tuning/`; [`crate::prepare`] joins the two.

pub mod build;
pub mod charge;
mod choices;
mod convert;
mod file;
mod load_sections;
mod names;
pub mod params;
pub mod tolerances;

use std::path::Path;

use pi_core::LoopConfig;

pub use params::Params;

use crate::model_error::ModelError;
use crate::plant::timing::Timing;
use crate::sim::runner::{DriveChain, Event};
use crate::spec::{Expectations, Spec};

/// Why a scenario could not be used.
#[derive(Debug)]
pub enum ScenarioError {
    /// The file could not be read.
    Io {
        /// The path.
        path: String,
        /// Why.
        error: std::io::Error,
    },
    /// Not valid TOML, or a field that is unknown, missing or of the wrong type.
    Syntax {
        /// Line, 1-based.
        line: usize,
        /// Column, 1-based.
        column: usize,
        /// The parser's message.
        message: String,
    },
    /// A value out of range.
    Invalid(ModelError),
}

impl std::fmt::Display for ScenarioError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            ScenarioError::Io { path, error } => {
                write!(f, "cannot read the scenario {path}: {error}; check the path")
            }
            ScenarioError::Syntax {
                line,
                column,
                message,
            } => write!(
                f,
                "scenario line {line}, column {column}: {message}; every field, unit and range is in host-sim/SCENARIO_FORMAT.md"
            ),
            ScenarioError::Invalid(e) => write!(f, "{e}"),
        }
    }
}

impl std::error::Error for ScenarioError {}

/// A validated scenario, ready to run any number of times.
#[derive(Clone, Debug)]
pub struct Scenario {
    /// Its name.
    pub name: String,
    /// Free text from the file.
    pub description: String,
    /// Length of the run, seconds.
    pub duration_s: f64,
    /// One trace point in this many ticks.
    pub record_every_ticks: u64,
    /// The plant.
    pub chain: DriveChain,
    /// The firmware's timing.
    pub timing: Timing,
    /// The firmware's loop configuration.
    pub loop_config: LoopConfig,
    /// The fixed-point loop's configuration and bus ADC bits, when the
    /// scenario runs the integer loop (`controller.arithmetic = "fixed"`).
    pub fixed_point: Option<(pi_core::current_loop::fixed::FixedLoopConfig, u8)>,
    /// Commands from the main loop.
    pub events: Vec<Event>,
    /// A charger's main loop, when the scenario has a `[charge]`.
    pub charge: Option<crate::sim::charger::Charge>,
    /// What the steps should meet.
    pub spec: Spec,
    /// What the run must (not) do besides.
    pub expect: Expectations,
    /// The overcurrent threshold, amperes (for plots).
    pub overcurrent_a: f64,
    /// The largest duty (for plots).
    pub max_duty: f64,
    /// The largest setpoint magnitude, amperes (for the design's headroom check).
    pub setpoint_max_a: f64,
}

impl From<ModelError> for ScenarioError {
    fn from(e: ModelError) -> Self {
        ScenarioError::Invalid(e)
    }
}

impl Scenario {
    /// Reads, validates and builds a scenario file that gives its gains.
    pub fn load(path: &Path) -> Result<Self, ScenarioError> {
        Params::load(path)?.build()
    }

    /// Validates and builds scenario text that gives its gains; `fallback_name`
    /// names it if the file does not.
    pub fn parse(text: &str, fallback_name: &str) -> Result<Self, ScenarioError> {
        Params::from_toml(text, fallback_name)?.build()
    }
}
