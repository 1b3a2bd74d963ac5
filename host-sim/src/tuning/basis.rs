//! What a design works from: the winding, the sampling as the loop really has
//! it, the spec and the bus. Built from plant parameters every time it is
//! needed, so a value derived from the timing (the sample-to-update delay) or
//! the filter (its lag) always follows the parameters it comes from.

use pi_core::design::{RlPlant, Sampling, Spec};
use serde::Serialize;

use crate::model_error::ModelError;
use crate::plant::bridge::BridgeParams;
use crate::plant::motor::MotorParams;
use crate::plant::sense_chain::SenseParams;
use crate::plant::timing::{Timing, TimingParams};
use crate::spec::Spec as Limits;

/// The design's inputs, SI units, validated.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Basis {
    /// Winding resistance, ohm.
    pub resistance_ohm: f64,
    /// Winding inductance, H.
    pub inductance_h: f64,
    /// Back-EMF constant of a rotor that turns, V s/rad (0: held or no rotor).
    pub back_emf_v_s_per_rad: f64,
    /// Torque constant, N m/A.
    pub torque_n_m_per_a: f64,
    /// Inertia on the shaft, kg m^2.
    pub inertia_kg_m2: f64,
    /// Control period, s.
    pub period_s: f64,
    /// Sample-to-update delay, control periods, `[0, 1]`.
    pub delay_periods: f64,
    /// Current filter as one lag, s (0: none).
    pub filter_tau_s: f64,
    /// 2 % settling time asked, s.
    pub settling_time_s: f64,
    /// Overshoot asked, fraction in `[0, 1)`.
    pub overshoot: f64,
    /// Largest 10-90 % rise time asked, s (optional).
    pub rise_time_s: Option<f64>,
    /// Supply voltage, V.
    pub supply_v: f64,
    /// Largest duty.
    pub max_duty: f64,
    /// Largest setpoint magnitude, A.
    pub setpoint_max_a: f64,
    /// The current a nonlinear load was linearised at to give `resistance_ohm`
    /// (an LED string's slope there), A; `None` for a load that is an R-L.
    pub linearised_at_a: Option<f64>,
    /// The air gap a solenoid's inductance was taken at, m; `None` otherwise.
    pub design_gap_m: Option<f64>,
    /// The lowest and highest counter-voltage the load holds against the
    /// current (a cell's open-circuit voltage over its charge, a winding's
    /// constant one), V: the PI's integral carries it, the design leaves it
    /// out; `None` for a load without one.
    pub counter_v: Option<(f64, f64)>,
}

/// The parts of a scenario a design reads.
#[derive(Clone, Copy, Debug)]
pub struct Inputs<'a> {
    /// The winding.
    pub motor: &'a MotorParams,
    /// The bridge (supply, PWM frequency).
    pub bridge: &'a BridgeParams,
    /// The sense chain (its filter).
    pub sense: &'a SenseParams,
    /// The firmware's timing.
    pub timing: &'a TimingParams,
    /// The step limits.
    pub limits: &'a Limits,
    /// Largest duty.
    pub max_duty: f64,
    /// Largest setpoint magnitude, A.
    pub setpoint_max_a: f64,
    /// Where `motor`'s R-L was linearised, for a nonlinear load, A.
    pub linearised_at_a: Option<f64>,
    /// The air gap `motor`'s inductance was taken at, for a solenoid, m.
    pub design_gap_m: Option<f64>,
    /// The counter-voltage range the load holds, V (see [`Basis::counter_v`]).
    pub counter_v: Option<(f64, f64)>,
}

fn missing(field: &str) -> ModelError {
    ModelError::new(
        field,
        "(missing)",
        "given for a design (add it to the [spec] section)",
    )
}

