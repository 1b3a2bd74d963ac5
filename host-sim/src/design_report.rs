//! `ampwright design`: every design method of `pi_core::design` applied to a
//! scenario's winding, sampling and spec, each analysed on the sampled loop,
//! with warnings in words, a choice, and the pictures' data.
//!
//! What the scenario gives the design:
//!
//! * the winding's `R` and `L` (`[motor]`; back-EMF is a disturbance here);
//! * the control period, and a one-period computation delay when the duty
//!   reaches the PWM more than a quarter period after the sample (an integer
//!   delay is what the analysis models; a shorter one is counted as none);
//! * the current filter's time constant: `1 / (2 pi fc)` for an RC filter,
//!   `1 / (Q w0)` (its low-frequency group delay) for a second-order one;
//! * the spec: `settling_time_s` and `overshoot_pct` (both needed).
//!
//! The designs run in f64 here and in f32 on the device, through the same code.

use pi_core::design::analysis::{self, Margins, OpenLoop};
use pi_core::design::step::StepMetrics;
use pi_core::design::{
    DesignError, Gains, RlPlant, Sampling, Spec, cancellation, discrete, modulus_optimum, root_locus,
};
use serde::Serialize;

use crate::model_error::ModelError;
use crate::plant::bridge::BridgeParams;
use crate::plant::motor::MotorParams;
use crate::plant::sense_chain::{SenseFilter, SenseParams};
use crate::plant::timing::Timing;
use crate::results::metrics::Spec as MetricSpec;
use crate::scenario::{Scenario, ScenarioError};

/// Fewer control periods than this per rise time is too coarse (common practice).
pub const MIN_PERIODS_PER_RISE: f64 = 10.0;
/// Below this phase margin the design is flagged, degrees (common practice).
pub const MIN_PHASE_MARGIN_DEG: f64 = 45.0;
/// Frequencies on the margin grid, Nyquist included.
pub const GRID_POINTS: usize = 4096;

/// What the design works from.
#[derive(Clone, Copy, Debug, Serialize)]
pub struct Basis {
    /// Winding resistance, ohm.
    pub resistance_ohm: f64,
    /// Winding inductance, H.
    pub inductance_h: f64,
    /// Control period, s.
    pub period_s: f64,
    /// Sample-to-update delay, control periods.
    pub delay_periods: f64,
    /// Current filter time constant, s (0: none).
    pub filter_tau_s: f64,
    /// 2 % settling time asked, s.
    pub settling_time_s: f64,
    /// Overshoot asked, fraction.
    pub overshoot: f64,
    /// Supply voltage, V, and the largest duty.
    pub supply_v: f64,
    /// Largest duty.
    pub max_duty: f64,
    /// Largest setpoint, A.
    pub setpoint_max_a: f64,
}

/// One method's result.
#[derive(Clone, Debug, Serialize)]
pub struct MethodResult {
    /// Method name.
    pub method: &'static str,
    /// Gains, if the method applies.
    pub kp_v_per_a: Option<f64>,
    /// Integral time, s.
    pub ti_s: Option<f64>,
    /// Setpoint weight recommended with it (0 removes the PI zero's overshoot).
    pub setpoint_weight: f64,
    /// Why the method does not apply.
    pub refused: Option<String>,
    /// Predicted step of the (near-)continuous loop: overshoot, fraction.
    pub continuous_overshoot: Option<f64>,
    /// Its 2 % settling time, s.
    pub continuous_settling_s: Option<f64>,
    /// Predicted step of the sampled loop with the recommended weight.
    pub discrete_overshoot: Option<f64>,
    /// Its 2 % settling time, s.
    pub discrete_settling_s: Option<f64>,
    /// Its 10-90 % rise time, s.
    pub discrete_rise_s: Option<f64>,
    /// Stable on the sampled loop.
    pub stable: bool,
    /// Phase margin, degrees.
    pub phase_margin_deg: Option<f64>,
    /// Gain margin, factor.
    pub gain_margin: Option<f64>,
    /// Gain crossover, Hz.
    pub crossover_hz: Option<f64>,
    /// Largest stable control period for these gains, s.
    pub largest_stable_period_s: Option<f64>,
    /// Meets the spec on the sampled loop (overshoot within it plus 1 point,
    /// settling within 10 %).
    pub meets_spec: bool,
    /// Warnings, one sentence each.
    pub warnings: Vec<String>,
}

