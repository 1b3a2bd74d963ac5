//! I^2t thermal overload: a first-order heating model of the winding.
//!
//! The state `h` is the winding's heat normalised so that `h = 1` is the steady
//! state reached at the rated continuous current `I_r`:
//!
//! ```text
//! tau dh/dt = (i / I_r)^2 - h
//! ```
//!
//! It trips when `h` reaches `trip_multiple^2` (default 1.15^2: a steady current of
//! 1.15 x rated trips eventually, 1.05 x never does) and counts as cooled, so the
//! fault may be cleared, once `h` is back at or below 1. Cooling follows the same
//! equation with the current removed.
//!
//! # Trip classes
//!
//! IEC 60947-4-1 (overload relays) defines trip classes by the tripping time from
//! cold at 7.2 x the current setting: class 10A 2-10 s, class 10 4-10 s, class 20
//! 6-20 s, class 30 9-30 s. From cold, the time to reach `h = L` at a constant
//! multiple `m` is `t = -tau ln(1 - L / m^2)`; [`TripClass`] picks `tau` so that
//! this time at `m = 7.2` is the middle of the class band.
//!
//! # Numerics
//!
//! Time constants are minutes while control periods are microseconds, so one tick
//! changes `h` by far less than an f32 can resolve near 1. The model therefore sums
//! `i^2` over a thermal step of about 10 ms (a whole number of control periods) and
//! advances once per step with the exact discretisation
//! `h += (1 - exp(-T/tau)) (q - h)`, `q` being the mean of `(i / I_r)^2` over the step.

use crate::error::{ConfigError, Requirement, non_negative, positive, within};

/// Thermal step the model aims for, seconds (see the module notes).
pub const THERMAL_STEP_S: f32 = 0.01;

/// Default trip multiple of the rated current (the heat level `1.15^2` trips).
/// Between the IEC 60947-4-1 "must not trip" 1.05 and "must trip" 1.2 multiples.
pub const DEFAULT_TRIP_MULTIPLE: f32 = 1.15;

/// Multiple of rated current at which IEC 60947-4-1 trip classes are defined.
pub const CLASS_TEST_MULTIPLE: f32 = 7.2;

/// An IEC 60947-4-1 trip class.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum TripClass {
    /// Class 10A: trips in more than 2 s and at most 10 s at 7.2 x rated, from cold.
    Class10A,
    /// Class 10: more than 4 s, at most 10 s.
    Class10,
    /// Class 20: more than 6 s, at most 20 s.
    Class20,
    /// Class 30: more than 9 s, at most 30 s.
    Class30,
}

impl TripClass {
    /// The class's tripping-time band at 7.2 x rated from cold, seconds
    /// `(lower, upper)`: IEC 60947-4-1, trip classes of overload relays.
    pub fn band_s(self) -> (f32, f32) {
        match self {
            TripClass::Class10A => (2.0, 10.0),
            TripClass::Class10 => (4.0, 10.0),
            TripClass::Class20 => (6.0, 20.0),
            TripClass::Class30 => (9.0, 30.0),
        }
    }

    /// The time the model aims to trip at: the middle of the band.
    pub fn target_s(self) -> f32 {
        let (lo, hi) = self.band_s();
        0.5 * (lo + hi)
    }
}

/// Validated parameters of the thermal model.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ThermalConfig {
    rated_a: f32,
    tau_s: f32,
    trip_multiple: f32,
}

impl ThermalConfig {
    /// Model with the rated continuous current (A, > 0) and the winding's thermal
    /// time constant (s, > 0), tripping at the default 1.15 x rated.
    pub fn from_time_constant(rated_a: f32, tau_s: f32) -> Result<Self, ConfigError> {
        Ok(Self {
            rated_a: positive("rated_a", rated_a)?,
            tau_s: positive("tau_s", tau_s)?,
            trip_multiple: DEFAULT_TRIP_MULTIPLE,
        })
    }

