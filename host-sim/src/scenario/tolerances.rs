//! The scenario's tolerances: which fields of the plant vary, and how. A
//! sweep draws values for them ([`Tolerances::draw`], or the extremes,
//! [`Tolerances::corners`]) and perturbs the validated [`Params`] with
//! them ([`Tolerances::apply`]), never the file's text.
//!
//! Only the plant varies: the winding, the rotor, the bridge, the supply and
//! the sense chain as built. The firmware keeps the nominal values it was
//! configured with (its calibration of the shunt and amplifier, its gains
//! and limits): a sweep asks how one firmware fares on many boards.

use super::Params;
use crate::model_error::ModelError;
use crate::plant::bridge::SwitchDrop;
use crate::plant::motor::{COPPER_ALPHA_PER_K, REFERENCE_C};
use crate::plant::noise::Gaussian;

/// A field of the plant a tolerance can vary.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Field {
    /// `motor.resistance_ohm` (at 20 C).
    ResistanceOhm,
    /// `motor.inductance_h`.
    InductanceH,
    /// `motor.back_emf_v_s_per_rad` (the torque constant scales with it).
    BackEmf,
    /// `motor.inertia_kg_m2`.
    InertiaKgM2,
    /// `bridge.rds_on_ohm`.
    RdsOnOhm,
    /// `bridge.source_resistance_ohm`.
    SourceResistanceOhm,
    /// `sense.shunt_ohm` (the board's; the firmware keeps its own value).
    ShuntOhm,
    /// `sense.amplifier_gain` (likewise).
    AmplifierGain,
    /// `sense.offset_error_v`.
    OffsetErrorV,
    /// The supply, `bridge.supply_v` (from `tolerances.supply_v`).
    SupplyV,
    /// The winding's temperature at the start, C (from
    /// `tolerances.winding_c`): R follows copper's coefficient.
    WindingC,
}

impl Field {
    /// Every field, in the order a run applies them (the temperature last:
    /// it scales the resistance drawn before it).
    pub const ALL: [Field; 11] = [
        Field::ResistanceOhm,
        Field::InductanceH,
        Field::BackEmf,
        Field::InertiaKgM2,
        Field::RdsOnOhm,
        Field::SourceResistanceOhm,
        Field::ShuntOhm,
        Field::AmplifierGain,
        Field::OffsetErrorV,
        Field::SupplyV,
        Field::WindingC,
    ];

