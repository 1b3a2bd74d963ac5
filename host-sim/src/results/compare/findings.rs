//! The differences between a capture and its simulation, in words (see the
//! module above for the rules).

use super::{Comparison, Finding, MIN_SHARE, StepPair};
use crate::results::metrics;

/// A sample is steady when the simulated current moves by at most this share
/// of its range from the sample before and to the sample after.
const STEADY: f64 = 2e-4;

/// Below this normalised error the rest is not called a difference of the
/// transients (a choice: 0.5 % of the capture's spread).
const NOISE_NRMSE: f64 = 0.005;

fn mean_square(v: impl Iterator<Item = f64>) -> f64 {
    let (s, n) = v.fold((0.0, 0usize), |(s, n), x| (s + x * x, n + 1));
    if n == 0 { 0.0 } else { s / n as f64 }
}

fn median(mut v: Vec<f64>) -> f64 {
    if v.is_empty() {
        return 0.0;
    }
    v.sort_by(f64::total_cmp);
    let m = v.len() / 2;
    if v.len() % 2 == 1 {
        v[m]
    } else {
        0.5 * (v[m - 1] + v[m])
    }
}

/// The normalised error, the offset and delay, and the findings.
pub(super) fn explain(c: &mut Comparison, period_s: f64) {
    let n = c.capture_a.len();
    let cap = &c.capture_a;
    let sim = &c.simulated_a;
    let mean = cap.iter().sum::<f64>() / n.max(1) as f64;
    let spread = mean_square(cap.iter().map(|x| x - mean)).sqrt();
    let mse0 = mean_square(cap.iter().zip(sim).map(|(a, b)| a - b));
    c.nrmse = if spread > 0.0 {
        mse0.sqrt() / spread
    } else {
        mse0.sqrt()
    };
    if mse0 == 0.0 {
        c.findings.push(Finding {
            share: 0.0,
            text: "the capture and the simulation agree sample for sample".into(),
        });
        return;
    }
    // The offset is read where both have settled after a step (without steps,
    // where the simulation is steady): a level, not a transient.
    let range = sim.iter().fold(f64::NEG_INFINITY, |m, x| m.max(*x))
        - sim.iter().fold(f64::INFINITY, |m, x| m.min(*x));
    let still = |k: usize| {
        k > 0 && k + 1 < n && (sim[k] - sim[k - 1]).abs().max((sim[k + 1] - sim[k]).abs()) <= STEADY * range
    };
    let settled = |k: usize| -> bool {
        let t = c.time_s[k];
        c.steps.iter().enumerate().any(|(j, p)| {
            let end = c.steps.get(j + 1).map_or(f64::INFINITY, |q| q.capture.at_s);
            match (p.capture.settling_time_s, p.simulated.settling_time_s) {
                (Some(a), Some(b)) => t >= p.capture.at_s + a.max(b) && t < end,
                _ => false,
            }
        })
    };
    let mut steady: Vec<usize> = (0..n)
        .filter(|&k| still(k) && (c.steps.is_empty() || settled(k)))
        .collect();
    if steady.len() < 10 {
        steady = (0..n).filter(|&k| still(k)).collect();
    }
    if steady.len() < 10 {
        steady = (0..n).collect();
    }
    let mut offset = median(steady.iter().map(|&k| cap[k] - sim[k]).collect());
    let mut mse1 = mean_square(cap.iter().zip(sim).map(|(a, b)| a - b - offset));
    if mse1 >= mse0 {
        // No offset: taking one out makes the whole worse.
        (offset, mse1) = (0.0, mse0);
    }
    // Delay: the shift of the capture against the simulation that leaves the
    // least squared difference.
    let max_shift = (n / 10).clamp(1, 50) as isize;
    let shifted = |s: isize| -> f64 {
        mean_square((0..n as isize).filter_map(|k| {
            let j = k - s;
            (j >= 0 && (j as usize) < n).then(|| cap[k as usize] - offset - sim[j as usize])
        }))
    };
    let errs: Vec<(isize, f64)> = (-max_shift..=max_shift).map(|s| (s, shifted(s))).collect();
    let (best, best_e) = errs
        .iter()
        .copied()
        .min_by(|a, b| a.1.total_cmp(&b.1))
        .unwrap_or((0, mse1));
    let around = |s: isize| errs.iter().find(|(k, _)| *k == s).map(|(_, e)| *e);
    let frac: f64 = match (around(best - 1), around(best + 1)) {
        (Some(l), Some(r)) if l + r - 2.0 * best_e > 0.0 => 0.5 * (l - r) / (l + r - 2.0 * best_e),
        _ => 0.0,
    };
    let lag_samples = best as f64 + frac.clamp(-0.5, 0.5);
    // A delay is a shift that takes away at least half of what the offset
    // leaves; one that takes away less is a response of another speed or shape.
    let is_delay = mse1 > 0.0 && (mse1 - best_e) >= 0.5 * mse1 && lag_samples.abs() >= 0.25;
    let mse2 = if is_delay { best_e.min(mse1) } else { mse1 };
    c.offset_a = offset;
    c.lag_s = if is_delay { lag_samples * period_s } else { 0.0 };
    let share = |before: f64, after: f64| ((before - after) / mse0).max(0.0);
    let mut found = Vec::new();
    let s_off = share(mse0, mse1);
    if s_off >= MIN_SHARE {
        found.push(Finding {
            share: s_off,
            text: format!(
                "an offset: once settled the capture reads {} A {} the simulation (the current sensor's zero, or a voltage the bridge loses)",
                sig(offset.abs()),
                if offset > 0.0 { "above" } else { "below" }
            ),
        });
    }
    let s_lag = share(mse1, mse2);
    if is_delay && s_lag >= MIN_SHARE {
        found.push(Finding {
            share: s_lag,
            text: format!(
                "a delay: the capture {} the simulation by {} us ({:.2} samples): {} delay in the board (conversion, computation, filter) than the scenario's timing states",
                if lag_samples > 0.0 { "lags" } else { "leads" },
                sig(lag_samples.abs() * period_s * 1e6),
                lag_samples.abs(),
                if lag_samples > 0.0 { "more" } else { "less" }
            ),
        });
    }
    let s_rest = (mse2 / mse0).min(1.0);
    if s_rest >= MIN_SHARE && c.nrmse > NOISE_NRMSE {
        found.push(Finding {
            share: s_rest,
            text: "the transients differ (no offset or delay explains it): a resistance, an inductance or gains other than the scenario's; `ampwright identify` on the capture measures the winding".into(),
        });
    }
    found.sort_by(|a, b| b.share.total_cmp(&a.share));
    for (k, p) in c.steps.iter().enumerate() {
        found.extend(step_findings(k, p));
    }
    if found.is_empty() {
        found.push(Finding {
            share: 0.0,
            text: "no offset or delay explains 5 % of the difference, and the steps agree: what is left looks like noise".into(),
        });
    }
    c.findings = found;
}