/// The whole design report.
#[derive(Clone, Debug, Serialize)]
pub struct DesignReport {
    /// Scenario name.
    pub name: String,
    /// What the design used.
    pub basis: Basis,
    /// One row per method.
    pub methods: Vec<MethodResult>,
    /// Index of the chosen method, if any meets the spec.
    pub chosen: Option<usize>,
    /// Warnings about the spec itself.
    pub warnings: Vec<String>,
}

/// Why a design report could not be made.
#[derive(Debug)]
pub enum DesignFailure {
    /// The scenario lacks what the design needs or is invalid.
    Scenario(ScenarioError),
    /// The spec cannot be met; the message names the nearest feasible spec.
    Infeasible(String),
}

impl std::fmt::Display for DesignFailure {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            DesignFailure::Scenario(e) => write!(f, "{e}"),
            DesignFailure::Infeasible(why) => write!(f, "{why}"),
        }
    }
}

fn missing(field: &str) -> DesignFailure {
    DesignFailure::Scenario(ScenarioError::Invalid(ModelError::new(
        field,
        "(missing)",
        "given for a design (add it to the [spec] section)",
    )))
}

/// What a scenario gives the design.
pub fn basis(s: &Scenario) -> Result<Basis, DesignFailure> {
    basis_from(
        s.chain.motor.params(),
        s.chain.bridge.params(),
        s.chain.sense.params(),
        &s.timing,
        &s.spec,
        s.max_duty,
        s.setpoint_max_a,
    )
}

/// What the blocks of a scenario give the design.
pub fn basis_from(
    motor: &MotorParams,
    bridge: &BridgeParams,
    sense: &SenseParams,
    timing: &Timing,
    spec: &MetricSpec,
    max_duty: f64,
    setpoint_max_a: f64,
) -> Result<Basis, DesignFailure> {
    let t_pwm = 1.0 / bridge.pwm_frequency_hz;
    let sample = timing.sample_offset_s();
    let ready = sample + timing.params().computation_delay_s;
    let load = ((ready / t_pwm) * (1.0 + 1e-9)).floor() + 1.0;
    let effective_delay = load * t_pwm - sample;
    let filter_tau_s = match sense.filter {
        SenseFilter::None => 0.0,
        SenseFilter::Rc { cutoff_hz } => 1.0 / (2.0 * std::f64::consts::PI * cutoff_hz),
        SenseFilter::SecondOrder { cutoff_hz, q } => 1.0 / (q * 2.0 * std::f64::consts::PI * cutoff_hz),
    };
    Ok(Basis {
        resistance_ohm: motor.resistance_ohm,
        inductance_h: motor.inductance_h,
        period_s: timing.control_period_s(),
        delay_periods: effective_delay / timing.control_period_s(),
        filter_tau_s,
        settling_time_s: spec
            .settling_time_s
            .ok_or_else(|| missing("spec.settling_time_s"))?,
        overshoot: {
            let pct = spec.overshoot_pct.ok_or_else(|| missing("spec.overshoot_pct"))?;
            if !(pct > 0.0 && pct < 100.0) {
                return Err(DesignFailure::Scenario(ScenarioError::Invalid(ModelError::new(
                    "spec.overshoot_pct",
                    pct,
                    "above 0 and below 100 for a design",
                ))));
            }
            pct / 100.0
        },
        supply_v: bridge.supply_v,
        max_duty,
        setpoint_max_a,
    })
}

fn invalid<T: std::fmt::Debug>(e: DesignError<T>) -> DesignFailure
where
    DesignError<T>: std::fmt::Display,
{
    DesignFailure::Infeasible(e.to_string())
}

/// Designs with every method and analyses each.
pub fn design(s: &Scenario) -> Result<DesignReport, DesignFailure> {
    design_basis(&s.name, basis(s)?)
}

