//! The scenario file: a motor, a board, a controller, what happens and when.
//!
//! A scenario is TOML. Every quantity is in SI units and its unit is in its name
//! (`_ohm`, `_h`, `_v`, `_a`, `_s`, `_hz`, `_n_m`, `_kg_m2`, `_c` for degrees
//! Celsius, `_pct` for percent). Unknown fields are refused, and so are values out
//! of range: the error names the field and what it needs, in one sentence. The
//! annotated example is `host-sim/scenarios/carousel_step.toml`; copy it to start
//! your own. Fields with a default may be left out; the defaults are an ideal
//! part (no drop, no noise, no error) unless said otherwise.
//!
//! Sections: `[motor]` (with an optional `[motor.thermal]`), `[bridge]`,
//! `[sense]` (with an optional `[sense.filter]`), `[timing]`, `[controller]`
//! (with `[controller.setpoint]` and `[controller.protection]`), `[spec]`, and the
//! lists `[[events]]`, `[[load]]` and `[[faults]]`.

use std::path::Path;

use pi_core::{
    AntiWindup, BusWindow, Command, ConfigError, CurrentLoop, DutyMapping, Feedforward, IntegratorRule,
    LoopConfig, OutputLimits, OvercurrentLimit, PiConfig, PiGains, Requirement, SetpointLimits, SpeedLimit,
    StuckDetection, SupervisorConfig, ThermalConfig, TripClass,
};
use serde::Deserialize;

use crate::model_error::ModelError;
use crate::plant::bridge::{Bridge, BridgeParams, Decay, Modulation, SwitchDrop};
use crate::plant::faults::{FaultKind, Injection, Injectors};
use crate::plant::motor::{Motor, MotorParams, WindingThermal};
use crate::plant::sense_chain::{SenseChain, SenseFilter, SenseParams};
use crate::plant::timing::{Timing, TimingParams};
use crate::results::metrics::Spec;
use crate::sim::runner::{DriveChain, Event, Runner};

/// Why a scenario could not be used.
#[derive(Debug)]
pub enum ScenarioError {
    /// The file could not be read.
    Io {
        /// The path.
        path: String,
        /// Why.
        error: std::io::Error,
    },
    /// Not valid TOML, or a field that is unknown, missing or of the wrong type.
    Syntax {
        /// Line, 1-based.
        line: usize,
        /// Column, 1-based.
        column: usize,
        /// The parser's message.
        message: String,
    },
    /// A value out of range.
    Invalid(ModelError),
    /// The gains were to be designed from the spec, and that failed.
    Design(String),
}

impl std::fmt::Display for ScenarioError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            ScenarioError::Io { path, error } => {
                write!(f, "cannot read the scenario {path}: {error}; check the path")
            }
            ScenarioError::Syntax {
                line,
                column,
                message,
            } => write!(
                f,
                "scenario line {line}, column {column}: {}; see host-sim/scenarios/carousel_step.toml for the fields",
                message.trim_end_matches('\n').replace('\n', " ")
            ),
            ScenarioError::Invalid(e) => write!(f, "{e}"),
            ScenarioError::Design(why) => {
                write!(f, "the scenario gives no gains and designing them failed: {why}")
            }
        }
    }
}

impl std::error::Error for ScenarioError {}

impl From<crate::design_report::DesignFailure> for ScenarioError {
    fn from(e: crate::design_report::DesignFailure) -> Self {
        match e {
            crate::design_report::DesignFailure::Scenario(s) => s,
            crate::design_report::DesignFailure::Infeasible(why) => ScenarioError::Design(why),
        }
    }
}

impl From<ModelError> for ScenarioError {
    fn from(e: ModelError) -> Self {
        ScenarioError::Invalid(e)
    }
}

