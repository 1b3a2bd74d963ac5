//! A run's report as sections of the review page ([`crate::results::html`]).

use crate::results::html::Section;
use crate::results::report::Report;

impl Report {
    /// The report as sections of an HTML page (the pictures are the caller's).
    pub fn sections(&self) -> Vec<crate::results::html::Section> {
        let mut out = Vec::new();
        if !self.description.is_empty() {
            out.push(Section::Text(self.description.clone()));
        }
        out.push(Section::Text(format!(
            "{} bridge at {:.0} Hz PWM, {} control at {:.0} Hz, {} ticks over {:.3} s. Verdict: {}.",
            self.bridge_mode,
            self.pwm_frequency_hz,
            self.arithmetic,
            self.control_rate_hz,
            self.ticks,
            self.duration_s,
            match self.pass {
                None => "nothing to check",
                Some(true) => "PASS",
                Some(false) => "FAIL",
            }
        )));
        out.push(Section::Heading("Steps".into()));
        let ms = |v: Option<f64>| v.map_or("-".to_string(), |t| format!("{:.3}", t * 1e3));
        out.push(Section::Table(
            [
                "step",
                "at (ms)",
                "from (A)",
                "to (A)",
                "rise (ms)",
                "overshoot (%)",
                "settling (ms)",
                "peak (A)",
                "steady-state error (A)",
                "note",
            ]
            .map(String::from)
            .to_vec(),
            self.steps
                .iter()
                .enumerate()
                .map(|(k, m)| {
                    vec![
                        k.to_string(),
                        format!("{:.3}", m.at_s * 1e3),
                        format!("{:.3}", m.from_a),
                        format!("{:.3}", m.to_a),
                        ms(m.rise_time_s),
                        format!("{:.2}", m.overshoot_pct),
                        ms(m.settling_time_s),
                        format!("{:.3}", m.peak_a),
                        format!("{:.4}", m.steady_state_error_a),
                        match (m.interrupted, m.clamped) {
                            (Some(i), _) => format!("not scored: {}", i.describe()),
                            (None, true) => "clamped to the setpoint limit".into(),
                            _ => String::new(),
                        },
                    ]
                })
                .collect(),
        ));
        if !self.checks.is_empty() {
            out.push(Section::Heading("Spec".into()));
            out.push(Section::Table(
                ["step", "criterion", "measured", "limit", "margin", "verdict"]
                    .map(String::from)
                    .to_vec(),
                self.checks
                    .iter()
                    .map(|c| {
                        let v = |x: Option<f64>| x.map_or("-".to_string(), |x| format!("{x:.6}"));
                        vec![
                            c.step.to_string(),
                            c.criterion.to_string(),
                            v(c.measured),
                            format!("{:.6}", c.limit),
                            v(c.margin),
                            if c.pass { "pass" } else { "FAIL" }.to_string(),
                        ]
                    })
                    .collect(),
            ));
        }
        if !self.expectations.is_empty() {
            out.push(Section::Heading("Expectations".into()));
            out.push(Section::Table(
                ["expected", "happened", "verdict"].map(String::from).to_vec(),
                self.expectations
                    .iter()
                    .map(|c| {
                        vec![
                            c.expected.clone(),
                            c.happened.clone(),
                            if c.pass { "pass" } else { "FAIL" }.into(),
                        ]
                    })
                    .collect(),
            ));
        }
        out.push(Section::Heading("Protections".into()));
        out.push(Section::Table(
            ["protection", "on", "setting"].map(String::from).to_vec(),
            self.protections
                .iter()
                .map(|p| {
                    vec![
                        p.name.to_string(),
                        if p.on { "on" } else { "OFF" }.into(),
                        p.setting.clone(),
                    ]
                })
                .collect(),
        ));
        out.push(Section::Heading("The command's report".into()));
        out.push(Section::Pre(self.table()));
        out
    }
}
