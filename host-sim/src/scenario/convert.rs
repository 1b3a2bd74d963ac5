//! The parsed file to [`Params`]: defaults filled in, choices that exclude
//! each other checked, each field named as the file names it. Ranges are
//! checked by [`Params::validate`].

use pi_core::{Fault, TripClass};

use super::ScenarioError;
use super::choices;
use super::file::{
    ActionName, AntiWindupName, DecayName, FaultCause, FaultName, File, FilterKind, ModeName, MotorSection,
    RuleName, TripClassName,
};
use super::params::{
    AntiWindupParams, ControllerParams, EventAction, EventParams, GainParams, MAX_DURATION_S, OverloadCurve,
    Params, ProtectionParams, SetpointParams,
};
use crate::model_error::ModelError;
use crate::plant::bridge::{BridgeParams, Decay, Modulation, SwitchDrop};
use crate::plant::faults::{FaultKind, Injection};
use crate::plant::motor::{MotorParams, Saturation, WindingThermal};
use crate::plant::sense_chain::{SenseFilter, SenseParams};
use crate::plant::timing::TimingParams;
use crate::spec::{Expectations, Spec};

/// A `[motor]` section's parameters.
pub(super) fn motor(m: &MotorSection) -> Result<MotorParams, ScenarioError> {
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
        saturation: match &m.saturation {
            None => None,
            Some(sat) => {
                if sat.current_a.len() != sat.inductance_share.len() {
                    return Err(ModelError::new(
                        "motor.saturation.inductance_share",
                        format!("{} values", sat.inductance_share.len()),
                        format!("one value per current ({})", sat.current_a.len()),
                    )
                    .into());
                }
                let points: Vec<(f64, f64)> = sat
                    .current_a
                    .iter()
                    .copied()
                    .zip(sat.inductance_share.iter().copied())
                    .collect();
                Some(Saturation::new(&points)?)
            }
        },
    };
    Ok(motor)
}

pub(super) fn missing(field: String, needs: String) -> ScenarioError {
    ModelError::new(field, "(missing)", needs).into()
}

pub(super) fn from_file(f: File, fallback_name: &str) -> Result<Params, ScenarioError> {
    let duration_s = ModelError::within("duration_s", f.duration_s, 1e-9, MAX_DURATION_S)?;
    if f.record_every_ticks == 0 {
        return Err(ModelError::new("record_every_ticks", 0, "a whole number of at least 1").into());
    }
    let choices::LoadChoice {
        motor,
        winding_counter_v,
        led,
        solenoid,
        battery,
    } = choices::load(&f)?;
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
            Some(DecayName::Fast) => Decay::Fast,
            _ => Decay::Slow,
        },
        topology: choices::topology(b)?,
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
            ActionName::SetCurrent if f.charge.is_some() => {
                return Err(ModelError::new(
                    field("action"),
                    "set_current",
                    "left out when [charge] is given (the charger's limit sets the current from charge.start_s)",
                )
                .into());
            }
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
        let unused = |name: &str, v: Option<f64>| -> Result<(), ScenarioError> {
            match v {
                Some(v) => Err(ModelError::new(
                    format!("faults[{k}].{name}"),
                    v,
                    format!("left out for kind {} (it does not use it)", fault_name(fs.kind)),
                )
                .into()),
                None => Ok(()),
            }
        };
        if fs.kind != FaultName::BusLevel {
            unused("supply_v", fs.supply_v)?;
        }
        if fs.kind != FaultName::LoadStep {
            unused("torque_n_m", fs.torque_n_m)?;
        }
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
        winding_counter_v,
        led,
        solenoid,
        battery,
        charge: f.charge.as_ref().map(super::charge::ChargeParams::from),
        bridge,
        sense,
        timing,
        controller,
        spec,
        expect: expectations(&f)?,
        events,
        load_profile,
        faults,
        tolerances: f
            .tolerances
            .as_ref()
            .map(super::tolerances::from_section)
            .transpose()?,
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
    for (name, v) in [
        ("controller.calibration_shunt_ohm", c.calibration_shunt_ohm),
        (
            "controller.calibration_amplifier_gain",
            c.calibration_amplifier_gain,
        ),
    ] {
        if let Some(v) = v {
            ModelError::within(name, v, 1e-9, 1e6)?;
        }
    }
    let fixed_point = choices::fixed_point(c)?;
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
        calibration_shunt_ohm: c.calibration_shunt_ohm,
        calibration_amplifier_gain: c.calibration_amplifier_gain,
        fixed_point,
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

fn expectations(f: &File) -> Result<Expectations, ScenarioError> {
    let e = &f.expect;
    let trip = e.trip.map(|c| match c {
        FaultCause::Overcurrent => Fault::Overcurrent,
        FaultCause::Overload => Fault::Overload,
        FaultCause::CurrentInvalid => Fault::CurrentInvalid,
        FaultCause::SensorRail => Fault::SensorRail,
        FaultCause::SensorStuck => Fault::SensorStuck,
        FaultCause::BusUndervoltage => Fault::BusUndervoltage,
        FaultCause::BusOvervoltage => Fault::BusOvervoltage,
        FaultCause::BusInvalid => Fault::BusInvalid,
        FaultCause::SpeedInvalid => Fault::SpeedInvalid,
        FaultCause::SpeedImplausible => Fault::SpeedImplausible,
    });
    if trip.is_some() && e.no_trip {
        return Err(ModelError::new("expect.no_trip", "true", "left out when expect.trip is given").into());
    }
    if trip.is_none() {
        for (name, v) in [
            ("trip_after_s", e.trip_after_s),
            ("trip_before_s", e.trip_before_s),
        ] {
            if let Some(v) = v {
                return Err(ModelError::new(format!("expect.{name}"), v, "given with expect.trip").into());
            }
        }
    }
    Ok(Expectations {
        trip,
        trip_after_s: e.trip_after_s,
        trip_before_s: e.trip_before_s,
        no_trip: e.no_trip,
        max_winding_c: e.max_winding_c,
        max_current_a: e.max_current_a,
        unsaturated_after_s: e.unsaturated_after_s,
    })
}
