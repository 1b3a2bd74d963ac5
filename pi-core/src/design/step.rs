//! The one step-metrics routine and the one rule for "meets the spec".
//!
//! Both the design's predicted step ([`crate::design::analysis::predict_step`])
//! and the simulator's measured steps (host-sim's metrics) feed their samples
//! through a [`StepMeter`], so a predicted and a measured figure mean the same
//! thing, and both judge them with [`within`].
//!
//! A step goes from `y0` to `y1`; each sample `y(t)` is normalised to
//! `c = (y - y0) / (y1 - y0)` and `t` is measured from the request. With that:
//!
//! | metric | definition |
//! |---|---|
//! | rise time | from the first crossing of `c = 0.1` to the first crossing of `c = 0.9`, each interpolated linearly between the samples around it |
//! | overshoot | `max(c) - 1` as a fraction, 0 if `c` never passes 1; a peak within [`OVERSHOOT_FLOOR`] of 1 is the round-off of the final approach and counts as none |
//! | peak | the largest `c` and its time |
//! | settling time | the time from which `c` stays within `1 +/- 0.02`: the last sample outside the band and the next one, interpolated linearly to the band edge; 0 if no sample is outside; none if the last sample is outside |
//!
//! These are the textbook definitions (Ogata, *Modern Control Engineering*,
//! the chapter on transient-response analysis; cited from memory) with our
//! choices made explicit: always 10-90 % rise, and overshoot and band taken
//! relative to the request `y1`, not the final value (with integral action they
//! coincide; an error shows in its own column). python-control's `step_info`
//! uses 10-90 % and a 2 % band too, but reports sample times without
//! interpolation.

use crate::num::Real;

/// The settling band, a fraction of the step (2 %).
pub const SETTLING_BAND: f64 = 0.02;

/// A normalised peak within this of 1 counts as no overshoot: the round-off of
/// a response that approaches its request from below (a millionth of the step).
pub const OVERSHOOT_FLOOR: f64 = 1e-6;

/// The metrics of one step, on the normalised response.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct StepMetrics<T> {
    /// 10-90 % rise time, s (`None`: 90 % not reached).
    pub rise_time_s: Option<T>,
    /// Overshoot, fraction of the step.
    pub overshoot: T,
    /// Largest normalised value.
    pub peak: T,
    /// Its time after the request, s.
    pub peak_time_s: T,
    /// 2 % settling time, s (`None`: still outside the band at the last sample).
    pub settling_time_s: Option<T>,
    /// The last normalised value.
    pub last: T,
}

/// Measures a step sample by sample: no storage, bounded work per sample, so
/// the device, the design and the simulator's runner can all use it.
#[derive(Clone, Copy, Debug)]
pub struct StepMeter<T> {
    prev: Option<(T, T)>,
    rise10: Option<T>,
    rise90: Option<T>,
    peak: T,
    peak_time_s: T,
    /// The last sample outside the band, `(t, |c - 1|)`, and whether the one
    /// after it has been seen (then the interpolated entry time).
    outside: Option<(T, T)>,
    entry: Option<T>,
    any: bool,
}

impl<T: Real> Default for StepMeter<T> {
    fn default() -> Self {
        Self::new()
    }
}

impl<T: Real> StepMeter<T> {
    /// A meter before its first sample.
    pub fn new() -> Self {
        Self {
            prev: None,
            rise10: None,
            rise90: None,
            peak: T::of(f64::NEG_INFINITY),
            peak_time_s: T::ZERO,
            outside: None,
            entry: None,
            any: false,
        }
    }

    /// One sample: `t_s` after the request (non-decreasing from call to call),
    /// `c` the normalised response. A non-finite `c` counts as outside the band
    /// and never as a crossing or a peak.
    pub fn sample(&mut self, t_s: T, c: T) {
        let cross = |level: T, found: &mut Option<T>, prev: Option<(T, T)>| {
            if found.is_none() && c >= level {
                *found = Some(match prev {
                    Some((tq, cq)) if cq < level && c != cq => tq + (level - cq) / (c - cq) * (t_s - tq),
                    _ => t_s,
                });
            }
        };
        cross(T::of(0.1), &mut self.rise10, self.prev);
        cross(T::of(0.9), &mut self.rise90, self.prev);
        if c > self.peak {
            self.peak = c;
            self.peak_time_s = t_s;
        }
        let e = (c - T::ONE).abs();
        let band = T::of(SETTLING_BAND);
        let inside = e <= band;
        if !inside {
            self.outside = Some((t_s, if e.is_finite() { e } else { T::of(f64::INFINITY) }));
            self.entry = None;
        } else if let Some((tq, eq)) = self.outside
            && self.entry.is_none()
        {
            let f = if eq > e && eq.is_finite() {
                (eq - band) / (eq - e)
            } else {
                T::ONE
            };
            self.entry = Some(tq + f * (t_s - tq));
        }
        self.prev = Some((t_s, c));
        self.any = true;
    }

    /// The metrics so far (`None` before the first sample).
    pub fn finish(&self) -> Option<StepMetrics<T>> {
        if !self.any {
            return None;
        }
        let overshoot = self.peak - T::ONE;
        let settling_time_s = match (self.outside, self.entry) {
            (None, _) => Some(T::ZERO),
            (Some(_), entry) => entry,
        };
        Some(StepMetrics {
            rise_time_s: match (self.rise10, self.rise90) {
                (Some(a), Some(b)) => Some(b - a),
                _ => None,
            },
            overshoot: if overshoot > T::of(OVERSHOOT_FLOOR) {
                overshoot
            } else {
                T::ZERO
            },
            peak: self.peak,
            peak_time_s: self.peak_time_s,
            settling_time_s,
            last: self.prev.map_or(T::ZERO, |(_, c)| c),
        })
    }
}

