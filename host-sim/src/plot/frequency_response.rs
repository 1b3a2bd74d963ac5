//! The open-loop frequency response of the sampled loop, `L(exp(j w Ts))`, from
//! a decade below the crossover (or 1 Hz) to the Nyquist frequency: magnitude
//! in dB above, phase in degrees below, with the crossover, the phase margin and
//! the gain margin marked.

use pi_core::design::analysis::{self, Margins, OpenLoop};
use pi_core::design::poly::Complex;

use crate::plot::svg::{Axis, Canvas, padded};

const CURVE: &str = "#1f3b73";
const MARK: &str = "#c62828";

/// The SVG.
pub fn frequency_response_svg(title: &str, open: &OpenLoop<f64>, period_s: f64, m: &Margins<f64>) -> String {
    let (w, h) = (900.0, 620.0);
    let mut c = Canvas::new(w, h);
    let nyquist = 0.5 / period_s;
    let f_lo = m
        .crossover_hz
        .map_or(1.0, |f| (f / 100.0).max(1e-3))
        .min(nyquist / 1e4);
    let (lx0, lx1) = (f_lo.log10(), nyquist.log10());
    let n = 800;
    let mut pts = Vec::with_capacity(n + 1);
    let mut prev_phase: Option<f64> = None;
    for k in 0..=n {
        let lf = lx0 + (lx1 - lx0) * k as f64 / n as f64;
        let f = if k == n { nyquist } else { 10f64.powf(lf) };
        let l = open.eval(Complex::unit(2.0 * std::f64::consts::PI * f * period_s));
        let ph = prev_phase.map_or(l.arg(), |p| analysis::unwrap_phase(p, l.arg()));
        prev_phase = Some(ph);
        pts.push((f.log10(), 20.0 * l.abs().log10(), ph.to_degrees()));
    }
    let (left, right) = (80.0, w - 30.0);
    let x = Axis {
        lo: lx0,
        hi: lx1,
        px_lo: left,
        px_hi: right,
    };
    let (mlo, mhi) = pts
        .iter()
        .fold((0.0f64, 0.0f64), |(a, b), p| (a.min(p.1), b.max(p.1)));
    let (mlo, mhi) = padded(mlo.max(-120.0), mhi.min(120.0), 0.05);
    let ym = Axis {
        lo: mlo,
        hi: mhi,
        px_lo: 300.0,
        px_hi: 40.0,
    };
    let (plo, phi) = pts
        .iter()
        .fold((-180.0f64, -90.0f64), |(a, b), p| (a.min(p.2), b.max(p.2)));
    let (plo, phi) = padded(plo.max(-720.0), phi.min(90.0), 0.05);
    let yp = Axis {
        lo: plo,
        hi: phi,
        px_lo: h - 70.0,
        px_hi: 340.0,
    };
    // Label whole decades only.
    let decade = |v: f64| {
        if (v - v.round()).abs() < 1e-9 {
            crate::plot::svg::format_tick(10f64.powf(v.round()))
        } else {
            String::new()
        }
    };
    c.frame(&x, &ym, "", "magnitude (dB)", &decade);
    c.frame(&x, &yp, "frequency (Hz, log)", "phase (deg)", &decade);
    c.text(left, 24.0, title, 14.0, "start", "#111");
    let mag: Vec<(f64, f64)> = pts
        .iter()
        .map(|p| (x.px(p.0), ym.px(p.1.clamp(mlo, mhi))))
        .collect();
    let pha: Vec<(f64, f64)> = pts
        .iter()
        .map(|p| (x.px(p.0), yp.px(p.2.clamp(plo, phi))))
        .collect();
    c.polyline(&mag, CURVE, 1.6, None);
    c.polyline(&pha, CURVE, 1.6, None);
    c.polyline(&[(left, ym.px(0.0)), (right, ym.px(0.0))], MARK, 1.0, Some("5 3"));
    c.polyline(
        &[(left, yp.px(-180.0)), (right, yp.px(-180.0))],
        MARK,
        1.0,
        Some("5 3"),
    );
    if let (Some(fc), Some(pm)) = (m.crossover_hz, m.phase_margin_deg) {
        let px = x.px(fc.log10());
        c.polyline(&[(px, 40.0), (px, h - 70.0)], MARK, 1.0, Some("2 3"));
        c.polyline(&[(px, yp.px(-180.0)), (px, yp.px(-180.0 + pm))], MARK, 3.0, None);
        c.text(
            px + 5.0,
            yp.px(-180.0 + pm) - 6.0,
            &format!("phase margin {pm:.1} deg at {fc:.0} Hz"),
            11.0,
            "start",
            MARK,
        );
    }
    match m.gain_margin_db() {
        Some(db) => {
            c.text(
                right - 4.0,
                ym.px(0.0) - 8.0,
                &format!("gain margin {db:.1} dB"),
                11.0,
                "end",
                MARK,
            );
        }
        None => c.text(
            right - 4.0,
            ym.px(0.0) - 8.0,
            "no phase crossover below Nyquist",
            11.0,
            "end",
            MARK,
        ),
    }
    c.text(
        right - 4.0,
        h - 40.0,
        "right edge: Nyquist frequency",
        10.0,
        "end",
        "#555",
    );
    c.finish()
}
