//! A free rotor from the current alone, when its inertia is known (from a
//! drawing or a datasheet): without the speed, the current fixes only
//! `Ke^2 / J` and `B / J` (see [`super::rotor`]), so J given makes Ke
//! identifiable. The two-state model
//!
//! ```text
//! L di/dt = v - R i - Ke w,    J dw/dt = Ke i - B w
//! ```
//!
//! is discretised exactly for the sample period with the voltage held
//! ([`crate::plant::linear::Discrete::zero_order_hold_2`]) and its current
//! fitted to the capture over `[R, L, Ke, B, offset, i0]` by the one
//! Levenberg-Marquardt fit ([`super::refine::fit`]), from the rotor at rest
//! at the first sample and Coulomb friction left out (say so when it shows).
//! The fit starts from R and L fitted on the first step's first
//! [`EARLY_SAMPLES`] samples, before the rotor gathers speed, and from each
//! back-EMF constant of a log grid (1 mV s/rad to 1 V s/rad), and keeps the
//! best: the error has a valley per electromechanical time constant
//! `J R / Ke^2`.

use super::capture::Capture;
use super::identify::{Estimate, RlFit};
use super::refine::fit;
use crate::plant::linear::Discrete;

/// Samples after the first step that give the start's R and L.
pub const EARLY_SAMPLES: usize = 60;

/// A free rotor identified from its current with J given.
#[derive(Clone, Debug, serde::Serialize)]
pub struct RotorFromCurrent {
    /// Resistance, ohm.
    pub resistance_ohm: Estimate,
    /// Inductance, H.
    pub inductance_h: Estimate,
    /// Back-EMF constant, V s/rad.
    pub back_emf_v_s_per_rad: Estimate,
    /// Viscous friction, N m s/rad.
    pub viscous_n_m_s_per_rad: Estimate,
    /// The inertia it was given, kg m^2.
    pub inertia_kg_m2: f64,
    /// Normalised RMS error of the model run on its own.
    pub nrmse: f64,
    /// The model's current, A (for the picture).
    #[serde(skip)]
    pub model_a: Vec<f64>,
}

fn simulate(theta: &[f64; 6], j: f64, ts: f64, d: usize, v: &[f64], out: &mut Vec<f64>) {
    let [r, l, ke, b, offset, i0] = *theta;
    let a = [[-r / l, -ke / l], [ke / j, -b.max(0.0) / j]];
    let bm = [[1.0 / l], [0.0]];
    let disc = Discrete::zero_order_hold_2(a, bm, ts);
    out.clear();
    let mut x = [i0, 0.0];
    for k in 0..v.len() {
        out.push(x[0] + offset);
        let vk = if k >= d { v[k - d] } else { v[0] };
        x = disc.step_held(&x, &[vk]);
    }
}

/// The fit for one voltage delay `d`, samples.
fn fit_with_delay(c: &Capture, rl: &RlFit, j: f64, d: usize) -> Option<super::refine::Refined<6>> {
    let (ts, i, v) = (c.period_s, &c.current_a, &c.voltage_v);
    // R and L from the first step's first samples, before the rotor gathers
    // speed (the R-L fit on them); then each back-EMF constant of a log grid
    // as a start, the best fit kept.
    let s0 = super::levels::steps(c).first().copied().unwrap_or(0);
    let from = s0.saturating_sub(1 + d);
    let to = (from + EARLY_SAMPLES).min(i.len());
    let early = Capture {
        time_s: c.time_s[from..to].to_vec(),
        current_a: i[from..to].to_vec(),
        voltage_v: (from..to).map(|k| v[k.saturating_sub(d)]).collect(),
        speed_rad_s: None,
        setpoint_a: None,
        period_s: ts,
        voltage_from: c.voltage_from.clone(),
    };
    let first = super::identify::identify_rl(&early, "the first step", Some(0)).ok()?;
    let (r0, l0) = (first.resistance_ohm.value, first.inductance_h.value);
    [1e-3, 3e-3, 1e-2, 3e-2, 1e-1, 3e-1, 1.0]
        .into_iter()
        .filter_map(|ke0| {
            fit(
                [r0, l0, ke0, 0.0, rl.offset_a, i[0] - rl.offset_a],
                [1e-9, 1e-12, 1e-9, j / (ts * i.len() as f64), 1e-6, 1e-6],
                i,
                |th, out| simulate(th, j, ts, d, v, out),
                |th| th[0] > 0.0 && th[1] > 0.0 && th[2] > 0.0 && th[3] >= 0.0,
            )
        })
        .min_by(|a, b| a.sse.total_cmp(&b.sse))
}