/// Designs from a basis (see [`basis_from`]).
pub fn design_basis(name: &str, b: Basis) -> Result<DesignReport, DesignFailure> {
    let plant = RlPlant::new(b.resistance_ohm, b.inductance_h).map_err(invalid)?;
    let sampling = Sampling::new(b.period_s, b.delay_periods, b.filter_tau_s).map_err(invalid)?;
    let spec = Spec::new(b.settling_time_s, b.overshoot).map_err(invalid)?;
    let mut warnings = Vec::new();
    // Rise of the second-order target, about (1.8 / wn) for these dampings
    // (Ogata's approximation; cited from memory): enough periods inside it?
    let rise = 1.8 / spec.natural_frequency();
    if rise < MIN_PERIODS_PER_RISE * b.period_s {
        warnings.push(format!(
            "the spec's rise time of about {:.3} ms spans only {:.1} control periods; common practice wants {MIN_PERIODS_PER_RISE} or more, so ask for a settling time of {:.3} ms or more or a shorter period",
            rise * 1e3,
            rise / b.period_s,
            b.settling_time_s * MIN_PERIODS_PER_RISE * b.period_s / rise * 1e3
        ));
    }
    // Bus headroom for the largest step: R i + L di/dt with di/dt ~ i / rise.
    let need_v = b.resistance_ohm * b.setpoint_max_a + b.inductance_h * b.setpoint_max_a / rise;
    let have_v = b.supply_v * b.max_duty;
    if need_v > have_v {
        warnings.push(format!(
            "a full step to {} A needs about {:.1} V (R i + L di/dt) but the bridge gives {:.1} V: large steps will saturate and be slower than the spec",
            b.setpoint_max_a, need_v, have_v
        ));
    }
    // A filter much faster than the period hardly moves the dominant poles: the
    // direct method, which cannot include it, designs without it, and the
    // analysis below puts it back.
    let unfiltered = Sampling::new(b.period_s, b.delay_periods, 0.0).map_err(invalid)?;
    let fast_filter = b.filter_tau_s > 0.0 && b.filter_tau_s < 0.1 * b.period_s;
    let direct = if fast_filter {
        discrete::design(&plant, &unfiltered, &spec)
    } else {
        discrete::design(&plant, &sampling, &spec)
    };
    let mut direct = analyse("direct discrete", direct, 0.0, &plant, &sampling, &spec);
    if fast_filter && direct.refused.is_none() {
        direct.warnings.push(format!(
            "designed without the {:.2} us filter (under a tenth of the period) and analysed with it",
            b.filter_tau_s * 1e6
        ));
    }
    let methods = vec![
        direct,
        analyse(
            "root locus",
            root_locus::design(&plant, &spec),
            0.0,
            &plant,
            &sampling,
            &spec,
        ),
        analyse(
            "modulus optimum",
            modulus_optimum::design(&plant, &sampling),
            1.0,
            &plant,
            &sampling,
            &spec,
        ),
        analyse(
            "pole-zero cancellation",
            // A first-order loop settles to 2 % in ln(50) / wc.
            cancellation::design(
                &plant,
                50f64.ln() / (2.0 * std::f64::consts::PI * b.settling_time_s),
            ),
            1.0,
            &plant,
            &sampling,
            &spec,
        ),
    ];
    let chosen = methods.iter().position(|m| m.meets_spec);
    if chosen.is_none() {
        let nearest = nearest_feasible_settling(&plant, &sampling, &spec);
        return Err(DesignFailure::Infeasible(match nearest {
            Some(ts) => format!(
                "no method meets a {:.3} ms settling time with {:.1} % overshoot on this sampled loop; the nearest feasible spec is {:.3} ms with the same overshoot",
                b.settling_time_s * 1e3,
                b.overshoot * 100.0,
                ts * 1e3
            ),
            None => format!(
                "no method meets a {:.3} ms settling time with {:.1} % overshoot on this sampled loop, and no slower settling time up to 8 L/R does either; shorten the control period",
                b.settling_time_s * 1e3,
                b.overshoot * 100.0
            ),
        }));
    }
    Ok(DesignReport {
        name: name.to_string(),
        basis: b,
        methods,
        chosen,
        warnings,
    })
}

/// The shortest settling time (same overshoot) the direct method meets, by a
/// geometric scan then bisection.
fn nearest_feasible_settling(
    plant: &RlPlant<f64>,
    sampling: &Sampling<f64>,
    spec: &Spec<f64>,
) -> Option<f64> {
    let meets = |ts: f64| -> bool {
        Spec::new(ts, spec.overshoot()).is_ok_and(|sp| {
            let unfiltered = sampling.with_filter(0.0);
            let fast = sampling.filter_tau_s() < 0.1 * sampling.period_s();
            let g = discrete::design(plant, if fast { &unfiltered } else { sampling }, &sp);
            analyse("direct discrete", g, 0.0, plant, sampling, &sp).meets_spec
        })
    };
    let mut lo = spec.settling_time_s();
    let mut hi = lo;
    let limit = 8.0 * plant.time_constant_s();
    let mut found = false;
    while hi < limit {
        hi *= 1.2;
        if meets(hi) {
            found = true;
            break;
        }
        lo = hi;
    }
    if !found {
        return None;
    }
    for _ in 0..40 {
        let mid = 0.5 * (lo + hi);
        if meets(mid) { hi = mid } else { lo = mid }
    }
    Some(hi)
}

