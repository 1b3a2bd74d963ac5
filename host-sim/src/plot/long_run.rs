//! The picture of a long run, where heat matters more than steps: the winding
//! temperature above, the I^2t model's heat as a fraction of its trip level
//! below with the trip level drawn, and the first fault marked on both.

use crate::plot::svg::{Axis, Canvas, padded};
use crate::sim::trace::Trace;

const WINDING: &str = "#c62828";
const I2T: &str = "#1f3b73";
const TRIP: &str = "#7b1fa2";
const FAULT: &str = "#8d6e63";

/// The SVG; `first_fault` is the first fault's description and time, s.
pub fn long_run_svg(title: &str, trace: &Trace, first_fault: Option<(&str, f64)>) -> String {
    let (w, h) = (960.0, 640.0);
    let (left, right) = (80.0, w - 40.0);
    let mut c = Canvas::new(w, h);
    let pts = &trace.points;
    let x = crate::plot::time_axis(pts, 1.0, left, right);
    let t_end = x.hi;
    let (tlo, thi) = pts.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), p| {
        (a.min(p.winding_c), b.max(p.winding_c))
    });
    let (tlo, thi) = padded(tlo, thi, 0.08);
    let yt = Axis {
        lo: tlo,
        hi: thi,
        px_lo: 300.0,
        px_hi: 60.0,
    };
    let lmax = pts.iter().fold(1.0f64, |m, p| m.max(p.i2t_level));
    let yl = Axis {
        lo: 0.0,
        hi: 1.1 * lmax,
        px_lo: h - 110.0,
        px_hi: 350.0,
    };
    let fmt = |t: f64| crate::plot::svg::format_tick(t);
    c.frame(&x, &yt, "", "winding (C)", &fmt);
    c.frame(&x, &yl, "time (s)", "I^2t heat / trip level", &fmt);
    c.text(left, 26.0, title, 15.0, "start", "#111");
    let series = |f: &dyn Fn(&crate::sim::trace::TracePoint) -> f64, axis: &Axis| {
        crate::plot::svg::trace_series(pts, &x, axis, right - left, f)
    };
    c.series(
        "winding temperature",
        &series(&|p| p.winding_c, &yt),
        WINDING,
        1.6,
        None,
    );
    c.series(
        "I^2t heat (fraction of the trip level)",
        &series(&|p| p.i2t_level, &yl),
        I2T,
        1.6,
        None,
    );
    c.series(
        "trip level",
        &[(left, yl.px(1.0)), (right, yl.px(1.0))],
        TRIP,
        1.2,
        Some("6 3"),
    );
    if let Some((what, t)) = first_fault
        && t <= t_end
    {
        let xf = x.px(t);
        c.series(
            "first fault",
            &[(xf, 60.0), (xf, h - 110.0)],
            FAULT,
            1.4,
            Some("2 3"),
        );
        let temp = pts.iter().find(|p| p.t_s >= t).map_or(f64::NAN, |p| p.winding_c);
        c.label(
            xf - 6.0,
            80.0,
            &format!("{what} at {t:.1} s, winding {temp:.0} C"),
            11.0,
            "end",
            FAULT,
        );
    }
    c.legend(left, h - 50.0, right);
    c.finish()
}
