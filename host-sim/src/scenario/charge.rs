//! `[charge]`: a charger's outer voltage limit on a `[battery]` load (see
//! `host-sim/SCENARIO_FORMAT.md`): the TOML shape, the validated parameters
//! and the pi-core configuration built from them, refused by scenario path.

use pi_core::PiGains;
use pi_core::charge::ChargeConfig;
use serde::Deserialize;

use super::ScenarioError;
use super::names::{Site, core};
use crate::model_error::ModelError;
use crate::sim::charger::Charge;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct ChargeSection {
    #[serde(default)]
    start_s: f64,
    current_a: f64,
    voltage_v: f64,
    taper_current_a: f64,
    time_limit_s: f64,
    kp_a_per_v: f64,
    ti_s: f64,
    period_s: f64,
}

/// A charge as the scenario gives it, SI units.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ChargeParams {
    /// When the main loop starts the charge, s.
    pub start_s: f64,
    /// The constant current, A.
    pub current_a: f64,
    /// The constant voltage at the cell's terminals, V.
    pub voltage_v: f64,
    /// The current that ends the constant-voltage phase (full), A.
    pub taper_current_a: f64,
    /// The longest the charge may last, s.
    pub time_limit_s: f64,
    /// The outer PI's proportional gain, amperes per volt.
    pub kp_a_per_v: f64,
    /// Its integral time, s.
    pub ti_s: f64,
    /// Its period in the main loop, s (a whole number of control periods).
    pub period_s: f64,
}

impl From<&ChargeSection> for ChargeParams {
    fn from(s: &ChargeSection) -> Self {
        Self {
            start_s: s.start_s,
            current_a: s.current_a,
            voltage_v: s.voltage_v,
            taper_current_a: s.taper_current_a,
            time_limit_s: s.time_limit_s,
            kp_a_per_v: s.kp_a_per_v,
            ti_s: s.ti_s,
            period_s: s.period_s,
        }
    }
}

impl ChargeParams {
    /// The charge the runner runs: pi-core's configuration, its start and
    /// its period in control ticks. `battery`: whether the load is a cell
    /// (the limit reads a cell's terminals); `setpoint_max_a`: the loop's
    /// largest setpoint, which the charge current may not pass.
    pub(super) fn build(
        &self,
        control_period_s: f64,
        duration_s: f64,
        battery: bool,
        setpoint_max_a: f64,
    ) -> Result<Charge, ScenarioError> {
        if !battery {
            return Err(ModelError::new(
                "charge",
                "(given)",
                "left out unless the load is a [battery] (the limit reads a cell's terminal voltage)",
            )
            .into());
        }
        let start_s = ModelError::within("charge.start_s", self.start_s, 0.0, duration_s)?;
        if self.current_a > setpoint_max_a {
            return Err(ModelError::number(
                "charge.current_a",
                self.current_a,
                format!("at most controller.setpoint.max_a = {setpoint_max_a} A"),
            )
            .into());
        }
        let period_s = ModelError::positive("charge.period_s", self.period_s)?;
        let ticks = (period_s / control_period_s).round();
        if ticks < 1.0 || (ticks * control_period_s - period_s).abs() > 1e-9 * period_s {
            return Err(ModelError::number(
                "charge.period_s",
                period_s,
                format!("a whole number of control periods (timing.control_period_s = {control_period_s} s)"),
            )
            .into());
        }
        let gains = PiGains::from_kp_ti(self.kp_a_per_v as f32, self.ti_s as f32)
            .map_err(|e| core(Site::Charge, e))?;
        let config = ChargeConfig::new(
            self.current_a as f32,
            self.voltage_v as f32,
            self.taper_current_a as f32,
            self.time_limit_s as f32,
            gains,
            period_s as f32,
        )
        .map_err(|e| core(Site::Charge, e))?;
        Ok(Charge {
            config,
            start_s,
            every_ticks: ticks as u64,
        })
    }
}
