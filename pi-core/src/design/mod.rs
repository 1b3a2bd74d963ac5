//! PI design for an R-L load, generic over `f32` (device) and `f64` (host).
//!
//! The plant is the winding `1 / (L s + R)` (back-EMF treated as a slow
//! disturbance, as usual for a current loop). The firmware samples every `Ts`,
//! holds the PWM duty for a period (zero-order hold), applies it a fraction of
//! a period after the sample (the computation delay, 0 to 1 period, modelled
//! exactly) and optionally sees the current through a first-order filter. The
//! methods:
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
pub mod step;

use core::fmt;

use crate::error::ConfigError;
pub use crate::num::Real;
use crate::pi::PiGains;

/// The winding: `R` (ohm) and `L` (H), both finite and positive; for a motor
/// whose rotor turns, optionally how fast its back-EMF rises while the current
/// accelerates it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RlPlant<T> {
    resistance_ohm: T,
    inductance_h: T,
    back_emf_ramp: T,
}

impl<T: Real> RlPlant<T> {
    /// A validated plant (a held rotor, a solenoid, any R-L load).
    pub fn new(resistance_ohm: T, inductance_h: T) -> Result<Self, DesignError<T>> {
        Ok(Self {
            resistance_ohm: positive("resistance_ohm", resistance_ohm)?,
            inductance_h: positive("inductance_h", inductance_h)?,
            back_emf_ramp: T::ZERO,
        })
    }

    /// The same winding on a free rotor: back-EMF constant `Ke` (V s/rad),
    /// torque constant `Kt` (N m/A) and inertia `J` (kg m^2). A current `i`
    /// accelerates the rotor at `Kt i / J`, so the back-EMF, a disturbance the
    /// PI must follow, rises at `Ke Kt i / J` volts per second (friction only
    /// slows it: this is the worst case).
    pub fn with_rotor(
        self,
        back_emf_v_s_per_rad: T,
        torque_n_m_per_a: T,
        inertia_kg_m2: T,
    ) -> Result<Self, DesignError<T>> {
        let ke = non_negative("back_emf_v_s_per_rad", back_emf_v_s_per_rad)?;
        let kt = non_negative("torque_n_m_per_a", torque_n_m_per_a)?;
        let j = positive("inertia_kg_m2", inertia_kg_m2)?;
        Ok(Self {
            back_emf_ramp: ke * kt / j,
            ..self
        })
    }

