//! The inductance at each current level a capture visits: an iron core
//! saturates, and the inductance the current loop sees falls as the current
//! rises. Each step of the capture (a change of the setpoint, or, without one,
//! a jump of the voltage by 2 % of its range and ten times its usual change
//! from sample to sample) starts a window
//! that runs to the next step. R and the offset come from the windows'
//! settled ends alone (`i = v / R + offset` by least squares through them: a
//! static property, which a saturating core does not distort as it distorts
//! a fit of the whole capture); in each window the R-L model is then fitted
//! with those held and only L and the window's start current free (the one Levenberg-Marquardt fit,
//! [`super::refine::fit`]). What a window measures is the incremental
//! inductance `d psi / d i` over the currents its transient crosses, the
//! slope of the flux linkage, which is what a small step around a level sees;
//! the table gives the level each window settles at.

use serde::Serialize;

use super::capture::Capture;
use super::identify::Estimate;
use super::refine::{fit, simulate};

/// A window needs at least this many samples.
pub const MIN_WINDOW: usize = 20;

/// The inductance one step of the capture shows.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct LevelInductance {
    /// The current the window settles at (the mean of its last tenth), A.
    pub current_a: f64,
    /// The step's size: settled current less the one before the step, A.
    pub step_a: f64,
    /// The inductance, H, with its 95 % interval.
    pub inductance_h: Estimate,
    /// When the step starts, s from the capture's start.
    pub at_s: f64,
}

/// Where the steps are: sample indices at which a window starts.
pub(crate) fn steps(c: &Capture) -> Vec<usize> {
    let mut starts = Vec::new();
    match &c.setpoint_a {
        Some(sp) => {
            for k in 1..sp.len() {
                if (sp[k] - sp[k - 1]).abs() > 1e-9 {
                    starts.push(k);
                }
            }
        }
        None => {
            // A jump of 2 % of the voltage's range, and ten times its usual
            // change from sample to sample (a loop's voltage moves every sample).
            let v = &c.voltage_v;
            let (lo, hi) = v.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| {
                (a.min(*x), b.max(*x))
            });
            let mut changes: Vec<f64> = v.windows(2).map(|p| (p[1] - p[0]).abs()).collect();
            changes.sort_by(f64::total_cmp);
            let usual = changes.get(changes.len() / 2).copied().unwrap_or(0.0);
            let jump = (0.02 * (hi - lo)).max(10.0 * usual);
            for k in 1..v.len() {
                if (v[k] - v[k - 1]).abs() > jump {
                    starts.push(k);
                }
            }
        }
    }
    starts
}

/// The inductance at each level the capture visits, given the whole fit's
/// resistance, offset and voltage delay; empty when the capture has fewer
/// than two steps with windows long enough.
pub fn by_level(
    c: &Capture,
    resistance_ohm: f64,
    offset_a: f64,
    delay: usize,
    inductance_h: f64,
) -> Vec<LevelInductance> {
    let starts = steps(c);
    let n = c.current_a.len();
    // The windows, from the sample before each step to the next step.
    let windows: Vec<(usize, usize, usize)> = starts
        .iter()
        .enumerate()
        .map(|(j, &s)| {
            (
                s,
                s.saturating_sub(1 + delay),
                starts.get(j + 1).copied().unwrap_or(n),
            )
        })
        .filter(|&(_, from, to)| to > from + MIN_WINDOW)
        .collect();
    // R and the offset from the settled ends alone (a static property, which
    // a saturating core does not distort as it distorts the whole fit):
    // `i = v / R + offset` through the windows' last tenths.
    let tail_mean = |x: &[f64], to: usize, len: usize| x[to - len..to].iter().sum::<f64>() / len as f64;
    let ends: Vec<(f64, f64)> = windows
        .iter()
        .map(|&(_, from, to)| {
            let len = ((to - from) / 10).max(1);
            let v: Vec<f64> = (to - len..to)
                .map(|k| c.voltage_v[k.saturating_sub(delay)])
                .collect();
            (
                v.iter().sum::<f64>() / len as f64,
                tail_mean(&c.current_a, to, len),
            )
        })
        .collect();
    let (mut r, mut offset) = (resistance_ohm, offset_a);
    if ends.len() >= 2 {
        let m = ends.len() as f64;
        let (sv, si) = ends.iter().fold((0.0, 0.0), |(a, b), (v, i)| (a + v, b + i));
        let (mv, mi) = (sv / m, si / m);
        let (svv, svi) = ends.iter().fold((0.0, 0.0), |(a, b), (v, i)| {
            (a + (v - mv) * (v - mv), b + (v - mv) * (i - mi))
        });
        if svv > 0.0 && svi > 0.0 {
            let slope = svi / svv;
            (r, offset) = (1.0 / slope, mi - slope * mv);
        }
    }
    let mut out = Vec::new();
    for &(s, from, to) in &windows {
        let y = &c.current_a[from..to];
        // The voltage each sample of the window sees, already delayed.
        let v: Vec<f64> = (from..to).map(|k| c.voltage_v[k.saturating_sub(delay)]).collect();
        let model = |th: &[f64; 2], out: &mut Vec<f64>| {
            simulate(&[r, th[0], offset, th[1]], c.period_s, 0, &v, out);
        };
        let Some(f) = fit([inductance_h, y[0] - offset], [1e-12, 1e-6], y, model, |th| {
            th[0] > 0.0
        }) else {
            continue;
        };
        let tail = (y.len() / 10).max(1);
        let settled = y[y.len() - tail..].iter().sum::<f64>() / tail as f64 - offset;
        let before = c.current_a[from] - offset;
        out.push(LevelInductance {
            current_a: settled,
            step_a: settled - before,
            inductance_h: Estimate::of(f.theta[0], f.sd[0]),
            at_s: c.time_s[s] - c.time_s[0],
        });
    }
    if out.len() < 2 { Vec::new() } else { out }
}
