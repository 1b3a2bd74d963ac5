//! The root locus of the sampled loop in the z-plane: the unit circle, the
//! open-loop poles (x) and zeros (o), the closed-loop poles as `Kp` runs from
//! near zero to three times the chosen value with `Ti` held, the desired
//! dominant poles and the achieved closed-loop poles.

use pi_core::design::analysis::OpenLoop;
use pi_core::design::poly::{Complex, Poly};
use pi_core::design::{Gains, RlPlant, Sampling};

use crate::plot::svg::{Axis, Canvas};

const LOCUS: &str = "#1f3b73";
const OPEN: &str = "#c62828";
const TARGET: &str = "#2e7d32";
const ACHIEVED: &str = "#e07a1f";

/// The SVG; `desired` is the desired dominant pole (upper half plane).
pub fn root_locus_svg(
    title: &str,
    plant: &RlPlant<f64>,
    sampling: &Sampling<f64>,
    gains: &Gains<f64>,
    desired: Option<(f64, f64)>,
) -> String {
    let (w, h) = (640.0, 640.0);
    let mut c = Canvas::new(w, h);
    let x = Axis {
        lo: -1.25,
        hi: 1.25,
        px_lo: 70.0,
        px_hi: w - 30.0,
    };
    let y = Axis {
        lo: -1.25,
        hi: 1.25,
        px_lo: h - 70.0,
        px_hi: 30.0,
    };
    c.frame(&x, &y, "Re z", "Im z", &|v| crate::plot::svg::format_tick(v));
    c.text(70.0, 20.0, title, 14.0, "start", "#111");
    let circle: Vec<(f64, f64)> = (0..=256)
        .map(|k| {
            let t = 2.0 * std::f64::consts::PI * k as f64 / 256.0;
            (x.px(t.cos()), y.px(t.sin()))
        })
        .collect();
    c.polyline(&circle, "#888", 1.0, Some("4 3"));
    // The locus.
    for k in 1..=300 {
        let scale = 3.0 * k as f64 / 300.0;
        let g = Gains {
            kp_v_per_a: gains.kp_v_per_a * scale,
            ti_s: gains.ti_s,
        };
        let (poles, n) = OpenLoop::new(plant, sampling, &g).poles();
        for z in &poles[..n] {
            if z.re.abs() < 1.25 && z.im.abs() < 1.25 {
                dot(&mut c, &x, &y, *z, 1.2, LOCUS);
            }
        }
    }
    let open = OpenLoop::new(plant, sampling, gains);
    let (num, den) = open.plant();
    let mut poles = vec![Complex::real(1.0)];
    if let Some(p) = Poly::new(den) {
        poles.extend_from_slice(&p.roots()[..p.degree()]);
    }
    for z in &poles {
        cross(&mut c, &x, &y, *z);
    }
    let mut zeros = vec![Complex::real(open.pi_zero())];
    let first = num.iter().position(|&c| c != 0.0).unwrap_or(num.len());
    if let Some(p) = Poly::new(&num[first..]) {
        zeros.extend_from_slice(&p.roots()[..p.degree()]);
    }
    for z in &zeros {
        ring(&mut c, &x, &y, *z, OPEN);
    }
    if let Some((re, im)) = desired {
        for s in [im, -im] {
            ring(&mut c, &x, &y, Complex::new(re, s), TARGET);
        }
    }
    let (achieved, n) = open.poles();
    for z in &achieved[..n] {
        dot(&mut c, &x, &y, *z, 4.0, ACHIEVED);
    }
    let ly = h - 18.0;
    let mut lx = 70.0;
    for (colour, label) in [
        (LOCUS, "locus (Kp x 0..3)"),
        (OPEN, "open-loop poles x, zeros o"),
        (TARGET, "desired poles"),
        (ACHIEVED, "achieved poles"),
    ] {
        c.polyline(&[(lx, ly - 4.0), (lx + 14.0, ly - 4.0)], colour, 3.0, None);
        c.text(lx + 18.0, ly, label, 11.0, "start", "#222");
        lx += 26.0 + 6.2 * label.len() as f64;
    }
    c.finish()
}

fn dot(c: &mut Canvas, x: &Axis, y: &Axis, z: Complex<f64>, r: f64, colour: &str) {
    let (px, py) = (x.px(z.re), y.px(z.im));
    c.rect(px - r, py - r, px + r, py + r, colour, 0.9);
}

fn cross(c: &mut Canvas, x: &Axis, y: &Axis, z: Complex<f64>) {
    let (px, py) = (x.px(z.re), y.px(z.im));
    c.polyline(&[(px - 6.0, py - 6.0), (px + 6.0, py + 6.0)], OPEN, 2.0, None);
    c.polyline(&[(px - 6.0, py + 6.0), (px + 6.0, py - 6.0)], OPEN, 2.0, None);
}

fn ring(c: &mut Canvas, x: &Axis, y: &Axis, z: Complex<f64>, colour: &str) {
    let (px, py) = (x.px(z.re), y.px(z.im));
    let pts: Vec<(f64, f64)> = (0..=24)
        .map(|k| {
            let t = 2.0 * std::f64::consts::PI * k as f64 / 24.0;
            (px + 6.0 * t.cos(), py + 6.0 * t.sin())
        })
        .collect();
    c.polyline(&pts, colour, 2.0, None);
}