    /// How fast the back-EMF rises per ampere while the rotor accelerates,
    /// V/(A s) (`Ke Kt / J`; 0 for a held rotor or a plain R-L load).
    pub fn back_emf_ramp_v_per_a_s(&self) -> T {
        self.back_emf_ramp
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

/// How the firmware samples: the control period, the delay from the sample to
/// the moment the new duty reaches the bridge, as a fraction of the period,
/// and the time constant of a first-order current filter (0: none).
///
/// The delay is what the analysis and the direct design model exactly (the
/// modified z-transform of the held, delayed input): `0` is a duty applied at
/// the sampling instant, `0.5` a sample at the PWM centre with the duty loaded
/// at the next period start, `1` the classic one-period computation delay.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Sampling<T> {
    period_s: T,
    delay_periods: T,
    filter_tau_s: T,
}

impl<T: Real> Sampling<T> {
    /// A validated sampling description: `period_s > 0`, `delay_periods` in
    /// `[0, 1]`, `filter_tau_s` zero (no filter) or positive.
    pub fn new(period_s: T, delay_periods: T, filter_tau_s: T) -> Result<Self, DesignError<T>> {
        let filter_tau_s = if filter_tau_s == T::ZERO {
            T::ZERO
        } else {
            positive("filter_tau_s", filter_tau_s)?
        };
        if !(delay_periods >= T::ZERO && delay_periods <= T::ONE) {
            return Err(DesignError::DelayOutOfRange { delay_periods });
        }
        Ok(Self {
            period_s: positive("period_s", period_s)?,
            delay_periods,
            filter_tau_s,
        })
    }
    /// `Ts`, s.
    pub fn period_s(&self) -> T {
        self.period_s
    }
    /// Sample-to-update delay, in control periods, `[0, 1]`.
    pub fn delay_periods(&self) -> T {
        self.delay_periods
    }
    /// Sample-to-update delay, s.
    pub fn delay_s(&self) -> T {
        self.delay_periods * self.period_s
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

    /// The same sampling at another period, the delay the same fraction of it.
    pub fn with_period(self, period_s: T) -> Self {
        Self { period_s, ..self }
    }
}

/// A step-response spec: a 2 % settling time (s), an overshoot as a fraction
/// in `[0, 1)` (0.05 is 5 %; 0 asks for none: a critically damped target), and
/// optionally a 10-90 % rise time (s) that the analysis checks (the placement
/// does not aim at it).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Spec<T> {
    settling_time_s: T,
    overshoot: T,
    rise_time_s: Option<T>,
}

/// `wn ts` of a critically damped second-order step entering the 2 % band:
/// the root of `(1 + x) exp(-x) = 0.02` (bisection in Python; checked in
/// `step.rs`'s tests).
pub const CRITICAL_SETTLING_WN_TS: f64 = 5.833_921_701_917_39;

impl<T: Real> Spec<T> {
    /// A validated spec.
    pub fn new(settling_time_s: T, overshoot: T) -> Result<Self, DesignError<T>> {
        let settling_time_s = positive("settling_time_s", settling_time_s)?;
        if !(overshoot.is_finite() && overshoot >= T::ZERO && overshoot < T::ONE) {
            return Err(DesignError::OvershootOutOfRange { overshoot });
        }
        Ok(Self {
            settling_time_s,
            overshoot,
            rise_time_s: None,
        })
    }
    /// The same spec with a largest 10-90 % rise time, s.
    pub fn with_rise_time(self, rise_time_s: T) -> Result<Self, DesignError<T>> {
        Ok(Self {
            rise_time_s: Some(positive("rise_time_s", rise_time_s)?),
            ..self
        })
    }
    /// The same spec with another settling time (validated).
    pub fn with_settling_time(self, settling_time_s: T) -> Result<Self, DesignError<T>> {
        Ok(Self {
            settling_time_s: positive("settling_time_s", settling_time_s)?,
            ..self
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
    /// Largest 10-90 % rise time, s, if asked.
    pub fn rise_time_s(&self) -> Option<T> {
        self.rise_time_s
    }
    /// Damping ratio for the overshoot of a second-order system:
    /// `zeta = -ln(Mp) / sqrt(pi^2 + ln^2(Mp))` (Ogata, *Modern Control
    /// Engineering*, transient-response chapter; cited from memory); 1 for no
    /// overshoot.
    pub fn damping(&self) -> T {
        if self.overshoot == T::ZERO {
            return T::ONE;
        }
        let l = self.overshoot.ln();
        -l / (T::PI * T::PI + l * l).sqrt()
    }
    /// Real part of the dominant poles for the 2 % settling time: the
    /// envelope rule `sigma = 4 / ts` (Ogata, same chapter:
    /// `ts = 4 / (zeta wn)`) when the target overshoots, and for the critically
    /// damped target (no envelope to speak of) the exact
    /// `sigma = wn = 5.834 / ts` ([`CRITICAL_SETTLING_WN_TS`]).
    pub fn sigma(&self) -> T {
        if self.overshoot == T::ZERO {
            T::of(CRITICAL_SETTLING_WN_TS) / self.settling_time_s
        } else {
            T::of(4.0) / self.settling_time_s
        }
    }
    /// Natural frequency `wn = sigma / zeta`, rad/s.
    pub fn natural_frequency(&self) -> T {
        self.sigma() / self.damping()
    }
    /// Damped frequency `wd = wn sqrt(1 - zeta^2)`, rad/s (0 when critically damped).
    pub fn damped_frequency(&self) -> T {
        let z = self.damping();
        self.natural_frequency() * (T::ONE - z * z).max(T::ZERO).sqrt()
    }
}

/// The design methods, in the order a survey lists them, each with the
/// setpoint weight it is meant to run with, so the device and the host design
/// and dispatch alike.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Method {
    /// [`discrete`]: the sampled loop's poles placed directly.
    DirectDiscrete,
    /// [`root_locus`]: continuous pole placement.
    RootLocus,
    /// [`modulus_optimum`]: the lumped small time constant.
    ModulusOptimum,
    /// [`cancellation`]: the PI zero on the winding's pole, the bandwidth from
    /// the settling time.
    Cancellation,
}

impl Method {
    /// Every method, in survey order.
    pub const ALL: [Method; 4] = [
        Method::DirectDiscrete,
        Method::RootLocus,
        Method::ModulusOptimum,
        Method::Cancellation,
    ];

    /// A short name for tables.
    pub fn name(self) -> &'static str {
        match self {
            Method::DirectDiscrete => "direct discrete",
            Method::RootLocus => "root locus",
            Method::ModulusOptimum => "modulus optimum",
            Method::Cancellation => "pole-zero cancellation",
        }
    }

    /// The setpoint weight the method is meant to run with: 0 for the pole
    /// placements (the poles are the response only without the PI zero in the
    /// setpoint path), 1 for the cancellations (the zero cancels the winding).
    pub fn setpoint_weight<T: Real>(self) -> T {
        match self {
            Method::DirectDiscrete | Method::RootLocus => T::ZERO,
            Method::ModulusOptimum | Method::Cancellation => T::ONE,
        }
    }

    /// The gains for a plant, sampling and spec. The cancellation's crossover
    /// `wc` is the slowest at which its first-order loop meets the spec's
    /// times: with the back-EMF lag `lag = ramp / (R wc)` (its `Ki` is `R wc`;
    /// see [`analysis::back_emf_lag`]) the response to a step is
    /// `c(t) = (1 - lag)(1 - exp(-wc t))`, so it settles to 2 % when
    /// `wc ts = ln((1 - lag) / (0.02 - lag))` and rises 10-90 % in
    /// `wc tr = ln((0.9 - lag) / (0.1 - lag))`: `ln(50)` and `ln(9)` for a
    /// held rotor. The modulus optimum ignores the spec (its response is fixed
    /// by the loop's small time constants).
    pub fn design<T: Real>(
        self,
        plant: &RlPlant<T>,
        sampling: &Sampling<T>,
        spec: &Spec<T>,
    ) -> Result<Gains<T>, DesignError<T>> {
        match self {
            Method::DirectDiscrete => discrete::design(plant, sampling, spec),
            Method::RootLocus => root_locus::design(plant, spec),
            Method::ModulusOptimum => modulus_optimum::design(plant, sampling),
            Method::Cancellation => {
                let band = T::of(step::SETTLING_BAND);
                let settle = slowest_crossover(plant, spec.settling_time_s(), T::ONE, band);
                let rise = spec
                    .rise_time_s()
                    .map_or(T::ZERO, |tr| slowest_crossover(plant, tr, T::of(0.9), T::of(0.1)));
                cancellation::design(plant, settle.max(rise) / (T::of(2.0) * T::PI))
            }
        }
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
    /// The overshoot must be a fraction from 0 up to (not including) 1.
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
    /// The sample-to-update delay must be between 0 and 1 control period.
    DelayOutOfRange {
        /// The value given, in periods.
        delay_periods: T,
    },
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
                "overshoot = {overshoot:?} must be a fraction from 0 up to (not including) 1; give for example 0.05 for 5 %, or 0 for none"
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
            DesignError::DelayOutOfRange { delay_periods } => write!(
                f,
                "a sample-to-update delay of {delay_periods:?} periods is outside what the analysis models; give a delay between 0 and 1 control period"
            ),
            DesignError::FilterUnsupported => write!(
                f,
                "direct discrete design does not handle a current filter yet; design without it and check with the analysis"
            ),
        }
    }
}

/// The smallest crossover `wc` (rad/s) of a cancellation loop with
/// `wc t >= ln((a - lag) / (b - lag))`, `lag = ramp / (R wc)`: a bisection of a
/// condition that only gets easier as `wc` grows, bounded for the device.
fn slowest_crossover<T: Real>(plant: &RlPlant<T>, t: T, a: T, b: T) -> T {
    let ramp_per_r = plant.back_emf_ramp_v_per_a_s() / plant.resistance_ohm();
    let ok = |wc: T| {
        let lag = ramp_per_r / wc;
        lag < b && wc * t >= ((a - lag) / (b - lag)).ln()
    };
    // Without a rotor the condition is exact at `ln(a / b) / t`.
    let mut lo = (a / b).ln() / t;
    if ramp_per_r == T::ZERO || !lo.is_finite() {
        return lo;
    }
    lo = lo.max(ramp_per_r / b);
    let mut hi = lo * T::of(2.0);
    for _ in 0..60 {
        if ok(hi) {
            break;
        }
        lo = hi;
        hi = hi * T::of(2.0);
    }
    for _ in 0..60 {
        let mid = (lo + hi) * T::of(0.5);
        if ok(mid) {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    hi
}

fn non_negative<T: Real>(field: &'static str, value: T) -> Result<T, DesignError<T>> {
    if value.is_finite() && value >= T::ZERO {
        Ok(value)
    } else {
        Err(DesignError::NotPositive { field, value })
    }
}

fn positive<T: Real>(field: &'static str, value: T) -> Result<T, DesignError<T>> {
    if value.is_finite() && value > T::ZERO {
        Ok(value)
    } else {
        Err(DesignError::NotPositive { field, value })
    }
}
