//! A scenario as validated parameters: SI units, every field checked, cloneable
//! and free of the file's shape. This is what a sweep perturbs, what
//! identification fills in and what the command line overrides; the gains may
//! be left out (the design fills them in). [`Params::validate`] checks the whole
//! set the way [`super::build`] will use it, so a set that validates builds.

use std::path::Path;

use pi_core::TripClass;

use super::ScenarioError;
use super::file::{
    self, ActionName, AntiWindupName, DecayName, FaultName, File, FilterKind, ModeName, RuleName,
    TripClassName,
};
use crate::model_error::ModelError;
use crate::plant::bridge::{BridgeParams, Decay, Modulation, SwitchDrop};
use crate::plant::faults::{FaultKind, Injection};
use crate::plant::motor::{MotorParams, WindingThermal};
use crate::plant::sense_chain::{SenseFilter, SenseParams};
use crate::plant::timing::TimingParams;
use crate::results::metrics::Spec;

/// Longest run accepted, seconds.
pub const MAX_DURATION_S: f64 = 1e6;

/// A whole scenario, validated.
#[derive(Clone, Debug, PartialEq)]
pub struct Params {
    /// A short name, for output files and titles.
    pub name: String,
    /// Free text.
    pub description: String,
    /// Length of the run, s.
    pub duration_s: f64,
    /// Keep one trace point in this many ticks.
    pub record_every_ticks: u64,
    /// The motor or R-L load.
    pub motor: MotorParams,
    /// The H-bridge.
    pub bridge: BridgeParams,
    /// The current sense chain.
    pub sense: SenseParams,
    /// When the firmware samples and updates.
    pub timing: TimingParams,
    /// The firmware's loop settings.
    pub controller: ControllerParams,
    /// Limits each step should meet (also the design's target).
    pub spec: Spec,
    /// Commands from the main loop, in file order.
    pub events: Vec<EventParams>,
    /// Load torque from given times, `(at_s, torque_n_m)`, sorted by time.
    pub load_profile: Vec<(f64, f64)>,
    /// Injected faults.
    pub faults: Vec<Injection>,
}

/// PI gains as the scenario gives them.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct GainParams {
    /// Proportional gain, V/A.
    pub kp_v_per_a: f64,
    /// Integral time, s.
    pub ti_s: f64,
}

/// The anti-windup choice.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum AntiWindupParams {
    /// Conditional integration.
    Clamping,
    /// Back-calculation, with pi-core's default tracking time when `None`.
    BackCalculation {
        /// Tracking time, s.
        tracking_time_s: Option<f64>,
    },
}

/// The I^2t overload curve: a trip class or a time constant.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum OverloadCurve {
    /// A trip class of IEC 60947-4-1.
    TripClass(TripClass),
    /// A thermal time constant, s.
    TimeConstant(f64),
}

/// The firmware loop's settings.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ControllerParams {
    /// The gains, or `None` to have them designed from the spec.
    pub gains: Option<GainParams>,
    /// Setpoint weight; `None`: 1 with given gains, the design's with designed ones.
    pub setpoint_weight: Option<f64>,
    /// Trapezoidal (Tustin) integration instead of backward Euler.
    pub tustin: bool,
    /// Anti-windup, `None` for pi-core's default.
    pub anti_windup: Option<AntiWindupParams>,
    /// Largest PI output, V; `None`: the supply voltage.
    pub output_limit_v: Option<f64>,
    /// Largest duty.
    pub max_duty: f64,
    /// Lowest bus voltage the duty mapping divides by, V.
    pub min_bus_v: f64,
    /// Resistive feedforward, ohm (0: off).
    pub feedforward_resistance_ohm: f64,
    /// Back-EMF feedforward, V s/rad (0: off).
    pub feedforward_back_emf_v_s_per_rad: f64,
    /// The firmware reads the speed.
    pub speed_feedback: bool,
    /// Setpoint limits and slew.
    pub setpoint: SetpointParams,
    /// Protections.
    pub protection: ProtectionParams,
}

/// Setpoint limits.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SetpointParams {
    /// Lowest request, A.
    pub min_a: f64,
    /// Highest request, A.
    pub max_a: f64,
    /// Largest rate of change, A/s.
    pub slew_a_per_s: f64,
}

/// The supervisor's settings.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ProtectionParams {
    /// Overcurrent threshold, A.
    pub overcurrent_a: f64,
    /// Samples above it before the trip.
    pub overcurrent_samples: u16,
    /// Bus window, V.
    pub bus_min_v: f64,
    /// Bus window, V.
    pub bus_max_v: f64,
    /// I^2t: rated continuous current, A, and the curve.
    pub overload: Option<(f64, OverloadCurve)>,
    /// Stuck reading: band in counts, ticks, least duty.
    pub stuck: Option<(u16, u16, f64)>,
    /// Speed plausibility, rad/s.
    pub max_speed_rad_s: Option<f64>,
}

