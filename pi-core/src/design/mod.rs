//! PI design for an R-L load, generic over `f32` (device) and `f64` (host).
//!
//! The plant is the winding `1 / (L s + R)` (back-EMF treated as a slow
//! disturbance, as usual for a current loop). The firmware samples every `Ts`,
//! holds the PWM duty for a period (zero-order hold), optionally applies the
//! duty one period late (the computation delay) and optionally sees the current
//! through a first-order filter. The methods:
//!
//! * [`root_locus`]: continuous pole placement from a 2 % settling time and an
//!   overshoot;
//! * [`cancellation`]: the PI zero on the plant pole, `Kp = L wc`, `Ti = L / R`;
//! * [`modulus_optimum`]: the small delays lumped into `T_sigma`,
//!   `Kp = L / (2 T_sigma)`, `Ti = L / R`;
//! * [`discrete`]: the dominant poles of the sampled loop placed at
//!   `z = exp(s Ts)` of the desired ones.
//!
//! [`analysis`] gives, for any gains, the discrete closed-loop poles, stability,
//! margins, the largest stable period and the predicted step response. Every
//! routine is allocation-free and bounded in time; bad inputs are a
//! [`DesignError`] in words.

pub mod analysis;
pub mod cancellation;
pub mod discrete;
pub mod modulus_optimum;
pub mod poly;
pub mod root_locus;

use core::fmt;

use crate::error::ConfigError;
pub use crate::num::Real;
use crate::pi::PiGains;

/// The winding: `R` (ohm) and `L` (H), both finite and positive.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RlPlant<T> {
    resistance_ohm: T,
    inductance_h: T,
}

impl<T: Real> RlPlant<T> {
    /// A validated plant.
    pub fn new(resistance_ohm: T, inductance_h: T) -> Result<Self, DesignError<T>> {
        Ok(Self {
            resistance_ohm: positive("resistance_ohm", resistance_ohm)?,
            inductance_h: positive("inductance_h", inductance_h)?,
        })
    }
    /// `R`, ohm.
    pub fn resistance_ohm(&self) -> T {
        self.resistance_ohm
    }
    /// `L`, H.
    pub fn inductance_h(&self) -> T {
        self.inductance_h
    }
    /// `L / R`, s.
    pub fn time_constant_s(&self) -> T {
        self.inductance_h / self.resistance_ohm
    }
}

/// How the firmware samples: the control period, whether the duty is applied
/// one period late (computation delay), and the time constant of a first-order
/// current filter (0: none).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Sampling<T> {
    period_s: T,
    one_period_delay: bool,
    filter_tau_s: T,
}

impl<T: Real> Sampling<T> {
    /// A validated sampling description.
    pub fn new(period_s: T, one_period_delay: bool, filter_tau_s: T) -> Result<Self, DesignError<T>> {
        let filter_tau_s = if filter_tau_s == T::ZERO {
            T::ZERO
        } else {
            positive("filter_tau_s", filter_tau_s)?
        };
        Ok(Self {
            period_s: positive("period_s", period_s)?,
            one_period_delay,
            filter_tau_s,
        })
    }
    /// `Ts`, s.
    pub fn period_s(&self) -> T {
        self.period_s
    }
    /// One-period computation delay.
    pub fn one_period_delay(&self) -> bool {
        self.one_period_delay
    }
    /// First-order filter time constant, s (0: none).
    pub fn filter_tau_s(&self) -> T {
        self.filter_tau_s
    }
    /// The same sampling with another filter time constant (0: none; a
    /// negative or NaN value also means none).
    pub fn with_filter(self, filter_tau_s: T) -> Self {
        let tau = if filter_tau_s.is_finite() && filter_tau_s > T::ZERO {
            filter_tau_s
        } else {
            T::ZERO
        };
        Self {
            filter_tau_s: tau,
            ..self
        }
    }

    /// The same sampling at another period.
    pub fn with_period(self, period_s: T) -> Self {
        Self { period_s, ..self }
    }
}

/// A step-response spec: 2 % settling time (s) and overshoot as a fraction in
/// `(0, 1)` (0.05 is 5 %).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Spec<T> {
    settling_time_s: T,
    overshoot: T,
}

