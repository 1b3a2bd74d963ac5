//! The scenario file's shape: the serde structures, private to `scenario/`.
//! Field documentation here and in `host-sim/scenarios/carousel_step.toml` is
//! the reference for users; [`super::params`] turns a parsed file into
//! validated parameters.

use serde::Deserialize;

pub(super) use super::load_sections::{BatterySection, LedSection, SolenoidSection, WindingSection};

use super::ScenarioError;

/// Parses scenario text; a syntax error, or a field that is unknown, missing
/// or of the wrong type, is placed by line and column.
pub(super) fn parse(text: &str) -> Result<File, ScenarioError> {
    toml::from_str(text).map_err(|e| {
        let offset = e.span().map_or(0, |s| s.start);
        let (line, column) = line_col(text, offset);
        let section = section_at(text, offset);
        let message = plain(e.message());
        ScenarioError::Syntax {
            line,
            column,
            message: match section {
                Some(s) if message.starts_with("missing field") => format!("{message} in [{s}]"),
                _ => message,
            },
        }
    })
}

/// The table a byte offset falls in (`motor.thermal`, `events`), if any.
fn section_at(text: &str, offset: usize) -> Option<String> {
    let before = &text[..offset.min(text.len())];
    // A span on the header itself belongs to the header's table.
    let upto = before.len()
        + text[before.len()..]
            .find('\n')
            .unwrap_or(text.len() - before.len());
    text[..upto]
        .lines()
        .rev()
        .map(str::trim_start)
        .find(|l| l.starts_with('['))
        .map(|l| {
            l.trim_start_matches('[')
                .split(']')
                .next()
                .unwrap_or_default()
                .trim()
                .to_string()
        })
}

/// The parser's message in the user's terms: no Rust type names.
fn plain(message: &str) -> String {
    let mut m = message.trim_end_matches('\n').replace('\n', " ");
    for (from, to) in [
        ("expected f64", "expected a number"),
        ("expected f32", "expected a number"),
        ("expected u8", "expected a whole number"),
        ("expected u16", "expected a whole number from 0 to 65535"),
        ("expected u32", "expected a whole number"),
        ("expected u64", "expected a whole number, 0 or more"),
        ("expected usize", "expected a whole number, 0 or more"),
        ("expected a string", "expected text in quotes"),
        ("invalid type: string ", "got the text "),
        ("invalid type: integer ", "got the whole number "),
        ("invalid type: floating point ", "got the number "),
        ("invalid type: boolean ", "got "),
        ("invalid type: sequence", "got a list"),
        ("invalid type: map", "got a table"),
        ("invalid value: integer ", "got "),
        ("wanted string or table", "expected one of the names in quotes"),
        ("unknown variant", "unknown choice"),
        ("expected a boolean", "expected true or false"),
    ] {
        m = m.replace(from, to);
    }
    m
}

fn line_col(text: &str, offset: usize) -> (usize, usize) {
    let before = &text[..offset.min(text.len())];
    let line = before.matches('\n').count() + 1;
    let column = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
    (line, column)
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct File {
    /// A short name, used for output files and titles.
    pub(super) name: Option<String>,
    /// Free text.
    #[serde(default)]
    pub(super) description: String,
    /// Length of the run, seconds.
    pub(super) duration_s: f64,
    /// Keep one trace point in this many ticks (default 1: every tick).
    #[serde(default = "one")]
    pub(super) record_every_ticks: u64,
    /// The load: a motor, or a plain winding (exactly one of the two).
    pub(super) motor: Option<MotorSection>,
    pub(super) winding: Option<WindingSection>,
    pub(super) led: Option<LedSection>,
    pub(super) solenoid: Option<SolenoidSection>,
    pub(super) battery: Option<BatterySection>,
    /// A charger's outer voltage limit (a battery only).
    pub(super) charge: Option<super::charge::ChargeSection>,
    pub(super) bridge: BridgeSection,
    pub(super) sense: SenseSection,
    pub(super) timing: TimingSection,
    pub(super) controller: ControllerSection,
    #[serde(default)]
    pub(super) spec: SpecSection,
    #[serde(default)]
    pub(super) expect: ExpectSection,
    #[serde(default)]
    pub(super) events: Vec<EventSection>,
    #[serde(default)]
    pub(super) load: Vec<LoadSection>,
    #[serde(default)]
    pub(super) faults: Vec<FaultSection>,
    pub(super) tolerances: Option<TolerancesSection>,
}

/// What `ampwright sweep` varies.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct TolerancesSection {
    pub(super) runs: Option<u32>,
    pub(super) seed: Option<u64>,
    pub(super) winding_c: Option<[f64; 2]>,
    pub(super) supply_v: Option<[f64; 2]>,
    #[serde(default)]
    pub(super) vary: Vec<VarySection>,
}

