//! The picture of what the load did over a run: the current and its setpoint
//! in the top panel, then one panel per quantity the load shows besides its
//! current (a plunger's travel, a cell's state of charge and terminal
//! voltage, a string's voltage), on one time axis. Levels worth reading off
//! (a charger's set voltage) are dashed lines in their panel; moments (the
//! charge turning to constant voltage, its end) are dotted lines through all
//! panels with their words.

use crate::plot::svg::{Axis, Canvas, format_tick, padded, trace_series};
use crate::plot::time_axis;
use crate::results::report::Report;
use crate::sim::trace::{Trace, TracePoint};

// Colours chosen for this project: current dark blue, setpoint teal, the
// readouts plum and ochre, levels red, moments brown.
const CURRENT: &str = "#1f3b73";
const SETPOINT: &str = "#2a9d8f";
const READOUT: [&str; 2] = ["#7d3c98", "#b7791f"];
const LEVEL: &str = "#c62828";
const MOMENT: &str = "#8d6e63";

/// A level drawn across one readout's panel.
#[derive(Clone, Debug, PartialEq)]
pub struct Level {
    /// Which readout (its index in the trace's readouts).
    pub readout: usize,
    /// The value, in the readout's unit.
    pub value: f64,
    /// What it is, for the legend.
    pub label: String,
}

/// What to draw besides the trace.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct LoadPlot {
    /// Title at the top.
    pub title: String,
    /// Levels in the readouts' panels.
    pub levels: Vec<Level>,
    /// Moments: time, s, and words.
    pub moments: Vec<(f64, String)>,
}

impl LoadPlot {
    /// What the load picture needs from a run's report and trace: the
    /// title, and a charge's set voltage and moments when there was one.
    pub fn of(report: &Report, trace: &Trace) -> Self {
        let mut plot = Self {
            title: format!("{}: the load over the run", report.name),
            ..Self::default()
        };
        if let Some(c) = &report.charge {
            if let Some(k) = trace.readouts.iter().position(|r| r.column == "cell_v") {
                plot.levels.push(Level {
                    readout: k,
                    value: c.voltage_v,
                    label: format!("charge voltage {:.3} V", c.voltage_v),
                });
            }
            if let Some(t) = c.constant_voltage_from_s {
                plot.moments.push((t, "constant voltage".into()));
            }
            if let Some((t, _)) = &c.ended {
                plot.moments.push((*t, "charge ended".into()));
            }
        }
        plot
    }
}

const TOP: f64 = 60.0;
const PANEL: f64 = 170.0;
const GAP: f64 = 30.0;

/// The SVG.
pub fn load_run_svg(trace: &Trace, plot: &LoadPlot) -> String {
    let pts = &trace.points;
    let panels = 1 + trace.readouts.len();
    let bottom_of_panels = TOP + panels as f64 * PANEL + (panels - 1) as f64 * GAP;
    let (w, h) = (960.0, bottom_of_panels + 110.0);
    let (left, right) = (90.0, w - 40.0);
    let mut c = Canvas::new(w, h);
    c.text(left, 30.0, &plot.title, 15.0, "start", "#111");
    let x = time_axis(pts, 1.0, left, right);
    let t_end = x.hi;
    let fmt = |t: f64| format_tick(t);
    let panel_axis = |k: usize, lo: f64, hi: f64| {
        let top = TOP + k as f64 * (PANEL + GAP);
        let (lo, hi) = padded(lo, hi, 0.08);
        Axis {
            lo,
            hi,
            px_lo: top + PANEL,
            px_hi: top,
        }
    };
    let range = |f: &dyn Fn(&TracePoint) -> f64, extra: &[f64]| {
        pts.iter()
            .map(f)
            .chain(extra.iter().copied())
            .filter(|v| v.is_finite())
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
                (a.min(v), b.max(v))
            })
    };
    let last = panels - 1;
    let x_label = |k: usize| if k == last { "time (s)" } else { "" };

    let (lo, hi) = range(&|p| p.current_a.max(p.setpoint_a), &[0.0]);
    let (lo2, _) = range(&|p| p.current_a.min(p.setpoint_a), &[0.0]);
    let yi = panel_axis(0, lo.min(lo2), hi);
    c.frame(&x, &yi, x_label(0), "current (A)", &fmt);
    let series = |f: &dyn Fn(&TracePoint) -> f64, y: &Axis| trace_series(pts, &x, y, right - left, f);
    c.series(
        "setpoint",
        &series(&|p| p.setpoint_a, &yi),
        SETPOINT,
        1.4,
        Some("5 3"),
    );
    c.series("current", &series(&|p| p.current_a, &yi), CURRENT, 1.6, None);

    for (k, r) in trace.readouts.iter().enumerate() {
        let levels: Vec<&Level> = plot.levels.iter().filter(|l| l.readout == k).collect();
        let values: Vec<f64> = levels.iter().map(|l| l.value).collect();
        let (lo, hi) = range(&|p| p.load[k], &values);
        let y = panel_axis(k + 1, lo, hi);
        c.frame_with(
            &x,
            &y,
            x_label(k + 1),
            &format!("{} ({})", r.name, r.unit),
            &fmt,
            &values,
        );
        c.series(
            r.name,
            &series(&|p| p.load[k], &y),
            READOUT[k % READOUT.len()],
            1.6,
            None,
        );
        for l in levels {
            let py = y.px(l.value);
            c.series(&l.label, &[(left, py), (right, py)], LEVEL, 1.2, Some("6 3"));
        }
    }

    for (t, what) in &plot.moments {
        if *t > t_end {
            continue;
        }
        let xm = x.px(*t);
        c.series(
            "events",
            &[(xm, TOP), (xm, bottom_of_panels)],
            MOMENT,
            1.2,
            Some("2 3"),
        );
        c.label(xm + 4.0, TOP + 14.0, what, 11.0, "start", MOMENT);
    }
    c.legend(left, h - 50.0, right);
    c.finish()
}
