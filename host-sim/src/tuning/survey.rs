//! Every design method of `pi_core::design` applied to a basis, each analysed
//! on the sampled loop (hold, fractional delay, filter), judged against the
//! spec by the one strict rule, and one chosen:
//!
//! * **meets the spec**: the predicted 2 % settling time, overshoot and (when
//!   asked) 10-90 % rise time are each within their limit by
//!   `pi_core::design::step::within`: no tolerance; a near miss is reported as
//!   what it misses by;
//! * **the choice**: among the methods that meet the spec, the one with the
//!   largest modulus margin (the shortest distance of the open loop's
//!   frequency response from -1, which bounds the gain and the phase margin
//!   together); none if none meets it;
//! * **the nearest feasible spec** when none meets it: the settling time
//!   closest to the one asked (same overshoot and rise time) at which this same
//!   survey chooses a method, found by a scan in steps of 3 % each way and a
//!   bisection towards the asked value.

use pi_core::design::analysis::{self, OpenLoop};
use pi_core::design::step;
use pi_core::design::{Gains, Method, Sampling};
use serde::Serialize;

use super::basis::Basis;
use crate::model_error::ModelError;
use crate::spec::PredictedStep as Predicted;

/// Fewer control periods than this per rise time is too coarse (common practice).
pub const MIN_PERIODS_PER_RISE: f64 = 10.0;
/// Below this phase margin the design is flagged, degrees (common practice).
pub const MIN_PHASE_MARGIN_DEG: f64 = 45.0;
/// Frequencies on the margin grid, Nyquist included.
pub const GRID_POINTS: usize = 4096;

/// One method's result.
#[derive(Clone, Debug, Serialize)]
pub struct MethodResult {
    /// The method.
    #[serde(skip)]
    pub kind: Method,
    /// Method name.
    pub method: &'static str,
    /// Gains, if the method applies: proportional, V/A.
    pub kp_v_per_a: Option<f64>,
    /// Integral time, s.
    pub ti_s: Option<f64>,
    /// The setpoint weight the method runs with (pi-core's rule).
    pub setpoint_weight: f64,
    /// Why the method does not apply.
    pub refused: Option<String>,
    /// The step of the near-continuous loop (a hundredth of the period, no
    /// delay, no filter), with the same weight.
    pub continuous: Option<Predicted>,
    /// The step of the sampled loop with hold, delay and filter.
    pub predicted: Option<Predicted>,
    /// Stable on the sampled loop.
    pub stable: bool,
    /// Phase margin, degrees.
    pub phase_margin_deg: Option<f64>,
    /// Gain margin, dB.
    pub gain_margin_db: Option<f64>,
    /// Modulus margin, `min |1 + L|` (the choice's measure).
    pub modulus_margin: Option<f64>,
    /// Gain crossover, Hz.
    pub crossover_hz: Option<f64>,
    /// Largest stable control period for these gains, s.
    pub largest_stable_period_s: Option<f64>,
    /// Meets every limit of the spec strictly.
    pub meets_spec: bool,
    /// What it misses and by how much, one phrase each ("settling by 0.10 ms").
    pub misses: Vec<String>,
    /// Warnings, one sentence each.
    pub warnings: Vec<String>,
}

/// The survey of all methods.
#[derive(Clone, Debug, Serialize)]
pub struct Survey {
    /// What the design used.
    pub basis: Basis,
    /// One row per method, in pi-core's order.
    pub methods: Vec<MethodResult>,
    /// Index of the chosen method.
    pub chosen: Option<usize>,
    /// The rule the choice follows, in words.
    pub choice_rule: &'static str,
    /// When none meets the spec: the nearest settling time that some method
    /// meets with the same overshoot (and rise time), s.
    pub nearest_settling_time_s: Option<f64>,
    /// Warnings about the spec itself.
    pub warnings: Vec<String>,
}

/// The choice rule, as the report states it.
pub const CHOICE_RULE: &str =
    "among the methods that meet every limit strictly, the largest modulus margin (min |1 + L|)";

impl Survey {
    /// The chosen method.
    pub fn chosen(&self) -> Option<&MethodResult> {
        self.chosen.and_then(|k| self.methods.get(k))
    }
}

/// Designs with every method, analyses each, chooses, and when none meets the
/// spec looks for the nearest settling time that does.
pub fn survey(basis: &Basis) -> Result<Survey, ModelError> {
    let mut s = survey_only(basis)?;
    if s.chosen.is_none() {
        s.nearest_settling_time_s = nearest_settling(basis);
    }
    Ok(s)
}

