//! A capture against a model: the measured current and the model's above (the
//! model fitted to the capture and run on its own, or the simulation of a
//! scenario driven the way the board was), the voltage on a second axis, and
//! the difference (measured minus model) below.

use crate::plot::svg::{Axis, Canvas, padded};

const MEASURED: &str = "#1f3b73";
const MODEL: &str = "#e07a1f";
const VOLTAGE: &str = "#8a8a8a";
const RESIDUAL: &str = "#c62828";

/// The SVG of a capture against the model fitted to it: times (s), measured
/// and modelled current (A), voltage (V).
pub fn fit_svg(
    title: &str,
    subtitle: &str,
    time_s: &[f64],
    measured_a: &[f64],
    model_a: &[f64],
    voltage_v: &[f64],
) -> String {
    overlay_svg(
        title,
        subtitle,
        time_s,
        (measured_a, model_a, voltage_v),
        ("measured current", "fitted model", "measured - model"),
    )
}

/// The same picture for any model: `series` is (measured current, model
/// current, voltage), `names` their legend entries and the difference's.
pub fn overlay_svg(
    title: &str,
    subtitle: &str,
    time_s: &[f64],
    series: (&[f64], &[f64], &[f64]),
    names: (&str, &str, &str),
) -> String {
    let (measured_a, model_a, voltage_v) = series;
    let (w, h) = (960.0, 640.0);
    let (left, right) = (80.0, w - 80.0);
    let mut c = Canvas::new(w, h);
    let t_end = time_s.last().copied().unwrap_or(1.0);
    let t0 = time_s.first().copied().unwrap_or(0.0);
    let (scale, unit) = if t_end - t0 > 2.0 {
        (1.0, "time (s)")
    } else {
        (1e3, "time (ms)")
    };
    let x = Axis {
        lo: t0,
        hi: t_end,
        px_lo: left,
        px_hi: right,
    };
    let range = |v: &[f64]| {
        v.iter()
            .fold((0.0f64, 0.0f64), |(a, b), x| (a.min(*x), b.max(*x)))
    };
    let (ilo, ihi) = padded(
        range(measured_a).0.min(range(model_a).0),
        range(measured_a).1.max(range(model_a).1),
        0.08,
    );
    let yi = Axis {
        lo: ilo,
        hi: ihi,
        px_lo: 380.0,
        px_hi: 70.0,
    };
    let (vlo, vhi) = padded(range(voltage_v).0, range(voltage_v).1, 0.08);
    let yv = Axis {
        lo: vlo,
        hi: vhi,
        px_lo: 380.0,
        px_hi: 70.0,
    };
    let resid: Vec<f64> = measured_a.iter().zip(model_a).map(|(m, f)| m - f).collect();
    let r = range(&resid).0.abs().max(range(&resid).1.abs()).max(1e-12);
    let yr = Axis {
        lo: -1.1 * r,
        hi: 1.1 * r,
        px_lo: h - 110.0,
        px_hi: 420.0,
    };
    let fmt = |t: f64| crate::plot::svg::format_tick(t * scale);
    c.frame(&x, &yi, "", "current (A)", &fmt);
    c.right_axis(right, &yv, "voltage (V)", VOLTAGE);
    c.frame(&x, &yr, unit, &format!("{} (A)", names.2), &fmt);
    c.text(left, 26.0, title, 15.0, "start", "#111");
    c.text(left, 44.0, subtitle, 11.0, "start", "#444");
    let stride = (time_s.len() / ((right - left) as usize * 2)).max(1);
    let pts = |v: &[f64], axis: &Axis| -> Vec<(f64, f64)> {
        time_s
            .iter()
            .zip(v)
            .step_by(stride)
            .map(|(t, y)| (x.px(*t), axis.px(*y)))
            .collect()
    };
    c.series("voltage", &pts(voltage_v, &yv), VOLTAGE, 1.0, Some("4 3"));
    c.series(names.0, &pts(measured_a, &yi), MEASURED, 1.6, None);
    c.series(names.1, &pts(model_a, &yi), MODEL, 1.4, Some("6 3"));
    c.series(names.2, &pts(&resid, &yr), RESIDUAL, 1.0, None);
    c.legend(left, h - 40.0, right);
    c.finish()
}