/// A pi-core configuration error, placed in the scenario section it came from
/// and named as the scenario names it.
fn core(section: &str, e: ConfigError) -> ScenarioError {
    let field = match (section, e.field) {
        (_, "setpoint_max_a") => "controller.setpoint.max_a".to_string(),
        (_, "threshold_a") => "controller.protection.overcurrent_a".to_string(),
        ("controller.protection", "samples") => "controller.protection.overcurrent_samples".to_string(),
        ("controller.protection", "tau_s") => "controller.protection.thermal_time_constant_s".to_string(),
        ("controller.protection", "min_drive") => "controller.protection.stuck_min_duty".to_string(),
        ("controller.protection", "window_counts") => "controller.protection.stuck_band_counts".to_string(),
        (_, "max_speed_rad_s") => "controller.protection.max_speed_rad_s".to_string(),
        ("controller", "v_max") => "controller.output_limit_v".to_string(),
        ("controller", "period_s") => "timing.control_period_s".to_string(),
        ("sense", f) => format!(
            "sense.{}",
            match f {
                "vref_v" => "adc_reference_v",
                "offset_counts" => "amplifier_offset_v",
                other => other,
            }
        ),
        (s, f) => format!("{s}.{f}"),
    };
    let scenario_name = |other: &str| match other {
        "the overcurrent threshold_a" => "controller.protection.overcurrent_a".to_string(),
        o => o.to_string(),
    };
    let needs = match e.needs {
        Requirement::Finite => "a finite number".to_string(),
        Requirement::Positive => "a finite number greater than zero".to_string(),
        Requirement::NonNegative => "a finite number, zero or more".to_string(),
        Requirement::Within { min, max } if min == f32::MIN_POSITIVE => {
            format!("greater than 0 and at most {max}")
        }
        Requirement::Within { min, max } => format!("between {min} and {max}"),
        Requirement::Above(other) => format!("greater than {}", scenario_name(other)),
        Requirement::Below(other) => format!("less than {}", scenario_name(other)),
        Requirement::DifferentFrom(other) => format!("different from {other}"),
        Requirement::AtLeastOne => "a whole number of at least 1".to_string(),
        Requirement::Required(reason) => format!("set, since {reason}"),
        // A requirement added to pi-core later: its own sentence says what is needed.
        _ => format!("what pi-core asks: {e}"),
    };
    let value = match e.needs {
        Requirement::Required(_) => "(missing)".to_string(),
        _ => format!("{}", e.value),
    };
    ScenarioError::Invalid(ModelError { field, value, needs })
}

