//! The scenario's choices of load, firmware arithmetic and drive topology,
//! and the fields that only make sense with one of them.

use super::ScenarioError;
use super::file::{ArithmeticName, BridgeSection, ControllerSection, File, TopologyName};
use super::params::{FixedPointParams, LedLoad, SolenoidLoad};
use crate::model_error::ModelError;
use crate::plant::battery::{Battery, BatteryParams};
use crate::plant::bridge::Topology;
use crate::plant::led::{LedParams, LedString};
use crate::plant::motor::MotorParams;
use crate::plant::solenoid::{Solenoid, SolenoidParams};

/// What the load of a scenario is, beside the R-L the design takes.
pub(super) struct LoadChoice {
    pub motor: MotorParams,
    pub winding_counter_v: Option<f64>,
    pub led: Option<LedLoad>,
    pub solenoid: Option<SolenoidLoad>,
    pub battery: Option<BatteryParams>,
}

/// The load: a `[motor]`, a `[winding]` (a held R-L with a counter-voltage)
/// or an `[led]` string; exactly one. The design takes the last two as a
/// held R-L: the winding's own R and L; the string's inductor and its slope
/// `dv/di` at its rated current, `led.design_current_a`.
pub(super) fn load(f: &File) -> Result<LoadChoice, ScenarioError> {
    let given = [
        f.motor.is_some(),
        f.winding.is_some(),
        f.led.is_some(),
        f.solenoid.is_some(),
        f.battery.is_some(),
    ];
    if given.iter().filter(|g| **g).count() > 1 {
        return Err(ModelError::new(
            "winding",
            "(given)",
            "one of [motor], [winding], [led], [solenoid] and [battery]: a scenario has one load",
        )
        .into());
    }
    if let Some(b) = &f.battery {
        let params = BatteryParams {
            ocv_table: b.ocv_table.clone(),
            capacity_ah: b.capacity_ah,
            series_resistance_ohm: b.series_resistance_ohm,
            polarisation_ohm: b.polarisation_ohm,
            polarisation_f: b.polarisation_f,
            initial_soc: b.initial_soc,
            inductance_h: b.inductance_h,
        };
        Battery::new(params.clone())?;
        return Ok(LoadChoice {
            motor: MotorParams::rl(params.series_resistance_ohm, params.inductance_h),
            winding_counter_v: None,
            led: None,
            solenoid: None,
            battery: Some(params),
        });
    }
    if let Some(sd) = &f.solenoid {
        let params = SolenoidParams {
            resistance_ohm: sd.resistance_ohm,
            turns: sd.turns,
            pole_area_m2: sd.pole_area_m2,
            iron_path_m: sd.iron_path_m,
            iron_relative_permeability: sd.iron_relative_permeability,
            plunger_mass_kg: sd.plunger_mass_kg,
            spring_n_per_m: sd.spring_n_per_m,
            spring_free_gap_m: sd.spring_free_gap_m,
            damping_n_s_per_m: sd.damping_n_s_per_m,
            closed_gap_m: sd.closed_gap_m,
            open_gap_m: sd.open_gap_m,
        };
        Solenoid::new(params)?;
        let at = ModelError::within(
            "solenoid.design_gap_m",
            sd.design_gap_m,
            sd.closed_gap_m,
            sd.open_gap_m,
        )?;
        return Ok(LoadChoice {
            motor: MotorParams::rl(params.resistance_ohm, params.inductance_h(at)),
            winding_counter_v: None,
            led: None,
            solenoid: Some(SolenoidLoad {
                solenoid: params,
                design_gap_m: at,
            }),
            battery: None,
        });
    }
    if let Some(m) = &f.motor {
        return Ok(LoadChoice {
            motor: super::convert::motor(m)?,
            winding_counter_v: None,
            led: None,
            solenoid: None,
            battery: None,
        });
    }
    if let Some(w) = &f.winding {
        return Ok(LoadChoice {
            motor: MotorParams::rl(w.resistance_ohm, w.inductance_h),
            winding_counter_v: Some(w.counter_v),
            led: None,
            solenoid: None,
            battery: None,
        });
    }
    if let Some(l) = &f.led {
        let led = LedParams {
            count: l.count,
            saturation_current_a: l.saturation_current_a,
            ideality: l.ideality,
            series_resistance_ohm: l.series_resistance_ohm,
            junction_c: l.junction_c,
            inductance_h: l.inductance_h,
        };
        // Validated here, so the linearisation below has a string to take.
        LedString::new(led)?;
        let at = ModelError::within("led.design_current_a", l.design_current_a, 1e-6, 1e3)?;
        return Ok(LoadChoice {
            motor: MotorParams::rl(led.slope_at(at), led.inductance_h),
            winding_counter_v: None,
            led: Some(LedLoad {
                string: led,
                design_current_a: at,
            }),
            solenoid: None,
            battery: None,
        });
    }
    Err(super::convert::missing(
        "motor".into(),
        "a [motor], [winding], [led], [solenoid] or [battery] section: the load".into(),
    ))
}