    /// Model whose time constant makes it trip in the middle of the class band at
    /// 7.2 x rated from cold: `tau = t_target / -ln(1 - 1.15^2 / 7.2^2)`.
    pub fn from_trip_class(rated_a: f32, class: TripClass) -> Result<Self, ConfigError> {
        let level = DEFAULT_TRIP_MULTIPLE * DEFAULT_TRIP_MULTIPLE;
        let m2 = CLASS_TEST_MULTIPLE * CLASS_TEST_MULTIPLE;
        // -ln(1 - L/m^2) = -log1p(-L/m^2), accurate for small L/m^2.
        let per_tau = -libm::log1pf(-level / m2);
        Self::from_time_constant(rated_a, class.target_s() / per_tau)
    }

    /// The same model tripping at another multiple of rated current, in `[1.05, 2]`
    /// exclusive of 1.05 (IEC 60947-4-1: no trip at 1.05 x).
    pub fn with_trip_multiple(self, multiple: f32) -> Result<Self, ConfigError> {
        let m = within("trip_multiple", multiple, 1.05, 2.0)?;
        if m <= 1.05 {
            return Err(ConfigError::new("trip_multiple", m, Requirement::Above("1.05")));
        }
        Ok(Self {
            trip_multiple: m,
            ..self
        })
    }

    /// Rated continuous current, amperes.
    pub fn rated_a(&self) -> f32 {
        self.rated_a
    }

    /// Thermal time constant, seconds.
    pub fn tau_s(&self) -> f32 {
        self.tau_s
    }

    /// Trip multiple of rated current.
    pub fn trip_multiple(&self) -> f32 {
        self.trip_multiple
    }
}

/// What [`ThermalModel::add_below_trip`] did.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum QuietHeat {
    /// Added to the step's sum; the heat did not change.
    Unchanged,
    /// Ended a thermal step below the trip level.
    Stepped {
        /// Whether the winding is still above its rated steady state.
        still_hot: bool,
    },
    /// Would have reached the trip level; nothing changed.
    WouldTrip,
}

/// The running thermal model.
#[derive(Clone, Debug)]
pub struct ThermalModel {
    inv_rated_sq: f32,
    trip_level: f32,
    alpha: f32,
    inv_ticks: f32,
    ticks_per_step: u16,
    /// Control ticks left before the next thermal step.
    countdown: u16,
    sum_sq_a2: f32,
    heat: f32,
}

impl ThermalModel {
    /// A cold model (`h = 0`) for a control period of `period_s` seconds (> 0).
    pub fn new(config: ThermalConfig, period_s: f32) -> Result<Self, ConfigError> {
        let period_s = positive("period_s", period_s)?;
        let n = libm::roundf(THERMAL_STEP_S / period_s);
        let ticks_per_step = if n < 1.0 {
            1
        } else if n > u16::MAX as f32 {
            u16::MAX
        } else {
            n as u16
        };
        let step_s = ticks_per_step as f32 * period_s;
        Ok(Self {
            inv_rated_sq: 1.0 / (config.rated_a * config.rated_a),
            trip_level: config.trip_multiple * config.trip_multiple,
            alpha: -libm::expm1f(-step_s / config.tau_s),
            inv_ticks: 1.0 / ticks_per_step as f32,
            ticks_per_step,
            countdown: ticks_per_step,
            sum_sq_a2: 0.0,
            heat: 0.0,
        })
    }

    /// Adds one control tick at `current_a` (a non-finite reading adds no heat; the
    /// supervisor faults on it separately). Returns true when the heat is at or above
    /// the trip level.
    #[inline]
    pub fn tick(&mut self, current_a: f32) -> bool {
        let sq = current_a * current_a;
        self.add_square(if sq.is_finite() { sq } else { 0.0 });
        self.tripped()
    }