/// Identifies the free rotor from the capture's current, with its inertia
/// `inertia_kg_m2` given; the voltage's delay is the one whose fit leaves
/// the least residual, and `rl` (the R-L fit) gives the offset to start from.
pub fn identify_from_current(c: &Capture, rl: &RlFit, inertia_kg_m2: f64) -> Option<RotorFromCurrent> {
    let (best, d) = (0..=super::identify::MAX_DELAY_SAMPLES)
        .filter_map(|d| fit_with_delay(c, rl, inertia_kg_m2, d).map(|f| (f, d)))
        .min_by(|a, b| a.0.sse.total_cmp(&b.0.sse))?;
    let (ts, j, i, v) = (c.period_s, inertia_kg_m2, &c.current_a, &c.voltage_v);
    let mut model_a = Vec::with_capacity(i.len());
    simulate(&best.theta, j, ts, d, v, &mut model_a);
    Some(RotorFromCurrent {
        resistance_ohm: Estimate::of(best.theta[0], best.sd[0]),
        inductance_h: Estimate::of(best.theta[1], best.sd[1]),
        back_emf_v_s_per_rad: Estimate::of(best.theta[2], best.sd[2]),
        viscous_n_m_s_per_rad: Estimate::of(best.theta[3], best.sd[3]),
        inertia_kg_m2: j,
        nrmse: super::refine::nrmse(i, &model_a),
        model_a,
    })
}

impl RotorFromCurrent {
    fn rows(&self) -> [(&'static str, &'static str, &Estimate); 4] {
        [
            ("resistance_ohm", "ohm", &self.resistance_ohm),
            ("inductance_h", "H", &self.inductance_h),
            ("back_emf_v_s_per_rad", "V s/rad", &self.back_emf_v_s_per_rad),
            ("viscous_n_m_s_per_rad", "N m s/rad", &self.viscous_n_m_s_per_rad),
        ]
    }

    /// The table, for people.
    pub fn table(&self, name: &str) -> String {
        use std::fmt::Write;
        let mut s = format!(
            "{name}: free rotor from the current alone, the inertia given ({:e} kg m^2); Coulomb friction left out\n\n",
            self.inertia_kg_m2
        );
        let _ = writeln!(
            s,
            "{:<24} {:>14} {:>14} {:>14}  unit",
            "parameter", "value", "95 % low", "95 % high"
        );
        for (field, unit, e) in self.rows() {
            let _ = writeln!(
                s,
                "{field:<24} {:>14.6e} {:>14.6e} {:>14.6e}  {unit}",
                e.value, e.low, e.high
            );
        }
        let _ = writeln!(
            s,
            "\nfit (output error): normalised RMS error {:.4} (model run on its own); Ke scales with the square root of the inertia given",
            self.nrmse
        );
        s
    }

    /// A `[motor]` section to paste into a scenario.
    pub fn motor_section(&self, name: &str) -> String {
        let mut s = format!(
            "# identified by `ampwright identify` from {name} (a free rotor, the inertia given)\n[motor]\n"
        );
        for (field, _, e) in self.rows() {
            s.push_str(&format!(
                "{:<32} # 95 %: {:.6e} to {:.6e}\n",
                format!("{field} = {:.6e}", e.value.max(0.0)),
                e.low,
                e.high
            ));
        }
        s.push_str(&format!(
            "inertia_kg_m2 = {:.6e}          # given, not identified\n",
            self.inertia_kg_m2
        ));
        s
    }

    /// The estimates as JSON, one entry per parameter named as its scenario field.
    pub fn json(&self) -> String {
        let v = serde_json::json!({
            "parameters": {
                "resistance_ohm": self.resistance_ohm,
                "inductance_h": self.inductance_h,
                "back_emf_v_s_per_rad": self.back_emf_v_s_per_rad,
                "torque_n_m_per_a": self.back_emf_v_s_per_rad,
                "viscous_n_m_s_per_rad": self.viscous_n_m_s_per_rad,
            },
            "inertia_kg_m2_given": self.inertia_kg_m2,
            "nrmse": self.nrmse,
        });
        serde_json::to_string_pretty(&v).unwrap_or_default()
    }
}
