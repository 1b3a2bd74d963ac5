//! The root locus of the sampled loop in the z-plane, two panels: the whole
//! unit circle, and a zoom near z = 1 where the dominant poles are. Each
//! closed-loop pole's path is a continuous line as `Kp` rises (Ti held) from a
//! thousandth of the chosen value to half again past the gain where the loop
//! leaves the unit circle, which is marked with its `Kp`. A grid of constant
//! damping and natural frequency, the open-loop poles and zeros, the desired
//! and the achieved poles. All numbers come from [`crate::tuning::locus`].

use pi_core::design::poly::Complex;

use crate::plot::svg::{Axis, Canvas, Mark};
use crate::tuning::locus::{Locus, constant_damping, constant_natural_frequency};

const LOCUS: &str = "#1f3b73";
const OPEN: &str = "#c62828";
const TARGET: &str = "#2e7d32";
const ACHIEVED: &str = "#e07a1f";
const CROSS: &str = "#7b1fa2";
const GRID: &str = "#cfd8dc";

/// The SVG; `desired` is the desired dominant pole (upper half plane).
pub fn root_locus_svg(title: &str, locus: &Locus, desired: Option<(f64, f64)>) -> String {
    let (w, h) = (1040.0, 600.0);
    let mut c = Canvas::new(w, h);
    c.text(60.0, 24.0, title, 15.0, "start", "#111");
    let range = locus.scale_range;
    c.text(
        60.0,
        42.0,
        &format!(
            "Kp from {} to {} times the chosen value, Ti held; grid: damping 0.2 to 0.8, natural frequency in steps of pi/10 per period",
            crate::plot::svg::format_tick(range.0),
            crate::plot::svg::format_tick(range.1)
        ),
        11.0,
        "start",
        "#444",
    );
    // Left: the whole circle. Right: around z = 1, fitted to the dominant poles.
    let full = (-1.25, 1.25, -1.25, 1.25);
    let mut re_min = 1.0f64;
    let mut im_max = 0.05f64;
    for z in locus.chosen.iter().filter(|z| z.abs() > 0.5) {
        re_min = re_min.min(z.re);
        im_max = im_max.max(z.im.abs());
    }
    if let Some((re, im)) = desired {
        re_min = re_min.min(re);
        im_max = im_max.max(im.abs());
    }
    let half = (1.0 - re_min + 0.05).max(1.25 * im_max).clamp(0.08, 0.6);
    let zoom = (1.0 + 0.05 - 2.0 * half, 1.05, -half, half);
    for (k, (x0, x1, y0, y1)) in [full, zoom].into_iter().enumerate() {
        let px0 = 60.0 + 500.0 * k as f64;
        let x = Axis {
            lo: x0,
            hi: x1,
            px_lo: px0,
            px_hi: px0 + 440.0,
        };
        let y = Axis {
            lo: y0,
            hi: y1,
            px_lo: 510.0,
            px_hi: 70.0,
        };
        panel(&mut c, &x, &y, locus, desired, k == 1);
    }
    c.legend(60.0, h - 22.0, w - 20.0);
    c.finish()
}

fn inside(x: &Axis, y: &Axis, z: Complex<f64>) -> bool {
    z.re >= x.lo && z.re <= x.hi && z.im >= y.lo && z.im <= y.hi
}

/// Polyline pieces of a curve clipped to the panel.
fn clipped(x: &Axis, y: &Axis, pts: &[Complex<f64>]) -> Vec<Vec<(f64, f64)>> {
    let mut out = vec![Vec::new()];
    for z in pts {
        if inside(x, y, *z) {
            if let Some(last) = out.last_mut() {
                last.push((x.px(z.re), y.px(z.im)));
            }
        } else if out.last().is_some_and(|l| !l.is_empty()) {
            out.push(Vec::new());
        }
    }
    out.retain(|p| p.len() > 1);
    out
}

fn panel(c: &mut Canvas, x: &Axis, y: &Axis, locus: &Locus, desired: Option<(f64, f64)>, zoomed: bool) {
    let fmt = |v: f64| crate::plot::svg::format_tick(v);
    c.frame(
        x,
        y,
        if zoomed { "Re z (near z = 1)" } else { "Re z" },
        "Im z",
        &fmt,
    );
    // Grid: constant damping solid, constant natural frequency dashed.
    for zeta in [0.2, 0.4, 0.6, 0.8] {
        grid_curve(c, x, y, &constant_damping(zeta), None);
    }
    for k in 1..=10 {
        let wn_t = std::f64::consts::PI * k as f64 / 10.0;
        grid_curve(c, x, y, &constant_natural_frequency(wn_t), Some("2 2"));
    }
    let circle: Vec<Complex<f64>> = (0..=720)
        .map(|k| Complex::unit(2.0 * std::f64::consts::PI * k as f64 / 720.0))
        .collect();
    for piece in clipped(x, y, &circle) {
        c.polyline(&piece, "#888", 1.0, Some("4 3"));
    }
    // Branches.
    for b in &locus.branches {
        for piece in clipped(x, y, b) {
            c.series("closed-loop poles as Kp rises", &piece, LOCUS, 1.6, None);
        }
    }
    for z in locus.open_poles.iter().filter(|z| inside(x, y, **z)) {
        c.marker("open-loop poles", x.px(z.re), y.px(z.im), Mark::Cross, OPEN, 6.0);
    }
    for z in locus.open_zeros.iter().filter(|z| inside(x, y, **z)) {
        c.marker("open-loop zeros", x.px(z.re), y.px(z.im), Mark::Ring, OPEN, 6.0);
    }
    if let Some((re, im)) = desired {
        for s in [im, -im] {
            let z = Complex::new(re, s);
            if inside(x, y, z) {
                c.marker(
                    "desired dominant poles",
                    x.px(z.re),
                    y.px(z.im),
                    Mark::Ring,
                    TARGET,
                    7.0,
                );
            }
        }
    }
    for z in locus.chosen.iter().filter(|z| inside(x, y, **z)) {
        c.marker(
            "closed-loop poles, chosen gains",
            x.px(z.re),
            y.px(z.im),
            Mark::Dot,
            ACHIEVED,
            4.5,
        );
    }
    if let Some((_, kp, on_circle)) = &locus.crossing {
        let mut labelled = false;
        for z in on_circle
            .iter()
            .filter(|z| (z.abs() - 1.0).abs() < 1e-3 && inside(x, y, **z))
        {
            c.marker(
                "unstable beyond this Kp",
                x.px(z.re),
                y.px(z.im),
                Mark::Dot,
                CROSS,
                5.0,
            );
            if !labelled && z.im >= 0.0 {
                c.label(
                    x.px(z.re) + 8.0,
                    y.px(z.im) - 6.0,
                    &format!("Kp = {kp:.3} V/A"),
                    11.0,
                    "start",
                    CROSS,
                );
                labelled = true;
            }
        }
    }
}

/// A grid curve given in the upper half plane, drawn with its mirror image.
fn grid_curve(c: &mut Canvas, x: &Axis, y: &Axis, upper: &[Complex<f64>], dash: Option<&str>) {
    for sign in [1.0, -1.0] {
        let curve: Vec<Complex<f64>> = upper.iter().map(|z| Complex::new(z.re, sign * z.im)).collect();
        for piece in clipped(x, y, &curve) {
            c.polyline(&piece, GRID, 0.8, dash);
        }
    }
}
