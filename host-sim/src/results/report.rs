//! Running a scenario and telling what happened: the metrics table and verdict
//! for people, the same content as JSON for scripts.

use std::fmt::Write;

use pi_core::FaultSet;
use serde::Serialize;

use crate::plant::bridge::Modulation;
use crate::results::expect::{self, ExpectCheck};
use crate::results::metrics::{self, Check, StepMetrics};
pub use crate::results::protections::{ProtectionLine, protections};
use crate::results::summary::Summary;
use crate::scenario::{Scenario, ScenarioError};
use crate::sim::trace::Trace;
use crate::spec::PredictedStep;

/// How a scenario's gains were designed, for the run's report.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Designed {
    /// The method chosen.
    pub method: &'static str,
    /// Proportional gain, V/A.
    pub kp_v_per_a: f64,
    /// Integral time, s.
    pub ti_s: f64,
    /// The setpoint weight used.
    pub setpoint_weight: f64,
    /// Whether that weight came from the scenario instead of the method.
    pub weight_from_scenario: bool,
    /// The unit step the design predicts with that weight (linear, no saturation).
    pub predicted: PredictedStep,
}

pub use crate::results::summary::MIN_STEP_A;

/// The result of one run, ready to print or serialise.
#[derive(Clone, Debug, Serialize)]
pub struct Report {
    /// Scenario name.
    pub name: String,
    /// Scenario description.
    pub description: String,
    /// `averaged` or `switching`.
    pub bridge_mode: &'static str,
    /// The firmware's arithmetic: "float" or "fixed-point".
    pub arithmetic: &'static str,
    /// PWM frequency, hertz.
    pub pwm_frequency_hz: f64,
    /// Control rate, hertz.
    pub control_rate_hz: f64,
    /// Simulated time, seconds.
    pub duration_s: f64,
    /// Control ticks run (the trace may keep fewer; see `record_every_ticks`).
    pub ticks: usize,
    /// Each setpoint step, measured.
    pub steps: Vec<StepMetrics>,
    /// Each spec criterion on each step.
    pub checks: Vec<Check>,
    /// Each expectation of the scenario's `[expect]` section (and the true
    /// current against the overcurrent threshold, always).
    pub expectations: Vec<ExpectCheck>,
    /// Safety notes: injected faults no detector sees.
    pub unprotected: Vec<String>,
    /// All spec checks and expectations hold (`None`: nothing to check).
    pub pass: Option<bool>,
    /// Faults latched at any time, in bit order.
    pub faults_latched: Vec<String>,
    /// The first fault and when it latched, seconds.
    pub first_fault: Option<(String, f64)>,
    /// Refused commands and notes.
    pub log: Vec<(f64, String)>,
    /// Largest true current magnitude, amperes.
    pub peak_current_a: f64,
    /// Largest duty magnitude.
    pub peak_duty: f64,
    /// Highest winding temperature, C (`None`: the load has no thermal
    /// model, its copper stays at its reference temperature).
    pub max_winding_c: Option<f64>,
    /// What a charger's voltage limit did, when the scenario ran one.
    pub charge: Option<ChargeReport>,
    /// Each protection of the firmware's loop: on with its setting, or off.
    pub protections: Vec<ProtectionLine>,
    /// How the gains were designed, when the scenario left them out, with the
    /// step the design predicts (to set beside the measured ones).
    pub designed: Option<Designed>,
}

/// Runs a scenario with the real `pi-core` loop; `progress` gets the fraction
/// done; `designed` says how its gains were designed, if they were. The trace
/// keeps one tick in `record_every_ticks`; every figure of the report is
/// gathered on every tick ([`Summary`]).
pub fn run(
    scenario: &Scenario,
    designed: Option<&Designed>,
    progress: &mut dyn FnMut(f64),
) -> Result<(Trace, Report), ScenarioError> {
    run_streaming(
        scenario,
        designed,
        progress,
        scenario.record_every_ticks,
        &mut |_| {},
    )
}