/// Overshoot and settling of one step, where they differ.
fn step_findings(k: usize, p: &StepPair) -> Vec<Finding> {
    let (a, b) = (&p.capture, &p.simulated);
    let name = format!(
        "step {k} ({} A to {} A at {} ms)",
        sig(a.from_a),
        sig(a.to_a),
        sig(a.at_s * 1e3)
    );
    let mut out = Vec::new();
    let d_os = a.overshoot_pct - b.overshoot_pct;
    if d_os.abs() >= 2.0 {
        out.push(Finding {
            share: 0.0,
            text: format!(
                "{name}: {} overshoot on the capture, {:.1} % against {:.1} % (a {} loop than the scenario's)",
                if d_os > 0.0 { "more" } else { "less" },
                a.overshoot_pct,
                b.overshoot_pct,
                if d_os > 0.0 { "less damped" } else { "better damped" }
            ),
        });
    }
    match (a.settling_time_s, b.settling_time_s) {
        (Some(x), Some(y)) if x > 1.25 * y || x < 0.8 * y => out.push(Finding {
            share: 0.0,
            text: format!(
                "{name}: the capture settles {} than the simulation, {} ms against {} ms ({})",
                if x > y { "slower" } else { "faster" },
                sig(x * 1e3),
                sig(y * 1e3),
                if x > y {
                    "a slower tail: an integral action or a time constant L/R other than the scenario's"
                } else {
                    "a faster tail than the scenario predicts"
                }
            ),
        }),
        (None, Some(y)) => out.push(Finding {
            share: 0.0,
            text: format!(
                "{name}: the capture does not settle within its window; the simulation settles in {} ms",
                sig(y * 1e3)
            ),
        }),
        _ => {}
    }
    let dy = (a.to_a - a.from_a).abs();
    let level = b.steady_state_error_a - a.steady_state_error_a;
    if dy > 0.0
        && level.abs() >= metrics::SETTLING_BAND * dy
        && a.interrupted.is_none()
        && b.interrupted.is_none()
    {
        out.push(Finding {
            share: 0.0,
            text: format!(
                "{name}: the capture settles {:.1} % of the step {} the simulation ({} A against {} A)",
                level.abs() / dy * 100.0,
                if level > 0.0 { "above" } else { "below" },
                sig(a.to_a - a.steady_state_error_a),
                sig(b.to_a - b.steady_state_error_a)
            ),
        });
    }
    out
}

/// A figure to four significant digits, plain between a thousandth and a
/// million, in powers of ten outside; zero below a billionth of a unit (what
/// the capture's own rounding leaves).
pub fn sig(v: f64) -> String {
    let a = v.abs();
    if a < 1e-9 || !v.is_finite() {
        return if v.is_finite() { "0".into() } else { format!("{v}") };
    }
    if (1e-3..1e6).contains(&a) {
        let digits = (3 - a.log10().floor() as i32).clamp(0, 6) as usize;
        let t = format!("{v:.digits$}");
        if t.contains('.') {
            t.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            t
        }
    } else {
        format!("{v:.3e}")
    }
}
