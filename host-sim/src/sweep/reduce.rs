//! The runs reduced, serially and in run order: the yield with its
//! confidence interval, and the worst case of each figure with the run
//! that gave it.

use super::{Origin, Outcome, Run};

/// The standard normal quantile for a two-sided 95 % interval.
pub const Z95: f64 = 1.959_963_984_540_054;

/// The Wilson score interval of a binomial proportion: `passed` of `n` at
/// the two-sided level whose normal quantile is `z` (Wilson, "Probable
/// inference, the law of succession, and statistical inference", JASA
/// 1927; recommended over the plain normal interval by Agresti and Coull,
/// The American Statistician 1998; cited from memory). `(0, 1)` for no runs.
pub fn wilson(passed: u64, n: u64, z: f64) -> (f64, f64) {
    if n == 0 {
        return (0.0, 1.0);
    }
    let (n, p) = (n as f64, passed as f64 / n as f64);
    let z2 = z * z;
    let centre = (p + z2 / (2.0 * n)) / (1.0 + z2 / n);
    let half = z / (1.0 + z2 / n) * (p * (1.0 - p) / n + z2 / (4.0 * n * n)).sqrt();
    ((centre - half).max(0.0), (centre + half).min(1.0))
}

/// A figure a sweep reports the worst case of.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Metric {
    /// 10-90 % rise time, the largest of a run's steps (never reached:
    /// the worst).
    RiseTime,
    /// Overshoot, the largest.
    Overshoot,
    /// 2 % settling time, the largest (never settled: the worst).
    SettlingTime,
    /// |steady-state error|, the largest.
    SteadyStateError,
    /// The highest true current.
    PeakCurrent,
    /// Phase margin, the smallest.
    PhaseMargin,
    /// Gain margin, the smallest.
    GainMargin,
    /// The longest stable control period, the smallest.
    LargestStablePeriod,
}

impl Metric {
    /// Every metric, in table order.
    pub const ALL: [Metric; 8] = [
        Metric::RiseTime,
        Metric::Overshoot,
        Metric::SettlingTime,
        Metric::SteadyStateError,
        Metric::PeakCurrent,
        Metric::PhaseMargin,
        Metric::GainMargin,
        Metric::LargestStablePeriod,
    ];

    /// Its name in tables, files and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Metric::RiseTime => "rise_time_s",
            Metric::Overshoot => "overshoot_pct",
            Metric::SettlingTime => "settling_time_s",
            Metric::SteadyStateError => "steady_state_error_a",
            Metric::PeakCurrent => "peak_current_a",
            Metric::PhaseMargin => "phase_margin_deg",
            Metric::GainMargin => "gain_margin_db",
            Metric::LargestStablePeriod => "largest_stable_period_s",
        }
    }

    /// Whether a larger value is worse.
    pub fn larger_is_worse(self) -> bool {
        !matches!(
            self,
            Metric::PhaseMargin | Metric::GainMargin | Metric::LargestStablePeriod
        )
    }

    /// A run's value: `None` when it has none (no scored step, no linear
    /// figure); infinite when a time was never reached.
    pub fn of(self, o: &Outcome) -> Option<f64> {
        let scored = || o.steps.iter().filter(|s| s.interrupted.is_none());
        let worst_time = |f: fn(&crate::results::metrics::StepMetrics) -> Option<f64>| {
            scored()
                .map(|s| f(s).unwrap_or(f64::INFINITY))
                .fold(None, |a: Option<f64>, v| Some(a.map_or(v, |a| a.max(v))))
        };
        match self {
            Metric::RiseTime => worst_time(|s| s.rise_time_s),
            Metric::SettlingTime => worst_time(|s| s.settling_time_s),
            Metric::Overshoot => scored().map(|s| s.overshoot_pct).reduce(f64::max),
            Metric::SteadyStateError => scored().map(|s| s.steady_state_error_a.abs()).reduce(f64::max),
            Metric::PeakCurrent => Some(o.peak_current_a),
            Metric::PhaseMargin => o.figures.and_then(|f| f.phase_margin_deg),
            Metric::GainMargin => o.figures.and_then(|f| f.gain_margin_db),
            Metric::LargestStablePeriod => o.figures.and_then(|f| f.largest_stable_period_s),
        }
    }
}

/// The worst value of one metric and the run that gave it.
#[derive(Clone, Debug, PartialEq)]
pub struct Worst {
    /// Which metric.
    pub metric: Metric,
    /// Its worst value.
    pub value: f64,
    /// Index of the run in the sweep.
    pub run: usize,
    /// That run's origin.
    pub origin: Origin,
}

/// The reduction.
#[derive(Clone, Debug, PartialEq)]
pub struct Reduced {
    /// Monte-Carlo runs.
    pub runs: u64,
    /// Of which passed.
    pub passed: u64,
    /// The 95 % Wilson interval of the yield.
    pub interval: (f64, f64),
    /// Corner runs, and of which passed.
    pub corners: (u64, u64),
    /// Runs that could not run (values outside the model), any origin.
    pub failed_to_run: u64,
    /// The worst of each metric over every run (Monte-Carlo and corners),
    /// the first run to reach it on a tie.
    pub worst: Vec<Worst>,
    /// How many Monte-Carlo runs missed each criterion (a run can miss
    /// several), most first.
    pub misses: Vec<(&'static str, u64)>,
}

impl Reduced {
    /// The yield: the share of Monte-Carlo runs that passed.
    pub fn yield_fraction(&self) -> Option<f64> {
        (self.runs > 0).then(|| self.passed as f64 / self.runs as f64)
    }
}

/// Reduces the runs, in order.
pub fn reduce(runs: &[Run]) -> Reduced {
    let mut r = Reduced {
        runs: 0,
        passed: 0,
        interval: (0.0, 1.0),
        corners: (0, 0),
        failed_to_run: 0,
        worst: Vec::new(),
        misses: Vec::new(),
    };
    for run in runs {
        let pass = run.pass();
        match run.origin {
            Origin::MonteCarlo(_) => {
                r.runs += 1;
                r.passed += pass as u64;
                for m in run.outcome.as_ref().map_or(&[][..], |o| &o.misses[..]) {
                    match r.misses.iter_mut().find(|(n, _)| n == m) {
                        Some((_, k)) => *k += 1,
                        None => r.misses.push((m, 1)),
                    }
                }
            }
            Origin::Corner(_) => {
                r.corners.0 += 1;
                r.corners.1 += pass as u64;
            }
        }
        r.failed_to_run += run.outcome.is_err() as u64;
    }
    r.interval = wilson(r.passed, r.runs, Z95);
    // Most first; equal counts by name, so the order never depends on the
    // runs' order.
    r.misses.sort_by(|a, b| b.1.cmp(&a.1).then(a.0.cmp(b.0)));
    for metric in Metric::ALL {
        let mut best: Option<Worst> = None;
        for (k, run) in runs.iter().enumerate() {
            let Some(v) = run.outcome.as_ref().ok().and_then(|o| metric.of(o)) else {
                continue;
            };
            let worse = match &best {
                None => true,
                Some(b) if metric.larger_is_worse() => v > b.value,
                Some(b) => v < b.value,
            };
            if worse {
                best = Some(Worst {
                    metric,
                    value: v,
                    run: k,
                    origin: run.origin,
                });
            }
        }
        r.worst.extend(best);
    }
    r
}
