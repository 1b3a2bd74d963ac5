//! Parameters to blocks: the plant blocks, the firmware's `LoopConfig` and the
//! command list. Building never designs: gains left out are an error here (the
//! joint, [`crate::prepare`], fills them in first).

use pi_core::{
    AntiWindup, BusWindow, Command, CurrentLoop, DutyMapping, Feedforward, IntegratorRule, LoopConfig,
    OutputLimits, OvercurrentLimit, PiConfig, PiGains, SetpointLimits, SpeedLimit, StuckDetection,
    SupervisorConfig, ThermalConfig,
};

use pi_core::current_loop::fixed::{FixedLoop, FixedLoopConfig};

use super::names::{Site, core};
use super::params::{AntiWindupParams, EventAction, GainParams, OverloadCurve, Params};
use super::{Scenario, ScenarioError};
use crate::model_error::ModelError;
use crate::plant::battery::Battery;
use crate::plant::bridge::{Bridge, Topology};
use crate::plant::faults::{FaultKind, Injectors};
use crate::plant::led::LedString;
use crate::plant::load::Load;
use crate::plant::motor::Motor;
use crate::plant::rl::{RlLoad, RlParams};
use crate::plant::sense_chain::SenseChain;
use crate::plant::solenoid::Solenoid;
use crate::plant::timing::Timing;
use crate::sim::controller::{FixedFirmware, LoopUnderTest};
use crate::sim::runner::{DriveChain, Event};

/// The largest load torque a scenario may apply, N m: ten kilonewton-metres is
/// past any machine a current loop of this kind drives.
pub const MAX_TORQUE_N_M: f64 = 1e4;

/// An injected bus level may reach this multiple of the nominal supply.
pub const MAX_BUS_FACTOR: f64 = 10.0;

/// Gains used only to check the rest of a controller whose gains will be designed.
const PLACEHOLDER: GainParams = GainParams {
    kp_v_per_a: 1.0,
    ti_s: 1.0,
};

fn f32_of(field: &str, v: f64) -> Result<f32, ScenarioError> {
    let x = v as f32;
    if v.is_finite() && x.is_finite() {
        Ok(x)
    } else {
        Err(ModelError::new(field, v, "a finite number within the range of f32").into())
    }
}

impl Params {
    /// Checks every value the way [`Params::build`] uses it; gains left out are
    /// checked when they are filled in.
    pub fn validate(&self) -> Result<(), ScenarioError> {
        self.assemble(self.controller.gains.unwrap_or(PLACEHOLDER), 1.0)
            .map(|_| ())
    }

    /// The runnable scenario; the gains must be given.
    pub fn build(&self) -> Result<Scenario, ScenarioError> {
        let gains = self.controller.gains.ok_or_else(|| {
            ModelError::new(
                "controller.kp_v_per_a",
                "(missing)",
                "given with ti_s, or designed from [spec] first (ampwright simulate does this)",
            )
        })?;
        self.assemble(gains, 1.0)
    }