    /// Its scenario path.
    pub fn path(self) -> &'static str {
        match self {
            Field::ResistanceOhm => "motor.resistance_ohm",
            Field::InductanceH => "motor.inductance_h",
            Field::BackEmf => "motor.back_emf_v_s_per_rad",
            Field::InertiaKgM2 => "motor.inertia_kg_m2",
            Field::RdsOnOhm => "bridge.rds_on_ohm",
            Field::SourceResistanceOhm => "bridge.source_resistance_ohm",
            Field::ShuntOhm => "sense.shunt_ohm",
            Field::AmplifierGain => "sense.amplifier_gain",
            Field::OffsetErrorV => "sense.offset_error_v",
            Field::SupplyV => "bridge.supply_v",
            Field::WindingC => "winding_c",
        }
    }

    /// The field of a path a `[[tolerances.vary]]` names.
    pub fn from_path(path: &str) -> Option<Field> {
        Field::ALL
            .into_iter()
            .filter(|f| !matches!(f, Field::SupplyV | Field::WindingC))
            .find(|f| f.path() == path)
    }

    /// Its value in `p`.
    pub fn get(self, p: &Params) -> f64 {
        match self {
            Field::ResistanceOhm => p.motor.resistance_ohm,
            Field::InductanceH => p.motor.inductance_h,
            Field::BackEmf => p.motor.back_emf_v_s_per_rad,
            Field::InertiaKgM2 => p.motor.inertia_kg_m2,
            Field::RdsOnOhm => match p.bridge.switch {
                SwitchDrop::OnResistance(r) => r,
                SwitchDrop::Fixed(_) => 0.0,
            },
            Field::SourceResistanceOhm => p.bridge.source_resistance_ohm,
            Field::ShuntOhm => p.sense.shunt_ohm,
            Field::AmplifierGain => p.sense.amplifier_gain,
            Field::OffsetErrorV => p.sense.offset_error_v,
            Field::SupplyV => p.bridge.supply_v,
            Field::WindingC => p.motor.thermal.map_or(REFERENCE_C, |t| t.initial_c),
        }
    }

    /// Sets it in `p` (the temperature: the thermal model's start, or
    /// without one the resistance scaled from 20 C).
    pub fn set(self, p: &mut Params, v: f64) {
        match self {
            Field::ResistanceOhm => p.motor.resistance_ohm = v,
            Field::InductanceH => p.motor.inductance_h = v,
            Field::BackEmf => {
                let k = if p.motor.back_emf_v_s_per_rad != 0.0 {
                    v / p.motor.back_emf_v_s_per_rad
                } else {
                    1.0
                };
                p.motor.back_emf_v_s_per_rad = v;
                p.motor.torque_n_m_per_a *= k;
            }
            Field::InertiaKgM2 => p.motor.inertia_kg_m2 = v,
            Field::RdsOnOhm => p.bridge.switch = SwitchDrop::OnResistance(v),
            Field::SourceResistanceOhm => p.bridge.source_resistance_ohm = v,
            Field::ShuntOhm => p.sense.shunt_ohm = v,
            Field::AmplifierGain => p.sense.amplifier_gain = v,
            Field::OffsetErrorV => p.sense.offset_error_v = v,
            Field::SupplyV => p.bridge.supply_v = v,
            Field::WindingC => match &mut p.motor.thermal {
                Some(t) => t.initial_c = v,
                None => p.motor.resistance_ohm *= 1.0 + COPPER_ALPHA_PER_K * (v - REFERENCE_C),
            },
        }
    }
}

/// How a field spreads about its nominal value.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Spread {
    /// Uniform within +/- this percentage of nominal.
    UniformPct(f64),
    /// Triangular (peak at nominal) within +/- this percentage.
    TriangularPct(f64),
    /// Normal with this standard deviation, percent of nominal; the corners
    /// are at +/- 3 sigma.
    NormalSigmaPct(f64),
    /// Normal with this standard deviation, in the field's unit, about
    /// nominal; corners at +/- 3 sigma.
    NormalSigma(f64),
    /// Uniform between two values, in the field's unit.
    Within(f64, f64),
}

impl Spread {
    /// A value drawn about `nominal`.
    pub fn draw(self, nominal: f64, rng: &mut Gaussian) -> f64 {
        match self {
            Spread::UniformPct(p) => nominal * (1.0 + p / 100.0 * (2.0 * rng.uniform() - 1.0)),
            // The difference of two uniforms is triangular on (-1, 1).
            Spread::TriangularPct(p) => nominal * (1.0 + p / 100.0 * (rng.uniform() - rng.uniform())),
            Spread::NormalSigmaPct(s) => nominal * (1.0 + s / 100.0 * rng.sample()),
            Spread::NormalSigma(s) => nominal + s * rng.sample(),
            Spread::Within(lo, hi) => lo + (hi - lo) * rng.uniform(),
        }
    }

    /// The low and high extremes about `nominal`.
    pub fn extremes(self, nominal: f64) -> (f64, f64) {
        match self {
            Spread::UniformPct(p) | Spread::TriangularPct(p) => {
                (nominal * (1.0 - p / 100.0), nominal * (1.0 + p / 100.0))
            }
            Spread::NormalSigmaPct(s) => (
                nominal * (1.0 - 3.0 * s / 100.0),
                nominal * (1.0 + 3.0 * s / 100.0),
            ),
            Spread::NormalSigma(s) => (nominal - 3.0 * s, nominal + 3.0 * s),
            Spread::Within(lo, hi) => (lo, hi),
        }
    }

