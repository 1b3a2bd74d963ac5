//! One firmware over many boards: the scenario's tolerances drawn
//! ([`crate::scenario::tolerances`]), each draw run through the real loop
//! and analysed on the linear loop, the runs reduced to a yield and the
//! worst cases ([`reduce`]), and written as tables, CSV and JSON
//! ([`report`]) and as scenario files that reproduce a run ([`worst`]).
//!
//! Runs go in parallel (`rayon`), each with its own values and noise seeds,
//! so a run's result does not depend on the thread that ran it; the results
//! are collected in run order and every reduction is serial, so the sweep's
//! figures are the same on one core or many. No file is read or written
//! here: the command line does that.

use pi_core::design::Gains;
use rayon::prelude::*;

use crate::prepare::{self, Overrides, PrepareError};
use crate::results::metrics::{StepMetrics, verdict};
use crate::results::report::{Designed, run_streaming};
use crate::results::summary::Interruption;
use crate::scenario::Params;
use crate::scenario::tolerances::{Field, Tolerances};
use crate::tuning::{self, LoopFigures};

pub mod methods;
pub mod reduce;
pub mod report;
pub mod worst;

/// The scenario every run starts from: gains in place, the firmware's
/// values pinned, and its tolerances.
#[derive(Clone, Debug)]
pub struct Nominal {
    /// The parameters (gains designed if the scenario left them out).
    pub params: Params,
    /// How the gains were designed, if they were.
    pub designed: Option<Designed>,
    /// What varies.
    pub tolerances: Tolerances,
}

/// Why a sweep could not start.
#[derive(Debug)]
pub enum SweepError {
    /// The scenario has no `[tolerances]`.
    NoTolerances,
    /// The scenario or its design.
    Prepare(PrepareError),
}

impl std::fmt::Display for SweepError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            SweepError::NoTolerances => write!(
                f,
                "the scenario has no [tolerances] section, so there is nothing to vary; add one (host-sim/SCENARIO_FORMAT.md)"
            ),
            SweepError::Prepare(e) => write!(f, "{e}"),
        }
    }
}

impl std::error::Error for SweepError {}

impl Nominal {
    /// The nominal run of `params`: its gains designed if it has none.
    pub fn new(params: Params) -> Result<Self, SweepError> {
        let tolerances = params.tolerances.clone().ok_or(SweepError::NoTolerances)?;
        let prepared = prepare::prepare(params).map_err(SweepError::Prepare)?;
        Ok(Self {
            params: prepared.params.with_firmware_pinned(),
            designed: prepared.designed,
            tolerances,
        })
    }

    /// The same firmware with other gains (and setpoint weight).
    pub fn with_gains(&self, kp_v_per_a: f64, ti_s: f64, setpoint_weight: f64) -> Self {
        let mut n = self.clone();
        n.params.controller.gains = Some(crate::scenario::params::GainParams { kp_v_per_a, ti_s });
        n.params.controller.setpoint_weight = Some(setpoint_weight);
        n
    }
}

/// Where a run's values came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Origin {
    /// Monte-Carlo run `k`.
    MonteCarlo(u64),
    /// Corner `j` (bit `i` set: field `i` at its high extreme).
    Corner(u64),
}

/// What one run did.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Outcome {
    /// Every step, scored or marked interrupted.
    pub steps: Vec<StepMetrics>,
    /// The spec held on every scored step (true when the scenario has no
    /// spec).
    pub spec_pass: bool,
    /// Every expectation held.
    pub expect_pass: bool,
    /// The highest true current, A.
    pub peak_current_a: f64,
    /// The first fault latched, and when.
    pub first_fault: Option<(String, f64)>,
    /// The linear loop at this board's values with the firmware's gains.
    pub figures: Option<LoopFigures>,
    /// What it missed: the spec's criteria, `expectations`, `stability`.
    pub misses: Vec<&'static str>,
}

impl Outcome {
    /// Spec, expectations and a stable linear loop.
    pub fn pass(&self) -> bool {
        self.spec_pass && self.expect_pass && self.figures.is_none_or(|f| f.stable)
    }
}

/// One run.
#[derive(Clone, Debug, PartialEq)]
pub struct Run {
    /// Where its values came from.
    pub origin: Origin,
    /// The varied fields' values, in the tolerances' order.
    pub values: Vec<f64>,
    /// What it did, or why it could not run.
    pub outcome: Result<Outcome, String>,
}

