//! One map from each pi-core configuration field to the scenario path the user
//! wrote and its unit, so that a value pi-core refuses is reported in the
//! user's terms. The build calls pi-core's constructors per [`Site`]; the same
//! pi-core field name can mean different scenario fields at different sites
//! (`period_s` is the control period for the PI and for the thermal model).

use pi_core::{ConfigError, Requirement};

use super::ScenarioError;
use crate::model_error::ModelError;

/// Which pi-core constructor refused a value.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(super) enum Site<'a> {
    /// `PiGains` for the controller (`"controller"`) or a retune event (`"events[2]"`).
    Gains(&'a str),
    /// `PiConfig`, `OutputLimits`, the anti-windup.
    Pi,
    /// `OvercurrentLimit`.
    Overcurrent,
    /// `BusWindow`.
    Bus,
    /// `ThermalConfig`.
    Thermal,
    /// `StuckDetection`.
    Stuck,
    /// `SpeedLimit`.
    Speed,
    /// `SetpointLimits`.
    Setpoint,
    /// `DutyMapping`.
    Duty,
    /// `CurrentSense` (the nominal calibration of the sense chain).
    Calibration,
    /// `LoopConfig::new`: checks across the parts.
    Loop,
    /// `Feedforward` and `LoopConfig::with_feedforward`.
    Feedforward,
    /// `FixedLoopConfig` and `FixedLoop`: the fixed-point loop.
    FixedPoint,
    /// `ChargeConfig` and its PI: a charger's outer voltage limit.
    Charge,
}

/// The scenario path and unit note for a pi-core field at a site (`None`: not
/// a field that site has).
pub(super) fn path(site: Site, field: &str) -> Option<(String, &'static str)> {
    const P: &str = "controller.protection";
    let plain = |s: &str| Some((s.to_string(), ""));
    match (site, field) {
        (Site::Gains(prefix), "kp_v_per_a" | "ti_s") => Some((format!("{prefix}.{field}"), "")),
        (Site::Gains(_), "setpoint_weight") => plain("controller.setpoint_weight"),
        (Site::Pi, "period_s") => plain("timing.control_period_s"),
        (Site::Pi, "v_max" | "max_v" | "min_v") => plain("controller.output_limit_v"),
        (Site::Pi, "tracking_time_s") => plain("controller.tracking_time_s"),
        (Site::Pi, "setpoint_weight") => plain("controller.setpoint_weight"),
        (Site::Overcurrent | Site::Loop, "threshold_a") => Some((format!("{P}.overcurrent_a"), "")),
        (Site::Overcurrent, "samples") => Some((format!("{P}.overcurrent_samples"), "")),
        (Site::Bus, "bus_min_v" | "min_v") => Some((format!("{P}.bus_min_v"), "")),
        (Site::Bus, "bus_max_v" | "max_v") => Some((format!("{P}.bus_max_v"), "")),
        (Site::Thermal, "rated_a") => Some((format!("{P}.rated_a"), "")),
        (Site::Thermal, "tau_s") => Some((
            format!("{P}.thermal_time_constant_s"),
            " (the trip class's time constant, if a class was given)",
        )),
        (Site::Thermal, "period_s") => plain("timing.control_period_s"),
        (Site::Stuck, "window_counts") => Some((format!("{P}.stuck_band_counts"), "")),
        (Site::Stuck, "stuck_ticks") => Some((format!("{P}.stuck_ticks"), "")),
        (Site::Stuck, "min_drive") => Some((format!("{P}.stuck_min_duty"), "")),
        (Site::Speed | Site::Feedforward, "max_speed_rad_s") => Some((format!("{P}.max_speed_rad_s"), "")),
        (Site::Setpoint, "min_a" | "max_a" | "slew_a_per_s") => {
            Some((format!("controller.setpoint.{field}"), ""))
        }
        (Site::Loop, "setpoint_max_a") => plain("controller.setpoint.max_a"),
        (Site::Loop, "setpoint_min_a") => Some((
            "controller.setpoint.min_a".to_string(),
            " (the bridge's topology = \"low_side\" drives one way only)",
        )),
        (Site::Duty, "max_duty") => plain("controller.max_duty"),
        (Site::Duty, "min_bus_v") => plain("controller.min_bus_v"),
        (Site::Calibration, "vref_v") => plain("sense.adc_reference_v"),
        (Site::Calibration, "shunt_ohm") => plain("sense.shunt_ohm"),
        (Site::Calibration, "gain") => plain("sense.amplifier_gain"),
        (Site::Calibration, "adc_bits") => plain("sense.adc_bits"),
        (Site::Calibration, "offset_counts") => Some((
            "sense.amplifier_offset_v".to_string(),
            " (converted to ADC counts)",
        )),
        (Site::Feedforward, "resistance_ohm") => plain("controller.feedforward_resistance_ohm"),
        (Site::Feedforward, "back_emf_v_s_per_rad") => plain("controller.feedforward_back_emf_v_s_per_rad"),
        (Site::FixedPoint, "adc_bits") => plain("sense.adc_bits"),
        (Site::FixedPoint, "bus_adc_bits") => plain("controller.bus_adc_bits"),
        (Site::FixedPoint, "bus_v_per_count") => {
            Some(("controller.bus_full_scale_v".to_string(), " (as volts per count)"))
        }
        (Site::FixedPoint, "max_v") => Some((format!("{P}.bus_max_v"), "")),
        (Site::FixedPoint, "kp_v_per_a") => plain("controller.kp_v_per_a"),
        (Site::FixedPoint, "threshold_a") => Some((format!("{P}.overcurrent_a"), "")),
        (Site::FixedPoint, "rated_a") => Some((format!("{P}.rated_a"), "")),
        (Site::FixedPoint, "tau_s") => Some((format!("{P}.thermal_time_constant_s"), "")),
        (Site::FixedPoint, "current_full_scale_a") => Some((
            "sense.adc_bits".to_string(),
            " (the current sensor's full scale, in amperes)",
        )),
        (Site::FixedPoint, "voltage_full_scale_v") => plain("controller.bus_full_scale_v"),
        (Site::Charge, "charge_current_a" | "max_v") => plain("charge.current_a"),
        (Site::Charge, "charge_voltage_v") => plain("charge.voltage_v"),
        (Site::Charge, "taper_current_a" | "time_limit_s" | "ti_s" | "period_s") => {
            Some((format!("charge.{field}"), ""))
        }
        (Site::Charge, "kp_v_per_a") => plain("charge.kp_a_per_v"),
        _ => None,
    }
}