    fn assemble(&self, gains: GainParams, default_weight: f64) -> Result<Scenario, ScenarioError> {
        let load: Box<dyn Load> = if let Some(b) = &self.battery {
            Box::new(Battery::new(b.clone())?)
        } else if let Some(sd) = self.solenoid {
            Box::new(Solenoid::new(sd.solenoid)?)
        } else if let Some(led) = self.led {
            Box::new(LedString::new(led.string)?)
        } else if let Some(counter_v) = self.winding_counter_v {
            Box::new(RlLoad::new(RlParams {
                resistance_ohm: self.motor.resistance_ohm,
                inductance_h: self.motor.inductance_h,
                counter_v,
            })?)
        } else {
            Box::new(Motor::new(self.motor)?)
        };
        let bridge = Bridge::new(self.bridge)?;
        let sense = SenseChain::new(self.sense)?;
        let timing = Timing::new(self.timing, bridge.pwm_period_s())?;
        self.check_spec()?;
        let c = &self.controller;
        if c.feedforward_back_emf_v_s_per_rad != 0.0 && !c.speed_feedback {
            return Err(ModelError::new(
                "controller.feedforward_back_emf_v_s_per_rad",
                c.feedforward_back_emf_v_s_per_rad,
                "0 unless speed_feedback = true (the firmware has no speed to multiply it by)",
            )
            .into());
        }
        let weight = self.controller.setpoint_weight.unwrap_or(default_weight);
        let loop_config = self.loop_config(gains, weight, &sense)?;
        let fixed_point = match self.controller.fixed_point {
            Some(f) => {
                let per_count = f.bus_full_scale_v / (1u32 << f.bus_adc_bits) as f64;
                let config = FixedLoopConfig::new(loop_config, f.bus_adc_bits, per_count as f32)
                    .map_err(|e| core(Site::FixedPoint, e))?;
                FixedLoop::new(config).map_err(|e| core(Site::FixedPoint, e))?;
                Some((config, f.bus_adc_bits))
            }
            None => None,
        };
        let mut events = Vec::new();
        for (k, e) in self.events.iter().enumerate() {
            let at = ModelError::non_negative(&format!("events[{k}].at_s"), e.at_s)?;
            if at > self.duration_s {
                return Err(ModelError::new(
                    format!("events[{k}].at_s"),
                    at,
                    format!("within the run (duration_s = {} s)", self.duration_s),
                )
                .into());
            }
            let field = |name: &str| format!("events[{k}].{name}");
            let command = match e.action {
                EventAction::Enable => Command::Enable,
                EventAction::Disable => Command::Disable,
                EventAction::ClearFaults => Command::ClearFaults,
                EventAction::SetCurrent(a) => Command::SetCurrent(f32_of(&field("current_a"), a)?),
                EventAction::Retune(g) => {
                    let prefix = format!("events[{k}]");
                    Command::Retune(self.pi_gains(g, weight, &prefix)?)
                }
            };
            events.push(Event { at_s: at, command });
        }
        for (k, &(at, tq)) in self.load_profile.iter().enumerate() {
            ModelError::within(&format!("load[{k}].at_s"), at, 0.0, self.duration_s)?;
            ModelError::within(
                &format!("load[{k}].torque_n_m"),
                tq,
                -MAX_TORQUE_N_M,
                MAX_TORQUE_N_M,
            )?;
        }
        for (k, f) in self.faults.iter().enumerate() {
            if f.start_s > self.duration_s {
                return Err(ModelError::new(
                    format!("faults[{k}].start_s"),
                    f.start_s,
                    format!("within the run (duration_s = {} s)", self.duration_s),
                )
                .into());
            }
            match f.kind {
                FaultKind::LoadStep(t) => {
                    ModelError::within(
                        &format!("faults[{k}].torque_n_m"),
                        t,
                        -MAX_TORQUE_N_M,
                        MAX_TORQUE_N_M,
                    )?;
                }
                FaultKind::BusLevel(v) => {
                    ModelError::within(
                        &format!("faults[{k}].supply_v"),
                        v,
                        0.0,
                        MAX_BUS_FACTOR * self.bridge.supply_v,
                    )?;
                }
                _ => {}
            }
        }
        let injectors = Injectors::new(self.faults.clone())?;
        Ok(Scenario {
            name: self.name.clone(),
            description: self.description.clone(),
            duration_s: self.duration_s,
            record_every_ticks: self.record_every_ticks,
            chain: DriveChain {
                load,
                bridge,
                sense,
                injectors,
                load_profile: self.load_profile.clone(),
                speed_feedback: self.controller.speed_feedback,
            },
            timing,
            loop_config,
            fixed_point,
            events,
            charge: self
                .charge
                .map(|c| {
                    c.build(
                        self.timing.control_period_s,
                        self.duration_s,
                        self.battery.is_some(),
                        self.controller.setpoint.max_a,
                    )
                })
                .transpose()?,
            spec: self.spec,
            expect: self.expect,
            overcurrent_a: self.controller.protection.overcurrent_a,
            max_duty: self.controller.max_duty,
            setpoint_max_a: self.setpoint_max_a(),
        })
    }