/// The drive: an H-bridge unless `topology = "low_side"`, which has no
/// decay mode to choose.
pub(super) fn topology(b: &BridgeSection) -> Result<Topology, ScenarioError> {
    match b.topology {
        Some(TopologyName::LowSide) => {
            if b.decay.is_some() {
                return Err(ModelError::new(
                    "bridge.decay",
                    "(given)",
                    "left out with topology = \"low_side\" (one switch has one off-state: the freewheel diode)",
                )
                .into());
            }
            Ok(Topology::LowSide)
        }
        _ => Ok(Topology::HBridge),
    }
}

/// The fixed-point loop's settings: the bus ADC only with `arithmetic =
/// "fixed"`, and its full scale required there (nothing else says how the
/// bus voltage becomes counts); no feedforward and no speed limit there.
pub(super) fn fixed_point(c: &ControllerSection) -> Result<Option<FixedPointParams>, ScenarioError> {
    let fixed = c.arithmetic == Some(ArithmeticName::Fixed);
    let why = "left out unless arithmetic = \"fixed\" (only the fixed-point loop reads the bus in counts)";
    let needs_float = "0 (left out) with arithmetic = \"fixed\": the fixed-point loop has no feedforward and reads no speed";
    let checks = [
        ("controller.bus_adc_bits", !fixed && c.bus_adc_bits.is_some(), why),
        (
            "controller.bus_full_scale_v",
            !fixed && c.bus_full_scale_v.is_some(),
            why,
        ),
        (
            "controller.feedforward_resistance_ohm",
            fixed && c.feedforward_resistance_ohm != 0.0,
            needs_float,
        ),
        (
            "controller.feedforward_back_emf_v_s_per_rad",
            fixed && c.feedforward_back_emf_v_s_per_rad != 0.0,
            needs_float,
        ),
        (
            "controller.protection.max_speed_rad_s",
            fixed && c.protection.max_speed_rad_s.is_some(),
            needs_float,
        ),
    ];
    if let Some((name, _, needs)) = checks.iter().find(|(_, bad, _)| *bad) {
        return Err(ModelError::new(*name, "(given)", *needs).into());
    }
    if !fixed {
        return Ok(None);
    }
    let bits = c.bus_adc_bits.unwrap_or(12);
    ModelError::within("controller.bus_adc_bits", bits as f64, 2.0, 15.0)?;
    let fs = c.bus_full_scale_v.ok_or_else(|| {
        ModelError::new(
            "controller.bus_full_scale_v",
            "(missing)",
            "given with arithmetic = \"fixed\": the bus voltage of a full-scale reading of the bus ADC",
        )
    })?;
    ModelError::within("controller.bus_full_scale_v", fs, 1e-3, 1e5)?;
    Ok(Some(FixedPointParams {
        bus_adc_bits: bits,
        bus_full_scale_v: fs,
    }))
}
