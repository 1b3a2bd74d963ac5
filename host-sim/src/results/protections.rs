//! The firmware loop's protections in the scenario's terms: each one on with
//! its setting, or off with what goes unnoticed and the fields that turn it on.

use pi_core::{LoopConfig, Protection};
use serde::Serialize;

/// One protection of the loop as configured by the scenario.
#[derive(Clone, Debug, Serialize)]
pub struct ProtectionLine {
    /// What it guards against.
    pub name: &'static str,
    /// Whether it is on.
    pub on: bool,
    /// Its setting when on, or why its being off does not matter.
    pub setting: String,
    /// When off and it matters: what goes unnoticed, and the fields that turn it on.
    pub warning: Option<String>,
}

/// The protections of a loop configuration, in the scenario's terms.
/// `speed_feedback` says whether the firmware gets a speed reading at all.
pub fn protections(config: &LoopConfig, speed_feedback: bool) -> Vec<ProtectionLine> {
    let on = config.protections();
    let sup = config.supervisor();
    Protection::ALL
        .into_iter()
        .map(|p| {
            let setting = match p {
                Protection::Overcurrent => Some(format!(
                    "above {} A for {} samples",
                    sup.overcurrent().threshold_a(),
                    sup.overcurrent().samples()
                )),
                Protection::BusWindow => Some(format!("{} V to {} V", sup.bus().min_v(), sup.bus().max_v())),
                Protection::SensorReadings => Some("NaN, infinite or at an ADC rail".to_string()),
                Protection::Overload => sup.thermal().map(|t| {
                    format!(
                        "{} A rated, time constant {:.1} s, trips above {} x rated",
                        t.rated_a(),
                        t.tau_s(),
                        t.trip_multiple()
                    )
                }),
                Protection::SensorStuck => sup.stuck_detection().map(|d| {
                    format!(
                        "within {} counts for {} ticks at duty {} or more",
                        d.band_counts(),
                        d.ticks(),
                        d.min_drive()
                    )
                }),
                Protection::SpeedLimit => sup
                    .speed_limit()
                    .map(|w| format!("above {} rad/s", w.max_speed_rad_s())),
            };
            let fields = match p {
                Protection::Overload => {
                    "set controller.protection.rated_a with trip_class or thermal_time_constant_s"
                }
                Protection::SensorStuck => {
                    "set controller.protection.stuck_band_counts, stuck_ticks and stuck_min_duty"
                }
                _ => "set controller.protection.max_speed_rad_s",
            };
            let matters = p != Protection::SpeedLimit || speed_feedback;
            match setting {
                Some(setting) if on.is_on(p) => ProtectionLine {
                    name: p.describe(),
                    on: true,
                    setting,
                    warning: None,
                },
                _ if !matters => ProtectionLine {
                    name: p.describe(),
                    on: false,
                    setting: "no speed reading in this scenario".to_string(),
                    warning: None,
                },
                _ => ProtectionLine {
                    name: p.describe(),
                    on: false,
                    setting: String::new(),
                    warning: Some(format!(
                        "{} is off: {}; {fields}",
                        p.describe(),
                        p.risk_when_off()
                    )),
                },
            }
        })
        .collect()
}