/// [`run`], handing every tick's point to `each` as it is made (to write the
/// CSV without keeping it) and keeping in memory only one point in
/// `keep_every` ticks (for the plots).
pub fn run_streaming(
    scenario: &Scenario,
    designed: Option<&Designed>,
    progress: &mut dyn FnMut(f64),
    keep_every: u64,
    each: &mut dyn FnMut(&crate::sim::trace::TracePoint),
) -> Result<(Trace, Report), ScenarioError> {
    let (mut cl, runner) = scenario.start()?;
    let mut runner = runner.record_every(keep_every);
    let limits = scenario.loop_config.setpoint();
    let mut summary =
        Summary::new(limits.min_a() as f64, limits.max_a() as f64).with_duty_limit(scenario.max_duty);
    runner.run_observed(&mut cl, scenario.duration_s, progress, &mut |p, note| {
        summary.observe(p, note);
        each(p);
    });
    summary.finish();
    let trace = runner.into_trace();
    let report = summarise(scenario, designed, &summary, &trace);
    Ok((trace, report))
}

/// The report of a finished run from its summary (the trace gives the log).
pub fn summarise(
    scenario: &Scenario,
    designed: Option<&Designed>,
    summary: &Summary,
    trace: &Trace,
) -> Report {
    let steps = summary.steps.clone();
    let checks = metrics::verdict(&steps, &scenario.spec);
    let expectations = expect::check(&scenario.expect, summary, scenario.overcurrent_a);
    let unprotected = expect::unprotected(
        scenario.chain.injectors.list().iter().map(|i| i.kind),
        &scenario.loop_config,
    );
    let pass = (!checks.is_empty() || !expectations.is_empty())
        .then(|| checks.iter().all(|c| c.pass) && expectations.iter().all(|c| c.pass));
    let faults_latched = FaultSet::from_bits(summary.fault_bits)
        .iter()
        .map(|f| f.describe().to_string())
        .collect();
    let first_fault = summary.first_fault.and_then(|(t, bits)| {
        FaultSet::from_bits(bits)
            .earliest()
            .map(|f| (f.describe().to_string(), t))
    });
    let bridge = scenario.chain.bridge.params();
    Report {
        name: scenario.name.clone(),
        description: scenario.description.clone(),
        bridge_mode: match bridge.modulation {
            Modulation::Averaged => "averaged",
            Modulation::Switching => "switching",
        },
        arithmetic: if scenario.fixed_point.is_some() {
            "fixed-point"
        } else {
            "float"
        },
        pwm_frequency_hz: bridge.pwm_frequency_hz,
        control_rate_hz: 1.0 / scenario.timing.control_period_s(),
        duration_s: scenario.duration_s,
        ticks: summary.ticks as usize,
        steps,
        checks,
        expectations,
        unprotected,
        pass,
        faults_latched,
        first_fault,
        log: trace.log.iter().map(|e| (e.t_s, e.text.clone())).collect(),
        peak_current_a: summary.peak_current.0,
        peak_duty: summary.peak_duty,
        max_winding_c: scenario.chain.load.heats().then_some(summary.max_winding_c),
        charge: trace.charge.map(|c| ChargeReport::of(&c, trace)),
        protections: protections(&scenario.loop_config, scenario.chain.speed_feedback),
        designed: designed.cloned(),
    }
}

/// What a charger's voltage limit did over the run.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ChargeReport {
    /// The constant current, A.
    pub current_a: f64,
    /// The constant voltage, V.
    pub voltage_v: f64,
    /// The current that ends the charge, A.
    pub taper_a: f64,
    /// When the voltage limit took over (constant voltage), s.
    pub constant_voltage_from_s: Option<f64>,
    /// When the charge ended, s, and why in words.
    pub ended: Option<(f64, String)>,
    /// The highest terminal voltage the limit read, V.
    pub peak_v: f64,
    /// The state of charge at the end of the run, % (from the load's
    /// `soc_pct` readout).
    pub final_soc_pct: Option<f64>,
}

