//! Step-response metrics and the verdict against a spec.
//!
//! Each setpoint step in a run (a change of the requested current) is measured
//! on the true winding current at the sampling instants, from the time of the
//! request until the next request or the end of the run. Rise, overshoot, peak
//! and settling come from pi-core's one step-metrics routine
//! ([`pi_core::design::step`], where the definitions and their sources are),
//! the same one the design's prediction uses; each limit is judged by its one
//! rule, [`pi_core::design::step::within`] (strict). Two measures are the
//! simulator's own:
//!
//! | metric | definition |
//! |---|---|
//! | steady-state error | the request `y1` minus the mean of `i` over the last 10 % of the window |
//! | IAE | integral of `|y1 - i|` over the window (rectangle rule on the samples), A s |

use pi_core::design::step;

pub use crate::results::summary::{Interruption, MAX_TAIL_TICKS, MIN_STEP_A, Summary};
use crate::sim::runner::TickNote;
use crate::sim::trace::TracePoint;

/// Settling band, fraction of the step (pi-core's).
pub const SETTLING_BAND: f64 = step::SETTLING_BAND;

/// The metrics of one step.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct StepMetrics {
    /// Time of the request, seconds.
    pub at_s: f64,
    /// Request before, amperes (as the setpoint limits let it through).
    pub from_a: f64,
    /// Request after, amperes (as the setpoint limits let it through).
    pub to_a: f64,
    /// The scenario asked for more than the setpoint limits allow.
    pub clamped: bool,
    /// Why the step was not scored, if it was not.
    pub interrupted: Option<Interruption>,
    /// 10-90 % rise time, seconds (`None`: 90 % not reached).
    pub rise_time_s: Option<f64>,
    /// Overshoot, percent of the step.
    pub overshoot_pct: f64,
    /// Peak current, amperes.
    pub peak_a: f64,
    /// Time of the peak after the request, seconds.
    pub peak_time_s: f64,
    /// 2 % settling time, seconds (`None`: not settled inside the window).
    pub settling_time_s: Option<f64>,
    /// Steady-state error, amperes (request minus the mean of the last 10 % of
    /// the window, at most [`MAX_TAIL_TICKS`] ticks).
    pub steady_state_error_a: f64,
    /// Integral of the absolute error, ampere-seconds.
    pub iae_a_s: f64,
}

/// Finds the steps in a full-rate trace and measures each (a trace on its
/// own, without the run's notes of bus events and retunes: for tests and
/// reference comparisons; a run's report uses [`Summary`]).
pub fn steps(points: &[TracePoint]) -> Vec<StepMetrics> {
    let mut s = Summary::new(f64::NEG_INFINITY, f64::INFINITY);
    for p in points {
        s.observe(p, &TickNote::default());
    }
    s.finish();
    s.steps
}

/// Metrics of one step window; `window[0]` is the first tick with the new
/// request `y1`, `y0` the request before.
pub fn measure(window: &[TracePoint], y0: f64, y1: f64) -> Option<StepMetrics> {
    let mut s = Summary::new(f64::NEG_INFINITY, f64::INFINITY);
    s.start_from(y0);
    for p in window {
        s.observe(&TracePoint { request_a: y1, ..*p }, &TickNote::default());
    }
    s.finish();
    s.steps.pop()
}

pub use crate::spec::{PredictedStep, Spec};

/// One criterion checked on one step.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Check {
    /// Which step (index into the step list).
    pub step: usize,
    /// What was checked (`rise_time_s`, ...).
    pub criterion: &'static str,
    /// The value measured (`None`: never reached, counts as a failure).
    pub measured: Option<f64>,
    /// The limit.
    pub limit: f64,
    /// Limit minus measured (positive: inside the spec).
    pub margin: Option<f64>,
    /// Whether the criterion holds.
    pub pass: bool,
}

