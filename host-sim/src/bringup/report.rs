//! The bring-up in words: the table a person reads, the JSON a script reads,
//! and the gains as a scenario's lines and as firmware constants.

use super::{BringUp, Rotor};
use crate::bench::identify::Estimate;

fn est(e: &Estimate, scale: f64) -> String {
    format!(
        "{:.4} ({:.4} to {:.4})",
        e.value * scale,
        e.low * scale,
        e.high * scale
    )
}

fn pct(measured: f64, nominal: f64) -> String {
    format!("{:+.1} %", (measured / nominal - 1.0) * 100.0)
}

impl BringUp {
    /// The report as text.
    pub fn table(&self, scenario: &str) -> String {
        let id = &self.identified;
        let (r_nom, l_nom) = self.nominal;
        let (r, l) = self.winding;
        let mut t = format!(
            "bring-up against {scenario} ({})\n\n",
            match self.identify_plan.rotor {
                Rotor::Held => "rotor held".to_string(),
                Rotor::Free { inertia_kg_m2 } => format!("shaft free, inertia {inertia_kg_m2} kg m^2 given"),
            }
        );
        t.push_str(&format!(
            "identified on the board ({} samples, {} us apart; 95 % intervals)\n",
            id.capture.time_s.len(),
            crate::results::compare::sig(id.capture.period_s * 1e6)
        ));
        t.push_str(&format!(
            "  resistance through the bridge  {} ohm\n",
            est(&id.resistance_ohm(), 1.0)
        ));
        t.push_str(&format!(
            "  winding resistance             {r:.4} ohm  (scenario {r_nom} ohm, {})\n",
            pct(r, r_nom)
        ));
        t.push_str(&format!(
            "  inductance                     {} mH  (scenario {} mH, {})\n",
            est(&id.inductance_h(), 1e3),
            l_nom * 1e3,
            pct(l, l_nom)
        ));
        if let Some(f) = &id.rotor {
            t.push_str(&format!(
                "  back-EMF constant              {} mV s/rad\n",
                est(&f.back_emf_v_s_per_rad, 1e3)
            ));
        }
        t.push_str(&format!(
            "  fit: normalised RMS error {:.4}, residual autocorrelation {:.3}\n",
            id.rl.nrmse, id.rl.residual_autocorrelation
        ));
        for w in &id.rl.warnings {
            t.push_str(&format!("  warning: {w}\n"));
        }
        match &id.on_board {
            Ok(b) => t.push_str(&format!(
                "  the board's own least squares (f32, {} samples): {:.4} ohm through the bridge, {:.4} mH\n",
                b.samples,
                b.resistance_ohm,
                b.inductance_h * 1e3
            )),
            Err(e) => t.push_str(&format!("  the board's own least squares: none ({e})\n")),
        }
        let d = &self.designed;
        t.push_str(&format!(
            "\ndesigned from the scenario's spec on the identified winding: {} method\n  Kp = {:.5} V/A, Ti = {:.5} ms, setpoint weight {}; predicted {:.2} % overshoot, settling {}\n",
            d.method,
            d.kp_v_per_a,
            d.ti_s * 1e3,
            d.setpoint_weight,
            d.predicted.overshoot_pct,
            d.predicted
                .settling_time_s
                .map_or("not within the prediction".to_string(), |s| format!("{:.3} ms", s * 1e3)),
        ));
        match &self.on_board_gains {
            Ok(g) => t.push_str(&format!(
                "  the board's own design (f32, same method and spec): Kp = {:.5} V/A, Ti = {:.5} ms\n",
                g.kp_v_per_a,
                g.ti_s * 1e3
            )),
            Err(e) => t.push_str(&format!("  the board's own design: none ({e})\n")),
        }
        t.push_str(&format!(
            "\nverification step on the board, {} A to {} A, against the spec\n",
            self.step_plan.from_a, self.step_plan.to_a
        ));
        if self.checks.is_empty() {
            t.push_str("  no step could be scored (the capture holds no complete step)\n");
        }
        for c in &self.checks {
            let (unit, scale) = match c.criterion {
                "overshoot_pct" => ("%", 1.0),
                "steady_state_error_a" => ("A", 1.0),
                _ => ("ms", 1e3),
            };
            t.push_str(&format!(
                "  {:<22} {:>10} {unit:<3} limit {:>8} {unit:<3} {}\n",
                c.criterion,
                c.measured
                    .map_or("never".to_string(), |m| format!("{:.4}", m * scale)),
                format!("{}", c.limit * scale),
                if c.pass { "ok" } else { "MISSED" }
            ));
        }
        let c = &self.comparison;
        t.push_str(&format!(
            "\nthe step against the simulation of the identified scenario: normalised RMS error {:.2} % (tolerance {} %) {}\n",
            c.nrmse * 100.0,
            self.max_error_pct,
            if self.within_tolerance() { "ok" } else { "BEYOND" }
        ));
        for f in &c.findings {
            t.push_str(&format!("  - {}\n", f.text));
        }
        t.push_str(&format!(
            "\nverdict: {}\n",
            if self.passed() {
                "the board meets the spec with the new gains, and behaves as the simulation says"
            } else if self.checks.iter().all(|c| c.pass) && !self.checks.is_empty() {
                "the step meets the spec, but the board does not behave as the simulation says: see the differences above"
            } else {
                "the board MISSES the spec with the new gains: see the checks above"
            }
        ));
        t.push_str("\nthe gains, for the scenario:\n");
        t.push_str(&self.gains_toml());
        t.push_str("and for the firmware:\n");
        t.push_str(&self.gains_rust());
        t
    }