// ---------------------------------------------------------------------------
// The file's shape. Field documentation here is the reference for users.

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct File {
    /// A short name, used for output files and titles.
    name: Option<String>,
    /// Free text.
    #[serde(default)]
    description: String,
    /// Length of the run, seconds.
    duration_s: f64,
    /// Keep one trace point in this many ticks (default 1: every tick).
    #[serde(default = "one")]
    record_every_ticks: u64,
    motor: MotorSection,
    bridge: BridgeSection,
    sense: SenseSection,
    timing: TimingSection,
    controller: ControllerSection,
    #[serde(default)]
    spec: SpecSection,
    #[serde(default)]
    events: Vec<EventSection>,
    #[serde(default)]
    load: Vec<LoadSection>,
    #[serde(default)]
    faults: Vec<FaultSection>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct MotorSection {
    resistance_ohm: f64,
    inductance_h: f64,
    #[serde(default)]
    back_emf_v_s_per_rad: f64,
    /// Defaults to the back-EMF constant (equal in SI units for an ideal machine).
    torque_n_m_per_a: Option<f64>,
    /// Needed unless the rotor is locked.
    inertia_kg_m2: Option<f64>,
    #[serde(default)]
    viscous_n_m_s_per_rad: f64,
    #[serde(default)]
    coulomb_n_m: f64,
    #[serde(default)]
    locked_rotor: bool,
    thermal: Option<ThermalSection>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct ThermalSection {
    ambient_c: f64,
    resistance_k_per_w: f64,
    capacitance_j_per_k: f64,
    /// Defaults to ambient.
    initial_c: Option<f64>,
}

#[derive(Debug, Deserialize, Clone, Copy)]
#[serde(rename_all = "snake_case")]
enum ModeName {
    Averaged,
    Switching,
}

#[derive(Debug, Deserialize, Clone, Copy)]
#[serde(rename_all = "snake_case")]
enum DecayName {
    Slow,
    Fast,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct BridgeSection {
    supply_v: f64,
    #[serde(default)]
    source_resistance_ohm: f64,
    pwm_frequency_hz: f64,
    #[serde(default = "averaged")]
    mode: ModeName,
    #[serde(default)]
    dead_time_s: f64,
    /// MOSFET bridge: on-resistance of each switch. Give this or `switch_drop_v`.
    rds_on_ohm: Option<f64>,
    /// Bipolar bridge: saturation voltage of each switch.
    switch_drop_v: Option<f64>,
    #[serde(default)]
    diode_drop_v: f64,
    #[serde(default = "slow")]
    decay: DecayName,
}

fn averaged() -> ModeName {
    ModeName::Averaged
}
fn slow() -> DecayName {
    DecayName::Slow
}

#[derive(Debug, Deserialize, Clone, Copy)]
#[serde(rename_all = "snake_case")]
enum FilterKind {
    Rc,
    SecondOrder,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct FilterSection {
    kind: FilterKind,
    cutoff_hz: f64,
    /// Second order only; default 0.707 (maximally flat).
    q: Option<f64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct SenseSection {
    shunt_ohm: f64,
    amplifier_gain: f64,
    /// Defaults to half the ADC reference.
    amplifier_offset_v: Option<f64>,
    #[serde(default)]
    offset_error_v: f64,
    filter: Option<FilterSection>,
    #[serde(default = "twelve")]
    adc_bits: u8,
    adc_reference_v: f64,
    #[serde(default)]
    noise_rms_v: f64,
    #[serde(default = "one")]
    seed: u64,
}

fn twelve() -> u8 {
    12
}
fn one() -> u64 {
    1
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct TimingSection {
    control_period_s: f64,
    #[serde(default)]
    sample_phase: f64,
    #[serde(default)]
    computation_delay_s: f64,
    #[serde(default)]
    jitter_rms_s: f64,
    #[serde(default = "one")]
    seed: u64,
}

#[derive(Debug, Deserialize, Clone, Copy)]
#[serde(rename_all = "snake_case")]
enum RuleName {
    BackwardEuler,
    Tustin,
}

#[derive(Debug, Deserialize, Clone, Copy)]
#[serde(rename_all = "snake_case")]
enum AntiWindupName {
    BackCalculation,
    Clamping,
}

#[derive(Debug, Deserialize, Clone, Copy)]
enum TripClassName {
    #[serde(rename = "10A")]
    Class10A,
    #[serde(rename = "10")]
    Class10,
    #[serde(rename = "20")]
    Class20,
    #[serde(rename = "30")]
    Class30,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct ControllerSection {
    /// With `ti_s`; leave both out to have them designed from `[spec]`.
    kp_v_per_a: Option<f64>,
    ti_s: Option<f64>,
    /// Default 1, or the design's choice when the gains are designed.
    setpoint_weight: Option<f64>,
    integrator: Option<RuleName>,
    anti_windup: Option<AntiWindupName>,
    tracking_time_s: Option<f64>,
    /// Largest PI output, volts; defaults to the supply voltage.
    output_limit_v: Option<f64>,
    max_duty: f64,
    min_bus_v: f64,
    #[serde(default)]
    feedforward_resistance_ohm: f64,
    #[serde(default)]
    feedforward_back_emf_v_s_per_rad: f64,
    #[serde(default)]
    speed_feedback: bool,
    setpoint: SetpointSection,
    protection: ProtectionSection,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct SetpointSection {
    min_a: f64,
    max_a: f64,
    slew_a_per_s: f64,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct ProtectionSection {
    overcurrent_a: f64,
    overcurrent_samples: u16,
    bus_min_v: f64,
    bus_max_v: f64,
    /// I^2t protection: rated continuous current, with a trip class or a time constant.
    rated_a: Option<f64>,
    trip_class: Option<TripClassName>,
    thermal_time_constant_s: Option<f64>,
    /// Stuck-reading detection: band, ticks, least duty.
    stuck_band_counts: Option<u16>,
    stuck_ticks: Option<u16>,
    stuck_min_duty: Option<f64>,
    /// Speed plausibility: the largest speed magnitude that is not a fault.
    max_speed_rad_s: Option<f64>,
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct SpecSection {
    rise_time_s: Option<f64>,
    overshoot_pct: Option<f64>,
    settling_time_s: Option<f64>,
    steady_state_error_a: Option<f64>,
}

#[derive(Debug, Deserialize, Clone, Copy, PartialEq)]
#[serde(rename_all = "snake_case")]
enum ActionName {
    Enable,
    Disable,
    SetCurrent,
    Retune,
    ClearFaults,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct EventSection {
    at_s: f64,
    action: ActionName,
    /// `set_current` only.
    current_a: Option<f64>,
    /// `retune` only.
    kp_v_per_a: Option<f64>,
    /// `retune` only.
    ti_s: Option<f64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct LoadSection {
    at_s: f64,
    torque_n_m: f64,
}

#[derive(Debug, Deserialize, Clone, Copy, PartialEq)]
#[serde(rename_all = "snake_case")]
enum FaultName {
    SensorOpen,
    SensorShorted,
    SensorStuck,
    BusLevel,
    LockedRotor,
    LoadStep,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct FaultSection {
    kind: FaultName,
    start_s: f64,
    end_s: Option<f64>,
    /// `bus_level` only.
    supply_v: Option<f64>,
    /// `load_step` only.
    torque_n_m: Option<f64>,
}

// ---------------------------------------------------------------------------
// The validated scenario.

/// A validated scenario, ready to run any number of times.
#[derive(Clone, Debug)]
pub struct Scenario {
    /// Its name.
    pub name: String,
    /// How the gains were designed, when the scenario gave a spec instead.
    pub design_note: Option<String>,
    /// Free text from the file.
    pub description: String,
    /// Length of the run, seconds.
    pub duration_s: f64,
    /// One trace point in this many ticks.
    pub record_every_ticks: u64,
    /// The plant.
    pub chain: DriveChain,
    /// The firmware's timing.
    pub timing: Timing,
    /// The firmware's loop configuration.
    pub loop_config: LoopConfig,
    /// Commands from the main loop.
    pub events: Vec<Event>,
    /// What the steps should meet.
    pub spec: Spec,
    /// The overcurrent threshold, amperes (for plots).
    pub overcurrent_a: f64,
    /// The largest duty (for plots).
    pub max_duty: f64,
    /// The largest setpoint magnitude, amperes (for the design's headroom check).
    pub setpoint_max_a: f64,
}

impl Scenario {
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
        Self::parse(&text, &fallback)
    }

    /// Validates scenario text; `fallback_name` names it if the file does not.
    pub fn parse(text: &str, fallback_name: &str) -> Result<Self, ScenarioError> {
        let file: File = toml::from_str(text).map_err(|e| {
            let (line, column) = e.span().map_or((1, 1), |s| line_col(text, s.start));
            ScenarioError::Syntax {
                line,
                column,
                message: e.message().to_string(),
            }
        })?;
        build(file, fallback_name)
    }

    /// A fresh controller and runner at `t = 0`.
    pub fn start(&self) -> Result<(CurrentLoop, Runner), ScenarioError> {
        let cl = CurrentLoop::new(self.loop_config).map_err(|e| core("controller", e))?;
        Ok((
            cl,
            Runner::new(self.chain.clone(), self.timing.clone(), self.events.clone()),
        ))
    }
}

fn line_col(text: &str, offset: usize) -> (usize, usize) {
    let before = &text[..offset.min(text.len())];
    let line = before.matches('\n').count() + 1;
    let column = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
    (line, column)
}

fn f32_of(field: &str, v: f64) -> Result<f32, ScenarioError> {
    let x = v as f32;
    if v.is_finite() && x.is_finite() {
        Ok(x)
    } else {
        Err(ModelError::new(field, v, "a finite number within the range of f32").into())
    }
}

fn build(f: File, fallback_name: &str) -> Result<Scenario, ScenarioError> {
    let duration_s = ModelError::within("duration_s", f.duration_s, 1e-9, 1e6)?;
    if f.record_every_ticks == 0 {
        return Err(ModelError::new("record_every_ticks", 0, "a whole number of at least 1").into());
    }

    // Motor.
    let m = &f.motor;
    let inertia = match (m.inertia_kg_m2, m.locked_rotor) {
        (Some(j), _) => j,
        (None, true) => 1.0,
        (None, false) => {
            return Err(ModelError::new(
                "motor.inertia_kg_m2",
                "(missing)",
                "given unless locked_rotor = true",
            )
            .into());
        }
    };
    let motor = Motor::new(MotorParams {
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
    })?;

    // Bridge.
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
    let bridge = Bridge::new(BridgeParams {
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
    })?;

    // Sense chain.
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
    let sense = SenseChain::new(SenseParams {
        shunt_ohm: s.shunt_ohm,
        amplifier_gain: s.amplifier_gain,
        amplifier_offset_v: s.amplifier_offset_v.unwrap_or(0.5 * s.adc_reference_v),
        offset_error_v: s.offset_error_v,
        filter,
        adc_bits: s.adc_bits,
        adc_reference_v: s.adc_reference_v,
        noise_rms_v: s.noise_rms_v,
        seed: s.seed,
    })?;

    // Timing.
    let t = &f.timing;
    let timing = Timing::new(
        TimingParams {
            control_period_s: t.control_period_s,
            sample_phase: t.sample_phase,
            computation_delay_s: t.computation_delay_s,
            jitter_rms_s: t.jitter_rms_s,
            seed: t.seed,
        },
        bridge.pwm_period_s(),
    )?;

    let sp = &f.spec;
    let spec = Spec {
        rise_time_s: sp
            .rise_time_s
            .map(|v| ModelError::positive("spec.rise_time_s", v))
            .transpose()?,
        overshoot_pct: sp
            .overshoot_pct
            .map(|v| ModelError::non_negative("spec.overshoot_pct", v))
            .transpose()?,
        settling_time_s: sp
            .settling_time_s
            .map(|v| ModelError::positive("spec.settling_time_s", v))
            .transpose()?,
        steady_state_error_a: sp
            .steady_state_error_a
            .map(|v| ModelError::non_negative("spec.steady_state_error_a", v))
            .transpose()?,
    };

    // Controller: the gains given, or designed from the spec.
    let name = f.name.clone().unwrap_or_else(|| fallback_name.to_string());
    let c = &f.controller;
    let (kp, ti, weight, design_note) = match (c.kp_v_per_a, c.ti_s) {
        (Some(kp), Some(ti)) => (kp, ti, c.setpoint_weight.unwrap_or(1.0), None),
        (None, None) => {
            let basis = crate::design_report::basis_from(
                motor.params(),
                bridge.params(),
                sense.params(),
                &timing,
                &spec,
                c.max_duty,
                c.setpoint.max_a.abs().max(c.setpoint.min_a.abs()),
            )
            .map_err(ScenarioError::from)?;
            let report = crate::design_report::design_basis(&name, basis).map_err(ScenarioError::from)?;
            let m = report
                .chosen()
                .ok_or_else(|| ScenarioError::Design("no design method meets the spec".into()))?;
            let (kp, ti) = (m.kp_v_per_a.unwrap_or(f64::NAN), m.ti_s.unwrap_or(f64::NAN));
            let weight = c.setpoint_weight.unwrap_or(m.setpoint_weight);
            let note = format!(
                "gains designed from the spec by the {} method: Kp = {kp:.4} V/A, Ti = {:.4} ms, b = {weight}",
                m.method,
                ti * 1e3
            );
            (kp, ti, weight, Some(note))
        }
        (Some(_), None) | (None, Some(_)) => {
            return Err(ModelError::new(
                "controller.kp_v_per_a",
                "(only one of kp_v_per_a and ti_s)",
                "given together with ti_s, or both left out to design them from [spec]",
            )
            .into());
        }
    };
    let loop_config = controller(c, (kp, ti, weight), &sense, &timing, b.supply_v)?;

    // Events, load profile, faults.
    let mut events = Vec::new();
    for (k, e) in f.events.iter().enumerate() {
        let at = ModelError::non_negative(&format!("events[{k}].at_s"), e.at_s)?;
        let field = |name: &str| format!("events[{k}].{name}");
        let unused = |name: &str, v: Option<f64>| -> Result<(), ScenarioError> {
            match v {
                Some(v) => {
                    Err(ModelError::new(field(name), v, format!("left out for action {:?}", e.action)).into())
                }
                None => Ok(()),
            }
        };
        let command = match e.action {
            ActionName::SetCurrent => {
                unused("kp_v_per_a", e.kp_v_per_a)?;
                unused("ti_s", e.ti_s)?;
                let a = e.current_a.ok_or_else(|| {
                    ModelError::new(field("current_a"), "(missing)", "given for set_current")
                })?;
                Command::SetCurrent(f32_of(&field("current_a"), a)?)
            }
            ActionName::Retune => {
                unused("current_a", e.current_a)?;
                let kp = e
                    .kp_v_per_a
                    .ok_or_else(|| ModelError::new(field("kp_v_per_a"), "(missing)", "given for retune"))?;
                let ti = e
                    .ti_s
                    .ok_or_else(|| ModelError::new(field("ti_s"), "(missing)", "given for retune"))?;
                let gains =
                    PiGains::from_kp_ti(f32_of(&field("kp_v_per_a"), kp)?, f32_of(&field("ti_s"), ti)?)
                        .map_err(|err| core(&format!("events[{k}]"), err))?;
                let weight = weight as f32;
                Command::Retune(
                    gains
                        .with_setpoint_weight(weight)
                        .map_err(|err| core("controller", err))?,
                )
            }
            other => {
                unused("current_a", e.current_a)?;
                unused("kp_v_per_a", e.kp_v_per_a)?;
                unused("ti_s", e.ti_s)?;
                match other {
                    ActionName::Enable => Command::Enable,
                    ActionName::Disable => Command::Disable,
                    _ => Command::ClearFaults,
                }
            }
        };
        events.push(Event { at_s: at, command });
    }
    let mut load_profile = Vec::new();
    for (k, l) in f.load.iter().enumerate() {
        let at = ModelError::non_negative(&format!("load[{k}].at_s"), l.at_s)?;
        let tq = ModelError::finite(&format!("load[{k}].torque_n_m"), l.torque_n_m)?;
        load_profile.push((at, tq));
    }
    load_profile.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut injections = Vec::new();
    for (k, fs) in f.faults.iter().enumerate() {
        let need = |name: &str, v: Option<f64>| {
            v.ok_or_else(|| {
                ModelError::new(
                    format!("faults[{k}].{name}"),
                    "(missing)",
                    format!("given for {:?}", fs.kind),
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
        injections.push(Injection {
            kind,
            start_s: fs.start_s,
            end_s: fs.end_s,
        });
    }
    let injectors = Injectors::new(injections)?;

    Ok(Scenario {
        name,
        design_note,
        description: f.description.clone(),
        duration_s,
        record_every_ticks: f.record_every_ticks,
        chain: DriveChain {
            motor,
            bridge,
            sense,
            injectors,
            load_profile,
            speed_feedback: f.controller.speed_feedback,
        },
        timing,
        loop_config,
        events,
        spec,
        overcurrent_a: f.controller.protection.overcurrent_a,
        max_duty: f.controller.max_duty,
        setpoint_max_a: f
            .controller
            .setpoint
            .max_a
            .abs()
            .max(f.controller.setpoint.min_a.abs()),
    })
}

fn controller(
    c: &ControllerSection,
    (kp, ti, weight): (f64, f64, f64),
    sense: &SenseChain,
    timing: &Timing,
    supply_v: f64,
) -> Result<LoopConfig, ScenarioError> {
    let sec = "controller";
    let err = |e: ConfigError| core(sec, e);
    let gains = PiGains::from_kp_ti(
        f32_of("controller.kp_v_per_a", kp)?,
        f32_of("controller.ti_s", ti)?,
    )
    .map_err(err)?
    .with_setpoint_weight(f32_of("controller.setpoint_weight", weight)?)
    .map_err(err)?;
    let limit = f32_of("controller.output_limit_v", c.output_limit_v.unwrap_or(supply_v))?;
    let period = f32_of("timing.control_period_s", timing.control_period_s())?;
    let mut pi = PiConfig::new(gains, period, OutputLimits::symmetric(limit).map_err(err)?).map_err(err)?;
    if let Some(rule) = c.integrator {
        pi = pi.with_rule(match rule {
            RuleName::BackwardEuler => IntegratorRule::BackwardEuler,
            RuleName::Tustin => IntegratorRule::Tustin,
        });
    }
    let aw = match (c.anti_windup, c.tracking_time_s) {
        (Some(AntiWindupName::Clamping), Some(t)) => {
            return Err(ModelError::new(
                "controller.tracking_time_s",
                t,
                "left out with clamping anti-windup",
            )
            .into());
        }
        (Some(AntiWindupName::Clamping), None) => Some(AntiWindup::Clamping),
        (_, Some(t)) => Some(AntiWindup::BackCalculation {
            tracking_time_s: Some(f32_of("controller.tracking_time_s", t)?),
        }),
        (Some(AntiWindupName::BackCalculation), None) => Some(AntiWindup::BackCalculation {
            tracking_time_s: None,
        }),
        (None, None) => None,
    };
    if let Some(aw) = aw {
        pi = pi.with_anti_windup(aw).map_err(err)?;
    }
    let p = &c.protection;
    let psec = "controller.protection";
    let perr = |e: ConfigError| core(psec, e);
    let mut supervisor = SupervisorConfig::new(
        OvercurrentLimit::new(
            f32_of("controller.protection.overcurrent_a", p.overcurrent_a)?,
            p.overcurrent_samples,
        )
        .map_err(perr)?,
        BusWindow::new(
            f32_of("controller.protection.bus_min_v", p.bus_min_v)?,
            f32_of("controller.protection.bus_max_v", p.bus_max_v)?,
        )
        .map_err(perr)?,
    );
    match (p.rated_a, p.trip_class, p.thermal_time_constant_s) {
        (None, None, None) => {}
        (Some(rated), Some(class), None) => {
            let class = match class {
                TripClassName::Class10A => TripClass::Class10A,
                TripClassName::Class10 => TripClass::Class10,
                TripClassName::Class20 => TripClass::Class20,
                TripClassName::Class30 => TripClass::Class30,
            };
            supervisor = supervisor.with_thermal(
                ThermalConfig::from_trip_class(f32_of("controller.protection.rated_a", rated)?, class)
                    .map_err(perr)?,
            );
        }
        (Some(rated), None, Some(tau)) => {
            supervisor = supervisor.with_thermal(
                ThermalConfig::from_time_constant(
                    f32_of("controller.protection.rated_a", rated)?,
                    f32_of("controller.protection.thermal_time_constant_s", tau)?,
                )
                .map_err(perr)?,
            );
        }
        (None, _, _) => {
            return Err(ModelError::new(
                "controller.protection.rated_a",
                "(missing)",
                "given with trip_class or thermal_time_constant_s",
            )
            .into());
        }
        (Some(r), _, _) => {
            return Err(ModelError::new(
                "controller.protection.rated_a",
                r,
                "given with exactly one of trip_class and thermal_time_constant_s",
            )
            .into());
        }
    }
    match (p.stuck_band_counts, p.stuck_ticks, p.stuck_min_duty) {
        (None, None, None) => {}
        (Some(band), Some(ticks), Some(duty)) => {
            supervisor = supervisor.with_stuck_detection(
                StuckDetection::new(band, ticks, f32_of("controller.protection.stuck_min_duty", duty)?)
                    .map_err(perr)?,
            );
        }
        _ => {
            return Err(ModelError::new(
                "controller.protection.stuck_band_counts",
                "(incomplete)",
                "given together with stuck_ticks and stuck_min_duty",
            )
            .into());
        }
    }
    if let Some(w) = p.max_speed_rad_s {
        supervisor = supervisor.with_speed_limit(
            SpeedLimit::new(f32_of("controller.protection.max_speed_rad_s", w)?).map_err(perr)?,
        );
    }
    let sp = &c.setpoint;
    let setpoint = SetpointLimits::new(
        f32_of("controller.setpoint.min_a", sp.min_a)?,
        f32_of("controller.setpoint.max_a", sp.max_a)?,
        f32_of("controller.setpoint.slew_a_per_s", sp.slew_a_per_s)?,
    )
    .map_err(|e| core("controller.setpoint", e))?;
    let duty = DutyMapping::new(
        f32_of("controller.max_duty", c.max_duty)?,
        f32_of("controller.min_bus_v", c.min_bus_v)?,
    )
    .map_err(err)?;
    let calibration = sense.nominal_calibration().map_err(|e| core("sense", e))?;
    let mut cfg = LoopConfig::new(calibration, setpoint, supervisor, pi, duty).map_err(|e| core(psec, e))?;
    if c.feedforward_resistance_ohm != 0.0 || c.feedforward_back_emf_v_s_per_rad != 0.0 {
        cfg = cfg
            .with_feedforward(
                Feedforward::new(
                    f32_of(
                        "controller.feedforward_resistance_ohm",
                        c.feedforward_resistance_ohm,
                    )?,
                    f32_of(
                        "controller.feedforward_back_emf_v_s_per_rad",
                        c.feedforward_back_emf_v_s_per_rad,
                    )?,
                )
                .map_err(|e| core("controller", e))?,
            )
            .map_err(|e| core(psec, e))?;
    }
    Ok(cfg)
}
