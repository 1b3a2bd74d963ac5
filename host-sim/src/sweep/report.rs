//! A sweep in words and numbers: the table a person reads, the CSV of every
//! run and the JSON a script reads.

use std::fmt::Write;

use super::reduce::{Metric, Reduced};
use super::{Nominal, Origin, Run};

fn origin_text(o: Origin) -> String {
    match o {
        Origin::MonteCarlo(k) => format!("run {k}"),
        Origin::Corner(j) => format!("corner {j}"),
    }
}

/// A metric's value in its table unit.
fn shown(metric: Metric, v: f64) -> String {
    if v.is_infinite() {
        return "never".into();
    }
    match metric {
        Metric::RiseTime | Metric::SettlingTime => format!("{:.3} ms", v * 1e3),
        Metric::LargestStablePeriod => format!("{:.1} us", v * 1e6),
        Metric::Overshoot => format!("{v:.2} %"),
        Metric::SteadyStateError => format!("{v:.4} A"),
        Metric::PeakCurrent => format!("{v:.3} A"),
        Metric::PhaseMargin => format!("{v:.1} deg"),
        Metric::GainMargin => format!("{v:.1} dB"),
    }
}

/// The summary table: what varied, the yield, the worst cases.
pub fn table(n: &Nominal, runs: &[Run], r: &Reduced) -> String {
    let mut t = String::new();
    let g = n.params.controller.gains;
    let _ = writeln!(
        t,
        "sweep of {}: one firmware (Kp = {} V/A, Ti = {} ms{}) on boards whose",
        n.params.name,
        g.map_or("-".into(), |g| format!("{:.4}", g.kp_v_per_a)),
        g.map_or("-".into(), |g| format!("{:.4}", g.ti_s * 1e3)),
        if n.designed.is_some() {
            ", designed from the spec"
        } else {
            ""
        }
    );
    for v in &n.tolerances.items {
        let _ = writeln!(
            t,
            "  {:<28} is {} (nominal {})",
            v.field.path(),
            v.spread.describe(),
            crate::results::compare::sig(v.field.get(&n.params))
        );
    }
    let _ = writeln!(t);
    match r.yield_fraction() {
        Some(y) => {
            let _ = writeln!(
                t,
                "yield {:.1} % ({} of {} Monte-Carlo runs meet the spec and every expectation with a stable loop; 95 % interval {:.1} % to {:.1} %)",
                y * 100.0,
                r.passed,
                r.runs,
                r.interval.0 * 100.0,
                r.interval.1 * 100.0
            );
        }
        None => {
            let _ = writeln!(t, "no Monte-Carlo runs");
        }
    }
    if !r.misses.is_empty() {
        let m: Vec<String> = r.misses.iter().map(|(n, k)| format!("{n} {k}")).collect();
        let _ = writeln!(t, "runs missing each: {}", m.join(", "));
    }
    if r.corners.0 > 0 {
        let _ = writeln!(t, "corners: {} of {} pass", r.corners.1, r.corners.0);
    }
    if r.failed_to_run > 0 {
        let _ = writeln!(
            t,
            "{} runs drew values outside the model's range and count as failed",
            r.failed_to_run
        );
    }
    let _ = writeln!(
        t,
        "\nworst case of each figure over every run, and the board that gave it:"
    );
    for w in &r.worst {
        let run = &runs[w.run];
        let values: Vec<String> = n
            .tolerances
            .items
            .iter()
            .zip(&run.values)
            .map(|(v, x)| format!("{} {}", short(v.field.path()), crate::results::compare::sig(*x)))
            .collect();
        let _ = writeln!(
            t,
            "  {:<24} {:>12}  {:<11} {}",
            w.metric.name(),
            shown(w.metric, w.value),
            origin_text(w.origin),
            values.join(", ")
        );
    }
    t
}

/// The last part of a path, for compact tables.
fn short(path: &str) -> &str {
    path.rsplit('.').next().unwrap_or(path)
}

/// Every run as CSV: its origin, the varied values, the verdicts and each
/// metric (empty when a run has none; `inf` for a time never reached).
pub fn csv(n: &Nominal, runs: &[Run]) -> String {
    let mut t = String::from("origin,index");
    for v in &n.tolerances.items {
        let _ = write!(t, ",{}", v.field.path());
    }
    t.push_str(",pass,spec_pass,expect_pass,stable");
    for m in Metric::ALL {
        let _ = write!(t, ",{}", m.name());
    }
    t.push_str(",first_fault,error\n");
    for run in runs {
        let (kind, k) = match run.origin {
            Origin::MonteCarlo(k) => ("monte_carlo", k),
            Origin::Corner(j) => ("corner", j),
        };
        let _ = write!(t, "{kind},{k}");
        for x in &run.values {
            let _ = write!(t, ",{x:e}");
        }
        match &run.outcome {
            Ok(o) => {
                let _ = write!(
                    t,
                    ",{},{},{},{}",
                    o.pass(),
                    o.spec_pass,
                    o.expect_pass,
                    o.figures.map_or(String::new(), |f| f.stable.to_string())
                );
                for m in Metric::ALL {
                    let _ = write!(t, ",{}", m.of(o).map_or(String::new(), |v| format!("{v:e}")));
                }
                let fault = o
                    .first_fault
                    .as_ref()
                    .map_or(String::new(), |(f, at)| format!("{f} at {at:e} s"));
                let _ = writeln!(t, ",{},", fault.replace(',', ";"));
            }
            Err(e) => {
                let _ = write!(t, ",false,,,");
                for _ in Metric::ALL {
                    t.push(',');
                }
                let _ = writeln!(t, ",{}", e.replace(',', ";"));
            }
        }
    }
    t
}

/// The sweep as JSON.
pub fn json(n: &Nominal, runs: &[Run], r: &Reduced, min_yield: Option<f64>) -> String {
    let worst: Vec<_> = r
        .worst
        .iter()
        .map(|w| {
            let values: serde_json::Map<String, serde_json::Value> = n
                .tolerances
                .items
                .iter()
                .zip(&runs[w.run].values)
                .map(|(v, x)| (v.field.path().to_string(), serde_json::json!(x)))
                .collect();
            serde_json::json!({
                "metric": w.metric.name(),
                "value": if w.value.is_finite() { serde_json::json!(w.value) } else { serde_json::Value::Null },
                "reached": w.value.is_finite(),
                "origin": w.origin,
                "values": values,
            })
        })
        .collect();
    let v = serde_json::json!({
        "scenario": n.params.name,
        "runs": r.runs,
        "passed": r.passed,
        "yield": r.yield_fraction(),
        "yield_interval_95": [r.interval.0, r.interval.1],
        "min_yield": min_yield,
        "corners": r.corners.0,
        "corners_passed": r.corners.1,
        "failed_to_run": r.failed_to_run,
        "misses": r.misses.iter().map(|(n, k)| serde_json::json!({"criterion": n, "runs": k})).collect::<Vec<_>>(),
        "worst": worst,
    });
    serde_json::to_string_pretty(&v).unwrap_or_default()
}
