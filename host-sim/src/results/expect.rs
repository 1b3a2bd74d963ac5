//! The scenario's expectations (`[expect]`) checked against a run's summary,
//! and what a run says about safety whether or not it was asked: a true
//! current beyond the overcurrent threshold, and injected sensor faults that
//! no configured detector can see.

use pi_core::{Fault, FaultSet, LoopConfig, Protection};
use serde::Serialize;

use crate::plant::faults::FaultKind;
use crate::results::summary::Summary;
use crate::spec::Expectations;

/// One expectation, checked.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ExpectCheck {
    /// What was expected, in words.
    pub expected: String,
    /// What happened, in words.
    pub happened: String,
    /// Whether it holds.
    pub pass: bool,
}

fn fault_name(f: Fault) -> &'static str {
    f.describe()
}

/// Checks the expectations; `overcurrent_a` is the default current limit.
pub fn check(e: &Expectations, s: &Summary, overcurrent_a: f64) -> Vec<ExpectCheck> {
    let mut out = Vec::new();
    let first = s.first_fault.map(|(t, bits)| {
        let cause = FaultSet::from_bits(bits).earliest();
        (t, cause)
    });
    let happened_trip = match first {
        Some((t, Some(cause))) => format!("{} latched first, at {:.4} s", fault_name(cause), t),
        Some((t, None)) => format!("a fault latched at {t:.4} s"),
        None => "no fault latched".to_string(),
    };
    if let Some(want) = e.trip {
        let window = match (e.trip_after_s, e.trip_before_s) {
            (Some(a), Some(b)) => format!(" between {a} s and {b} s"),
            (Some(a), None) => format!(" at or after {a} s"),
            (None, Some(b)) => format!(" by {b} s"),
            (None, None) => String::new(),
        };
        let pass = matches!(first, Some((t, Some(cause)))
            if cause == want
                && e.trip_after_s.is_none_or(|a| t >= a)
                && e.trip_before_s.is_none_or(|b| t <= b));
        out.push(ExpectCheck {
            expected: format!("trips on {}{window}", fault_name(want)),
            happened: happened_trip.clone(),
            pass,
        });
    }
    if e.no_trip {
        out.push(ExpectCheck {
            expected: "no fault latches".into(),
            happened: happened_trip,
            pass: first.is_none(),
        });
    }
    if let Some(limit) = e.max_winding_c {
        out.push(ExpectCheck {
            expected: format!("the winding stays below {limit} C"),
            happened: format!("it reached {:.2} C", s.max_winding_c),
            pass: s.max_winding_c < limit,
        });
    }
    let (limit, named) = match e.max_current_a {
        Some(a) => (a, format!("{a} A")),
        None => (
            overcurrent_a,
            format!("the {overcurrent_a} A overcurrent threshold"),
        ),
    };
    let (peak, at, read) = s.peak_current;
    out.push(ExpectCheck {
        expected: format!("the true current stays below {named}"),
        happened: if peak < limit {
            format!("it peaked at {peak:.3} A")
        } else {
            format!(
                "true current reached {peak:.2} A, {:.0} % of {limit} A, at {at:.4} s while the controller read {read:.2} A",
                100.0 * peak / limit
            )
        },
        pass: peak < limit,
    });
    if let Some(after) = e.unsaturated_after_s {
        let last = s.last_saturated_s.filter(|&t| t >= after);
        out.push(ExpectCheck {
            expected: format!("the duty stays off its limit after {after} s"),
            happened: match last {
                Some(t) => format!("it sat at its limit as late as {t:.4} s"),
                None => "it did".into(),
            },
            pass: last.is_none(),
        });
    }
    out
}

/// Injected sensor faults that none of the loop's detectors can see, in words.
pub fn unprotected(kinds: impl Iterator<Item = FaultKind>, config: &LoopConfig) -> Vec<String> {
    let stuck_on = config.protections().is_on(Protection::SensorStuck);
    let mut out = Vec::new();
    let mut seen = Vec::new();
    for k in kinds {
        let (name, covered) = match k {
            // An open or shorted sensor reads a rail, which the always-on
            // reading check sees; a frozen reading only the stuck-reading
            // detector can.
            FaultKind::SensorStuck => ("sensor_stuck", stuck_on),
            _ => continue,
        };
        if !covered && !seen.contains(&name) {
            seen.push(name);
            out.push(format!(
                "the injected {name} fault is unprotected: no detector is configured for it; set controller.protection.stuck_band_counts, stuck_ticks and stuck_min_duty"
            ));
        }
    }
    out
}
