//! I^2t thermal overload: a first-order heating model of the winding.
//!
//! The state `h` is the winding's heat normalised so that `h = 1` is the steady
//! state reached at the rated continuous current `I_r`:
//!
//! ```text
//! tau dh/dt = (i / I_r)^2 - h
//! ```
//!
//! It trips when `h` reaches the trip level `L = trip_multiple^2` (default
//! `1.15^2 = 1.3225`) and counts as cooled, so the fault may be cleared, once `h`
//! is back at or below 1. Cooling follows the same equation with the current
//! removed.
//!
//! # What trips and what never does
//!
//! At a steady multiple `m` of rated current the heat approaches `m^2`. From a
//! heat `h0` it reaches `L` after
//!
//! ```text
//! t = tau ln((m^2 - h0) / (m^2 - L))        (from cold: t = -tau ln(1 - L / m^2))
//! ```
//!
//! so a steady current above `trip_multiple x rated` trips, later the closer it
//! is, and one below it never does: `trip_multiple x rated` is the no-trip
//! ceiling (1.15 x by default; 1.16 x from cold trips after about `4.06 tau`,
//! 1.14 x never). Exactly at the ceiling the heat only approaches the level, and
//! whether rounding lets it touch is not specified.
//!
//! # Trip classes
//!
//! IEC 60947-4-1 (overload relays) defines trip classes by the tripping time from
//! cold at 7.2 x the current setting: class 10A 2-10 s, class 10 4-10 s, class 20
//! 6-20 s, class 30 9-30 s. [`TripClass`] picks `tau` so that the time from cold
//! at `m = 7.2` is the middle of the class band.
//!
//! # Numerics
//!
//! Time constants are minutes while control periods are microseconds, so one tick
//! changes `h` by far less than an f32 can resolve near 1. The model therefore sums
//! `i^2` over a thermal step of about 10 ms (a whole number of control periods) and
//! advances once per step with the exact discretisation
//! `h += (1 - exp(-T/tau)) (q - h)`, `q` being the mean of `(i / I_r)^2` over the step.
//!
//! Even one thermal step moves `h` by less than half an f32 step near the trip
//! level once `tau` reaches hours (at 1.2 x rated and `tau` = 20,000 s the step is
//! about 6e-8, the half step 6e-8): a plain f32 sum would stop rising there and
//! never trip. The heat is therefore kept as an f32 plus the rounding error of
//! its last addition (compensated summation, Knuth's two-sum), which resolves
//! about 48 bits: every accepted `tau` rises as the closed form says.
//!
//! `tau` is accepted from [`MIN_TAU_S`] to [`MAX_TAU_S`]: below a second the 10 ms
//! thermal step is no longer small against it (the trip time would be off by
//! more than 1 %), and above a day it is no winding's time constant (large
//! machines' are about an hour; from memory) but more likely a unit slip.

use crate::error::{ConfigError, Requirement, non_negative, positive, within};

/// Thermal step the model aims for, seconds (see the module notes).
pub const THERMAL_STEP_S: f32 = 0.01;

/// Default trip multiple of the rated current (the heat level `1.15^2` trips).
/// Between the IEC 60947-4-1 "must not trip" 1.05 and "must trip" 1.2 multiples.
pub const DEFAULT_TRIP_MULTIPLE: f32 = 1.15;

/// Multiple of rated current at which IEC 60947-4-1 trip classes are defined.
pub const CLASS_TEST_MULTIPLE: f32 = 7.2;

/// Shortest accepted thermal time constant, seconds (see the module notes).
pub const MIN_TAU_S: f32 = 1.0;