    /// The gains as a scenario's `[controller]` lines.
    pub fn gains_toml(&self) -> String {
        let d = &self.designed;
        format!(
            "[controller]\nkp_v_per_a = {}\nti_s = {}\nsetpoint_weight = {}\n",
            d.kp_v_per_a, d.ti_s, d.setpoint_weight
        )
    }

    /// The gains as firmware constants.
    pub fn gains_rust(&self) -> String {
        let d = &self.designed;
        format!(
            "pub const KP_V_PER_A: f32 = {:e};\npub const TI_S: f32 = {:e};\npub const SETPOINT_WEIGHT: f32 = {};\n// pi_core::PiGains::from_kp_ti(KP_V_PER_A, TI_S)?.with_setpoint_weight(SETPOINT_WEIGHT)?\n",
            d.kp_v_per_a as f32, d.ti_s as f32, d.setpoint_weight as f32
        )
    }

    /// The report as JSON: each identified value under its scenario field,
    /// the gains, the checks and the comparison.
    pub fn json(&self) -> String {
        let id = &self.identified;
        let e = |x: &Estimate| serde_json::json!({"value": x.value, "low": x.low, "high": x.high});
        let v = serde_json::json!({
            "passed": self.passed(),
            "identified": {
                "circuit_resistance_ohm": e(&id.resistance_ohm()),
                "resistance_ohm": self.winding.0,
                "inductance_h": e(&id.inductance_h()),
                "back_emf_v_s_per_rad": id.rotor.as_ref().map(|f| e(&f.back_emf_v_s_per_rad)),
                "nrmse": id.rl.nrmse,
                "on_board": id.on_board.as_ref().ok().map(|b| serde_json::json!({
                    "circuit_resistance_ohm": b.resistance_ohm,
                    "inductance_h": b.inductance_h,
                    "samples": b.samples,
                })),
            },
            "scenario": {"resistance_ohm": self.nominal.0, "inductance_h": self.nominal.1},
            "gains": {
                "method": self.designed.method,
                "kp_v_per_a": self.designed.kp_v_per_a,
                "ti_s": self.designed.ti_s,
                "setpoint_weight": self.designed.setpoint_weight,
                "on_board": self.on_board_gains.as_ref().ok().map(|g| serde_json::json!({
                    "kp_v_per_a": g.kp_v_per_a,
                    "ti_s": g.ti_s,
                })),
            },
            "step": {"from_a": self.step_plan.from_a, "to_a": self.step_plan.to_a},
            "checks": self.checks,
            "comparison": {
                "nrmse": self.comparison.nrmse,
                "max_error_pct": self.max_error_pct,
                "within_tolerance": self.within_tolerance(),
                "findings": self.comparison.findings,
            },
        });
        serde_json::to_string_pretty(&v).unwrap_or_default()
    }
}