fn survey_only(b: &Basis) -> Result<Survey, ModelError> {
    let plant = b.plant()?;
    let sampling = b.sampling()?;
    let spec = b.spec()?;
    let mut warnings = Vec::new();
    // Rise of the second-order target, about 1.8 / wn for these dampings
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
    // analysis puts it back.
    let fast_filter = b.filter_tau_s > 0.0 && b.filter_tau_s < 0.1 * b.period_s;
    let methods: Vec<MethodResult> = Method::ALL
        .into_iter()
        .map(|m| {
            let design_sampling = if m == Method::DirectDiscrete && fast_filter {
                sampling.with_filter(0.0)
            } else {
                sampling
            };
            let mut r = analyse(m, m.design(&plant, &design_sampling, &spec), b, &sampling);
            if m == Method::DirectDiscrete && fast_filter && r.refused.is_none() {
                r.warnings.push(format!(
                    "designed without the {:.2} us filter (under a tenth of the period) and analysed with it",
                    b.filter_tau_s * 1e6
                ));
            }
            r
        })
        .collect();
    let chosen = methods
        .iter()
        .enumerate()
        .filter(|(_, m)| m.meets_spec)
        .fold(None, |best: Option<(usize, f64)>, (k, m)| {
            let mm = m.modulus_margin.unwrap_or(0.0);
            match best {
                Some((_, b)) if b >= mm => best,
                _ => Some((k, mm)),
            }
        })
        .map(|(k, _)| k);
    Ok(Survey {
        basis: *b,
        methods,
        chosen,
        choice_rule: CHOICE_RULE,
        nearest_settling_time_s: None,
        warnings,
    })
}

/// Whether the survey at this settling time chooses a method.
fn feasible(b: &Basis, settling_time_s: f64) -> bool {
    survey_only(&b.with_settling_time(settling_time_s)).is_ok_and(|s| s.chosen.is_some())
}

/// The settling time nearest the asked one (in ratio) at which the survey
/// chooses a method; `None` if none within a factor of 1000 either way.
pub fn nearest_settling(b: &Basis) -> Option<f64> {
    let ts = b.settling_time_s;
    const STEP: f64 = 1.03;
    let steps = (1000f64.ln() / STEP.ln()).ceil() as i32;
    for k in 1..=steps {
        // Slower first at each distance: a slower spec is the usual way out.
        for dir in [1, -1] {
            let hi = ts * STEP.powi(dir * k);
            if feasible(b, hi) {
                // Bisect between the last infeasible point and this one.
                let (mut out, mut inside) = (ts * STEP.powi(dir * (k - 1)), hi);
                for _ in 0..30 {
                    let mid = (out * inside).sqrt();
                    if feasible(b, mid) {
                        inside = mid;
                    } else {
                        out = mid;
                    }
                }
                return Some(inside);
            }
        }
    }
    None
}

/// Periods a predicted step runs: six settling times, within 200 to 200,000.
fn horizon(settling_time_s: f64, period_s: f64) -> usize {
    ((6.0 * settling_time_s / period_s) as usize).clamp(200, 200_000)
}

/// The predicted unit step of given gains with a setpoint weight on the
/// basis's sampled loop (the same analysis the survey uses).
pub fn predict(b: &Basis, gains: &Gains<f64>, setpoint_weight: f64) -> Result<Predicted, ModelError> {
    let open = OpenLoop::new(&b.plant()?, &b.sampling()?, gains);
    let steps = horizon(b.settling_time_s, b.period_s);
    Ok(analysis::predict_step(&open, b.period_s, steps, setpoint_weight).into())
}

fn fmt_ms(v: f64) -> String {
    format!("{:.3} ms", v * 1e3)
}