/// Longest accepted thermal time constant, seconds: one day (see the module notes).
pub const MAX_TAU_S: f32 = 86_400.0;

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
    /// time constant (s, from [`MIN_TAU_S`] to [`MAX_TAU_S`]), tripping at the
    /// default 1.15 x rated.
    pub fn from_time_constant(rated_a: f32, tau_s: f32) -> Result<Self, ConfigError> {
        Ok(Self {
            rated_a: positive("rated_a", rated_a)?,
            tau_s: within("tau_s", tau_s, MIN_TAU_S, MAX_TAU_S)?,
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
    /// The heat, rounded to f32.
    heat: f32,
    /// What `heat` lacks of the exact sum of the steps: the rounding error of
    /// its last addition, `|heat_low| <= ulp(heat) / 2` (see the module notes).
    heat_low: f32,
}

/// The heat after one thermal step, as the rounded value and its error.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Heat {
    value: f32,
    low: f32,
}

impl ThermalModel {
    /// A cold model (`h = 0`) for a control period of `period_s` seconds (> 0).
    ///
    /// The thermal step is the whole number of periods nearest 10 ms (at least
    /// one). The period must be at most a hundredth of `tau`, so that a step is
    /// small against it.
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
        if period_s > 0.01 * config.tau_s {
            return Err(ConfigError::new(
                "period_s",
                period_s,
                Requirement::Below("a hundredth of the thermal time constant tau_s"),
            ));
        }
        Ok(Self {
            inv_rated_sq: 1.0 / (config.rated_a * config.rated_a),
            trip_level: config.trip_multiple * config.trip_multiple,
            alpha: -libm::expm1f(-step_s / config.tau_s),
            inv_ticks: 1.0 / ticks_per_step as f32,
            ticks_per_step,
            countdown: ticks_per_step,
            sum_sq_a2: 0.0,
            heat: 0.0,
            heat_low: 0.0,
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
        if heat.value >= self.trip_level {
            return QuietHeat::WouldTrip;
        }
        self.store(heat);
        QuietHeat::Stepped {
            still_hot: self.still_hot(),
        }
    }

    /// The heat one thermal step after the present one, given the step's sum of
    /// squared currents: `h + alpha (q - h)`, added with its rounding error kept
    /// (two-sum: `value + low` is the exact sum of the old heat and the increment).
    #[inline(always)]
    fn stepped_heat(&self, sum_sq_a2: f32) -> Heat {
        let q = sum_sq_a2 * self.inv_ticks * self.inv_rated_sq;
        let increment = self.alpha * ((q - self.heat) - self.heat_low) + self.heat_low;
        let value = self.heat + increment;
        let increment_part = value - self.heat;
        let heat_part = value - increment_part;
        let low = (self.heat - heat_part) + (increment - increment_part);
        Heat { value, low }
    }

    /// Takes a stepped heat and starts the next thermal step.
    #[inline(always)]
    fn store(&mut self, heat: Heat) {
        self.heat = heat.value;
        self.heat_low = heat.low;
        self.countdown = self.ticks_per_step;
        self.sum_sq_a2 = 0.0;
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
        let heat = self.stepped_heat(self.sum_sq_a2);
        self.store(heat);
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

    /// Control ticks per thermal step.
    pub(crate) fn ticks_per_step(&self) -> u16 {
        self.ticks_per_step
    }

    /// The step's weight `1 - exp(-T / tau)`.
    pub(crate) fn alpha(&self) -> f32 {
        self.alpha
    }

    /// The trip level `trip_multiple^2` the heat trips at.
    pub fn trip_level(&self) -> f32 {
        self.trip_level
    }

    /// True while the winding has not cooled to the rated steady state.
    pub fn still_hot(&self) -> bool {
        self.heat > 1.0
    }

    /// Sets the heat, for example to assume a hot winding after a reset (common
    /// practice when the temperature before the reset is unknown). Must be >= 0.
    pub fn set_heat(&mut self, heat: f32) -> Result<(), ConfigError> {
        self.heat = non_negative("heat", heat)?;
        self.heat_low = 0.0;
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use std::format;

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

    #[test]
    fn time_constants_outside_the_range_are_refused_by_name() {
        for tau in [0.0, 0.999, MAX_TAU_S * 1.001, 1e9, f32::INFINITY] {
            let e = ThermalConfig::from_time_constant(2.0, tau).unwrap_err();
            assert_eq!(e.field, "tau_s", "tau {tau}");
        }
        for tau in [MIN_TAU_S, MAX_TAU_S] {
            assert!(ThermalConfig::from_time_constant(2.0, tau).is_ok(), "tau {tau}");
        }
        // A control period longer than tau / 100 is refused.
        let c = ThermalConfig::from_time_constant(2.0, 1.0).unwrap();
        assert!(ThermalModel::new(c, 0.01).is_ok());
        assert_eq!(ThermalModel::new(c, 0.02).unwrap_err().field, "period_s");
    }

    /// Seconds until a model ticked at `multiple` x rated (period `period_s`)
    /// trips, or `None` within `limit_s`.
    fn trip_time_s(
        model: &mut ThermalModel,
        rated_a: f32,
        multiple: f32,
        period_s: f32,
        limit_s: f64,
    ) -> Option<f64> {
        let ticks = (limit_s / period_s as f64) as u64;
        (1..=ticks)
            .find(|_| model.tick(multiple * rated_a))
            .map(|k| k as f64 * period_s as f64)
    }

    /// Closed form of the first-order model from cold at a steady multiple `m`:
    /// `t = -tau ln(1 - L / m^2)` (the solution of `tau dh/dt = m^2 - h`, h(0) = 0).
    fn closed_form_s(tau_s: f64, level: f64, m: f64) -> f64 {
        -tau_s * (1.0 - level / (m * m)).ln()
    }

    #[test]
    fn every_accepted_time_constant_trips_at_1_2_times_rated_as_the_closed_form_says() {
        // Twelve time constants log-spaced over the accepted range, at a 10 ms
        // period (one tick per thermal step). A plain f32 heat stalled below the
        // level from about 20,000 s up (1.3208 against 1.3225) and never tripped.
        let (lo, hi) = (MIN_TAU_S as f64, MAX_TAU_S as f64);
        for k in 0..12 {
            let tau = (lo * (hi / lo).powf(k as f64 / 11.0)) as f32;
            let c = ThermalConfig::from_time_constant(2.0, tau).unwrap();
            let mut m = ThermalModel::new(c, 0.01).unwrap();
            let expected = closed_form_s(c.tau_s() as f64, 1.3225, 1.2);
            let t = trip_time_s(&mut m, 2.0, 1.2, 0.01, 30.0 * tau as f64)
                .unwrap_or_else(|| panic!("tau {tau} s: no trip in 30 tau, heat {}", m.heat()));
            assert!(
                (t - expected).abs() / expected < 0.01,
                "tau {tau} s: tripped at {t} s, closed form {expected} s"
            );
        }
    }

    #[test]
    fn the_no_trip_ceiling_is_the_trip_multiple() {
        // Class 10A (tau about 232 s) and an hour: 1.16 x trips as the closed form
        // says (the f32 sum took 1,101 s instead of 944 s at class 10A), 1.14 x
        // settles just below the level and never trips.
        let class = ThermalConfig::from_trip_class(2.0, TripClass::Class10A).unwrap();
        let hour = ThermalConfig::from_time_constant(2.0, 3600.0).unwrap();
        for c in [class, hour] {
            let tau = c.tau_s() as f64;
            let mut m = ThermalModel::new(c, 0.01).unwrap();
            let expected = closed_form_s(tau, 1.3225, 1.16);
            let t = trip_time_s(&mut m, 2.0, 1.16, 0.01, 30.0 * tau).expect("1.16 x must trip");
            assert!(
                (t - expected).abs() / expected < 0.01,
                "tau {tau}: {t} vs {expected}"
            );

            let mut m = ThermalModel::new(c, 0.01).unwrap();
            assert_eq!(
                trip_time_s(&mut m, 2.0, 1.14, 0.01, 30.0 * tau),
                None,
                "tau {tau}"
            );
            // After 30 tau the heat is at 1.14^2 = 1.2996 to within e^-30.
            assert!((m.heat() - 1.2996).abs() < 1e-4, "tau {tau}: {}", m.heat());
        }
    }

    #[test]
    fn a_higher_trip_multiple_moves_the_level() {
        // Trip multiple 1.5: level 2.25. 1.45 x never trips; 2 x trips at
        // -tau ln(1 - 2.25 / 4).
        let c = ThermalConfig::from_time_constant(2.0, 10.0)
            .unwrap()
            .with_trip_multiple(1.5)
            .unwrap();
        assert_eq!(c.trip_multiple(), 1.5);
        let mut m = ThermalModel::new(c, 0.01).unwrap();
        assert_eq!(m.trip_level(), 2.25);
        assert_eq!(trip_time_s(&mut m, 2.0, 1.45, 0.01, 300.0), None);
        let mut m = ThermalModel::new(c, 0.01).unwrap();
        let expected = closed_form_s(10.0, 2.25, 2.0);
        let t = trip_time_s(&mut m, 2.0, 2.0, 0.01, 300.0).unwrap();
        assert!((t - expected).abs() / expected < 0.01, "{t} vs {expected}");
    }

    #[test]
    fn still_hot_until_cooled_to_the_rated_steady_state() {
        let c = ThermalConfig::from_time_constant(1.0, 10.0).unwrap();
        let mut m = ThermalModel::new(c, 0.01).unwrap();
        m.set_heat(2.0).unwrap();
        assert!(m.still_hot());
        // Cooling from 2 to 1 takes tau ln 2 = 6.93 s.
        for _ in 0..680 {
            m.tick(0.0);
        }
        assert!(m.still_hot(), "{}", m.heat());
        for _ in 0..20 {
            m.tick(0.0);
        }
        assert!(!m.still_hot(), "{}", m.heat());
    }

    #[test]
    fn the_quiet_step_matches_the_tick_until_the_trip_and_then_changes_nothing() {
        // One model ticked as the supervisor's full check does, one through the
        // quiet path's call: the same heat after every tick; at the tick that
        // would trip, the quiet call reports it and leaves its model unchanged.
        let c = ThermalConfig::from_time_constant(2.0, 5.0).unwrap();
        let mut full = ThermalModel::new(c, 1e-3).unwrap();
        let mut quiet = full.clone();
        let mut stepped = 0;
        loop {
            let before = quiet.clone();
            let outcome = quiet.add_below_trip(4.0);
            let tripped = full.tick(4.0);
            if tripped {
                assert_eq!(outcome, QuietHeat::WouldTrip);
                assert_eq!(format!("{quiet:?}"), format!("{before:?}"), "nothing changed");
                break;
            }
            match outcome {
                QuietHeat::Unchanged => {}
                QuietHeat::Stepped { still_hot } => {
                    stepped += 1;
                    assert_eq!(still_hot, full.still_hot());
                }
                QuietHeat::WouldTrip => panic!("would trip before the tick trips"),
            }
            assert_eq!(format!("{quiet:?}"), format!("{full:?}"));
        }
        // 2 x rated: -5 ln(1 - 1.3225 / 4) = 2.0 s, about 200 thermal steps.
        assert!((195..=205).contains(&stepped), "{stepped}");
    }

    #[test]
    fn exactly_at_the_rated_steady_state_counts_as_cooled() {
        let c = ThermalConfig::from_time_constant(1.0, 10.0).unwrap();
        let mut m = ThermalModel::new(c, 0.01).unwrap();
        m.set_heat(1.0).unwrap();
        assert!(!m.still_hot());
        m.set_heat(f32::from_bits(1.0f32.to_bits() + 1)).unwrap();
        assert!(m.still_hot());
    }
}
