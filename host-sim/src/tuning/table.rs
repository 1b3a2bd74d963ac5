//! A survey for people (the table), for scripts (JSON) and for firmware (Rust
//! constants). No control math here: every number comes from the survey.

use std::fmt::Write;

use pi_core::design::Gains;

use super::survey::{MethodResult, Survey};

fn opt(v: Option<f64>, scale: f64, digits: usize) -> String {
    v.map_or("-".into(), |x| format!("{:.*}", digits, x * scale))
}

/// The survey with the scenario's name, as printed and written.
#[derive(Clone, Debug, serde::Serialize)]
pub struct DesignReport {
    /// Scenario name.
    pub name: String,
    /// The survey.
    #[serde(flatten)]
    pub survey: Survey,
}

impl DesignReport {
    /// The chosen method.
    pub fn chosen(&self) -> Option<&MethodResult> {
        self.survey.chosen()
    }

    /// The chosen gains.
    pub fn chosen_gains(&self) -> Option<Gains<f64>> {
        let m = self.chosen()?;
        Some(Gains {
            kp_v_per_a: m.kp_v_per_a?,
            ti_s: m.ti_s?,
        })
    }

    /// The table, for people.
    pub fn table(&self) -> String {
        let b = &self.survey.basis;
        let mut s = String::new();
        let _ = writeln!(s, "{}: PI design", self.name);
        let _ = writeln!(
            s,
            "winding R = {} ohm{}, L = {} H{}{}; Ts = {} us, sample-to-update delay {:.2} periods, {}",
            b.resistance_ohm,
            match b.linearised_at_a {
                Some(a) => format!(" (the load's slope dv/di at {a} A)"),
                None => String::new(),
            },
            b.inductance_h,
            match b.design_gap_m {
                Some(g) => format!(" (at an air gap of {} mm)", g * 1e3),
                None => String::new(),
            },
            match b.counter_v {
                Some((lo, hi)) if lo == hi =>
                    format!(", behind a counter-voltage of {lo} V that the integral carries"),
                Some((lo, hi)) =>
                    format!(", behind a counter-voltage of {lo} to {hi} V that the integral carries"),
                None => String::new(),
            },
            b.period_s * 1e6,
            b.delay_periods,
            if b.filter_tau_s > 0.0 {
                format!("filter lag {:.2} us", b.filter_tau_s * 1e6)
            } else {
                "no filter".into()
            },
        );
        let _ = writeln!(
            s,
            "spec: settling (2 %) {:.3} ms, overshoot {:.1} %{}\n",
            b.settling_time_s * 1e3,
            b.overshoot * 100.0,
            b.rise_time_s
                .map_or(String::new(), |r| format!(", rise (10-90 %) {:.3} ms", r * 1e3))
        );
        let _ = writeln!(
            s,
            "{:<23} {:>9} {:>9} {:>3} {:>7} {:>8} {:>7} {:>8} {:>8} {:>6} {:>6} {:>5} {:>7} {:>8}  verdict",
            "method",
            "kp_v_a",
            "ti_ms",
            "b",
            "c_os_%",
            "c_ts_ms",
            "os_%",
            "ts_ms",
            "tr_ms",
            "pm_deg",
            "gm_dB",
            "mm",
            "fc_hz",
            "tsmax_us"
        );
        for m in &self.survey.methods {
            if let Some(why) = &m.refused {
                let _ = writeln!(s, "{:<23} refused: {why}", m.method);
                continue;
            }
            let p = m.predicted;
            let verdict = if m.meets_spec {
                "meets".to_string()
            } else {
                format!("misses {}", m.misses.join(", "))
            };
            let _ = writeln!(
                s,
                "{:<23} {:>9} {:>9} {:>3} {:>7} {:>8} {:>7} {:>8} {:>8} {:>6} {:>6} {:>5} {:>7} {:>8}  {verdict}",
                m.method,
                opt(m.kp_v_per_a, 1.0, 3),
                opt(m.ti_s, 1e3, 4),
                m.setpoint_weight,
                opt(m.continuous.map(|c| c.overshoot_pct), 1.0, 2),
                opt(m.continuous.and_then(|c| c.settling_time_s), 1e3, 3),
                opt(p.map(|c| c.overshoot_pct), 1.0, 2),
                opt(p.and_then(|c| c.settling_time_s), 1e3, 3),
                opt(p.and_then(|c| c.rise_time_s), 1e3, 3),
                opt(m.phase_margin_deg, 1.0, 1),
                opt(m.gain_margin_db, 1.0, 1),
                opt(m.modulus_margin, 1.0, 2),
                opt(m.crossover_hz, 1.0, 0),
                opt(m.largest_stable_period_s, 1e6, 1),
            );
        }
        let _ = writeln!(
            s,
            "\nc_: near-continuous loop; os, ts, tr: the sampled loop with hold, delay and filter; b: setpoint weight; mm: modulus margin"
        );
        for w in &self.survey.warnings {
            let _ = writeln!(s, "warning: {w}");
        }
        for m in &self.survey.methods {
            for w in &m.warnings {
                let _ = writeln!(s, "warning ({}): {w}", m.method);
            }
        }
        match self.chosen() {
            Some(m) => {
                let _ = writeln!(s, "chosen: {} ({})", m.method, self.survey.choice_rule);
            }
            None => {
                let _ = writeln!(s, "{}", self.infeasible());
            }
        }
        s
    }