fn analyse(
    method: Method,
    gains: Result<Gains<f64>, pi_core::design::DesignError<f64>>,
    b: &Basis,
    sampling: &Sampling<f64>,
) -> MethodResult {
    let weight: f64 = method.setpoint_weight();
    let mut r = MethodResult {
        kind: method,
        method: method.name(),
        kp_v_per_a: None,
        ti_s: None,
        setpoint_weight: weight,
        refused: None,
        continuous: None,
        predicted: None,
        stable: false,
        phase_margin_deg: None,
        gain_margin_db: None,
        modulus_margin: None,
        crossover_hz: None,
        largest_stable_period_s: None,
        meets_spec: false,
        misses: Vec::new(),
        warnings: Vec::new(),
    };
    let g = match gains {
        Ok(g) => g,
        Err(e) => {
            r.refused = Some(e.to_string());
            r.misses.push("refused".into());
            return r;
        }
    };
    let Ok(plant) = b.plant() else { return r };
    r.kp_v_per_a = Some(g.kp_v_per_a);
    r.ti_s = Some(g.ti_s);
    let ts = b.period_s;
    let horizon = |period: f64| horizon(b.settling_time_s, period);
    if let Ok(fine) = Sampling::new(ts / 100.0, 0.0, 0.0) {
        let p = analysis::predict_step(
            &OpenLoop::new(&plant, &fine, &g),
            ts / 100.0,
            horizon(ts / 100.0),
            weight,
        );
        r.continuous = Some(p.into());
    }
    let open = OpenLoop::new(&plant, sampling, &g);
    let Ok(f) = super::figures::figures(b, &g) else {
        return r;
    };
    r.stable = f.stable;
    r.phase_margin_deg = f.phase_margin_deg;
    r.gain_margin_db = f.gain_margin_db;
    r.modulus_margin = Some(f.modulus_margin);
    r.crossover_hz = f.crossover_hz;
    r.largest_stable_period_s = f.largest_stable_period_s;
    if !r.stable {
        r.warnings
            .push("the sampled loop is unstable with these gains".into());
        r.misses.push("stability".into());
        return r;
    }
    let p = analysis::predict_step(&open, ts, horizon(ts), weight);
    r.predicted = Some(p.into());
    let mut misses = Vec::new();
    if let Some(by) = step::miss(p.settling_time_s, b.settling_time_s) {
        misses.push(format!("settling by {}", fmt_ms(by)));
    } else if p.settling_time_s.is_none() {
        misses.push("settling (not settled in the window)".into());
    }
    if let Some(by) = step::miss(Some(p.overshoot), b.overshoot) {
        misses.push(format!("overshoot by {:.2} points", by * 100.0));
    }
    if let Some(limit) = b.rise_time_s {
        if let Some(by) = step::miss(p.rise_time_s, limit) {
            misses.push(format!("rise by {}", fmt_ms(by)));
        } else if p.rise_time_s.is_none() {
            misses.push("rise (never reaches 90 %)".into());
        }
    }
    let lag = analysis::back_emf_lag(&plant, &g);
    let lag_ok = lag <= step::SETTLING_BAND;
    if !lag_ok {
        misses.push(format!(
            "settling while the rotor accelerates (the back-EMF holds the current {:.1} % below its request, outside the 2 % band)",
            lag * 100.0
        ));
    }
    let kick_v = weight * g.kp_v_per_a * b.setpoint_max_a + b.resistance_ohm * b.setpoint_max_a;
    if kick_v > b.supply_v * b.max_duty {
        r.warnings.push(format!(
            "a step from 0 to {} A asks for {:.1} V at once (b Kp i + R i) but the bridge gives {:.1} V: steps that large saturate, and settle slower than predicted",
            b.setpoint_max_a,
            kick_v,
            b.supply_v * b.max_duty
        ));
    }
    r.meets_spec = lag_ok
        && step::within(p.settling_time_s, b.settling_time_s)
        && step::within(Some(p.overshoot), b.overshoot)
        && b.rise_time_s
            .is_none_or(|limit| step::within(p.rise_time_s, limit));
    r.misses = misses;
    if let Some(pm) = f.phase_margin_deg
        && pm < MIN_PHASE_MARGIN_DEG
    {
        r.warnings.push(format!(
            "phase margin {pm:.0} degrees is below {MIN_PHASE_MARGIN_DEG:.0}: the delay and hold cost more than the design allowed for"
        ));
    }
    if let Some(c) = r.continuous
        && p.overshoot * 100.0 > c.overshoot_pct + 5.0
    {
        r.warnings.push(format!(
            "sampling and delay raise the overshoot from {:.1} % (continuous) to {:.1} %",
            c.overshoot_pct,
            p.overshoot * 100.0
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

/// What the design pictures draw, all computed here.
#[derive(Clone, Debug)]
pub struct Pictures {
    /// The chosen method's name.
    pub method: &'static str,
    /// The root locus of the chosen gains.
    pub locus: super::locus::Locus,
    /// The spec's dominant pole in z (upper half).
    pub desired: (f64, f64),
    /// The chosen loop's frequency response.
    pub bode: Vec<super::locus::BodePoint>,
    /// Its margins.
    pub margins: analysis::Margins<f64>,
    /// The other stable methods' frequency responses, when asked for.
    pub others: Vec<(&'static str, Vec<super::locus::BodePoint>)>,
}

impl Survey {
    /// The pictures' numbers for the chosen design (`None` if none was
    /// chosen); `overlay` adds every other method's frequency response.
    pub fn pictures(&self, overlay: bool) -> Option<Pictures> {
        let m = self.chosen()?;
        let b = &self.basis;
        let (plant, sampling, spec) = (b.plant().ok()?, b.sampling().ok()?, b.spec().ok()?);
        let gains_of = |r: &MethodResult| {
            Some(Gains {
                kp_v_per_a: r.kp_v_per_a?,
                ti_s: r.ti_s?,
            })
        };
        let gains = gains_of(m)?;
        let open = OpenLoop::new(&plant, &sampling, &gains);
        let margins = analysis::margins(&open, b.period_s, GRID_POINTS);
        let f_lo = margins
            .crossover_hz
            .map_or(1.0, |f| (f / 100.0).max(1e-3))
            .min(0.5e-4 / b.period_s);
        let sweep =
            |g: &Gains<f64>| super::locus::bode(&OpenLoop::new(&plant, &sampling, g), b.period_s, f_lo, 800);
        let others = if overlay {
            self.methods
                .iter()
                .filter(|r| r.method != m.method && r.stable)
                .filter_map(|r| Some((r.method, sweep(&gains_of(r)?))))
                .collect()
        } else {
            Vec::new()
        };
        Some(Pictures {
            method: m.method,
            locus: super::locus::locus(&plant, &sampling, &gains),
            desired: pi_core::design::discrete::target_pole(&spec, b.period_s),
            bode: sweep(&gains),
            margins,
            others,
        })
    }
}