impl ChargeReport {
    fn of(c: &crate::sim::charger::ChargeRecord, trace: &Trace) -> Self {
        let soc = trace.readouts.iter().position(|r| r.column == "soc_pct");
        Self {
            current_a: c.current_a,
            voltage_v: c.voltage_v,
            taper_a: c.taper_a,
            constant_voltage_from_s: c.constant_voltage_from_s,
            ended: c
                .ended
                .map(|(t, why)| (t, crate::sim::charger::describe_end(why).to_string())),
            peak_v: c.peak_v,
            final_soc_pct: soc.and_then(|k| trace.points.last().map(|p| p.load[k])),
        }
    }

    fn lines(&self) -> String {
        let mut s = format!(
            "charge: constant current {:.3} A up to {:.3} V, ",
            self.current_a, self.voltage_v
        );
        match self.constant_voltage_from_s {
            Some(t) => s.push_str(&format!("constant voltage from {t:.3} s")),
            None => s.push_str("the voltage limit never took over"),
        }
        match &self.ended {
            Some((t, why)) => s.push_str(&format!("; ended at {t:.3} s: {why}")),
            None => s.push_str("; still charging at the end of the run"),
        }
        s.push_str(&format!("\n  terminal voltage up to {:.4} V", self.peak_v));
        if let Some(soc) = self.final_soc_pct {
            s.push_str(&format!(", state of charge at the end {soc:.2} %"));
        }
        s.push('\n');
        s
    }
}

/// A number in at most `width` characters: fixed with `decimals`, or in
/// scientific notation when that would not fit, so the columns stay aligned.
fn fit(v: f64, width: usize, decimals: usize) -> String {
    let fixed = format!("{v:.decimals$}");
    let out = if fixed.len() <= width {
        fixed
    } else {
        format!("{v:.1e}")
    };
    format!("{out:>width$}")
}

fn ms(v: Option<f64>) -> String {
    v.map_or("-".into(), |s| fit(s * 1e3, 8, 3).trim_start().to_string())
}

