//! A scenario as validated parameters: SI units, every field checked, cloneable
//! and free of the file's shape. This is what a sweep perturbs, what
//! identification fills in and what the command line overrides; the gains may
//! be left out (the design fills them in). [`Params::validate`] checks the whole
//! set the way [`super::build`] will use it, so a set that validates builds.

use std::path::Path;

use pi_core::TripClass;

use super::ScenarioError;
use super::file;
use crate::plant::bridge::BridgeParams;
use crate::plant::faults::Injection;
use crate::plant::motor::MotorParams;
use crate::plant::sense_chain::SenseParams;
use crate::plant::timing::TimingParams;
use crate::spec::{Expectations, Spec};

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
    /// The motor or R-L load (a `[winding]` is a held R-L here, its
    /// counter-voltage in `winding_counter_v`).
    pub motor: MotorParams,
    /// `Some(E)`: the load is a plain winding with counter-voltage `E`
    /// (`[winding]`), not a motor.
    pub winding_counter_v: Option<f64>,
    /// `Some`: the load is an LED string (`[led]`); `motor` then holds the
    /// R-L the design takes (its inductor, and its slope at
    /// `led.design_current_a`).
    pub led: Option<LedLoad>,
    /// `Some`: the load is a solenoid (`[solenoid]`); `motor` then holds the
    /// R-L the design takes (the coil's R, its inductance at
    /// `design_gap_m`).
    pub solenoid: Option<SolenoidLoad>,
    /// `Some`: the load is a battery behind the charger's inductor
    /// (`[battery]`); `motor` then holds the R-L the design takes (the
    /// series resistance and the inductor).
    pub battery: Option<crate::plant::battery::BatteryParams>,
    /// `Some`: a charger's outer voltage limit sets the current (`[charge]`,
    /// a battery only).
    pub charge: Option<super::charge::ChargeParams>,
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
    /// What the run must (not) do besides.
    pub expect: Expectations,
    /// Commands from the main loop, in file order.
    pub events: Vec<EventParams>,
    /// Load torque from given times, `(at_s, torque_n_m)`, sorted by time.
    pub load_profile: Vec<(f64, f64)>,
    /// Injected faults.
    pub faults: Vec<Injection>,
    /// What a sweep varies, if the file says.
    pub tolerances: Option<super::tolerances::Tolerances>,
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
    /// The shunt the firmware's current conversion assumes, ohm; `None`:
    /// the sense chain's.
    pub calibration_shunt_ohm: Option<f64>,
    /// The amplifier gain it assumes; `None`: the sense chain's.
    pub calibration_amplifier_gain: Option<f64>,
    /// The fixed-point loop (integers, for cores without an FPU) instead of
    /// the float one, with its bus ADC; `None`: the float loop.
    pub fixed_point: Option<FixedPointParams>,
    /// Setpoint limits and slew.
    pub setpoint: SetpointParams,
    /// Protections.
    pub protection: ProtectionParams,
}

/// A solenoid and the gap the design takes it at.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SolenoidLoad {
    /// The solenoid.
    pub solenoid: crate::plant::solenoid::SolenoidParams,
    /// The air gap its inductance is taken at for the design, m.
    pub design_gap_m: f64,
}

/// An LED string and where the design linearises it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LedLoad {
    /// The string.
    pub string: crate::plant::led::LedParams,
    /// The current its slope is taken at for the design, A.
    pub design_current_a: f64,
}

/// The fixed-point loop's bus ADC.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FixedPointParams {
    /// Its resolution, bits (2 to 15).
    pub bus_adc_bits: u8,
    /// The bus voltage of a full-scale reading, V (`2^bits` counts).
    pub bus_full_scale_v: f64,
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
        let params = super::convert::from_file(file::parse(text)?, fallback_name)?;
        params.validate()?;
        // Every extreme of the tolerances must give a plant the model takes.
        if let Some(t) = &params.tolerances {
            for corner in t.corners(&params, false) {
                if let Err(e) = t.apply(&params, &corner) {
                    let values: Vec<String> = t
                        .items
                        .iter()
                        .zip(&corner)
                        .map(|(v, x)| format!("{} = {x}", v.field.path()))
                        .collect();
                    return Err(crate::model_error::ModelError::new(
                        "tolerances",
                        values.join(", "),
                        format!("extremes the model accepts ({e})"),
                    )
                    .into());
                }
            }
        }
        Ok(params)
    }

    /// The same scenario with every value the firmware was written for
    /// made explicit (its output limit at this supply, the shunt and
    /// amplifier gain its current conversion assumes), so a perturbed board
    /// does not change the firmware with it.
    pub fn with_firmware_pinned(&self) -> Params {
        let mut p = self.clone();
        let c = &mut p.controller;
        c.output_limit_v = Some(c.output_limit_v.unwrap_or(self.bridge.supply_v));
        c.calibration_shunt_ohm = Some(c.calibration_shunt_ohm.unwrap_or(self.sense.shunt_ohm));
        c.calibration_amplifier_gain =
            Some(c.calibration_amplifier_gain.unwrap_or(self.sense.amplifier_gain));
        p
    }

    /// The largest setpoint magnitude, A.
    pub fn setpoint_max_a(&self) -> f64 {
        let s = &self.controller.setpoint;
        s.max_a.abs().max(s.min_a.abs())
    }
}