fn analyse(
    method: &'static str,
    gains: Result<Gains<f64>, DesignError<f64>>,
    weight: f64,
    plant: &RlPlant<f64>,
    sampling: &Sampling<f64>,
    spec: &Spec<f64>,
) -> MethodResult {
    let mut r = MethodResult {
        method,
        kp_v_per_a: None,
        ti_s: None,
        setpoint_weight: weight,
        refused: None,
        continuous_overshoot: None,
        continuous_settling_s: None,
        discrete_overshoot: None,
        discrete_settling_s: None,
        discrete_rise_s: None,
        stable: false,
        phase_margin_deg: None,
        gain_margin: None,
        crossover_hz: None,
        largest_stable_period_s: None,
        meets_spec: false,
        warnings: Vec::new(),
    };
    let g = match gains {
        Ok(g) => g,
        Err(e) => {
            r.refused = Some(e.to_string());
            return r;
        }
    };
    r.kp_v_per_a = Some(g.kp_v_per_a);
    r.ti_s = Some(g.ti_s);
    let ts = sampling.period_s();
    let horizon = |period: f64| ((6.0 * spec.settling_time_s() / period) as usize).clamp(200, 200_000);
    // Near-continuous: a period a hundredth of the real one, no delay, no filter.
    if let Ok(fine) = Sampling::new(ts / 100.0, 0.0, 0.0) {
        let p = analysis::predict_step(
            &OpenLoop::new(plant, &fine, &g),
            ts / 100.0,
            horizon(ts / 100.0),
            weight,
        );
        r.continuous_overshoot = Some(p.overshoot);
        r.continuous_settling_s = p.settling_time_s;
    }
    let open = OpenLoop::new(plant, sampling, &g);
    r.stable = open.is_stable();
    let m: Margins<f64> = analysis::margins(&open, ts, GRID_POINTS);
    r.phase_margin_deg = m.phase_margin_deg;
    r.gain_margin = m.gain_margin;
    r.crossover_hz = m.crossover_hz;
    r.largest_stable_period_s = analysis::largest_stable_period(plant, sampling, &g);
    if !r.stable {
        r.warnings
            .push("the sampled loop is unstable with these gains".into());
        return r;
    }
    let p: StepMetrics<f64> = analysis::predict_step(&open, ts, horizon(ts), weight);
    r.discrete_overshoot = Some(p.overshoot);
    r.discrete_settling_s = p.settling_time_s;
    r.discrete_rise_s = p.rise_time_s;
    r.meets_spec = p.overshoot <= spec.overshoot() + 0.01
        && p.settling_time_s
            .is_some_and(|t| t <= 1.1 * spec.settling_time_s());
    if let Some(pm) = m.phase_margin_deg
        && pm < MIN_PHASE_MARGIN_DEG
    {
        r.warnings.push(format!(
            "phase margin {pm:.0} degrees is below {MIN_PHASE_MARGIN_DEG:.0}: the delay and hold cost more than the design allowed for"
        ));
    }
    if let (Some(c), Some(d)) = (r.continuous_overshoot, r.discrete_overshoot)
        && d > c + 0.05
    {
        r.warnings.push(format!(
            "sampling and delay raise the overshoot from {:.1} % (continuous) to {:.1} %",
            c * 100.0,
            d * 100.0
        ));
    }
    if let Some(lim) = r.largest_stable_period_s
        && ts > 0.5 * lim
    {
        r.warnings.push(format!(
            "the control period is {:.0} % of the largest stable one ({:.1} us) for these gains",
            100.0 * ts / lim,
            lim * 1e6
        ));
    }
    r
}

fn opt(v: Option<f64>, scale: f64, digits: usize) -> String {
    v.map_or("-".into(), |x| format!("{:.*}", digits, x * scale))
}

impl DesignReport {
    /// The chosen method.
    pub fn chosen(&self) -> Option<&MethodResult> {
        self.chosen.map(|k| &self.methods[k])
    }