    /// The spec's limits: one rule for the overshoot, pi-core's (a fraction in
    /// `[0, 1)`, here in percent).
    fn check_spec(&self) -> Result<(), ScenarioError> {
        let s = &self.spec;
        if let Some(v) = s.rise_time_s {
            ModelError::positive("spec.rise_time_s", v)?;
        }
        if let Some(v) = s.settling_time_s {
            ModelError::positive("spec.settling_time_s", v)?;
        }
        if let Some(v) = s.steady_state_error_a {
            ModelError::non_negative("spec.steady_state_error_a", v)?;
        }
        let e = &self.expect;
        for (name, v) in [
            ("trip_after_s", e.trip_after_s),
            ("trip_before_s", e.trip_before_s),
            ("unsaturated_after_s", e.unsaturated_after_s),
        ] {
            if let Some(v) = v {
                ModelError::within(&format!("expect.{name}"), v, 0.0, self.duration_s)?;
            }
        }
        if let (Some(a), Some(b)) = (e.trip_after_s, e.trip_before_s)
            && a > b
        {
            return Err(ModelError::new("expect.trip_before_s", b, "at or after expect.trip_after_s").into());
        }
        if let Some(v) = e.max_winding_c {
            ModelError::finite("expect.max_winding_c", v)?;
        }
        if let Some(v) = e.max_current_a {
            ModelError::positive("expect.max_current_a", v)?;
        }
        if let Some(pct) = s.overshoot_pct
            && pi_core::design::Spec::new(1.0, pct / 100.0).is_err()
        {
            return Err(ModelError::new(
                "spec.overshoot_pct",
                pct,
                "from 0 up to (not including) 100 percent (0 asks for no overshoot)",
            )
            .into());
        }
        Ok(())
    }

    fn pi_gains(&self, g: GainParams, weight: f64, prefix: &str) -> Result<PiGains, ScenarioError> {
        let site = Site::Gains(prefix);
        PiGains::from_kp_ti(
            f32_of(&format!("{prefix}.kp_v_per_a"), g.kp_v_per_a)?,
            f32_of(&format!("{prefix}.ti_s"), g.ti_s)?,
        )
        .map_err(|e| core(site, e))?
        .with_setpoint_weight(f32_of("controller.setpoint_weight", weight)?)
        .map_err(|e| core(site, e))
    }