/// Checks every step that was not interrupted against the spec.
pub fn verdict(steps: &[StepMetrics], spec: &Spec) -> Vec<Check> {
    let mut out = Vec::new();
    for (k, s) in steps.iter().enumerate() {
        if s.interrupted.is_some() {
            continue;
        }
        let items: [(&'static str, Option<f64>, Option<f64>); 4] = [
            ("rise_time_s", spec.rise_time_s, s.rise_time_s),
            ("overshoot_pct", spec.overshoot_pct, Some(s.overshoot_pct)),
            ("settling_time_s", spec.settling_time_s, s.settling_time_s),
            (
                "steady_state_error_a",
                spec.steady_state_error_a,
                Some(s.steady_state_error_a.abs()),
            ),
        ];
        for (criterion, limit, measured) in items {
            let Some(limit) = limit else { continue };
            let margin = measured.map(|m| limit - m);
            out.push(Check {
                step: k,
                criterion,
                measured,
                limit,
                margin,
                pass: step::within(measured, limit),
            });
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn point(t_s: f64, request_a: f64, current_a: f64) -> TracePoint {
        TracePoint {
            t_s,
            request_a,
            setpoint_a: request_a,
            current_a,
            measured_a: current_a,
            counts: 0,
            commanded_v: 0.0,
            duty: 0.0,
            enabled: true,
            speed_rad_s: 0.0,
            bus_v: 24.0,
            supply_a: 0.0,
            winding_c: 20.0,
            fault_bits: 0,
            state: 1,
            i2t_level: 0.0,
            load: [f64::NAN; crate::plant::load::READOUTS],
        }
    }

    #[test]
    fn first_order_step_has_the_textbook_rise_and_settling_times() {
        // c(t) = 1 - exp(-t / tau): rise 10-90 % = tau ln 9, 2 % settling =
        // tau ln 50 (Ogata, first-order systems; chapter cited from memory).
        let tau = 1e-3;
        let dt = 1e-6;
        let mut pts = vec![point(0.0, 0.0, 0.0)];
        for k in 0..20_000 {
            let t = k as f64 * dt;
            pts.push(point(t, 2.0, 2.0 * (1.0 - (-t / tau).exp())));
        }
        let s = steps(&pts);
        assert_eq!(s.len(), 1);
        let m = s[0];
        assert!((m.rise_time_s.unwrap() - tau * 9f64.ln()).abs() < 2e-9);
        assert!((m.settling_time_s.unwrap() - tau * 50f64.ln()).abs() < 2e-9);
        assert_eq!(m.overshoot_pct, 0.0);
        // IAE of a first-order step: step * tau (less the truncated tail).
        assert!((m.iae_a_s - 2.0 * tau).abs() < 2.0 * tau * 1e-3);
    }

    #[test]
    fn second_order_overshoot_matches_the_damping_formula() {
        // Mp = exp(-zeta pi / sqrt(1 - zeta^2)) (Ogata, second-order systems).
        let (zeta, wn) = (0.5f64, 2000.0f64);
        let wd = wn * (1.0 - zeta * zeta).sqrt();
        let dt = 1e-6;
        let mut pts = vec![point(0.0, 0.0, 0.0)];
        for k in 0..20_000 {
            let t = k as f64 * dt;
            let c = 1.0
                - (-zeta * wn * t).exp()
                    * ((wd * t).cos() + zeta / (1.0 - zeta * zeta).sqrt() * (wd * t).sin());
            pts.push(point(t, 1.0, c));
        }
        let m = steps(&pts)[0];
        let expected = 100.0 * (-zeta * std::f64::consts::PI / (1.0 - zeta * zeta).sqrt()).exp();
        assert!(
            (m.overshoot_pct - expected).abs() < 1e-3,
            "{} vs {expected}",
            m.overshoot_pct
        );
        // Peak time pi / wd.
        assert!((m.peak_time_s - std::f64::consts::PI / wd).abs() < 2e-6);
    }

    #[test]
    fn verdict_reports_margins_and_unreached_targets() {
        let m = StepMetrics {
            at_s: 0.0,
            from_a: 0.0,
            to_a: 1.0,
            clamped: false,
            interrupted: None,
            rise_time_s: Some(0.4e-3),
            overshoot_pct: 6.0,
            peak_a: 1.06,
            peak_time_s: 1e-3,
            settling_time_s: None,
            steady_state_error_a: -0.001,
            iae_a_s: 0.0,
        };
        let spec = Spec {
            rise_time_s: Some(0.5e-3),
            overshoot_pct: Some(5.0),
            settling_time_s: Some(2e-3),
            steady_state_error_a: Some(0.01),
        };
        let v = verdict(&[m], &spec);
        let pass: Vec<_> = v.iter().map(|c| c.pass).collect();
        assert_eq!(pass, [true, false, false, true]);
        assert!((v[0].margin.unwrap() - 0.1e-3).abs() < 1e-12);
        assert_eq!(v[2].measured, None);
    }
}