/// One varied field: its path and exactly one spread.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct VarySection {
    pub(super) field: String,
    pub(super) uniform_pct: Option<f64>,
    pub(super) triangular_pct: Option<f64>,
    pub(super) normal_sigma_pct: Option<f64>,
    pub(super) normal_sigma: Option<f64>,
    pub(super) within: Option<[f64; 2]>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct MotorSection {
    pub(super) resistance_ohm: f64,
    pub(super) inductance_h: f64,
    #[serde(default)]
    pub(super) back_emf_v_s_per_rad: f64,
    /// Defaults to the back-EMF constant (equal in SI units for an ideal machine).
    pub(super) torque_n_m_per_a: Option<f64>,
    /// Needed unless the rotor is locked.
    pub(super) inertia_kg_m2: Option<f64>,
    #[serde(default)]
    pub(super) viscous_n_m_s_per_rad: f64,
    #[serde(default)]
    pub(super) coulomb_n_m: f64,
    #[serde(default)]
    pub(super) locked_rotor: bool,
    pub(super) thermal: Option<ThermalSection>,
    pub(super) saturation: Option<SaturationSection>,
}

/// The inductance's fall with current.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct SaturationSection {
    pub(super) current_a: Vec<f64>,
    pub(super) inductance_share: Vec<f64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct ThermalSection {
    pub(super) ambient_c: f64,
    pub(super) resistance_k_per_w: f64,
    pub(super) capacitance_j_per_k: f64,
    /// Defaults to ambient.
    pub(super) initial_c: Option<f64>,
}

#[derive(Debug, Deserialize, Clone, Copy)]
#[serde(rename_all = "snake_case")]
pub(super) enum ModeName {
    Averaged,
    Switching,
}

#[derive(Debug, Deserialize, Clone, Copy, PartialEq)]
#[serde(rename_all = "snake_case")]
pub(super) enum TopologyName {
    HBridge,
    LowSide,
}