    /// In words, for tables.
    pub fn describe(self) -> String {
        match self {
            Spread::UniformPct(p) => format!("uniform +/-{p} %"),
            Spread::TriangularPct(p) => format!("triangular +/-{p} %"),
            Spread::NormalSigmaPct(s) => format!("normal, sigma {s} %"),
            Spread::NormalSigma(s) => format!("normal, sigma {s}"),
            Spread::Within(lo, hi) => format!("uniform {lo} to {hi}"),
        }
    }
}

/// One varied field.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Varied {
    /// Which.
    pub field: Field,
    /// How.
    pub spread: Spread,
}

/// The whole section.
#[derive(Clone, Debug, PartialEq)]
pub struct Tolerances {
    /// Monte-Carlo runs.
    pub runs: u32,
    /// The sweep's seed: run `k` draws from its own stream of it.
    pub seed: u64,
    /// The varied fields, in the order a run applies them.
    pub items: Vec<Varied>,
}

/// The most Monte-Carlo runs a scenario may ask for.
pub const MAX_RUNS: u32 = 1_000_000;

impl Tolerances {
    /// Values for run `k`: its own stream (the seed and `k` mixed), so a
    /// run's values do not depend on which thread runs it or on how many
    /// runs there are.
    pub fn draw(&self, nominal: &Params, k: u64) -> Vec<f64> {
        let mut rng = Gaussian::new(self.seed ^ k.wrapping_add(1).wrapping_mul(0xD1B5_4A32_D192_ED03));
        self.items
            .iter()
            .map(|v| v.spread.draw(v.field.get(nominal), &mut rng))
            .collect()
    }

    /// Every combination of each field's extremes (a full factorial:
    /// `2^n` runs for `n` fields; run `j` takes field `i`'s high extreme when
    /// bit `i` of `j` is set). With `half`, the half fraction whose fields'
    /// signs multiply to +1 (`I = AB...N`, resolution `n`): `2^(n-1)` runs.
    pub fn corners(&self, nominal: &Params, half: bool) -> Vec<Vec<f64>> {
        let n = self.items.len();
        let ext: Vec<(f64, f64)> = self
            .items
            .iter()
            .map(|v| v.spread.extremes(v.field.get(nominal)))
            .collect();
        (0u64..1 << n)
            .filter(|j| !half || j.count_ones() % 2 == n as u32 % 2)
            .map(|j| {
                ext.iter()
                    .enumerate()
                    .map(|(i, &(lo, hi))| if j >> i & 1 == 1 { hi } else { lo })
                    .collect()
            })
            .collect()
    }

    /// `nominal` with the drawn `values` in place (one per item), checked.
    pub fn apply(&self, nominal: &Params, values: &[f64]) -> Result<Params, ModelError> {
        let mut p = nominal.clone();
        let mut order: Vec<(usize, &Varied)> = self.items.iter().enumerate().collect();
        order.sort_by_key(|(_, v)| Field::ALL.iter().position(|f| *f == v.field));
        for (i, v) in order {
            v.field.set(&mut p, values.get(i).copied().unwrap_or(f64::NAN));
        }
        p.validate().map_err(|e| match e {
            super::ScenarioError::Invalid(m) => m,
            other => ModelError::new("tolerances", "", other.to_string()),
        })?;
        Ok(p)
    }
}

/// Runs when the section does not say.
pub const DEFAULT_RUNS: u32 = 200;