impl Report {
    /// The metrics table and verdict, as plain text.
    pub fn table(&self) -> String {
        let mut s = String::new();
        let _ = writeln!(s, "{}", self.name);
        if !self.description.is_empty() {
            let _ = writeln!(s, "{}", self.description);
        }
        let _ = writeln!(
            s,
            "{} bridge at {:.0} Hz PWM, {} control at {:.0} Hz, {} ticks over {:.3} ms\n",
            self.bridge_mode,
            self.pwm_frequency_hz,
            self.arithmetic,
            self.control_rate_hz,
            self.ticks,
            self.duration_s * 1e3
        );
        let _ = writeln!(
            s,
            "{:>4} {:>8} {:>7} {:>7} {:>8} {:>9} {:>9} {:>7} {:>8} {:>9} {:>10}",
            "step",
            "at_ms",
            "from_a",
            "to_a",
            "rise_ms",
            "overshoot",
            "settle_ms",
            "peak_a",
            "peak_ms",
            "ss_err_a",
            "iae_mA_s"
        );
        let mut clamped = false;
        for (k, m) in self.steps.iter().enumerate() {
            clamped |= m.clamped;
            let head = format!(
                "{:>4} {:>8} {:>7} {:>7}{}",
                k,
                fit(m.at_s * 1e3, 8, 3),
                fit(m.from_a, 7, 3),
                fit(m.to_a, 7, 3),
                if m.clamped { "*" } else { " " }
            );
            if let Some(why) = m.interrupted {
                let _ = writeln!(s, "{head}  interrupted, not scored: {}", why.describe());
                continue;
            }
            let _ = writeln!(
                s,
                "{head}{:>8} {:>8}% {:>9} {:>7} {:>8} {:>9} {:>10}",
                ms(m.rise_time_s),
                fit(m.overshoot_pct, 8, 2),
                ms(m.settling_time_s),
                fit(m.peak_a, 7, 3),
                fit(m.peak_time_s * 1e3, 8, 3),
                fit(m.steady_state_error_a, 9, 4),
                fit(m.iae_a_s * 1e3, 10, 4)
            );
        }
        if clamped {
            let _ = writeln!(
                s,
                "   * the scenario asked for more than the setpoint limits allow; the step is measured to the limit"
            );
        }
        if self.steps.is_empty() {
            let _ = writeln!(s, "   (no setpoint step in this run)");
        }
        if let Some(d) = &self.designed {
            let p = &d.predicted;
            let _ = writeln!(
                s,
                "{:>4} {:>8} {:>7} {:>7} {:>8} {:>8.2}% {:>9}   (the design's prediction: linear, no back-EMF, no saturation)",
                "pred",
                "",
                "",
                "",
                ms(p.rise_time_s),
                p.overshoot_pct,
                ms(p.settling_time_s),
            );
            let _ = writeln!(
                s,
                "gains designed from the spec by the {} method: Kp = {:.4} V/A, Ti = {:.4} ms, b = {}{}",
                d.method,
                d.kp_v_per_a,
                d.ti_s * 1e3,
                d.setpoint_weight,
                if d.weight_from_scenario {
                    " (the scenario's setpoint_weight, not the method's)"
                } else {
                    ""
                }
            );
        }
        if !self.checks.is_empty() {
            let _ = writeln!(s, "\nspec");
            for c in &self.checks {
                let (measured, limit, margin) = match c.criterion {
                    "rise_time_s" | "settling_time_s" => (
                        ms(c.measured),
                        format!("{:.3} ms", c.limit * 1e3),
                        ms(c.margin) + " ms",
                    ),
                    "overshoot_pct" => (
                        c.measured.map_or("-".into(), |v| format!("{v:.2} %")),
                        format!("{:.2} %", c.limit),
                        c.margin.map_or("-".into(), |v| format!("{v:.2} %")),
                    ),
                    _ => (
                        c.measured.map_or("-".into(), |v| format!("{v:.4} A")),
                        format!("{:.4} A", c.limit),
                        c.margin.map_or("-".into(), |v| format!("{v:.4} A")),
                    ),
                };
                let _ = writeln!(
                    s,
                    "  step {} {:<21} {:>11} limit {:>10}  margin {:>11}  {}",
                    c.step,
                    c.criterion,
                    measured,
                    limit,
                    margin,
                    if c.pass { "pass" } else { "FAIL" }
                );
            }
        }
        let _ = write!(
            s,
            "\npeak current {:.3} A, peak duty {:.3}",
            self.peak_current_a, self.peak_duty
        );
        match self.max_winding_c {
            Some(c) => {
                let _ = writeln!(s, ", winding up to {c:.2} C");
            }
            None => {
                let _ = writeln!(s);
            }
        }
        if let Some(c) = &self.charge {
            s.push_str(&c.lines());
        }
        let _ = writeln!(s, "protections");
        for p in &self.protections {
            let _ = writeln!(
                s,
                "  {:<3} {:<35} {}",
                if p.on { "on" } else { "OFF" },
                p.name,
                p.setting
            );
        }
        for p in &self.protections {
            if let Some(w) = &p.warning {
                let _ = writeln!(s, "warning: {w}");
            }
        }
        match &self.first_fault {
            None => {
                let _ = writeln!(s, "faults: none latched");
            }
            Some((what, t)) => {
                let _ = writeln!(
                    s,
                    "faults: first {what} at {:.3} ms; latched during the run: {}",
                    t * 1e3,
                    self.faults_latched.join(", ")
                );
            }
        }
        for (t, text) in &self.log {
            let _ = writeln!(s, "note at {:.3} ms: {text}", t * 1e3);
        }
        if !self.expectations.is_empty() {
            let _ = writeln!(s, "expectations");
            for c in &self.expectations {
                let _ = writeln!(
                    s,
                    "  {} {}: {}",
                    if c.pass { "pass" } else { "FAIL" },
                    c.expected,
                    c.happened
                );
            }
        }
        for u in &self.unprotected {
            let _ = writeln!(s, "warning: {u}");
        }
        let _ = writeln!(
            s,
            "verdict: {}",
            match self.pass {
                None => "nothing to check",
                Some(true) => "PASS, every check above holds",
                Some(false) => "FAIL, see the lines marked FAIL",
            }
        );
        s
    }

    /// The report as JSON.
    pub fn json(&self) -> String {
        serde_json::to_string_pretty(self).unwrap_or_else(|e| format!("{{\"error\": \"{e}\"}}"))
    }
}
