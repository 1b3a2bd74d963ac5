//! Every design method's gains over the same tolerances: each method's
//! yield and worst cases, and the method a worst-case choice takes.

use super::reduce::{Metric, Reduced, reduce};
use super::{Nominal, plan, sweep};
use crate::tuning::DesignReport;

/// One method over the tolerances.
#[derive(Clone, Debug, PartialEq)]
pub struct MethodYield {
    /// The method's name.
    pub method: &'static str,
    /// Its gains and setpoint weight: V/A, s, 0 to 1.
    pub gains: (f64, f64, f64),
    /// The sweep reduced.
    pub reduced: Reduced,
}

impl MethodYield {
    /// The worst value of `metric` over the runs (`None`: no run had one).
    pub fn worst(&self, metric: Metric) -> Option<f64> {
        self.reduced
            .worst
            .iter()
            .find(|w| w.metric == metric)
            .map(|w| w.value)
    }
}

/// Sweeps `runs` Monte-Carlo boards with each method's gains (the methods
/// that gave stable gains), the same boards for every method. The setpoint
/// weight is the scenario's if it gives one, else the method's.
pub fn method_yields(
    n: &Nominal,
    report: &DesignReport,
    runs: u64,
    scenario_weight: Option<f64>,
    tick: &(dyn Fn() + Sync),
) -> Vec<MethodYield> {
    report
        .survey
        .methods
        .iter()
        .filter(|m| m.stable)
        .filter_map(|m| {
            let (kp, ti) = (m.kp_v_per_a?, m.ti_s?);
            let w = scenario_weight.unwrap_or(m.setpoint_weight);
            let with = n.with_gains(kp, ti, w);
            let runs = sweep(&with, &plan(&with, runs, None), tick);
            Some(MethodYield {
                method: m.method,
                gains: (kp, ti, w),
                reduced: reduce(&runs),
            })
        })
        .collect()
}

/// The worst-case choice: the highest yield; on a tie the shortest worst
/// settling time (never settling last), then the smallest worst overshoot.
pub fn choose(yields: &[MethodYield]) -> Option<usize> {
    let key = |m: &MethodYield| {
        (
            m.reduced.passed,
            m.worst(Metric::SettlingTime).unwrap_or(f64::INFINITY),
            m.worst(Metric::Overshoot).unwrap_or(f64::INFINITY),
        )
    };
    (0..yields.len()).reduce(|best, k| {
        let (a, b) = (key(&yields[best]), key(&yields[k]));
        let better = b.0 > a.0 || (b.0 == a.0 && (b.1 < a.1 || (b.1 == a.1 && b.2 < a.2)));
        if better { k } else { best }
    })
}

/// The methods as a table, the choice marked.
pub fn table(yields: &[MethodYield], chosen: Option<usize>, runs: u64) -> String {
    let mut t = format!(
        "over the tolerances ({runs} boards each, the same for every method):\n{:<26} {:>9} {:>17} {:>14} {:>14}\n",
        "method", "yield", "95 % interval", "worst settle", "worst overshoot"
    );
    for (k, m) in yields.iter().enumerate() {
        let r = &m.reduced;
        let settle = m.worst(Metric::SettlingTime).map_or("-".into(), |v| {
            if v.is_finite() {
                format!("{:.3} ms", v * 1e3)
            } else {
                "never".into()
            }
        });
        let os = m
            .worst(Metric::Overshoot)
            .map_or("-".into(), |v| format!("{v:.2} %"));
        t.push_str(&format!(
            "{:<26} {:>8.1}% {:>7.1} to {:>5.1}% {:>14} {:>14}{}\n",
            m.method,
            r.yield_fraction().unwrap_or(0.0) * 100.0,
            r.interval.0 * 100.0,
            r.interval.1 * 100.0,
            settle,
            os,
            if Some(k) == chosen {
                "  <- chosen by worst case"
            } else {
                ""
            }
        ));
    }
    t
}