    /// Adds a tick at a current known to be finite and inside the overcurrent
    /// threshold, exactly as [`ThermalModel::tick`] would, unless that would
    /// reach the trip level: then nothing is changed.
    #[inline(always)]
    pub(crate) fn add_below_trip(&mut self, current_a: f32) -> QuietHeat {
        let sum = self.sum_sq_a2 + current_a * current_a;
        if self.countdown > 1 {
            self.sum_sq_a2 = sum;
            self.countdown -= 1;
            return QuietHeat::Unchanged;
        }
        let heat = self.stepped_heat(sum);
        if heat >= self.trip_level {
            return QuietHeat::WouldTrip;
        }
        self.heat = heat;
        self.countdown = self.ticks_per_step;
        self.sum_sq_a2 = 0.0;
        QuietHeat::Stepped {
            still_hot: self.still_hot(),
        }
    }

    /// The heat one thermal step after the present one, given the step's sum of
    /// squared currents.
    #[inline(always)]
    fn stepped_heat(&self, sum_sq_a2: f32) -> f32 {
        let q = sum_sq_a2 * self.inv_ticks * self.inv_rated_sq;
        self.heat + self.alpha * (q - self.heat)
    }

    #[inline(always)]
    fn add_square(&mut self, sq_a2: f32) -> bool {
        self.sum_sq_a2 += sq_a2;
        self.countdown = self.countdown.wrapping_sub(1);
        if self.countdown == 0 {
            self.step();
            true
        } else {
            false
        }
    }

    /// Advances the heat by one thermal step from the mean square of the step.
    #[inline(never)]
    fn step(&mut self) {
        self.heat = self.stepped_heat(self.sum_sq_a2);
        self.countdown = self.ticks_per_step;
        self.sum_sq_a2 = 0.0;
    }

    /// True while the heat is at or above the trip level.
    #[inline]
    pub fn tripped(&self) -> bool {
        self.heat >= self.trip_level
    }

    /// The normalised heat `h` (1 = steady state at rated current).
    pub fn heat(&self) -> f32 {
        self.heat
    }

    /// True while the winding has not cooled to the rated steady state.
    pub fn still_hot(&self) -> bool {
        self.heat > 1.0
    }

    /// Sets the heat, for example to assume a hot winding after a reset (common
    /// practice when the temperature before the reset is unknown). Must be >= 0.
    pub fn set_heat(&mut self, heat: f32) -> Result<(), ConfigError> {
        self.heat = non_negative("heat", heat)?;
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn class_time_constant_matches_the_closed_form() {
        // tau = 7 s / -ln(1 - 1.3225 / 51.84) for class 10.
        let c = ThermalConfig::from_trip_class(2.0, TripClass::Class10).unwrap();
        let expected = 7.0 / -(1.0f64 - 1.3225 / 51.84).ln();
        assert!((c.tau_s() as f64 - expected).abs() / expected < 1e-5);
    }

    #[test]
    fn cools_when_current_drops() {
        let c = ThermalConfig::from_time_constant(1.0, 1.0).unwrap();
        let mut m = ThermalModel::new(c, 1e-3).unwrap();
        for _ in 0..2000 {
            m.tick(1.0);
        }
        let hot = m.heat();
        // After 2 tau at rated current: 1 - e^-2 = 0.8647.
        assert!((hot - 0.8647).abs() < 2e-3, "{hot}");
        for _ in 0..1000 {
            m.tick(0.0);
        }
        // One tau of cooling: factor e^-1.
        assert!((m.heat() - hot * 0.36788).abs() < 2e-3);
    }

    #[test]
    fn bad_parameters_are_refused() {
        assert!(ThermalConfig::from_time_constant(0.0, 1.0).is_err());
        assert!(ThermalConfig::from_time_constant(1.0, f32::NAN).is_err());
        let c = ThermalConfig::from_time_constant(1.0, 1.0).unwrap();
        assert!(c.with_trip_multiple(1.05).is_err());
        assert!(c.with_trip_multiple(1.2).is_ok());
        assert!(ThermalModel::new(c, 0.0).is_err());
    }
}