/// A command at a time.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct EventParams {
    /// When, s.
    pub at_s: f64,
    /// What.
    pub action: EventAction,
}

/// What an event does.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum EventAction {
    /// Enable the bridge.
    Enable,
    /// Disable it.
    Disable,
    /// Clear latched faults.
    ClearFaults,
    /// A new current request, A.
    SetCurrent(f64),
    /// New gains, live.
    Retune(GainParams),
}

impl Params {
    /// Reads and validates a scenario file.
    pub fn load(path: &Path) -> Result<Self, ScenarioError> {
        let text = std::fs::read_to_string(path).map_err(|error| ScenarioError::Io {
            path: path.display().to_string(),
            error,
        })?;
        let fallback = path
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_default();
        Self::from_toml(&text, &fallback)
    }

    /// Validates scenario text; `fallback_name` names it if the file does not.
    pub fn from_toml(text: &str, fallback_name: &str) -> Result<Self, ScenarioError> {
        let params = from_file(file::parse(text)?, fallback_name)?;
        params.validate()?;
        Ok(params)
    }

    /// The largest setpoint magnitude, A.
    pub fn setpoint_max_a(&self) -> f64 {
        let s = &self.controller.setpoint;
        s.max_a.abs().max(s.min_a.abs())
    }
}

fn missing(field: String, needs: String) -> ScenarioError {
    ModelError::new(field, "(missing)", needs).into()
}