#[derive(Debug, Deserialize, Clone, Copy)]
#[serde(rename_all = "snake_case")]
pub(super) enum DecayName {
    Slow,
    Fast,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct BridgeSection {
    pub(super) supply_v: f64,
    #[serde(default)]
    pub(super) source_resistance_ohm: f64,
    pub(super) pwm_frequency_hz: f64,
    #[serde(default = "averaged")]
    pub(super) mode: ModeName,
    #[serde(default)]
    pub(super) dead_time_s: f64,
    /// MOSFET bridge: on-resistance of each switch. Give this or `switch_drop_v`.
    pub(super) rds_on_ohm: Option<f64>,
    /// Bipolar bridge: saturation voltage of each switch.
    pub(super) switch_drop_v: Option<f64>,
    #[serde(default)]
    pub(super) diode_drop_v: f64,
    /// H-bridge only; `slow` when left out.
    pub(super) decay: Option<DecayName>,
    /// `h_bridge` when left out.
    pub(super) topology: Option<TopologyName>,
}

fn averaged() -> ModeName {
    ModeName::Averaged
}

#[derive(Debug, Deserialize, Clone, Copy)]
#[serde(rename_all = "snake_case")]
pub(super) enum FilterKind {
    Rc,
    SecondOrder,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct FilterSection {
    pub(super) kind: FilterKind,
    pub(super) cutoff_hz: f64,
    /// Second order only; default 0.707 (maximally flat).
    pub(super) q: Option<f64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct SenseSection {
    pub(super) shunt_ohm: f64,
    pub(super) amplifier_gain: f64,
    /// Defaults to half the ADC reference.
    pub(super) amplifier_offset_v: Option<f64>,
    #[serde(default)]
    pub(super) offset_error_v: f64,
    pub(super) filter: Option<FilterSection>,
    #[serde(default = "twelve")]
    pub(super) adc_bits: u8,
    pub(super) adc_reference_v: f64,
    #[serde(default)]
    pub(super) noise_rms_v: f64,
    #[serde(default = "one")]
    pub(super) seed: u64,
}

fn twelve() -> u8 {
    12
}
fn one() -> u64 {
    1
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct TimingSection {
    pub(super) control_period_s: f64,
    #[serde(default)]
    pub(super) sample_phase: f64,
    #[serde(default)]
    pub(super) computation_delay_s: f64,
    #[serde(default)]
    pub(super) jitter_rms_s: f64,
    #[serde(default = "one")]
    pub(super) seed: u64,
}

#[derive(Debug, Deserialize, Clone, Copy)]
#[serde(rename_all = "snake_case")]
pub(super) enum RuleName {
    BackwardEuler,
    Tustin,
}

#[derive(Debug, Deserialize, Clone, Copy, PartialEq)]
#[serde(rename_all = "snake_case")]
pub(super) enum ArithmeticName {
    Float,
    Fixed,
}

#[derive(Debug, Deserialize, Clone, Copy)]
#[serde(rename_all = "snake_case")]
pub(super) enum AntiWindupName {
    BackCalculation,
    Clamping,
}

#[derive(Debug, Deserialize, Clone, Copy)]
pub(super) enum TripClassName {
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
pub(super) struct ControllerSection {
    /// With `ti_s`; leave both out to have them designed from `[spec]`.
    pub(super) kp_v_per_a: Option<f64>,
    pub(super) ti_s: Option<f64>,
    /// Default 1, or the design's choice when the gains are designed.
    pub(super) setpoint_weight: Option<f64>,
    pub(super) integrator: Option<RuleName>,
    pub(super) anti_windup: Option<AntiWindupName>,
    pub(super) tracking_time_s: Option<f64>,
    /// Largest PI output, volts; defaults to the supply voltage.
    pub(super) output_limit_v: Option<f64>,
    pub(super) max_duty: f64,
    pub(super) min_bus_v: f64,
    #[serde(default)]
    pub(super) feedforward_resistance_ohm: f64,
    #[serde(default)]
    pub(super) feedforward_back_emf_v_s_per_rad: f64,
    #[serde(default)]
    pub(super) speed_feedback: bool,
    pub(super) calibration_shunt_ohm: Option<f64>,
    pub(super) calibration_amplifier_gain: Option<f64>,
    /// The firmware's arithmetic: `float` (default) or `fixed`.
    pub(super) arithmetic: Option<ArithmeticName>,
    /// The bus ADC, for the fixed-point loop.
    pub(super) bus_adc_bits: Option<u8>,
    pub(super) bus_full_scale_v: Option<f64>,
    pub(super) setpoint: SetpointSection,
    pub(super) protection: ProtectionSection,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct SetpointSection {
    pub(super) min_a: f64,
    pub(super) max_a: f64,
    pub(super) slew_a_per_s: f64,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct ProtectionSection {
    pub(super) overcurrent_a: f64,
    pub(super) overcurrent_samples: u16,
    pub(super) bus_min_v: f64,
    pub(super) bus_max_v: f64,
    /// I^2t protection: rated continuous current, with a trip class or a time constant.
    pub(super) rated_a: Option<f64>,
    pub(super) trip_class: Option<TripClassName>,
    pub(super) thermal_time_constant_s: Option<f64>,
    /// Stuck-reading detection: band, ticks, least duty.
    pub(super) stuck_band_counts: Option<u16>,
    pub(super) stuck_ticks: Option<u16>,
    pub(super) stuck_min_duty: Option<f64>,
    /// Speed plausibility: the largest speed magnitude that is not a fault.
    pub(super) max_speed_rad_s: Option<f64>,
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct SpecSection {
    pub(super) rise_time_s: Option<f64>,
    pub(super) overshoot_pct: Option<f64>,
    pub(super) settling_time_s: Option<f64>,
    pub(super) steady_state_error_a: Option<f64>,
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct ExpectSection {
    /// A fault cause the run must trip on (see `FaultCause`).
    pub(super) trip: Option<FaultCause>,
    pub(super) trip_after_s: Option<f64>,
    pub(super) trip_before_s: Option<f64>,
    #[serde(default)]
    pub(super) no_trip: bool,
    pub(super) max_winding_c: Option<f64>,
    pub(super) max_current_a: Option<f64>,
    pub(super) unsaturated_after_s: Option<f64>,
}

/// pi-core's fault causes as a scenario names them.
#[derive(Debug, Deserialize, Clone, Copy, PartialEq)]
#[serde(rename_all = "snake_case")]
pub(super) enum FaultCause {
    Overcurrent,
    Overload,
    CurrentInvalid,
    SensorRail,
    SensorStuck,
    BusUndervoltage,
    BusOvervoltage,
    BusInvalid,
    SpeedInvalid,
    SpeedImplausible,
}

#[derive(Debug, Deserialize, Clone, Copy, PartialEq)]
#[serde(rename_all = "snake_case")]
pub(super) enum ActionName {
    Enable,
    Disable,
    SetCurrent,
    Retune,
    ClearFaults,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct EventSection {
    pub(super) at_s: f64,
    pub(super) action: ActionName,
    /// `set_current` only.
    pub(super) current_a: Option<f64>,
    /// `retune` only.
    pub(super) kp_v_per_a: Option<f64>,
    /// `retune` only.
    pub(super) ti_s: Option<f64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct LoadSection {
    pub(super) at_s: f64,
    pub(super) torque_n_m: f64,
}

#[derive(Debug, Deserialize, Clone, Copy, PartialEq)]
#[serde(rename_all = "snake_case")]
pub(super) enum FaultName {
    SensorOpen,
    SensorShorted,
    SensorStuck,
    BusLevel,
    LockedRotor,
    LoadStep,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct FaultSection {
    pub(super) kind: FaultName,
    pub(super) start_s: f64,
    pub(super) end_s: Option<f64>,
    /// `bus_level` only.
    pub(super) supply_v: Option<f64>,
    /// `load_step` only.
    pub(super) torque_n_m: Option<f64>,
}