/// Another field a requirement refers to, in scenario terms.
fn other(name: &str) -> String {
    match name {
        "bus_min_v" => "controller.protection.bus_min_v".into(),
        "charge_current_a" => "charge.current_a".into(),
        "min_v" => "the lower output limit".into(),
        "min_a and zero" => "controller.setpoint.min_a and zero".into(),
        "the overcurrent threshold_a" => "controller.protection.overcurrent_a".into(),
        "the bus ADC's full scale, bus_v_per_count x (2^bus_adc_bits - 1)" => {
            "controller.bus_full_scale_v less one count".into()
        }
        "8 x 64 x the bus ADC's full scale over the current sensor's full scale" => {
            "8 x 64 x controller.bus_full_scale_v over the current sensor's full scale (the fixed-point PI's coefficients must stay below 8 of its full scales, at most 64 bus full scales)".into()
        }
        "a hundredth of the thermal time constant tau_s" => {
            "a hundredth of the I^2t time constant (controller.protection)".into()
        }
        o => o.to_string(),
    }
}

/// A pi-core refusal as a scenario error naming the path the user wrote.
pub(super) fn core(site: Site, e: ConfigError) -> ScenarioError {
    let (field, note) = path(site, e.field).unwrap_or_else(|| {
        // A field this map does not know yet: say what pi-core calls it.
        (format!("the value pi-core calls {}", e.field), "")
    });
    let needs = match e.needs {
        Requirement::Finite => "a finite number".to_string(),
        Requirement::Positive => "a finite number greater than zero".to_string(),
        Requirement::NonNegative => "a finite number, zero or more".to_string(),
        Requirement::Within { min, max } if min == f32::MIN_POSITIVE => {
            format!("greater than 0 and at most {max}")
        }
        Requirement::Within { min, max } if max == f32::MAX => format!("at least {min}"),
        Requirement::Within { min, max } => format!("between {min} and {max}"),
        Requirement::Above(o) => format!("greater than {}", other(o)),
        Requirement::Below(o) => format!("less than {}", other(o)),
        Requirement::DifferentFrom(o) => format!("different from {}", other(o)),
        Requirement::AtLeastOne => "a whole number of at least 1".to_string(),
        Requirement::Required(reason) => format!("set, since {reason}"),
        // A requirement added to pi-core later: its own sentence says what is needed.
        _ => format!("what pi-core asks: {e}"),
    };
    let value = match e.needs {
        Requirement::Required(_) => "(missing)".to_string(),
        _ => format!("{}{note}", e.value),
    };
    ModelError { field, value, needs }.into()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every path the map names is a field of the annotated template.
    #[test]
    fn every_mapped_path_is_in_the_template() {
        let template = include_str!("../../scenarios/carousel_step.toml");
        let sites = [
            Site::Gains("controller"),
            Site::Pi,
            Site::Overcurrent,
            Site::Bus,
            Site::Thermal,
            Site::Stuck,
            Site::Speed,
            Site::Setpoint,
            Site::Duty,
            Site::Calibration,
            Site::Loop,
            Site::Feedforward,
            Site::FixedPoint,
        ];
        let fields = [
            "kp_v_per_a",
            "ti_s",
            "setpoint_weight",
            "period_s",
            "v_max",
            "max_v",
            "min_v",
            "tracking_time_s",
            "threshold_a",
            "samples",
            "bus_min_v",
            "bus_max_v",
            "rated_a",
            "tau_s",
            "window_counts",
            "stuck_ticks",
            "min_drive",
            "max_speed_rad_s",
            "min_a",
            "max_a",
            "slew_a_per_s",
            "setpoint_max_a",
            "setpoint_min_a",
            "max_duty",
            "min_bus_v",
            "vref_v",
            "shunt_ohm",
            "gain",
            "adc_bits",
            "offset_counts",
            "resistance_ohm",
            "back_emf_v_s_per_rad",
            "bus_adc_bits",
            "bus_v_per_count",
            "current_full_scale_a",
            "voltage_full_scale_v",
        ];
        let mut mapped = 0;
        for site in sites {
            for field in fields {
                if let Some((p, _)) = path(site, field) {
                    mapped += 1;
                    let leaf = p.rsplit('.').next().unwrap();
                    assert!(
                        template.contains(&format!("{leaf} =")) || template.contains(&format!("# {leaf} =")),
                        "{p} (pi-core {field}) is not in the template"
                    );
                }
            }
        }
        assert!(mapped >= 30, "{mapped}");
    }

    #[test]
    fn the_offset_is_named_in_volts_with_the_count_conversion_said() {
        let e = ConfigError {
            field: "offset_counts",
            value: 6206.06,
            needs: Requirement::Within {
                min: 0.0,
                max: 4095.0,
            },
        };
        let text = core(Site::Calibration, e).to_string();
        assert!(
            text.starts_with(
                "sense.amplifier_offset_v = 6206.06 (converted to ADC counts) must be between 0 and 4095"
            ),
            "{text}"
        );
    }
}