fn from_file(f: File, fallback_name: &str) -> Result<Params, ScenarioError> {
    let duration_s = ModelError::within("duration_s", f.duration_s, 1e-9, MAX_DURATION_S)?;
    if f.record_every_ticks == 0 {
        return Err(ModelError::new("record_every_ticks", 0, "a whole number of at least 1").into());
    }
    let m = &f.motor;
    let inertia = match (m.inertia_kg_m2, m.locked_rotor) {
        (Some(j), _) => j,
        (None, true) => 1.0,
        (None, false) => {
            return Err(missing(
                "motor.inertia_kg_m2".into(),
                "given unless locked_rotor = true".into(),
            ));
        }
    };
    let motor = MotorParams {
        resistance_ohm: m.resistance_ohm,
        inductance_h: m.inductance_h,
        back_emf_v_s_per_rad: m.back_emf_v_s_per_rad,
        torque_n_m_per_a: m.torque_n_m_per_a.unwrap_or(m.back_emf_v_s_per_rad),
        inertia_kg_m2: inertia,
        viscous_n_m_s_per_rad: m.viscous_n_m_s_per_rad,
        coulomb_n_m: m.coulomb_n_m,
        locked_rotor: m.locked_rotor,
        thermal: m.thermal.as_ref().map(|t| WindingThermal {
            ambient_c: t.ambient_c,
            resistance_k_per_w: t.resistance_k_per_w,
            capacitance_j_per_k: t.capacitance_j_per_k,
            initial_c: t.initial_c.unwrap_or(t.ambient_c),
        }),
    };
    let b = &f.bridge;
    let switch = match (b.rds_on_ohm, b.switch_drop_v) {
        (Some(r), None) => SwitchDrop::OnResistance(r),
        (None, Some(v)) => SwitchDrop::Fixed(v),
        (None, None) => SwitchDrop::OnResistance(0.0),
        (Some(_), Some(v)) => {
            return Err(ModelError::new(
                "bridge.switch_drop_v",
                v,
                "left out when rds_on_ohm is given (a switch is a MOSFET or a bipolar transistor, not both)",
            )
            .into());
        }
    };
    let bridge = BridgeParams {
        supply_v: b.supply_v,
        source_resistance_ohm: b.source_resistance_ohm,
        pwm_frequency_hz: b.pwm_frequency_hz,
        modulation: match b.mode {
            ModeName::Averaged => Modulation::Averaged,
            ModeName::Switching => Modulation::Switching,
        },
        dead_time_s: b.dead_time_s,
        switch,
        diode_drop_v: b.diode_drop_v,
        decay: match b.decay {
            DecayName::Slow => Decay::Slow,
            DecayName::Fast => Decay::Fast,
        },
    };
    let s = &f.sense;
    let filter = match &s.filter {
        None => SenseFilter::None,
        Some(fs) => match (fs.kind, fs.q) {
            (FilterKind::Rc, None) => SenseFilter::Rc {
                cutoff_hz: fs.cutoff_hz,
            },
            (FilterKind::Rc, Some(q)) => {
                return Err(ModelError::new("sense.filter.q", q, "left out for an rc filter").into());
            }
            (FilterKind::SecondOrder, q) => SenseFilter::SecondOrder {
                cutoff_hz: fs.cutoff_hz,
                q: q.unwrap_or(std::f64::consts::FRAC_1_SQRT_2),
            },
        },
    };
    let sense = SenseParams {
        shunt_ohm: s.shunt_ohm,
        amplifier_gain: s.amplifier_gain,
        amplifier_offset_v: s.amplifier_offset_v.unwrap_or(0.5 * s.adc_reference_v),
        offset_error_v: s.offset_error_v,
        filter,
        adc_bits: s.adc_bits,
        adc_reference_v: s.adc_reference_v,
        noise_rms_v: s.noise_rms_v,
        seed: s.seed,
    };
    let t = &f.timing;
    let timing = TimingParams {
        control_period_s: t.control_period_s,
        sample_phase: t.sample_phase,
        computation_delay_s: t.computation_delay_s,
        jitter_rms_s: t.jitter_rms_s,
        seed: t.seed,
    };
    let sp = &f.spec;
    let spec = Spec {
        rise_time_s: sp.rise_time_s,
        overshoot_pct: sp.overshoot_pct,
        settling_time_s: sp.settling_time_s,
        steady_state_error_a: sp.steady_state_error_a,
    };
    let controller = controller(&f)?;
    let mut events = Vec::new();
    for (k, e) in f.events.iter().enumerate() {
        let field = |name: &str| format!("events[{k}].{name}");
        let unused = |name: &str, v: Option<f64>| -> Result<(), ScenarioError> {
            match v {
                Some(v) => Err(ModelError::new(
                    field(name),
                    v,
                    format!("left out for action {}", action_name(e.action)),
                )
                .into()),
                None => Ok(()),
            }
        };
        let action = match e.action {
            ActionName::SetCurrent => {
                unused("kp_v_per_a", e.kp_v_per_a)?;
                unused("ti_s", e.ti_s)?;
                let a = e
                    .current_a
                    .ok_or_else(|| missing(field("current_a"), "given for set_current".into()))?;
                EventAction::SetCurrent(a)
            }
            ActionName::Retune => {
                unused("current_a", e.current_a)?;
                let kp = e
                    .kp_v_per_a
                    .ok_or_else(|| missing(field("kp_v_per_a"), "given for retune".into()))?;
                let ti = e
                    .ti_s
                    .ok_or_else(|| missing(field("ti_s"), "given for retune".into()))?;
                EventAction::Retune(GainParams {
                    kp_v_per_a: kp,
                    ti_s: ti,
                })
            }
            other => {
                unused("current_a", e.current_a)?;
                unused("kp_v_per_a", e.kp_v_per_a)?;
                unused("ti_s", e.ti_s)?;
                match other {
                    ActionName::Enable => EventAction::Enable,
                    ActionName::Disable => EventAction::Disable,
                    _ => EventAction::ClearFaults,
                }
            }
        };
        events.push(EventParams { at_s: e.at_s, action });
    }
    let mut load_profile: Vec<(f64, f64)> = f.load.iter().map(|l| (l.at_s, l.torque_n_m)).collect();
    load_profile.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut faults = Vec::new();
    for (k, fs) in f.faults.iter().enumerate() {
        let need = |name: &str, v: Option<f64>| {
            v.ok_or_else(|| {
                missing(
                    format!("faults[{k}].{name}"),
                    format!("given for {}", fault_name(fs.kind)),
                )
            })
        };
        let kind = match fs.kind {
            FaultName::SensorOpen => FaultKind::SensorOpen,
            FaultName::SensorShorted => FaultKind::SensorShorted,
            FaultName::SensorStuck => FaultKind::SensorStuck,
            FaultName::LockedRotor => FaultKind::LockedRotor,
            FaultName::BusLevel => FaultKind::BusLevel(need("supply_v", fs.supply_v)?),
            FaultName::LoadStep => FaultKind::LoadStep(need("torque_n_m", fs.torque_n_m)?),
        };
        faults.push(Injection {
            kind,
            start_s: fs.start_s,
            end_s: fs.end_s,
        });
    }
    Ok(Params {
        name: f.name.clone().unwrap_or_else(|| fallback_name.to_string()),
        description: f.description.clone(),
        duration_s,
        record_every_ticks: f.record_every_ticks,
        motor,
        bridge,
        sense,
        timing,
        controller,
        spec,
        events,
        load_profile,
        faults,
    })
}

