//! Setpoint shaping: the current the loop is asked for, limited and slewed.
//!
//! A requested current is first limited to `[min_a, max_a]` (the reply says so when
//! that happened), then the setpoint the PI sees moves toward it by at most
//! `slew_a_per_s * Ts` per control tick. Both limits are in amperes, positive =
//! forward.
//!
//! ```
//! use pi_core::setpoint::{SetpointLimits, SetpointShaper, Acceptance};
//!
//! let limits = SetpointLimits::new(-3.0, 3.0, 1000.0)?; // 1 A per ms
//! let mut shaper = SetpointShaper::new(limits, 1e-4);
//! assert_eq!(shaper.request(5.0), Ok(Acceptance::Limited { applied_a: 3.0 }));
//! let first = shaper.advance();
//! assert!((first - 0.1).abs() < 1e-6);
//! # Ok::<(), pi_core::ConfigError>(())
//! ```

use crate::error::{CommandError, ConfigError, Requirement, finite};
use crate::num::clamp;

/// Validated setpoint limits and slew rate.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SetpointLimits {
    min_a: f32,
    max_a: f32,
    slew_a_per_s: f32,
}

impl SetpointLimits {
    /// `min_a <= 0 <= max_a`, `min_a < max_a` (so a zero-current setpoint is always
    /// allowed), and `slew_a_per_s > 0`; `f32::INFINITY` means no slew limit.
    pub fn new(min_a: f32, max_a: f32, slew_a_per_s: f32) -> Result<Self, ConfigError> {
        let min_a = finite("min_a", min_a)?;
        let max_a = finite("max_a", max_a)?;
        if min_a > 0.0 {
            return Err(ConfigError::new(
                "min_a",
                min_a,
                Requirement::Within {
                    min: f32::MIN,
                    max: 0.0,
                },
            ));
        }
        if max_a < 0.0 || max_a <= min_a {
            return Err(ConfigError::new(
                "max_a",
                max_a,
                Requirement::Above("min_a and zero"),
            ));
        }
        if slew_a_per_s.is_nan() || slew_a_per_s <= 0.0 {
            return Err(ConfigError::new(
                "slew_a_per_s",
                slew_a_per_s,
                Requirement::Positive,
            ));
        }
        Ok(Self {
            min_a,
            max_a,
            slew_a_per_s,
        })
    }

    /// Lowest setpoint, amperes.
    pub fn min_a(&self) -> f32 {
        self.min_a
    }

    /// Highest setpoint, amperes.
    pub fn max_a(&self) -> f32 {
        self.max_a
    }

    /// Slew limit, amperes per second.
    pub fn slew_a_per_s(&self) -> f32 {
        self.slew_a_per_s
    }

    /// The largest setpoint magnitude these limits allow.
    pub fn max_magnitude_a(&self) -> f32 {
        let lo = -self.min_a;
        if lo > self.max_a { lo } else { self.max_a }
    }
}

/// How a requested setpoint was taken.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Acceptance {
    /// Taken as asked.
    Exact,
    /// Outside the limits: the nearest limit was taken instead.
    Limited {
        /// The setpoint that will be approached, amperes.
        applied_a: f32,
    },
}

/// The running setpoint: target and the slewed value the PI sees.
#[derive(Clone, Debug)]
pub struct SetpointShaper {
    limits: SetpointLimits,
    step_a: f32,
    target_a: f32,
    value_a: f32,
}

impl SetpointShaper {
    /// A shaper at 0 A for a control period of `period_s` seconds (validated by the
    /// caller's PI configuration; a non-positive period means no slew limit).
    pub fn new(limits: SetpointLimits, period_s: f32) -> Self {
        let step_a = limits.slew_a_per_s * period_s;
        let step_a = if step_a > 0.0 { step_a } else { f32::INFINITY };
        Self {
            limits,
            step_a,
            target_a: 0.0,
            value_a: 0.0,
        }
    }

    /// Asks for a new current. NaN or infinite is refused and the old target stays.
    pub fn request(&mut self, current_a: f32) -> Result<Acceptance, CommandError> {
        if !current_a.is_finite() {
            return Err(CommandError::SetpointNotFinite(current_a));
        }
        let applied = clamp(current_a, self.limits.min_a, self.limits.max_a);
        self.target_a = applied;
        if applied == current_a {
            Ok(Acceptance::Exact)
        } else {
            Ok(Acceptance::Limited { applied_a: applied })
        }
    }

    /// Advances one control tick and returns the setpoint for the PI, amperes.
    #[inline]
    pub fn advance(&mut self) -> f32 {
        if self.value_a == self.target_a {
            return self.value_a;
        }
        let lo = self.value_a - self.step_a;
        let hi = self.value_a + self.step_a;
        self.value_a = clamp(self.target_a, lo, hi);
        self.value_a
    }

    /// Sets both target and value to 0 A (used when the loop stops or faults).
    pub fn reset(&mut self) {
        self.target_a = 0.0;
        self.value_a = 0.0;
    }

    /// The target being approached, amperes.
    pub fn target_a(&self) -> f32 {
        self.target_a
    }

    /// The present slewed setpoint, amperes.
    pub fn value_a(&self) -> f32 {
        self.value_a
    }

    /// The limits in use.
    pub fn limits(&self) -> SetpointLimits {
        self.limits
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn slew_reaches_target_in_the_expected_number_of_ticks() {
        // 2 A at 500 A/s with Ts = 1/1024 s: 2 / (500/1024) = 4.096 ticks -> 5 ticks.
        let limits = SetpointLimits::new(-5.0, 5.0, 500.0).unwrap();
        let mut s = SetpointShaper::new(limits, 1.0 / 1024.0);
        s.request(2.0).unwrap();
        let values: [f32; 6] = core::array::from_fn(|_| s.advance());
        for (k, v) in values.iter().enumerate().take(4) {
            assert!((v - (k as f32 + 1.0) * 500.0 / 1024.0).abs() < 1e-6);
        }
        assert_eq!(values[4], 2.0);
        assert_eq!(values[5], 2.0);
    }

    #[test]
    fn infinite_slew_steps_at_once() {
        let limits = SetpointLimits::new(-5.0, 5.0, f32::INFINITY).unwrap();
        let mut s = SetpointShaper::new(limits, 1e-4);
        s.request(-4.0).unwrap();
        assert_eq!(s.advance(), -4.0);
    }

    #[test]
    fn limits_and_bad_requests() {
        let limits = SetpointLimits::new(-1.0, 2.0, 100.0).unwrap();
        let mut s = SetpointShaper::new(limits, 1e-3);
        assert_eq!(s.request(1.0), Ok(Acceptance::Exact));
        assert_eq!(s.request(-7.0), Ok(Acceptance::Limited { applied_a: -1.0 }));
        assert!(matches!(s.request(f32::NAN), Err(CommandError::SetpointNotFinite(v)) if v.is_nan()));
        assert!(s.request(f32::INFINITY).is_err());
        assert_eq!(s.target_a(), -1.0);
        assert!(SetpointLimits::new(1.0, 2.0, 1.0).is_err());
        assert!(SetpointLimits::new(-1.0, 2.0, 0.0).is_err());
        assert!(SetpointLimits::new(-1.0, -2.0, 1.0).is_err());
    }
}