/// The section as the file gives it, checked; each refusal names the entry
/// as the file does (`tolerances.vary[2].uniform_pct`, counting from 1).
pub(super) fn from_section(t: &super::file::TolerancesSection) -> Result<Tolerances, ModelError> {
    let runs = t.runs.unwrap_or(DEFAULT_RUNS);
    if !(1..=MAX_RUNS).contains(&runs) {
        return Err(ModelError::new(
            "tolerances.runs",
            runs,
            format!("a whole number from 1 to {MAX_RUNS}"),
        ));
    }
    let mut items: Vec<Varied> = Vec::new();
    for (k, v) in t.vary.iter().enumerate() {
        let at = format!("tolerances.vary[{}]", k + 1);
        let field = Field::from_path(&v.field).ok_or_else(|| {
            let known: Vec<&str> = Field::ALL
                .iter()
                .filter(|f| Field::from_path(f.path()).is_some())
                .map(|f| f.path())
                .collect();
            ModelError::new(
                format!("{at}.field"),
                format!("{:?}", v.field),
                format!(
                    "one of {} (the supply and the winding's temperature have tolerances.supply_v and tolerances.winding_c)",
                    known.join(", ")
                ),
            )
        })?;
        if items.iter().any(|i| i.field == field) {
            return Err(ModelError::new(
                format!("{at}.field"),
                format!("{:?}", v.field),
                "a field not already varied above",
            ));
        }
        let given = [
            v.uniform_pct.map(|p| ("uniform_pct", Spread::UniformPct(p), p)),
            v.triangular_pct
                .map(|p| ("triangular_pct", Spread::TriangularPct(p), p)),
            v.normal_sigma_pct
                .map(|s| ("normal_sigma_pct", Spread::NormalSigmaPct(s), s)),
            v.normal_sigma
                .map(|s| ("normal_sigma", Spread::NormalSigma(s), s)),
            v.within.map(|[lo, hi]| ("within", Spread::Within(lo, hi), lo)),
        ];
        let mut given = given.into_iter().flatten();
        let (Some((name, spread, value)), None) = (given.next(), given.next()) else {
            return Err(ModelError::new(
                at,
                "",
                "exactly one of uniform_pct, triangular_pct, normal_sigma_pct, normal_sigma or within",
            ));
        };
        let name = format!("{at}.{name}");
        match spread {
            Spread::UniformPct(_) | Spread::TriangularPct(_) => {
                ModelError::within(&name, value, 1e-6, 99.0)?;
            }
            // Five sigma stays inside +/-100 %: a draw that would change the
            // field's sign is a few in ten million.
            Spread::NormalSigmaPct(_) => {
                ModelError::within(&name, value, 1e-6, 20.0)?;
            }
            Spread::NormalSigma(_) => {
                ModelError::positive(&name, value)?;
            }
            Spread::Within(lo, hi) => within_pair(&name, lo, hi, f64::MIN, f64::MAX)?,
        }
        items.push(Varied { field, spread });
    }
    if let Some([lo, hi]) = t.supply_v {
        within_pair("tolerances.supply_v", lo, hi, 1e-3, 1e4)?;
        items.push(Varied {
            field: Field::SupplyV,
            spread: Spread::Within(lo, hi),
        });
    }
    if let Some([lo, hi]) = t.winding_c {
        within_pair("tolerances.winding_c", lo, hi, -60.0, 250.0)?;
        items.push(Varied {
            field: Field::WindingC,
            spread: Spread::Within(lo, hi),
        });
    }
    if items.is_empty() {
        return Err(ModelError::new(
            "tolerances",
            "(nothing varied)",
            "at least one [[tolerances.vary]], tolerances.supply_v or tolerances.winding_c",
        ));
    }
    if items.len() > 16 {
        return Err(ModelError::new(
            "tolerances.vary",
            items.len(),
            "at most 16 varied fields (the corners grow as 2 to the number of fields)",
        ));
    }
    Ok(Tolerances {
        runs,
        seed: t.seed.unwrap_or(1),
        items,
    })
}

/// `[lo, hi]` finite, `lo < hi`, both within `[min, max]`.
fn within_pair(name: &str, lo: f64, hi: f64, min: f64, max: f64) -> Result<(), ModelError> {
    if !(lo.is_finite() && hi.is_finite() && lo < hi) {
        return Err(ModelError::new(
            name,
            format!("[{lo}, {hi}]"),
            "two finite values, the lower first",
        ));
    }
    if lo < min || hi > max {
        return Err(ModelError::new(
            name,
            format!("[{lo}, {hi}]"),
            format!("values from {min} to {max}"),
        ));
    }
    Ok(())
}