    /// The table, for people.
    pub fn table(&self) -> String {
        use std::fmt::Write;
        let b = &self.basis;
        let mut s = String::new();
        let _ = writeln!(s, "{}: PI design", self.name);
        let _ = writeln!(
            s,
            "winding R = {} ohm, L = {} H; Ts = {} us, delay {:.2} periods, {}; spec {:.3} ms settling (2 %), {:.1} % overshoot\n",
            b.resistance_ohm,
            b.inductance_h,
            b.period_s * 1e6,
            b.delay_periods,
            if b.filter_tau_s > 0.0 {
                format!("filter tau {:.2} us", b.filter_tau_s * 1e6)
            } else {
                "no filter".into()
            },
            b.settling_time_s * 1e3,
            b.overshoot * 100.0
        );
        let _ = writeln!(
            s,
            "{:<23} {:>9} {:>9} {:>3} {:>8} {:>8} {:>8} {:>8} {:>6} {:>6} {:>8} {:>8}  meets",
            "method",
            "kp_v_a",
            "ti_ms",
            "b",
            "c_os_%",
            "c_ts_ms",
            "d_os_%",
            "d_ts_ms",
            "pm_deg",
            "gm",
            "fc_hz",
            "tsmax_us"
        );
        for m in &self.methods {
            if let Some(why) = &m.refused {
                let _ = writeln!(s, "{:<23} refused: {why}", m.method);
                continue;
            }
            let _ = writeln!(
                s,
                "{:<23} {:>9} {:>9} {:>3} {:>8} {:>8} {:>8} {:>8} {:>6} {:>6} {:>8} {:>8}  {}",
                m.method,
                opt(m.kp_v_per_a, 1.0, 3),
                opt(m.ti_s, 1e3, 4),
                m.setpoint_weight,
                opt(m.continuous_overshoot, 100.0, 2),
                opt(m.continuous_settling_s, 1e3, 3),
                opt(m.discrete_overshoot, 100.0, 2),
                opt(m.discrete_settling_s, 1e3, 3),
                opt(m.phase_margin_deg, 1.0, 1),
                opt(m.gain_margin, 1.0, 2),
                opt(m.crossover_hz, 1.0, 0),
                opt(m.largest_stable_period_s, 1e6, 1),
                if m.meets_spec { "yes" } else { "no" }
            );
        }
        let _ = writeln!(
            s,
            "\nc_: near-continuous loop; d_: the sampled loop with hold, delay and filter; b: setpoint weight"
        );
        for w in &self.warnings {
            let _ = writeln!(s, "warning: {w}");
        }
        for m in &self.methods {
            for w in &m.warnings {
                let _ = writeln!(s, "warning ({}): {w}", m.method);
            }
        }
        if let Some(m) = self.chosen() {
            let _ = writeln!(
                s,
                "chosen: {} (the first in the table that meets the spec)",
                m.method
            );
        }
        s
    }

    /// Firmware constants for the chosen gains.
    pub fn rust_snippet(&self) -> Option<String> {
        let m = self.chosen()?;
        Some(format!(
            "// PI gains for {name}, {method} design by `ampwright design`:\n\
             // {ts:.3} ms settling, {os:.1} % overshoot asked; predicted on the sampled loop\n\
             // {dos:.2} % and {dts} ms, phase margin {pm} degrees.\n\
             pub const KP_V_PER_A: f32 = {kp:e};\n\
             pub const TI_S: f32 = {ti:e};\n\
             pub const SETPOINT_WEIGHT: f32 = {b:.1};\n\
             // pi_core::PiGains::from_kp_ti(KP_V_PER_A, TI_S)?.with_setpoint_weight(SETPOINT_WEIGHT)?\n",
            name = self.name,
            method = m.method,
            ts = self.basis.settling_time_s * 1e3,
            os = self.basis.overshoot * 100.0,
            dos = m.discrete_overshoot.unwrap_or(f64::NAN) * 100.0,
            dts = opt(m.discrete_settling_s, 1e3, 3),
            pm = opt(m.phase_margin_deg, 1.0, 1),
            kp = m.kp_v_per_a.unwrap_or(f64::NAN) as f32,
            ti = m.ti_s.unwrap_or(f64::NAN) as f32,
            b = m.setpoint_weight,
        ))
    }

    /// The report as JSON.
    pub fn json(&self) -> String {
        serde_json::to_string_pretty(self).unwrap_or_else(|e| format!("{{\"error\": \"{e}\"}}"))
    }

    /// The open loop of the chosen design, for the plots.
    pub fn chosen_open_loop(&self) -> Option<(RlPlant<f64>, Sampling<f64>, Gains<f64>)> {
        let m = self.chosen()?;
        let b = &self.basis;
        Some((
            RlPlant::new(b.resistance_ohm, b.inductance_h).ok()?,
            Sampling::new(b.period_s, b.delay_periods, b.filter_tau_s).ok()?,
            Gains {
                kp_v_per_a: m.kp_v_per_a?,
                ti_s: m.ti_s?,
            },
        ))
    }
}
