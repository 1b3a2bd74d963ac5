//! The open-loop frequency response of the sampled loop, `L(exp(j w Ts))`, from
//! a decade below the crossover (or 1 Hz) to the Nyquist frequency: magnitude
//! in dB above, phase in degrees below. The chosen gains' curve carries the
//! marks: the gain crossover with the phase margin, the phase crossover with
//! the gain margin. Other methods' curves may be overlaid, thinner. All numbers
//! come from [`crate::tuning::locus::bode`] and the analysis' margins.

use pi_core::design::analysis::Margins;

use crate::plot::svg::{Axis, Canvas, padded};
use crate::tuning::locus::{BodePoint, phase_crossover};

const CURVE: &str = "#1f3b73";
const MARK: &str = "#c62828";
const OTHERS: [&str; 4] = ["#2a9d8f", "#e07a1f", "#7b1fa2", "#8d6e63"];

/// One curve: its name and points.
pub type Curve<'a> = (&'a str, &'a [BodePoint]);

/// The SVG: `chosen` carries the margins `m`; `others` are drawn beside it.
pub fn frequency_response_svg(title: &str, chosen: Curve, m: &Margins<f64>, others: &[Curve]) -> String {
    let (w, h) = (900.0, 660.0);
    let mut c = Canvas::new(w, h);
    let (left, right) = (80.0, w - 30.0);
    let all: Vec<&BodePoint> = std::iter::once(chosen.1)
        .chain(others.iter().map(|o| o.1))
        .flat_map(|p| p.iter())
        .collect();
    let (f_lo, f_hi) = all
        .iter()
        .fold((f64::INFINITY, 0.0f64), |(a, b), p| (a.min(p.hz), b.max(p.hz)));
    let x = Axis {
        lo: f_lo.log10(),
        hi: f_hi.log10(),
        px_lo: left,
        px_hi: right,
    };
    let (mlo, mhi) = all
        .iter()
        .fold((0.0f64, 0.0f64), |(a, b), p| (a.min(p.db), b.max(p.db)));
    let (mlo, mhi) = padded(mlo.max(-120.0), mhi.min(120.0), 0.05);
    let ym = Axis {
        lo: mlo,
        hi: mhi,
        px_lo: 320.0,
        px_hi: 60.0,
    };
    let (plo, phi) = all
        .iter()
        .fold((-180.0f64, -90.0f64), |(a, b), p| (a.min(p.deg), b.max(p.deg)));
    let (plo, phi) = padded(plo.max(-720.0), phi.min(90.0), 0.05);
    let yp = Axis {
        lo: plo,
        hi: phi,
        px_lo: h - 110.0,
        px_hi: 360.0,
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
    c.frame(
        &x,
        &yp,
        "frequency (Hz, log; right edge: the Nyquist frequency)",
        "phase (deg)",
        &decade,
    );
    c.text(left, 24.0, title, 15.0, "start", "#111");
    let draw = |c: &mut Canvas, name: &str, pts: &[BodePoint], colour: &str, width: f64| {
        let mag: Vec<(f64, f64)> = pts
            .iter()
            .map(|p| (x.px(p.hz.log10()), ym.px(p.db.clamp(mlo, mhi))))
            .collect();
        let pha: Vec<(f64, f64)> = pts
            .iter()
            .map(|p| (x.px(p.hz.log10()), yp.px(p.deg.clamp(plo, phi))))
            .collect();
        c.series(name, &mag, colour, width, None);
        c.series(name, &pha, colour, width, None);
    };
    for (k, (name, pts)) in others.iter().enumerate() {
        draw(&mut c, name, pts, OTHERS[k % OTHERS.len()], 1.0);
    }
    draw(&mut c, chosen.0, chosen.1, CURVE, 2.0);
    c.series(
        "0 dB and -180 deg",
        &[(left, ym.px(0.0)), (right, ym.px(0.0))],
        MARK,
        1.0,
        Some("5 3"),
    );
    c.series(
        "0 dB and -180 deg",
        &[(left, yp.px(-180.0)), (right, yp.px(-180.0))],
        MARK,
        1.0,
        Some("5 3"),
    );
    if let (Some(fc), Some(pm)) = (m.crossover_hz, m.phase_margin_deg) {
        let px = x.px(fc.log10());
        c.series(
            "margins (chosen gains)",
            &[(px, yp.px(-180.0)), (px, yp.px(-180.0 + pm))],
            MARK,
            3.0,
            None,
        );
        c.polyline(
            &[(px, ym.px(0.0)), (px, yp.px(-180.0 + pm))],
            MARK,
            0.8,
            Some("2 3"),
        );
        c.label(
            px + 5.0,
            yp.px(-180.0 + pm) - 6.0,
            &format!("phase margin {pm:.1} deg at {fc:.0} Hz"),
            11.0,
            "start",
            MARK,
        );
    }
    match (phase_crossover(chosen.1), m.gain_margin_db()) {
        (Some((fp, db_at)), Some(gm)) => {
            let px = x.px(fp.log10());
            c.series(
                "margins (chosen gains)",
                &[(px, ym.px(0.0)), (px, ym.px(db_at.clamp(mlo, mhi)))],
                MARK,
                3.0,
                None,
            );
            c.polyline(&[(px, ym.px(db_at)), (px, yp.px(-180.0))], MARK, 0.8, Some("2 3"));
            c.label(
                px - 5.0,
                ym.px(0.0) - 8.0,
                &format!("gain margin {gm:.1} dB at {fp:.0} Hz"),
                11.0,
                "end",
                MARK,
            );
        }
        (_, Some(gm)) => {
            c.label(
                right - 4.0,
                ym.px(0.0) - 8.0,
                &format!("gain margin {gm:.1} dB (at Nyquist)"),
                11.0,
                "end",
                MARK,
            );
        }
        _ => c.label(
            right - 4.0,
            ym.px(0.0) - 8.0,
            "no phase crossover below Nyquist",
            11.0,
            "end",
            MARK,
        ),
    }
    c.legend(left, h - 44.0, right);
    c.finish()
}