    /// The sentence for a spec no method meets.
    pub fn infeasible(&self) -> String {
        let b = &self.survey.basis;
        let asked = format!(
            "no method meets a {:.3} ms settling time with {:.1} % overshoot{} strictly on this sampled loop",
            b.settling_time_s * 1e3,
            b.overshoot * 100.0,
            b.rise_time_s
                .map_or(String::new(), |r| format!(" and a {:.3} ms rise", r * 1e3))
        );
        match self.survey.nearest_settling_time_s {
            Some(ts) => format!(
                "{asked}; the nearest feasible settling time with the same overshoot is {:.3} ms (--settling-time-s {ts:.4e})",
                ts * 1e3
            ),
            None => format!(
                "{asked}, and no settling time within a factor of 1000 is; shorten the control period or relax the overshoot"
            ),
        }
    }

    /// Firmware constants for the chosen gains.
    pub fn rust_snippet(&self) -> Option<String> {
        let m = self.chosen()?;
        let b = &self.survey.basis;
        let p = m.predicted?;
        Some(format!(
            "// PI gains for {name}, {method} design by `ampwright design`:\n\
             // {ts:.3} ms settling, {os:.1} % overshoot asked; predicted on the sampled loop\n\
             // {dos:.2} % and {dts} ms, phase margin {pm} degrees, gain margin {gm} dB.\n\
             pub const KP_V_PER_A: f32 = {kp:e};\n\
             pub const TI_S: f32 = {ti:e};\n\
             pub const SETPOINT_WEIGHT: f32 = {w:.1};\n\
             // pi_core::PiGains::from_kp_ti(KP_V_PER_A, TI_S)?.with_setpoint_weight(SETPOINT_WEIGHT)?\n",
            name = self.name,
            method = m.method,
            ts = b.settling_time_s * 1e3,
            os = b.overshoot * 100.0,
            dos = p.overshoot_pct,
            dts = opt(p.settling_time_s, 1e3, 3),
            pm = opt(m.phase_margin_deg, 1.0, 1),
            gm = opt(m.gain_margin_db, 1.0, 1),
            kp = m.kp_v_per_a.unwrap_or(f64::NAN) as f32,
            ti = m.ti_s.unwrap_or(f64::NAN) as f32,
            w = m.setpoint_weight,
        ))
    }

    /// The report as sections of an HTML page (the pictures are the caller's).
    pub fn sections(&self) -> Vec<crate::results::html::Section> {
        use crate::results::html::Section;
        let b = &self.survey.basis;
        let mut out = vec![Section::Text(format!(
            "Winding R = {} ohm, L = {} H; control period {} us; sample-to-update delay {:.2} periods; spec: settling {} ms, overshoot {} %{}.",
            b.resistance_ohm,
            b.inductance_h,
            b.period_s * 1e6,
            b.delay_periods,
            b.settling_time_s * 1e3,
            b.overshoot * 100.0,
            b.rise_time_s
                .map_or(String::new(), |r| format!(", rise {} ms", r * 1e3))
        ))];
        out.push(Section::Heading("Methods".into()));
        out.push(Section::Table(
            [
                "method",
                "Kp (V/A)",
                "Ti (ms)",
                "b",
                "overshoot (%)",
                "settling (ms)",
                "rise (ms)",
                "phase margin (deg)",
                "gain margin (dB)",
                "modulus margin",
                "verdict",
            ]
            .map(String::from)
            .to_vec(),
            self.survey
                .methods
                .iter()
                .map(|m| {
                    let p = m.predicted;
                    vec![
                        m.method.to_string(),
                        opt(m.kp_v_per_a, 1.0, 3),
                        opt(m.ti_s, 1e3, 4),
                        m.setpoint_weight.to_string(),
                        opt(p.map(|p| p.overshoot_pct), 1.0, 2),
                        opt(p.and_then(|p| p.settling_time_s), 1e3, 3),
                        opt(p.and_then(|p| p.rise_time_s), 1e3, 3),
                        opt(m.phase_margin_deg, 1.0, 1),
                        opt(m.gain_margin_db, 1.0, 1),
                        opt(m.modulus_margin, 1.0, 2),
                        match (&m.refused, m.meets_spec) {
                            (Some(why), _) => format!("refused: {why}"),
                            (None, true) => "meets".into(),
                            (None, false) => format!("misses {}", m.misses.join(", ")),
                        },
                    ]
                })
                .collect(),
        ));
        out.push(Section::Text(match self.chosen() {
            Some(m) => format!("Chosen: {} ({}).", m.method, self.survey.choice_rule),
            None => self.infeasible(),
        }));
        out.push(Section::Heading("The command's report".into()));
        out.push(Section::Pre(self.table()));
        out
    }

    /// The report as JSON.
    pub fn json(&self) -> String {
        serde_json::to_string_pretty(self).unwrap_or_else(|e| format!("{{\"error\": \"{e}\"}}"))
    }
}