impl Run {
    /// Whether it ran and passed.
    pub fn pass(&self) -> bool {
        self.outcome.as_ref().is_ok_and(Outcome::pass)
    }
}

/// The values of every run a sweep makes: `runs` Monte-Carlo draws, then
/// the corners (all of them, or the half fraction).
pub fn plan(n: &Nominal, runs: u64, corners: Option<bool>) -> Vec<(Origin, Vec<f64>)> {
    let mut out: Vec<(Origin, Vec<f64>)> = (0..runs)
        .map(|k| (Origin::MonteCarlo(k), n.tolerances.draw(&n.params, k)))
        .collect();
    if let Some(half) = corners {
        let all = n.tolerances.corners(&n.params, false);
        let kept = n.tolerances.corners(&n.params, half);
        for c in kept {
            let j = all.iter().position(|a| *a == c).unwrap_or(0) as u64;
            out.push((Origin::Corner(j), c));
        }
    }
    out
}

/// The parameters of one run: the nominal scenario with `values` in place.
pub fn params_of(n: &Nominal, values: &[f64]) -> Result<Params, String> {
    n.tolerances
        .apply(&n.params, values)
        .map_err(|e| format!("the drawn values leave the model's range: {e}"))
}

/// Runs one set of values through the real loop and the linear analysis.
pub fn run_one(n: &Nominal, values: &[f64]) -> Result<Outcome, String> {
    let p = params_of(n, values)?;
    let scenario = p.build().map_err(|e| e.to_string())?;
    let (_, report) =
        run_streaming(&scenario, None, &mut |_| {}, u64::MAX, &mut |_| {}).map_err(|e| e.to_string())?;
    // Every run lasts as long as the nominal one: a step still outside its
    // settling band when the run ends never settles, and is scored as such
    // (a single run reports it as cut short instead).
    let mut steps = report.steps;
    for s in &mut steps {
        if s.interrupted == Some(Interruption::EndOfRun) {
            s.interrupted = None;
        }
    }
    let checks = verdict(&steps, &scenario.spec);
    let spec_pass = checks.iter().all(|c| c.pass);
    let expect_pass = report.expectations.iter().all(|c| c.pass);
    let figures = figures_of(&p);
    let mut misses: Vec<&'static str> = checks.iter().filter(|c| !c.pass).map(|c| c.criterion).collect();
    if !expect_pass {
        misses.push("expectations");
    }
    if figures.is_some_and(|f| !f.stable) {
        misses.push("stability");
    }
    misses.sort_unstable();
    misses.dedup();
    Ok(Outcome {
        misses,
        steps,
        spec_pass,
        expect_pass,
        peak_current_a: report.peak_current_a,
        first_fault: report.first_fault,
        figures,
    })
}

/// The linear loop's figures at a board's values: the winding at its
/// starting temperature, and the sense chain's error as a gain on the
/// plant (the loop sees `k i` for a current `i`, `k` the board's shunt and
/// gain over the ones the firmware assumes, so the PI acts on `R / k` and
/// `L / k`).
pub fn figures_of(p: &Params) -> Option<LoopFigures> {
    let g = p.controller.gains?;
    let mut q = p.clone();
    let start_c = Field::WindingC.get(p);
    if q.motor.thermal.is_some() {
        q.motor.resistance_ohm *=
            1.0 + crate::plant::motor::COPPER_ALPHA_PER_K * (start_c - crate::plant::motor::REFERENCE_C);
    }
    let c = &p.controller;
    let k = (p.sense.shunt_ohm * p.sense.amplifier_gain)
        / (c.calibration_shunt_ohm.unwrap_or(p.sense.shunt_ohm)
            * c.calibration_amplifier_gain.unwrap_or(p.sense.amplifier_gain));
    q.motor.resistance_ohm /= k;
    q.motor.inductance_h /= k;
    let b = prepare::basis(&q, &Overrides::default()).ok()?;
    tuning::figures(
        &b,
        &Gains {
            kp_v_per_a: g.kp_v_per_a,
            ti_s: g.ti_s,
        },
    )
    .ok()
}

/// Runs every planned set in parallel; `tick` is called after each run
/// (from any thread). The runs come back in plan order.
pub fn sweep(n: &Nominal, plan: &[(Origin, Vec<f64>)], tick: &(dyn Fn() + Sync)) -> Vec<Run> {
    plan.par_iter()
        .map(|(origin, values)| {
            let outcome = run_one(n, values);
            tick();
            Run {
                origin: *origin,
                values: values.clone(),
                outcome,
            }
        })
        .collect()
}
