//! The TOML shapes of the loads besides the motor (`[winding]`, `[led]`,
//! `[solenoid]`); see `host-sim/SCENARIO_FORMAT.md`.

use serde::Deserialize;

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct SolenoidSection {
    pub(crate) resistance_ohm: f64,
    pub(crate) turns: f64,
    pub(crate) pole_area_m2: f64,
    #[serde(default)]
    pub(crate) iron_path_m: f64,
    #[serde(default = "iron_mu")]
    pub(crate) iron_relative_permeability: f64,
    pub(crate) plunger_mass_kg: f64,
    pub(crate) spring_n_per_m: f64,
    pub(crate) spring_free_gap_m: f64,
    #[serde(default)]
    pub(crate) damping_n_s_per_m: f64,
    pub(crate) closed_gap_m: f64,
    pub(crate) open_gap_m: f64,
    /// The gap the design takes the coil's inductance at.
    pub(crate) design_gap_m: f64,
}

fn iron_mu() -> f64 {
    1000.0
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct LedSection {
    pub(crate) count: u32,
    pub(crate) saturation_current_a: f64,
    pub(crate) ideality: f64,
    #[serde(default)]
    pub(crate) series_resistance_ohm: f64,
    #[serde(default = "junction_c")]
    pub(crate) junction_c: f64,
    pub(crate) inductance_h: f64,
    /// The current the design linearises the string at (its slope there).
    pub(crate) design_current_a: f64,
}

fn junction_c() -> f64 {
    25.0
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct WindingSection {
    pub(crate) resistance_ohm: f64,
    pub(crate) inductance_h: f64,
    #[serde(default)]
    pub(crate) counter_v: f64,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub(crate) struct BatterySection {
    pub(crate) ocv_table: Vec<(f64, f64)>,
    pub(crate) capacity_ah: f64,
    pub(crate) series_resistance_ohm: f64,
    #[serde(default)]
    pub(crate) polarisation_ohm: f64,
    #[serde(default = "one_farad")]
    pub(crate) polarisation_f: f64,
    pub(crate) initial_soc: f64,
    pub(crate) inductance_h: f64,
}

fn one_farad() -> f64 {
    1.0
}