/// The one rule for a spec limit: a measured (or predicted) value meets its
/// limit when it is known and not above it. No tolerance: a value a hair above
/// the limit misses it, and the report says by how much.
pub fn within<T: Real>(measured: Option<T>, limit: T) -> bool {
    measured.is_some_and(|m| m <= limit)
}

/// By how much a value misses its limit (`None` when it meets it or was never
/// reached: see [`within`]).
pub fn miss<T: Real>(measured: Option<T>, limit: T) -> Option<T> {
    match measured {
        Some(m) if m > limit => Some(m - limit),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn run(dt: f64, n: usize, f: impl Fn(f64) -> f64) -> StepMetrics<f64> {
        let mut m = StepMeter::new();
        for k in 0..n {
            let t = k as f64 * dt;
            m.sample(t, f(t));
        }
        m.finish().unwrap()
    }

    #[test]
    fn first_order_rise_and_settling_are_tau_ln9_and_tau_ln50() {
        // c(t) = 1 - exp(-t / tau): rise 10-90 % = tau ln 9, 2 % settling =
        // tau ln 50 (Ogata, first-order systems; cited from memory).
        let tau = 1e-3;
        let m = run(1e-6, 20_000, |t| 1.0 - (-t / tau).exp());
        assert!((m.rise_time_s.unwrap() - tau * 9f64.ln()).abs() < 2e-9);
        assert!((m.settling_time_s.unwrap() - tau * 50f64.ln()).abs() < 2e-9);
        assert_eq!(m.overshoot, 0.0);
    }

    #[test]
    fn second_order_overshoot_and_peak_time_match_ogata() {
        // Mp = exp(-zeta pi / sqrt(1 - zeta^2)), tp = pi / wd (Ogata).
        let (zeta, wn) = (0.5f64, 2000.0f64);
        let wd = wn * (1.0 - zeta * zeta).sqrt();
        let m = run(1e-6, 20_000, |t| {
            1.0 - (-zeta * wn * t).exp()
                * ((wd * t).cos() + zeta / (1.0 - zeta * zeta).sqrt() * (wd * t).sin())
        });
        let mp = (-zeta * core::f64::consts::PI / (1.0 - zeta * zeta).sqrt()).exp();
        assert!((m.overshoot - mp).abs() < 1e-5, "{}", m.overshoot);
        assert!((m.peak_time_s - core::f64::consts::PI / wd).abs() < 2e-6);
    }

    #[test]
    fn critically_damped_settles_at_5_834_over_wn() {
        // c = 1 - (1 + wn t) exp(-wn t) enters the 2 % band at wn t = 5.8339
        // (the root of (1 + x) exp(-x) = 0.02, by bisection in Python).
        let wn = 1000.0;
        let m = run(1e-7, 100_000, |t| 1.0 - (1.0 + wn * t) * (-wn * t).exp());
        assert!((m.settling_time_s.unwrap() * wn - 5.833_921_701_917_39).abs() < 1e-5);
        assert_eq!(m.overshoot, 0.0);
    }

    #[test]
    fn a_response_still_outside_the_band_has_no_settling_time() {
        let m = run(1e-3, 10, |t| t);
        assert_eq!(m.settling_time_s, None);
        assert_eq!(m.rise_time_s, None);
    }

    #[test]
    fn leaving_the_band_again_restarts_settling() {
        let m = run(1.0, 6, |t| [0.0, 1.0, 1.0, 1.5, 1.0, 1.0][t as usize]);
        // Outside at t = 3 (|e| = 0.5), inside at t = 4: entry at 3 + 0.48/0.5.
        assert!((m.settling_time_s.unwrap() - (3.0 + 0.48 / 0.5)).abs() < 1e-12);
        assert!((m.overshoot - 0.5).abs() < 1e-12);
    }

    #[test]
    fn a_nan_sample_is_outside_and_never_a_peak() {
        let m = run(1.0, 4, |t| [0.0, f64::NAN, 1.0, 1.0][t as usize]);
        assert_eq!(m.peak, 1.0);
        assert_eq!(m.settling_time_s, Some(2.0));
    }

    #[test]
    fn round_off_above_the_request_is_no_overshoot_but_a_real_peak_is() {
        let m = run(1.0, 3, |t| [0.0, 1.0 + 1e-9, 1.0][t as usize]);
        assert_eq!(m.overshoot, 0.0);
        let m = run(1.0, 3, |t| [0.0, 1.0 + 2e-6, 1.0][t as usize]);
        assert!(m.overshoot > 0.0);
    }

    #[test]
    fn the_rule_is_strict_and_names_the_miss() {
        assert!(within(Some(2.0e-3), 2.0e-3));
        assert!(!within(Some(2.0e-3 + 1e-12), 2.0e-3));
        assert!(!within(None, 2.0e-3));
        assert_eq!(miss(Some(2.1f64), 2.0).map(|m| (m * 10.0).round()), Some(1.0));
        assert_eq!(miss(Some(1.9), 2.0), None);
    }
}
