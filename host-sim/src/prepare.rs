//! The one joint between the scenario and the design: load the parameters,
//! apply the command line's overrides (before anything is designed, each
//! checked like the field it replaces and named by its option in errors),
//! build the design basis from the overridden parameters, and fill in gains a
//! scenario leaves out. `scenario/` and `tuning/` never import each other;
//! everything that needs both goes through here.

use std::path::Path;

use crate::model_error::ModelError;
use crate::plant::sense_chain::SenseFilter;
use crate::results::report::Designed;
use crate::scenario::params::GainParams;
use crate::scenario::{Params, Scenario, ScenarioError};
use crate::tuning::{self, Basis, DesignReport, Inputs};

/// Values given on the command line in place of the scenario's.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Overrides {
    /// `--settling-time-s`: `spec.settling_time_s`.
    pub settling_time_s: Option<f64>,
    /// `--overshoot-pct`: `spec.overshoot_pct`.
    pub overshoot_pct: Option<f64>,
    /// `--rise-time-s`: `spec.rise_time_s`.
    pub rise_time_s: Option<f64>,
    /// `--resistance-ohm`: `motor.resistance_ohm`.
    pub resistance_ohm: Option<f64>,
    /// `--inductance-h`: `motor.inductance_h`.
    pub inductance_h: Option<f64>,
    /// `--control-period-s`: `timing.control_period_s` (the delay follows).
    pub control_period_s: Option<f64>,
    /// `--supply-v`: `bridge.supply_v`.
    pub supply_v: Option<f64>,
    /// `--filter-cutoff-hz`: `sense.filter.cutoff_hz` (an RC filter if the
    /// scenario has none).
    pub filter_cutoff_hz: Option<f64>,
    /// `--delay-periods`: the sample-to-update delay the design models, in
    /// control periods, instead of the one the timing gives.
    pub delay_periods: Option<f64>,
}

/// Each override: its option, the scenario path it replaces.
const OPTIONS: [(&str, &str); 8] = [
    ("--settling-time-s", "spec.settling_time_s"),
    ("--overshoot-pct", "spec.overshoot_pct"),
    ("--rise-time-s", "spec.rise_time_s"),
    ("--resistance-ohm", "motor.resistance_ohm"),
    ("--inductance-h", "motor.inductance_h"),
    ("--control-period-s", "timing.control_period_s"),
    ("--supply-v", "bridge.supply_v"),
    ("--filter-cutoff-hz", "sense.filter.cutoff_hz"),
];

impl Overrides {
    fn given(&self) -> [Option<f64>; 8] {
        [
            self.settling_time_s,
            self.overshoot_pct,
            self.rise_time_s,
            self.resistance_ohm,
            self.inductance_h,
            self.control_period_s,
            self.supply_v,
            self.filter_cutoff_hz,
        ]
    }

    /// An error about a path this override replaced, renamed to its option.
    fn rename(&self, e: ScenarioError) -> ScenarioError {
        match e {
            ScenarioError::Invalid(mut m) => {
                for ((option, path), v) in OPTIONS.iter().zip(self.given()) {
                    if v.is_some() && m.field == *path {
                        m.field = option.to_string();
                    }
                }
                ScenarioError::Invalid(m)
            }
            other => other,
        }
    }

    /// The parameters with the overrides in place, validated.
    pub fn apply(&self, params: &Params) -> Result<Params, ScenarioError> {
        let mut p = params.clone();
        let set = |slot: &mut f64, v: Option<f64>| {
            if let Some(v) = v {
                *slot = v;
            }
        };
        let set_opt = |slot: &mut Option<f64>, v: Option<f64>| {
            if v.is_some() {
                *slot = v;
            }
        };
        set_opt(&mut p.spec.settling_time_s, self.settling_time_s);
        set_opt(&mut p.spec.overshoot_pct, self.overshoot_pct);
        set_opt(&mut p.spec.rise_time_s, self.rise_time_s);
        set(&mut p.motor.resistance_ohm, self.resistance_ohm);
        set(&mut p.motor.inductance_h, self.inductance_h);
        set(&mut p.timing.control_period_s, self.control_period_s);
        set(&mut p.bridge.supply_v, self.supply_v);
        if let Some(fc) = self.filter_cutoff_hz {
            p.sense.filter = match p.sense.filter {
                SenseFilter::SecondOrder { q, .. } => SenseFilter::SecondOrder { cutoff_hz: fc, q },
                _ => SenseFilter::Rc { cutoff_hz: fc },
            };
        }
        if let Some(d) = self.delay_periods
            && !(0.0..=1.0).contains(&d)
        {
            return Err(ModelError::new("--delay-periods", d, "between 0 and 1 control period").into());
        }
        p.validate().map_err(|e| self.rename(e))?;
        Ok(p)
    }
}

