//! The step-response picture: the true current, the current the controller
//! read and the setpoint against time on the left axis, the duty on the right
//! axis with its zero level with the current's, the 2 % settling band and the
//! overshoot limit of each scored step, the spec's rise and settling deadlines
//! as brackets above the plot (so they cannot be read as measured instants),
//! the duty limits, the overcurrent threshold when it is in view, and markers
//! for faults, bus events and retunes. A subtitle states the gains, the bridge
//! and the spec. The legend lists exactly what was drawn.

use crate::plot::svg::{Axis, Canvas, padded};
use crate::results::metrics::{SETTLING_BAND, StepMetrics};
use crate::results::report::Report;
use crate::scenario::Scenario;
use crate::sim::trace::Trace;
use crate::spec::Spec;

// Colours chosen for this project: current dark blue, the controller's reading
// light blue, request grey, setpoint teal, duty orange, band green, overshoot
// limit purple, overcurrent red, deadlines dark grey, events brown.
const CURRENT: &str = "#1f3b73";
const MEASURED: &str = "#6fa8dc";
const REQUEST: &str = "#8a8a8a";
const SETPOINT: &str = "#2a9d8f";
const DUTY: &str = "#e07a1f";
const BAND: &str = "#4caf50";
const OVERSHOOT: &str = "#7b1fa2";
const OVERCURRENT: &str = "#c62828";
const DEADLINE: &str = "#555555";
const EVENT: &str = "#8d6e63";

/// Something that happened at a time, drawn as a marked vertical line.
#[derive(Clone, Debug, PartialEq)]
pub struct PlotEvent {
    /// When, s.
    pub t_s: f64,
    /// What, in a few words.
    pub label: String,
}

/// What to draw besides the trace.
#[derive(Clone, Debug, Default)]
pub struct StepPlot {
    /// Title at the top.
    pub title: String,
    /// The line under it: gains, bridge, spec.
    pub subtitle: String,
    /// The measured steps.
    pub steps: Vec<StepMetrics>,
    /// The spec (deadlines and the overshoot limit).
    pub spec: Spec,
    /// Overcurrent threshold, amperes (drawn at +/- when in view).
    pub overcurrent_a: Option<f64>,
    /// Largest duty (drawn at +/- on the duty axis).
    pub max_duty: Option<f64>,
    /// Faults, bus events, retunes.
    pub events: Vec<PlotEvent>,
}

impl StepPlot {
    /// What the step plot needs from a scenario and its report.
    pub fn of(scenario: &Scenario, report: &Report) -> Self {
        let g = scenario.loop_config.pi().gains();
        let sp = &scenario.spec;
        let mut spec = Vec::new();
        if let Some(v) = sp.rise_time_s {
            spec.push(format!("rise <= {} ms", v * 1e3));
        }
        if let Some(v) = sp.overshoot_pct {
            spec.push(format!("overshoot <= {v} %"));
        }
        if let Some(v) = sp.settling_time_s {
            spec.push(format!("settling <= {} ms", v * 1e3));
        }
        let subtitle = format!(
            "Kp = {:.4} V/A, Ti = {:.4} ms, b = {}; {} bridge at {} kHz; spec: {}",
            g.kp_v_per_a(),
            g.ti_s() * 1e3,
            g.setpoint_weight(),
            report.bridge_mode,
            report.pwm_frequency_hz / 1e3,
            if spec.is_empty() {
                "none".to_string()
            } else {
                spec.join(", ")
            }
        );
        let mut events = Vec::new();
        if let Some((what, t)) = &report.first_fault {
            events.push(PlotEvent {
                t_s: *t,
                label: format!("fault: {what}"),
            });
        }
        for inj in scenario.chain.injectors.list() {
            if let crate::plant::faults::FaultKind::BusLevel(v) = inj.kind {
                events.push(PlotEvent {
                    t_s: inj.start_s,
                    label: format!("bus to {v} V"),
                });
                if let Some(end) = inj.end_s {
                    events.push(PlotEvent {
                        t_s: end,
                        label: "bus back".into(),
                    });
                }
            }
        }
        for e in &scenario.events {
            if let pi_core::Command::Retune(_) = e.command {
                events.push(PlotEvent {
                    t_s: e.at_s,
                    label: "retune".into(),
                });
            }
        }
        Self {
            title: format!("{}: step response ({} bridge)", report.name, report.bridge_mode),
            subtitle,
            steps: report.steps.clone(),
            spec: scenario.spec,
            overcurrent_a: Some(scenario.overcurrent_a),
            max_duty: Some(scenario.max_duty),
            events,
        }
    }
}