    fn loop_config(
        &self,
        gains: GainParams,
        weight: f64,
        sense: &SenseChain,
    ) -> Result<LoopConfig, ScenarioError> {
        let c = &self.controller;
        let gains = self.pi_gains(gains, weight, "controller")?;
        let pi_err = |e| core(Site::Pi, e);
        let limit = f32_of(
            "controller.output_limit_v",
            c.output_limit_v.unwrap_or(self.bridge.supply_v),
        )?;
        let period = f32_of("timing.control_period_s", self.timing.control_period_s)?;
        let mut pi =
            PiConfig::new(gains, period, OutputLimits::symmetric(limit).map_err(pi_err)?).map_err(pi_err)?;
        if c.tustin {
            pi = pi.with_rule(IntegratorRule::Tustin);
        }
        let aw = match c.anti_windup {
            None => None,
            Some(AntiWindupParams::Clamping) => Some(AntiWindup::Clamping),
            Some(AntiWindupParams::BackCalculation { tracking_time_s }) => {
                Some(AntiWindup::BackCalculation {
                    tracking_time_s: tracking_time_s
                        .map(|t| f32_of("controller.tracking_time_s", t))
                        .transpose()?,
                })
            }
        };
        if let Some(aw) = aw {
            pi = pi.with_anti_windup(aw).map_err(pi_err)?;
        }
        let p = &c.protection;
        const P: &str = "controller.protection";
        let mut supervisor = SupervisorConfig::new(
            OvercurrentLimit::new(
                f32_of(&format!("{P}.overcurrent_a"), p.overcurrent_a)?,
                p.overcurrent_samples,
            )
            .map_err(|e| core(Site::Overcurrent, e))?,
            BusWindow::new(
                f32_of(&format!("{P}.bus_min_v"), p.bus_min_v)?,
                f32_of(&format!("{P}.bus_max_v"), p.bus_max_v)?,
            )
            .map_err(|e| core(Site::Bus, e))?,
        );
        if let Some((rated, curve)) = p.overload {
            let rated = f32_of(&format!("{P}.rated_a"), rated)?;
            let thermal = match curve {
                OverloadCurve::TripClass(class) => ThermalConfig::from_trip_class(rated, class),
                OverloadCurve::TimeConstant(tau) => ThermalConfig::from_time_constant(
                    rated,
                    f32_of(&format!("{P}.thermal_time_constant_s"), tau)?,
                ),
            }
            .map_err(|e| core(Site::Thermal, e))?;
            supervisor = supervisor.with_thermal(thermal);
        }
        if let Some((band, ticks, duty)) = p.stuck {
            supervisor = supervisor.with_stuck_detection(
                StuckDetection::new(band, ticks, f32_of(&format!("{P}.stuck_min_duty"), duty)?)
                    .map_err(|e| core(Site::Stuck, e))?,
            );
        }
        if let Some(w) = p.max_speed_rad_s {
            supervisor = supervisor.with_speed_limit(
                SpeedLimit::new(f32_of(&format!("{P}.max_speed_rad_s"), w)?)
                    .map_err(|e| core(Site::Speed, e))?,
            );
        }
        let sp = &c.setpoint;
        let setpoint = SetpointLimits::new(
            f32_of("controller.setpoint.min_a", sp.min_a)?,
            f32_of("controller.setpoint.max_a", sp.max_a)?,
            f32_of("controller.setpoint.slew_a_per_s", sp.slew_a_per_s)?,
        )
        .map_err(|e| core(Site::Setpoint, e))?;
        let duty = DutyMapping::new(
            f32_of("controller.max_duty", c.max_duty)?,
            f32_of("controller.min_bus_v", c.min_bus_v)?,
        )
        .map_err(|e| core(Site::Duty, e))?;
        // The firmware of a one-way drive knows it: no reverse, a 0 V floor.
        let duty = match self.bridge.topology {
            Topology::LowSide => duty.one_direction(),
            Topology::HBridge => duty,
        };
        let calibration = sense
            .calibration_for(
                c.calibration_shunt_ohm.unwrap_or(self.sense.shunt_ohm),
                c.calibration_amplifier_gain.unwrap_or(self.sense.amplifier_gain),
            )
            .map_err(|e| core(Site::Calibration, e))?;
        let mut cfg =
            LoopConfig::new(calibration, setpoint, supervisor, pi, duty).map_err(|e| core(Site::Loop, e))?;
        if c.feedforward_resistance_ohm != 0.0 || c.feedforward_back_emf_v_s_per_rad != 0.0 {
            let ff = Feedforward::new(
                f32_of(
                    "controller.feedforward_resistance_ohm",
                    c.feedforward_resistance_ohm,
                )?,
                f32_of(
                    "controller.feedforward_back_emf_v_s_per_rad",
                    c.feedforward_back_emf_v_s_per_rad,
                )?,
            )
            .map_err(|e| core(Site::Feedforward, e))?;
            cfg = cfg.with_feedforward(ff).map_err(|e| core(Site::Feedforward, e))?;
        }
        Ok(cfg)
    }
}

impl Scenario {
    /// A fresh controller (the arithmetic the scenario chose) and runner at
    /// `t = 0`, keeping one trace point in `record_every_ticks`.
    pub fn start(&self) -> Result<(LoopUnderTest, crate::sim::runner::Runner), ScenarioError> {
        let firmware = match self.fixed_point {
            Some((config, bits)) => LoopUnderTest::Fixed(FixedFirmware::new(
                FixedLoop::new(config).map_err(|e| core(Site::FixedPoint, e))?,
                bits,
            )),
            None => LoopUnderTest::Float(self.float_loop()?),
        };
        Ok((
            firmware,
            crate::sim::runner::Runner::new(self.chain.clone(), self.timing.clone(), self.events.clone())
                .record_every(self.record_every_ticks)
                .with_charge(self.charge),
        ))
    }

    /// The float loop of the scenario, whatever arithmetic it chose (for the
    /// bench link's virtual board, which runs the float firmware).
    pub fn float_loop(&self) -> Result<CurrentLoop, ScenarioError> {
        CurrentLoop::new(self.loop_config).map_err(|e| core(Site::Loop, e))
    }
}
