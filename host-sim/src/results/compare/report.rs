//! A comparison as a table and as JSON (what `ampwright compare` prints).

use super::{Comparison, Drive, sig as num};

/// `Some(true)` when the normalised error is within `max_error_pct`,
/// `Some(false)` beyond it, `None` without a tolerance.
pub fn within(c: &Comparison, max_error_pct: Option<f64>) -> Option<bool> {
    max_error_pct.map(|tol| c.nrmse * 100.0 <= tol)
}

fn ms(v: Option<f64>) -> String {
    v.map_or("-".into(), |s| format!("{:.3}", s * 1e3))
}

impl Comparison {
    /// The table: how it was driven, the steps side by side, the error and
    /// the differences in words.
    pub fn table(&self, capture: &str, scenario: &str, max_error_pct: Option<f64>) -> String {
        let n = self.time_s.len();
        let period = self.time_s.get(1).copied().unwrap_or(0.0) - self.time_s.first().copied().unwrap_or(0.0);
        let mut t = format!(
            "{capture} against the scenario {scenario}: {} ({n} samples, {} us apart; the scenario's own events replaced)\n",
            match self.drive {
                Drive::Setpoint => "the scenario's loop driven by the capture's setpoint",
                Drive::Voltage => "the capture's voltage applied open loop to the scenario's load",
            },
            num(period * 1e6)
        );
        if !self.steps.is_empty() {
            t.push_str(&format!(
                "\n{:>4} {:>9} {:>8} {:>8}   {:>17}   {:>17}   {:>17}   {:>17}\n",
                "step", "at_ms", "from_a", "to_a", "rise_ms", "overshoot_pct", "settle_ms", "ss_err_a"
            ));
            t.push_str(&format!(
                "{:>4} {:>9} {:>8} {:>8}   {:>17}   {:>17}   {:>17}   {:>17}\n",
                "", "", "", "", "capture / sim", "capture / sim", "capture / sim", "capture / sim"
            ));
            for (k, p) in self.steps.iter().enumerate() {
                let (a, b) = (&p.capture, &p.simulated);
                let pair = |x: String, y: String| format!("{x:>7} / {y:<7}");
                t.push_str(&format!(
                    "{k:>4} {:>9.3} {:>8.3} {:>8.3}   {:>17}   {:>17}   {:>17}   {:>17}\n",
                    a.at_s * 1e3,
                    a.from_a,
                    a.to_a,
                    pair(ms(a.rise_time_s), ms(b.rise_time_s)),
                    pair(
                        format!("{:.2}", a.overshoot_pct),
                        format!("{:.2}", b.overshoot_pct)
                    ),
                    pair(ms(a.settling_time_s), ms(b.settling_time_s)),
                    pair(
                        format!("{:.4}", a.steady_state_error_a),
                        format!("{:.4}", b.steady_state_error_a)
                    ),
                ));
            }
        }
        t.push_str(&format!(
            "\nnormalised RMS error {:.4} ({:.2} % of the capture's spread){}\n",
            self.nrmse,
            self.nrmse * 100.0,
            match (within(self, max_error_pct), max_error_pct) {
                (Some(true), Some(tol)) => format!(", within the {} % tolerance", num(tol)),
                (Some(false), Some(tol)) => format!(", BEYOND the {} % tolerance", num(tol)),
                _ => String::new(),
            }
        ));
        t.push_str(&format!(
            "offset {} A once settled; {}\n",
            num(self.offset_a),
            if self.lag_s == 0.0 {
                "no delay explains the difference".to_string()
            } else {
                format!(
                    "the capture {} the simulation by {} us",
                    if self.lag_s > 0.0 { "lags" } else { "leads" },
                    num(self.lag_s.abs() * 1e6)
                )
            }
        ));
        t.push_str("differences, largest first:\n");
        for f in &self.findings {
            if f.share > 0.0 {
                t.push_str(&format!(
                    "  - {} ({:.0} % of the squared difference)\n",
                    f.text,
                    f.share * 100.0
                ));
            } else {
                t.push_str(&format!("  - {}\n", f.text));
            }
        }
        t
    }

    /// The comparison as JSON, for scripts.
    pub fn json(&self, max_error_pct: Option<f64>) -> String {
        let v = serde_json::json!({
            "drive": self.drive,
            "samples": self.time_s.len(),
            "nrmse": self.nrmse,
            "max_error_pct": max_error_pct,
            "within_tolerance": within(self, max_error_pct),
            "offset_a": self.offset_a,
            "lag_s": self.lag_s,
            "steps": self.steps,
            "findings": self.findings,
        });
        serde_json::to_string_pretty(&v).unwrap_or_default()
    }
}