/// Two axes with their zeros at the same height: the current's `[lo, hi]`
/// and the duty's `[dlo, dhi]` (each containing 0) are widened downward or
/// upward as little as needed so that 0 sits at the same fraction of both.
pub fn aligned_zero(current: (f64, f64), duty: (f64, f64)) -> ((f64, f64), (f64, f64)) {
    let frac = |(lo, hi): (f64, f64)| ((0.0 - lo) / (hi - lo)).clamp(0.0, 1.0);
    let f = frac(current).max(frac(duty)).clamp(0.05, 0.95);
    // Keep each axis's top (or bottom, when that is what it needs) and put 0 at f.
    let fit = |(lo, hi): (f64, f64)| {
        if frac((lo, hi)) < f {
            (-f * hi / (1.0 - f), hi)
        } else {
            (lo, -lo * (1.0 - f) / f)
        }
    };
    (fit(current), fit(duty))
}

/// The SVG document.
pub fn step_response_svg(trace: &Trace, plot: &StepPlot) -> String {
    let (w, h) = (960.0, 600.0);
    let (left, right, top, bottom) = (70.0, w - 80.0, 96.0, h - 96.0);
    let mut c = Canvas::new(w, h);
    let pts = &trace.points;
    let x = crate::plot::time_axis(pts, 1e-3, left, right);
    let t_end = x.hi;
    let (mut lo, mut hi) = (0.0f64, 0.0f64);
    for p in pts {
        for v in [p.current_a, p.setpoint_a, p.request_a, p.measured_a] {
            if v.is_finite() {
                lo = lo.min(v);
                hi = hi.max(v);
            }
        }
    }
    // The duty axis spans the duty drawn, and the limit on each side where
    // the duty goes more than a twentieth of the way to it.
    let md = plot.max_duty.unwrap_or(1.0);
    let (dmin, dmax) = pts
        .iter()
        .fold((0.0f64, 0.0f64), |(a, b), p| (a.min(p.duty), b.max(p.duty)));
    let side = |d: f64| {
        if d.abs() > 0.05 * md {
            md.max(d.abs()) * 1.05
        } else {
            d.abs() * 1.05 + 0.01
        }
    };
    let dspan = (-side(dmin), side(dmax));
    let ((ylo, yhi), (dlo, dhi)) = aligned_zero(padded(lo, hi, 0.12), dspan);
    let y = Axis {
        lo: ylo,
        hi: yhi,
        px_lo: bottom,
        px_hi: top,
    };
    let duty = Axis {
        lo: dlo,
        hi: dhi,
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
    // The levels the steps go to are worth reading off the axis.
    let mut levels: Vec<f64> = plot.steps.iter().flat_map(|s| [s.from_a, s.to_a]).collect();
    levels.sort_by(f64::total_cmp);
    levels.dedup();
    c.frame_with(&x, &y, unit, "current (A)", &fmt, &levels);
    c.right_axis(right, &duty, "duty (signed)", DUTY);
    c.text(left, 26.0, &plot.title, 15.0, "start", "#111");
    c.text(left, 44.0, &plot.subtitle, 11.0, "start", "#444");

    // Spec per scored step: the band, the overshoot limit, and the deadlines
    // as brackets from the request in the strip above the plot.
    for s in plot.steps.iter().filter(|s| s.interrupted.is_none()) {
        let dy = s.to_a - s.from_a;
        let x0 = x.px(s.at_s);
        let x1 = x.px(next_step_time(&plot.steps, s.at_s).unwrap_or(t_end));
        let band = SETTLING_BAND * dy.abs();
        c.band(
            "2 % settling band",
            (x0, y.px(s.to_a - band)),
            (x1, y.px(s.to_a + band)),
            BAND,
            0.18,
        );
        if let Some(os) = plot.spec.overshoot_pct {
            let lim = s.to_a + dy * os / 100.0;
            c.series(
                "overshoot limit",
                &[(x0, y.px(lim)), (x1, y.px(lim))],
                OVERSHOOT,
                1.2,
                Some("6 3"),
            );
        }
        for (k, (deadline, label)) in [
            (plot.spec.rise_time_s, "rise"),
            (plot.spec.settling_time_s, "settle"),
        ]
        .into_iter()
        .enumerate()
        {
            if let Some(d) = deadline {
                let xd = x.px(s.at_s + d).min(right);
                let yb = top - 30.0 + 14.0 * k as f64;
                c.series(
                    "spec deadlines (from each request)",
                    &[(x0, yb - 3.0), (x0, yb), (xd, yb), (xd, yb - 3.0)],
                    DEADLINE,
                    1.2,
                    None,
                );
                c.label(
                    xd + 3.0,
                    yb + 3.0,
                    &format!("{label} {} ms", d * 1e3),
                    9.0,
                    "start",
                    DEADLINE,
                );
            }
        }
    }
    if let Some(oc) = plot.overcurrent_a {
        for v in [oc, -oc] {
            if v > ylo && v < yhi {
                c.series(
                    &format!("overcurrent {oc} A"),
                    &[(left, y.px(v)), (right, y.px(v))],
                    OVERCURRENT,
                    2.0,
                    None,
                );
            }
        }
    }
    if let Some(d) = plot.max_duty {
        for v in [d, -d].into_iter().filter(|v| *v >= dlo && *v <= dhi) {
            c.series(
                "duty limits",
                &[(left, duty.px(v)), (right, duty.px(v))],
                DUTY,
                0.8,
                Some("2 4"),
            );
        }
    }
    for e in &plot.events {
        if e.t_s >= 0.0 && e.t_s <= t_end {
            let xe = x.px(e.t_s);
            c.series(
                "faults, bus events, retunes",
                &[(xe, top), (xe, bottom)],
                EVENT,
                1.2,
                Some("1 3"),
            );
            c.label(xe + 3.0, bottom - 6.0, &e.label, 9.0, "start", EVENT);
        }
    }

    // Data, thinned to at most about two points per pixel column.
    let series = |f: &dyn Fn(&crate::sim::trace::TracePoint) -> f64, axis: &Axis| {
        crate::plot::svg::trace_series(pts, &x, axis, right - left, f)
    };
    c.series("duty", &series(&|p| p.duty, &duty), DUTY, 1.0, None);
    if pts.iter().any(|p| p.request_a != p.setpoint_a) {
        c.series(
            "request",
            &series(&|p| p.request_a, &y),
            REQUEST,
            1.0,
            Some("4 3"),
        );
    }
    c.series(
        "setpoint (limited, slewed)",
        &series(&|p| p.setpoint_a, &y),
        SETPOINT,
        1.2,
        None,
    );
    c.series(
        "current read by the controller",
        &series(&|p| p.measured_a, &y),
        MEASURED,
        1.0,
        None,
    );
    c.series(
        "current (true)",
        &series(&|p| p.current_a, &y),
        CURRENT,
        1.6,
        None,
    );
    c.legend(left, h - 34.0, right);
    c.finish()
}

fn next_step_time(steps: &[StepMetrics], after: f64) -> Option<f64> {
    steps
        .iter()
        .map(|s| s.at_s)
        .filter(|t| *t > after)
        .reduce(f64::min)
}
