//! The pictures of a sweep: a histogram of each chosen figure over the
//! runs (runs that pass and runs that fail stacked, the spec's limit
//! marked), and overshoot against settling time for every run with the
//! spec's box drawn.

use crate::plot::svg::{Axis, Canvas, Mark, format_tick, padded};
use crate::spec::Spec;
use crate::sweep::reduce::Metric;
use crate::sweep::{Origin, Run};

const PASS: &str = "#1f77b4";
const FAIL: &str = "#d62728";
const LIMIT: &str = "#7b1fa2";
const CORNER: &str = "#111111";

/// A run on the scatter: settling (ms), overshoot (%), passed, a corner.
type Dot = (f64, f64, bool, bool);

/// A metric in its plotted unit, and that unit's axis label.
fn plotted(metric: Metric) -> (f64, &'static str) {
    match metric {
        Metric::RiseTime => (1e3, "rise time (ms)"),
        Metric::SettlingTime => (1e3, "settling time (ms)"),
        Metric::Overshoot => (1.0, "overshoot (%)"),
        Metric::SteadyStateError => (1.0, "|steady-state error| (A)"),
        Metric::PeakCurrent => (1.0, "peak current (A)"),
        Metric::PhaseMargin => (1.0, "phase margin (deg)"),
        Metric::GainMargin => (1.0, "gain margin (dB)"),
        Metric::LargestStablePeriod => (1e6, "largest stable period (us)"),
    }
}

fn limit_of(metric: Metric, spec: &Spec) -> Option<f64> {
    match metric {
        Metric::RiseTime => spec.rise_time_s,
        Metric::SettlingTime => spec.settling_time_s,
        Metric::Overshoot => spec.overshoot_pct,
        Metric::SteadyStateError => spec.steady_state_error_a,
        _ => None,
    }
}

/// Histograms of `metrics` (up to four, two by two).
pub fn sweep_histograms_svg(title: &str, runs: &[Run], metrics: &[Metric], spec: &Spec) -> String {
    let (w, h) = (960.0, 700.0);
    let mut c = Canvas::new(w, h);
    c.text(80.0, 26.0, title, 15.0, "start", "#111");
    c.text(
        80.0,
        44.0,
        "each run's worst step: the largest overshoot, the longest rise and settling; its linear loop's phase margin",
        11.0,
        "start",
        "#555",
    );
    for (k, &metric) in metrics.iter().take(4).enumerate() {
        let (col, row) = ((k % 2) as f64, (k / 2) as f64);
        let (left, right) = (80.0 + col * 460.0, 80.0 + col * 460.0 + 380.0);
        let (top, bottom) = (70.0 + row * 290.0, 70.0 + row * 290.0 + 200.0);
        let (scale, label) = plotted(metric);
        let values: Vec<(f64, bool)> = runs
            .iter()
            .filter_map(|r| {
                let o = r.outcome.as_ref().ok()?;
                metric.of(o).map(|v| (v * scale, r.pass()))
            })
            .collect();
        let never = values.iter().filter(|(v, _)| !v.is_finite()).count();
        let finite: Vec<(f64, bool)> = values.iter().copied().filter(|(v, _)| v.is_finite()).collect();
        let limit = limit_of(metric, spec).map(|l| l * scale);
        let (mut lo, mut hi) = finite
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), (v, _)| {
                (a.min(*v), b.max(*v))
            });
        if let Some(l) = limit {
            lo = lo.min(l);
            hi = hi.max(l);
        }
        if !lo.is_finite() {
            (lo, hi) = (0.0, 1.0);
        }
        let (lo, hi) = padded(lo, hi, 0.05);
        let bins = 24usize;
        let width = (hi - lo) / bins as f64;
        let mut counts = vec![(0usize, 0usize); bins];
        for (v, pass) in &finite {
            let b = (((v - lo) / width) as usize).min(bins - 1);
            if *pass {
                counts[b].0 += 1;
            } else {
                counts[b].1 += 1;
            }
        }
        let peak = counts.iter().map(|(a, b)| a + b).max().unwrap_or(1).max(1);
        let x = Axis {
            lo,
            hi,
            px_lo: left,
            px_hi: right,
        };
        let y = Axis {
            lo: 0.0,
            hi: peak as f64 * 1.1,
            px_lo: bottom,
            px_hi: top,
        };
        c.frame(&x, &y, label, "runs", &|t| format_tick(t));
        for (b, &(pass, fail)) in counts.iter().enumerate() {
            let (x0, x1) = (
                x.px(lo + b as f64 * width) + 0.5,
                x.px(lo + (b + 1) as f64 * width) - 0.5,
            );
            if pass > 0 {
                c.band(
                    "runs that pass",
                    (x0, y.px(0.0)),
                    (x1, y.px(pass as f64)),
                    PASS,
                    0.85,
                );
            }
            if fail > 0 {
                c.band(
                    "runs that fail",
                    (x0, y.px(pass as f64)),
                    (x1, y.px((pass + fail) as f64)),
                    FAIL,
                    0.85,
                );
            }
        }
        if let Some(l) = limit {
            c.series(
                "spec limit",
                &[(x.px(l), top), (x.px(l), bottom)],
                LIMIT,
                1.4,
                Some("6 3"),
            );
        }
        if never > 0 {
            c.label(
                right - 6.0,
                top + 16.0,
                &format!("{never} runs never reached it"),
                11.0,
                "end",
                FAIL,
            );
        }
    }
    c.legend(80.0, h - 30.0, w - 40.0);
    c.finish()
}