impl Basis {
    /// The basis of a scenario's parts; `delay_periods` replaces the delay the
    /// timing gives when set.
    pub fn new(p: Inputs<'_>, delay_periods: Option<f64>) -> Result<Self, ModelError> {
        let timing = Timing::new(*p.timing, 1.0 / p.bridge.pwm_frequency_hz)?;
        let period_s = timing.control_period_s();
        let delay_periods = match delay_periods {
            Some(d) => d,
            None => {
                let d = timing.sample_to_update_s() / period_s;
                if d > 1.0 + 1e-9 {
                    return Err(ModelError::new(
                        "timing.computation_delay_s",
                        p.timing.computation_delay_s,
                        format!(
                            "short enough that the duty reaches the bridge within one control period of the sample for a design (it takes {d:.2} periods); the simulation runs it, the design models up to one period"
                        ),
                    ));
                }
                d.min(1.0)
            }
        };
        let basis = Basis {
            resistance_ohm: p.motor.resistance_ohm,
            inductance_h: p.motor.inductance_h,
            back_emf_v_s_per_rad: if p.motor.locked_rotor {
                0.0
            } else {
                p.motor.back_emf_v_s_per_rad
            },
            torque_n_m_per_a: p.motor.torque_n_m_per_a,
            inertia_kg_m2: p.motor.inertia_kg_m2,
            period_s,
            delay_periods,
            filter_tau_s: p.sense.filter.lag_s(),
            settling_time_s: p
                .limits
                .settling_time_s
                .ok_or_else(|| missing("spec.settling_time_s"))?,
            overshoot: p
                .limits
                .overshoot_pct
                .ok_or_else(|| missing("spec.overshoot_pct"))?
                / 100.0,
            rise_time_s: p.limits.rise_time_s,
            supply_v: p.bridge.supply_v,
            max_duty: p.max_duty,
            setpoint_max_a: p.setpoint_max_a,
            linearised_at_a: p.linearised_at_a,
            design_gap_m: p.design_gap_m,
            counter_v: p.counter_v,
        };
        basis.plant()?;
        basis.sampling()?;
        basis.spec()?;
        Ok(basis)
    }

    /// The winding (and the rotor, when it turns) for pi-core's design.
    pub fn plant(&self) -> Result<RlPlant<f64>, ModelError> {
        let plant = RlPlant::new(self.resistance_ohm, self.inductance_h).map_err(|_| {
            let (field, v) = if self.resistance_ohm.is_finite() && self.resistance_ohm > 0.0 {
                ("motor.inductance_h", self.inductance_h)
            } else {
                ("motor.resistance_ohm", self.resistance_ohm)
            };
            ModelError::new(field, v, "a finite number greater than zero")
        })?;
        if self.back_emf_v_s_per_rad == 0.0 {
            return Ok(plant);
        }
        plant
            .with_rotor(self.back_emf_v_s_per_rad, self.torque_n_m_per_a, self.inertia_kg_m2)
            .map_err(|_| {
                ModelError::new(
                    "motor.inertia_kg_m2",
                    self.inertia_kg_m2,
                    "a finite number greater than zero, with back_emf_v_s_per_rad and torque_n_m_per_a zero or more",
                )
            })
    }

    /// The sampling for pi-core's design.
    pub fn sampling(&self) -> Result<Sampling<f64>, ModelError> {
        Sampling::new(self.period_s, self.delay_periods, self.filter_tau_s).map_err(|_| {
            ModelError::new(
                "the sample-to-update delay",
                format!("{} periods", self.delay_periods),
                "between 0 and 1 control period",
            )
        })
    }

    /// The spec for pi-core's design.
    pub fn spec(&self) -> Result<Spec<f64>, ModelError> {
        let spec = Spec::new(self.settling_time_s, self.overshoot).map_err(|_| {
            if self.settling_time_s.is_finite() && self.settling_time_s > 0.0 {
                ModelError::new(
                    "spec.overshoot_pct",
                    self.overshoot * 100.0,
                    "from 0 up to (not including) 100 percent",
                )
            } else {
                ModelError::new(
                    "spec.settling_time_s",
                    self.settling_time_s,
                    "a finite number greater than zero",
                )
            }
        })?;
        match self.rise_time_s {
            Some(r) => spec
                .with_rise_time(r)
                .map_err(|_| ModelError::new("spec.rise_time_s", r, "a finite number greater than zero")),
            None => Ok(spec),
        }
    }

    /// The same basis with another settling time.
    pub fn with_settling_time(self, settling_time_s: f64) -> Self {
        Self {
            settling_time_s,
            ..self
        }
    }
}
