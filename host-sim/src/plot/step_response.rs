//! The step-response picture: current and setpoint against time on the left
//! axis, duty on the right axis, the 2 % settling band and the overshoot limit of
//! each step, the spec's rise and settling deadlines, the duty limits, and the
//! overcurrent threshold when it is in view.

use crate::plot::svg::{Axis, Canvas, padded};
use crate::results::metrics::{SETTLING_BAND, StepMetrics};
use crate::results::report::Report;
use crate::scenario::Scenario;
use crate::sim::trace::Trace;
use crate::spec::Spec;

// Colours chosen for this project: current dark blue, request grey, setpoint
// teal, duty orange, bands green, limits red.
const CURRENT: &str = "#1f3b73";
const REQUEST: &str = "#8a8a8a";
const SETPOINT: &str = "#2a9d8f";
const DUTY: &str = "#e07a1f";
const BAND: &str = "#4caf50";
const LIMIT: &str = "#c62828";

/// What to draw besides the trace.
#[derive(Clone, Debug, Default)]
pub struct StepPlot {
    /// Title at the top.
    pub title: String,
    /// The measured steps.
    pub steps: Vec<StepMetrics>,
    /// The spec (deadlines and the overshoot limit).
    pub spec: Spec,
    /// Overcurrent threshold, amperes (drawn at +/- when in view).
    pub overcurrent_a: Option<f64>,
    /// Largest duty (drawn at +/- on the duty axis).
    pub max_duty: Option<f64>,
}

impl StepPlot {
    /// What the step plot needs from a scenario and its report.
    pub fn of(scenario: &Scenario, report: &Report) -> Self {
        Self {
            title: format!("{}: step response ({} bridge)", report.name, report.bridge_mode),
            steps: report.steps.clone(),
            spec: scenario.spec,
            overcurrent_a: Some(scenario.overcurrent_a),
            max_duty: Some(scenario.max_duty),
        }
    }
}

/// The SVG document.
pub fn step_response_svg(trace: &Trace, plot: &StepPlot) -> String {
    let (w, h) = (960.0, 540.0);
    let (left, right, top, bottom) = (70.0, w - 80.0, 46.0, h - 70.0);
    let mut c = Canvas::new(w, h);
    let pts = &trace.points;
    let t_end = pts.last().map_or(1e-3, |p| p.t_s).max(1e-9);
    let x = Axis {
        lo: 0.0,
        hi: t_end,
        px_lo: left,
        px_hi: right,
    };
    let (mut lo, mut hi) = (0.0f64, 0.0f64);
    for p in pts {
        for v in [p.current_a, p.setpoint_a, p.request_a] {
            if v.is_finite() {
                lo = lo.min(v);
                hi = hi.max(v);
            }
        }
    }
    let (ylo, yhi) = padded(lo, hi, 0.12);
    let y = Axis {
        lo: ylo,
        hi: yhi,
        px_lo: bottom,
        px_hi: top,
    };
    let duty = Axis {
        lo: -1.05,
        hi: 1.05,
        px_lo: bottom,
        px_hi: top,
    };
    // Milliseconds for short runs, seconds for long ones.
    let (scale, unit) = if t_end > 2.0 {
        (1.0, "time (s)")
    } else {
        (1e3, "time (ms)")
    };
    let fmt = |t: f64| crate::plot::svg::format_tick(t * scale);
    c.frame(&x, &y, unit, "current (A)", &fmt);
    c.right_axis(right, &duty, "duty (signed)", DUTY);
    c.text(left, 28.0, &plot.title, 15.0, "start", "#111");

    // Spec: settling band and overshoot limit per step, deadlines.
    for s in &plot.steps {
        let dy = s.to_a - s.from_a;
        let x0 = x.px(s.at_s);
        let x1 = x.px(next_step_time(&plot.steps, s.at_s).unwrap_or(t_end));
        let band = SETTLING_BAND * dy.abs();
        c.rect(x0, y.px(s.to_a - band), x1, y.px(s.to_a + band), BAND, 0.18);
        if let Some(os) = plot.spec.overshoot_pct {
            let lim = s.to_a + dy * os / 100.0;
            c.polyline(&[(x0, y.px(lim)), (x1, y.px(lim))], LIMIT, 1.0, Some("6 3"));
        }
        for (deadline, label) in [
            (plot.spec.rise_time_s, "rise"),
            (plot.spec.settling_time_s, "settle"),
        ] {
            if let Some(d) = deadline {
                let xd = x.px(s.at_s + d);
                if xd <= right {
                    c.polyline(&[(xd, top), (xd, bottom)], BAND, 1.0, Some("3 3"));
                    c.text(xd + 3.0, top + 12.0, label, 10.0, "start", "#2e7d32");
                }
            }
        }
    }
    if let Some(oc) = plot.overcurrent_a {
        for v in [oc, -oc] {
            if v > ylo && v < yhi {
                c.polyline(&[(left, y.px(v)), (right, y.px(v))], LIMIT, 1.5, Some("8 4"));
            }
        }
    }
    if let Some(d) = plot.max_duty {
        for v in [d, -d] {
            c.polyline(&[(left, duty.px(v)), (right, duty.px(v))], DUTY, 0.8, Some("2 4"));
        }
    }

    // Data, thinned to at most about two points per pixel column.
    let stride = (pts.len() / ((right - left) as usize * 2)).max(1);
    let series = |f: &dyn Fn(&crate::sim::trace::TracePoint) -> f64, axis: &Axis| -> Vec<(f64, f64)> {
        pts.iter()
            .step_by(stride)
            .filter(|p| f(p).is_finite())
            .map(|p| (x.px(p.t_s), axis.px(f(p))))
            .collect()
    };
    c.polyline(&series(&|p| p.duty, &duty), DUTY, 1.0, None);
    c.polyline(&series(&|p| p.request_a, &y), REQUEST, 1.0, Some("4 3"));
    c.polyline(&series(&|p| p.setpoint_a, &y), SETPOINT, 1.2, None);
    c.polyline(&series(&|p| p.current_a, &y), CURRENT, 1.6, None);

    // Legend.
    let mut lx = left;
    let ly = h - 22.0;
    let mut entries: Vec<(&str, String)> = vec![
        (CURRENT, "current (true)".into()),
        (SETPOINT, "setpoint (slewed)".into()),
        (REQUEST, "request".into()),
        (DUTY, "duty".into()),
        (BAND, "2 % band".into()),
    ];
    if plot.spec.overshoot_pct.is_some() {
        entries.push((LIMIT, "overshoot limit".into()));
    }
    if let Some(oc) = plot.overcurrent_a {
        let shown = oc > ylo && oc < yhi;
        entries.push((
            LIMIT,
            format!("overcurrent {oc} A{}", if shown { "" } else { " (off scale)" }),
        ));
    }
    for (colour, label) in entries {
        c.polyline(&[(lx, ly - 4.0), (lx + 18.0, ly - 4.0)], colour, 3.0, None);
        c.text(lx + 22.0, ly, &label, 11.0, "start", "#222");
        lx += 30.0 + 6.5 * label.len() as f64;
    }
    c.finish()
}

fn next_step_time(steps: &[StepMetrics], after: f64) -> Option<f64> {
    steps
        .iter()
        .map(|s| s.at_s)
        .filter(|t| *t > after)
        .reduce(f64::min)
}