fn action_name(a: ActionName) -> &'static str {
    match a {
        ActionName::Enable => "enable",
        ActionName::Disable => "disable",
        ActionName::SetCurrent => "set_current",
        ActionName::Retune => "retune",
        ActionName::ClearFaults => "clear_faults",
    }
}

fn fault_name(k: FaultName) -> &'static str {
    match k {
        FaultName::SensorOpen => "sensor_open",
        FaultName::SensorShorted => "sensor_shorted",
        FaultName::SensorStuck => "sensor_stuck",
        FaultName::BusLevel => "bus_level",
        FaultName::LockedRotor => "locked_rotor",
        FaultName::LoadStep => "load_step",
    }
}

fn controller(f: &File) -> Result<ControllerParams, ScenarioError> {
    let c = &f.controller;
    let gains = match (c.kp_v_per_a, c.ti_s) {
        (Some(kp), Some(ti)) => Some(GainParams {
            kp_v_per_a: kp,
            ti_s: ti,
        }),
        (None, None) => None,
        (Some(_), None) | (None, Some(_)) => {
            return Err(ModelError::new(
                "controller.kp_v_per_a",
                "(only one of kp_v_per_a and ti_s)",
                "given together with ti_s, or both left out to design them from [spec]",
            )
            .into());
        }
    };
    let anti_windup = match (c.anti_windup, c.tracking_time_s) {
        (Some(AntiWindupName::Clamping), Some(t)) => {
            return Err(ModelError::new(
                "controller.tracking_time_s",
                t,
                "left out with clamping anti-windup",
            )
            .into());
        }
        (Some(AntiWindupName::Clamping), None) => Some(AntiWindupParams::Clamping),
        (_, Some(t)) => Some(AntiWindupParams::BackCalculation {
            tracking_time_s: Some(t),
        }),
        (Some(AntiWindupName::BackCalculation), None) => Some(AntiWindupParams::BackCalculation {
            tracking_time_s: None,
        }),
        (None, None) => None,
    };
    let p = &c.protection;
    let overload = match (p.rated_a, p.trip_class, p.thermal_time_constant_s) {
        (None, None, None) => None,
        (Some(rated), Some(class), None) => Some((
            rated,
            OverloadCurve::TripClass(match class {
                TripClassName::Class10A => TripClass::Class10A,
                TripClassName::Class10 => TripClass::Class10,
                TripClassName::Class20 => TripClass::Class20,
                TripClassName::Class30 => TripClass::Class30,
            }),
        )),
        (Some(rated), None, Some(tau)) => Some((rated, OverloadCurve::TimeConstant(tau))),
        (None, _, _) => {
            return Err(missing(
                "controller.protection.rated_a".into(),
                "given with trip_class or thermal_time_constant_s".into(),
            ));
        }
        (Some(r), _, _) => {
            return Err(ModelError::new(
                "controller.protection.rated_a",
                r,
                "given with exactly one of trip_class and thermal_time_constant_s",
            )
            .into());
        }
    };
    let stuck = match (p.stuck_band_counts, p.stuck_ticks, p.stuck_min_duty) {
        (None, None, None) => None,
        (Some(band), Some(ticks), Some(duty)) => Some((band, ticks, duty)),
        _ => {
            return Err(ModelError::new(
                "controller.protection.stuck_band_counts",
                "(incomplete)",
                "given together with stuck_ticks and stuck_min_duty",
            )
            .into());
        }
    };
    Ok(ControllerParams {
        gains,
        setpoint_weight: c.setpoint_weight,
        tustin: matches!(c.integrator, Some(RuleName::Tustin)),
        anti_windup,
        output_limit_v: c.output_limit_v,
        max_duty: c.max_duty,
        min_bus_v: c.min_bus_v,
        feedforward_resistance_ohm: c.feedforward_resistance_ohm,
        feedforward_back_emf_v_s_per_rad: c.feedforward_back_emf_v_s_per_rad,
        speed_feedback: c.speed_feedback,
        setpoint: SetpointParams {
            min_a: c.setpoint.min_a,
            max_a: c.setpoint.max_a,
            slew_a_per_s: c.setpoint.slew_a_per_s,
        },
        protection: ProtectionParams {
            overcurrent_a: p.overcurrent_a,
            overcurrent_samples: p.overcurrent_samples,
            bus_min_v: p.bus_min_v,
            bus_max_v: p.bus_max_v,
            overload,
            stuck,
            max_speed_rad_s: p.max_speed_rad_s,
        },
    })
}