/// Overshoot against settling time, one dot per run (corners as crosses),
/// the spec's limits drawn.
pub fn sweep_scatter_svg(title: &str, runs: &[Run], spec: &Spec) -> String {
    let (w, h) = (960.0, 640.0);
    let (left, right, top, bottom) = (80.0, w - 40.0, 60.0, h - 110.0);
    let mut c = Canvas::new(w, h);
    c.text(left, 26.0, title, 15.0, "start", "#111");
    c.text(
        left,
        44.0,
        "each run's worst step: its largest overshoot against its longest settling",
        11.0,
        "start",
        "#555",
    );
    let pts: Vec<Dot> = runs
        .iter()
        .filter_map(|r| {
            let o = r.outcome.as_ref().ok()?;
            let ts = Metric::SettlingTime.of(o)?;
            let os = Metric::Overshoot.of(o)?;
            ts.is_finite()
                .then_some((ts * 1e3, os, r.pass(), matches!(r.origin, Origin::Corner(_))))
        })
        .collect();
    let never = runs
        .iter()
        .filter(|r| {
            r.outcome
                .as_ref()
                .ok()
                .and_then(|o| Metric::SettlingTime.of(o))
                .is_some_and(|v| v.is_infinite())
        })
        .count();
    let ts_limit = spec.settling_time_s.map(|s| s * 1e3);
    let os_limit = spec.overshoot_pct;
    let fold = |f: &dyn Fn(&Dot) -> f64, extra: Option<f64>| {
        let (a, b) = pts
            .iter()
            .map(f)
            .chain(extra)
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
                (a.min(v), b.max(v))
            });
        if a.is_finite() {
            padded(a, b, 0.06)
        } else {
            (0.0, 1.0)
        }
    };
    let (xlo, xhi) = fold(&|p| p.0, ts_limit);
    let (ylo, yhi) = fold(&|p| p.1, os_limit);
    let x = Axis {
        lo: xlo,
        hi: xhi,
        px_lo: left,
        px_hi: right,
    };
    let y = Axis {
        lo: ylo,
        hi: yhi,
        px_lo: bottom,
        px_hi: top,
    };
    c.frame(&x, &y, "settling time, 2 % band (ms)", "overshoot (%)", &|t| {
        format_tick(t)
    });
    for &(ts, os, pass, corner) in &pts {
        let (name, colour, mark, r) = match (corner, pass) {
            (true, _) => ("corner", CORNER, Mark::Cross, 4.0),
            (false, true) => ("run that passes", PASS, Mark::Dot, 2.6),
            (false, false) => ("run that fails", FAIL, Mark::Dot, 2.6),
        };
        c.marker(name, x.px(ts), y.px(os), mark, colour, r);
    }
    if let Some(l) = ts_limit {
        c.series(
            "settling limit",
            &[(x.px(l), top), (x.px(l), bottom)],
            LIMIT,
            1.4,
            Some("6 3"),
        );
    }
    if let Some(l) = os_limit {
        c.series(
            "overshoot limit",
            &[(left, y.px(l)), (right, y.px(l))],
            LIMIT,
            1.4,
            Some("2 3"),
        );
    }
    if never > 0 {
        c.label(
            right - 6.0,
            top + 16.0,
            &format!("{never} runs never settled (not shown)"),
            11.0,
            "end",
            FAIL,
        );
    }
    c.legend(left, h - 50.0, right);
    c.finish()
}