/// The design basis of (overridden) parameters.
pub fn basis(params: &Params, overrides: &Overrides) -> Result<Basis, ScenarioError> {
    Basis::new(
        Inputs {
            motor: &params.motor,
            bridge: &params.bridge,
            sense: &params.sense,
            timing: &params.timing,
            limits: &params.spec,
            max_duty: params.controller.max_duty,
            setpoint_max_a: params.setpoint_max_a(),
            linearised_at_a: params.led.map(|l| l.design_current_a),
            design_gap_m: params.solenoid.map(|s| s.design_gap_m),
            counter_v: match (&params.battery, params.winding_counter_v) {
                (Some(b), _) => Some(
                    b.ocv_table
                        .iter()
                        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &(_, v)| {
                            (lo.min(v), hi.max(v))
                        }),
                ),
                (None, Some(e)) if e != 0.0 => Some((e, e)),
                _ => None,
            },
        },
        overrides.delay_periods,
    )
    .map_err(|e| overrides.rename(e.into()))
}

/// The design survey of a scenario with overrides.
pub fn design(params: &Params, overrides: &Overrides) -> Result<DesignReport, ScenarioError> {
    let p = overrides.apply(params)?;
    let b = basis(&p, overrides)?;
    let survey = tuning::survey(&b).map_err(|e| overrides.rename(e.into()))?;
    Ok(DesignReport {
        name: p.name.clone(),
        survey,
    })
}

/// A scenario ready to run.
#[derive(Clone, Debug)]
pub struct Prepared {
    /// The parameters, gains filled in.
    pub params: Params,
    /// The blocks.
    pub scenario: Scenario,
    /// Set when the gains were designed here.
    pub designed: Option<Designed>,
}

/// Why a scenario could not be prepared.
#[derive(Debug)]
pub enum PrepareError {
    /// The scenario itself.
    Scenario(ScenarioError),
    /// The gains were to be designed and no method meets the spec strictly.
    NoDesign(Box<DesignReport>),
}

impl std::fmt::Display for PrepareError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            PrepareError::Scenario(e) => write!(f, "{e}"),
            PrepareError::NoDesign(r) => write!(
                f,
                "the scenario gives no gains, and {}; run `ampwright design` to see every method",
                r.infeasible()
            ),
        }
    }
}

impl std::error::Error for PrepareError {}

impl From<ScenarioError> for PrepareError {
    fn from(e: ScenarioError) -> Self {
        PrepareError::Scenario(e)
    }
}

/// Loads a scenario file and prepares it (see [`prepare`]).
pub fn load(path: &Path) -> Result<Prepared, PrepareError> {
    prepare(Params::load(path)?)
}

/// The design's chosen gains for `params` with `overrides`, and the setpoint
/// weight they run with: the scenario's if it gives one, the method's
/// otherwise.
pub fn choose(params: &Params, overrides: &Overrides) -> Result<Designed, PrepareError> {
    let report = design(params, overrides)?;
    let (Some(m), Some(g)) = (report.chosen(), report.chosen_gains()) else {
        return Err(PrepareError::NoDesign(Box::new(report)));
    };
    let from_scenario = params.controller.setpoint_weight.is_some();
    let weight = params
        .controller
        .setpoint_weight
        .unwrap_or_else(|| m.kind.setpoint_weight());
    let predicted =
        tuning::predict(&report.survey.basis, &g, weight).map_err(|e| PrepareError::Scenario(e.into()))?;
    Ok(Designed {
        method: m.method,
        kp_v_per_a: g.kp_v_per_a,
        ti_s: g.ti_s,
        setpoint_weight: weight,
        weight_from_scenario: from_scenario,
        predicted,
    })
}

/// Builds the scenario, designing the gains first when it leaves them out
/// ([`choose`]).
pub fn prepare(mut params: Params) -> Result<Prepared, PrepareError> {
    let mut designed = None;
    if params.controller.gains.is_none() {
        let d = choose(&params, &Overrides::default())?;
        params.controller.gains = Some(GainParams {
            kp_v_per_a: d.kp_v_per_a,
            ti_s: d.ti_s,
        });
        params.controller.setpoint_weight = Some(d.setpoint_weight);
        designed = Some(d);
    }
    let scenario = params.build()?;
    Ok(Prepared {
        params,
        scenario,
        designed,
    })
}