impl<T: Real> Spec<T> {
    /// A validated spec.
    pub fn new(settling_time_s: T, overshoot: T) -> Result<Self, DesignError<T>> {
        let settling_time_s = positive("settling_time_s", settling_time_s)?;
        if !(overshoot.is_finite() && overshoot > T::ZERO && overshoot < T::ONE) {
            return Err(DesignError::OvershootOutOfRange { overshoot });
        }
        Ok(Self {
            settling_time_s,
            overshoot,
        })
    }
    /// 2 % settling time, s.
    pub fn settling_time_s(&self) -> T {
        self.settling_time_s
    }
    /// Overshoot fraction.
    pub fn overshoot(&self) -> T {
        self.overshoot
    }
    /// Damping ratio for the overshoot of a second-order system:
    /// `zeta = -ln(Mp) / sqrt(pi^2 + ln^2(Mp))` (Ogata, *Modern Control
    /// Engineering*, transient-response chapter; cited from memory).
    pub fn damping(&self) -> T {
        let l = self.overshoot.ln();
        -l / (T::PI * T::PI + l * l).sqrt()
    }
    /// Real part of the dominant poles for the 2 % settling time,
    /// `sigma = 4 / ts` (Ogata, same chapter: `ts = 4 / (zeta wn)`).
    pub fn sigma(&self) -> T {
        T::of(4.0) / self.settling_time_s
    }
    /// Natural frequency `wn = sigma / zeta`, rad/s.
    pub fn natural_frequency(&self) -> T {
        self.sigma() / self.damping()
    }
    /// Damped frequency `wd = wn sqrt(1 - zeta^2)`, rad/s.
    pub fn damped_frequency(&self) -> T {
        let z = self.damping();
        self.natural_frequency() * (T::ONE - z * z).sqrt()
    }
}

/// Designed gains, `Kp` (V/A) and `Ti` (s).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Gains<T> {
    /// Proportional gain, V/A.
    pub kp_v_per_a: T,
    /// Integral time, s.
    pub ti_s: T,
}

impl<T: Real> Gains<T> {
    /// Integral gain `Kp / Ti`, V/(A s).
    pub fn ki_v_per_a_s(&self) -> T {
        self.kp_v_per_a / self.ti_s
    }
    /// The controller's gains (validated there; they are positive by design).
    pub fn to_pi_gains(&self) -> Result<PiGains, ConfigError> {
        PiGains::from_kp_ti(self.kp_v_per_a.to_f64() as f32, self.ti_s.to_f64() as f32)
    }
}

/// Why a design could not be made, with the nearest thing that can. New
/// reasons may be added, so a match on it needs a wildcard arm.
#[derive(Clone, Copy, Debug, PartialEq)]
#[non_exhaustive]
pub enum DesignError<T> {
    /// A parameter that must be finite and positive was not.
    NotPositive {
        /// Which.
        field: &'static str,
        /// Its value.
        value: T,
    },
    /// The overshoot must be a fraction strictly between 0 and 1.
    OvershootOutOfRange {
        /// The value given.
        overshoot: T,
    },
    /// The loop's own pole already settles faster than asked: a PI cannot slow
    /// it down by placement (the root-locus solution needs `sigma > R / (2 L)`,
    /// i.e. a settling time below `8 L / R`).
    SettlingTooSlow {
        /// The settling time asked, s.
        settling_time_s: T,
        /// The slowest settling time this method can give, s.
        max_settling_time_s: T,
    },
    /// The sampled loop's remaining pole falls outside the unit circle: the
    /// spec is too fast for the period.
    UnstableRemainder {
        /// Magnitude of the remaining pole.
        magnitude: T,
        /// The shortest settling time that leaves it inside, s (approximate).
        min_settling_time_s: T,
    },
    /// The direct discrete method does not handle a current filter yet.
    FilterUnsupported,
}

impl<T: Real> core::error::Error for DesignError<T> {}

impl<T: Real> fmt::Display for DesignError<T> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            DesignError::NotPositive { field, value } => {
                write!(
                    f,
                    "{field} = {value:?} must be a finite number greater than zero; give a positive value"
                )
            }
            DesignError::OvershootOutOfRange { overshoot } => write!(
                f,
                "overshoot = {overshoot:?} must be a fraction strictly between 0 and 1; give for example 0.05 for 5 %"
            ),
            DesignError::SettlingTooSlow {
                settling_time_s,
                max_settling_time_s,
            } => write!(
                f,
                "settling time {:?} s is slower than the winding settles by itself, so placement would need a negative Kp; ask for {:?} s or less, or use pole-zero cancellation",
                settling_time_s, max_settling_time_s
            ),
            DesignError::UnstableRemainder {
                magnitude,
                min_settling_time_s,
            } => write!(
                f,
                "the sampled loop's third pole would lie at |z| = {magnitude:?}, outside the unit circle; ask for a settling time of {min_settling_time_s:?} s or more, or a shorter control period"
            ),
            DesignError::FilterUnsupported => write!(
                f,
                "direct discrete design does not handle a current filter yet; design without it and check with the analysis"
            ),
        }
    }
}

fn positive<T: Real>(field: &'static str, value: T) -> Result<T, DesignError<T>> {
    if value.is_finite() && value > T::ZERO {
        Ok(value)
    } else {
        Err(DesignError::NotPositive { field, value })
    }
}
