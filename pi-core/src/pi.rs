//! The bare PI controller: amperes in, volts out.
//!
//! It knows nothing about ADCs, faults or PWM; the assembled loop
//! ([`crate::CurrentLoop`]) wraps it. Use it alone when you already have a
//! current in amperes and want a voltage.
//!
//! # Control law
//!
//! Parallel form with a proportional setpoint weight `b` (two-degree-of-freedom PI):
//!
//! ```text
//! e[k] = r[k] - y[k]                       (amperes; positive = more current wanted)
//! P[k] = Kp * (b * r[k] - y[k])            (volts)
//! I[k] = I[k-1] + Ki * Ts * e[k]           backward Euler (default)
//! I[k] = I[k-1] + Ki * Ts / 2 * (e[k] + e[k-1])   Tustin (trapezoidal)
//! u[k] = sat(P[k] + I[k])                  clamped to the output limits
//! ```
//!
//! `r` is the current setpoint, `y` the measured current, both in amperes with the
//! same sign convention (positive = forward); `u` is the voltage to apply across the
//! load, positive driving positive current. With `b = 1` this is the textbook PI.
//! With `b < 1` the response to setpoint steps loses the overshoot that the
//! controller's zero adds, while the response to disturbances is unchanged.
//!
//! # Anti-windup
//!
//! * [`AntiWindup::Clamping`] (conditional integration): the integrator does not
//!   move in a step that would drive a saturated output further into saturation.
//! * [`AntiWindup::BackCalculation`] (the default): the integrator is pulled back
//!   by `Ts / Tt * (u_sat - u_unsat)` each step, with tracking time `Tt`.
//!
//! While the output is saturated the integrator is also held on the far side of
//! the range the output needs at steady state, `[lo, hi] + Kp (1 - b) r`: saturated
//! high, no lower than `lo + Kp (1 - b) r` (back-calculation would otherwise take
//! it far below when the proportional part alone spans more than the range);
//! saturated low, no higher than `hi + Kp (1 - b) r`. Clamping holds it inside
//! both edges. While the output is inside its limits the integrator is left
//! alone, so the loop is linear there.
//!
//! # Bad input
//!
//! If the setpoint or the measurement is NaN or infinite, or `r - y` overflows,
//! the update returns 0 V and leaves the integrator untouched; the supervisor in
//! the assembled loop faults on such a reading before it reaches here. (Finite
//! inputs so large that only the proportional part overflows saturate the
//! output instead.)
//!
//! # Retuning
//!
//! [`PiController::retune`] takes effect at the next update, which first moves
//! the integrator by the change of the proportional part at its own setpoint and
//! measurement: `P + I` is carried over, so the output moves only by the change of
//! the integral step.
//!
//! # Cost
//!
//! The common configuration (backward Euler, back-calculation, no retune
//! waiting) runs inline; trapezoidal integration, clamping and the update that
//! hands a retune over take an out-of-line path. The README's performance
//! section has the instruction counts of each.
//!
//! ```
//! use pi_core::pi::{OutputLimits, PiConfig, PiController, PiGains};
//!
//! // 2.4 mH, 1.9 ohm winding (invented demo values); Kp = 3 V/A, Ti = L/R.
//! let gains = PiGains::from_kp_ti(3.0, 2.4e-3 / 1.9)?;
//! let limits = OutputLimits::new(-24.0, 24.0)?;
//! let config = PiConfig::new(gains, 50e-6, limits)?;
//! let mut pi = PiController::new(config);
//! let volts = pi.update(1.0, 0.0); // 1 A wanted, 0 A measured
//! // Kp e + Ki Ts e = 3 + 3 / 1.263e-3 * 50e-6 = 3.119 V on the first step.
//! assert!((volts - 3.1188).abs() < 1e-3);
//! # Ok::<(), pi_core::ConfigError>(())
//! ```

use crate::error::{ConfigError, Requirement, finite, non_negative, positive, within};
use crate::num::clamp;

pub mod fixed;

/// The numbers the control law runs on: `f32` on a core with an FPU. The
/// law ([`Law`]) is written once over this trait, so another arithmetic
/// (fixed point for cores without an FPU) runs the same law.
pub(crate) trait Arithmetic: Copy + PartialOrd {
    /// A coefficient that multiplies a value (a gain, a tracking rate).
    type Coefficient: Copy + core::fmt::Debug + PartialEq;
    /// Zero.
    const ZERO: Self;
    /// `self + other`.
    fn plus(self, other: Self) -> Self;
    /// `self - other`.
    fn minus(self, other: Self) -> Self;
    /// `k * self`.
    fn times(self, k: Self::Coefficient) -> Self;
    /// `k * (self - other)` for two values of the input range (a setpoint
    /// and a measurement): one product instead of two, exact where the
    /// arithmetic allows.
    fn difference_times(self, other: Self, k: Self::Coefficient) -> Self;
    /// Whether the value is no number (an f32 NaN); an arithmetic without
    /// such values says `false`.
    fn is_bad(self) -> bool;
    /// `self` limited to `[lo, hi]` (`lo <= hi`), without a panic path.
    fn limited(self, lo: Self, hi: Self) -> Self;
}

impl Arithmetic for f32 {
    type Coefficient = f32;
    const ZERO: f32 = 0.0;
    #[inline(always)]
    fn plus(self, other: f32) -> f32 {
        self + other
    }
    #[inline(always)]
    fn minus(self, other: f32) -> f32 {
        self - other
    }
    #[inline(always)]
    fn times(self, k: f32) -> f32 {
        k * self
    }
    #[inline(always)]
    fn difference_times(self, other: f32, k: f32) -> f32 {
        k * (self - other)
    }
    #[inline(always)]
    fn is_bad(self) -> bool {
        self.is_nan()
    }
    #[inline(always)]
    fn limited(self, lo: f32, hi: f32) -> f32 {
        clamp(self, lo, hi)
    }
}

/// How the integral is discretised.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum IntegratorRule {
    /// `I[k] = I[k-1] + Ki Ts e[k]`: uses the newest error, no extra state. Default.
    #[default]
    BackwardEuler,
    /// `I[k] = I[k-1] + Ki Ts (e[k] + e[k-1]) / 2`: trapezoidal, matches the
    /// continuous integrator's phase better at the cost of one stored error.
    Tustin,
}

/// How the integrator is kept from winding up while the output is saturated.
///
/// Measured on the invented demo load (tests/windup_recovery.rs): the default
/// back-calculation recovers from 1 s of saturation as well as from a plain step
/// in both test scenarios (limit reached by a large setpoint, and by a disturbance
/// the output cannot overcome). Clamping does as well when a disturbance held the
/// output, but after the setpoint swings the output from one limit to the other it
/// leaves the integrator at a stale value and overshoots by about 3.5 % of the step.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum AntiWindup {
    /// Conditional integration: skip the integrator step when the output is
    /// saturated and the step would push it further the same way.
    Clamping,
    /// Back-calculation: feed `Ts / Tt * (u_sat - u_unsat)` back into the integrator.
    ///
    /// `tracking_time_s: None` selects the default `Tt = sqrt(Ti Ts)`, kept within
    /// `[Ts, Ti]`. Åström and Hägglund (Advanced PID Control, ISA 2006, the
    /// anti-windup section of ch. 3; cited from memory) advise a tracking time
    /// between `Td` and `Ti`, with `Tt = sqrt(Ti Td)` as the rule of thumb. A PI has no `Td`; the default puts the shortest time scale the
    /// sampled loop has, the control period `Ts`, in its place (our adaptation of
    /// their rule). With `Tt = Ti` the integrator settles at the limit itself and the
    /// recovery after a disturbance overshoots by over 20 % in the test above. A given
    /// time must be at least one control period (`Ts / Tt <= 1` keeps the correction
    /// stable).
    BackCalculation {
        /// Tracking time constant `Tt` in seconds, or `None` for the default.
        tracking_time_s: Option<f32>,
    },
}

impl Default for AntiWindup {
    /// Back-calculation with the default tracking time.
    fn default() -> Self {
        AntiWindup::BackCalculation {
            tracking_time_s: None,
        }
    }
}

/// Whether the last output hit a limit.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Saturation {
    /// The output was inside the limits.
    #[default]
    None,
    /// The output was clamped to the upper limit.
    High,
    /// The output was clamped to the lower limit.
    Low,
}

/// Validated PI gains: proportional gain, integral gain and setpoint weight.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PiGains {
    kp_v_per_a: f32,
    ki_v_per_a_s: f32,
    setpoint_weight: f32,
}

impl PiGains {
    /// Gains from the proportional gain `Kp` (V/A) and the integral time `Ti` (s),
    /// `Ki = Kp / Ti`. `Kp` must be > 0 and `Ti` > 0; `Ti = f32::INFINITY` gives a
    /// proportional-only controller.
    pub fn from_kp_ti(kp_v_per_a: f32, ti_s: f32) -> Result<Self, ConfigError> {
        let kp = positive("kp_v_per_a", kp_v_per_a)?;
        if ti_s.is_nan() || ti_s <= 0.0 {
            return Err(ConfigError::new("ti_s", ti_s, Requirement::Positive));
        }
        let ki = if ti_s.is_infinite() { 0.0 } else { kp / ti_s };
        Self::from_kp_ki(kp, ki)
    }

    /// Gains from `Kp` (V/A) and `Ki` (V/(A s)), both finite and >= 0, not both zero.
    pub fn from_kp_ki(kp_v_per_a: f32, ki_v_per_a_s: f32) -> Result<Self, ConfigError> {
        let kp = non_negative("kp_v_per_a", kp_v_per_a)?;
        let ki = non_negative("ki_v_per_a_s", ki_v_per_a_s)?;
        if kp == 0.0 && ki == 0.0 {
            return Err(ConfigError::new("kp_v_per_a", kp, Requirement::Positive));
        }
        Ok(Self {
            kp_v_per_a: kp,
            ki_v_per_a_s: ki,
            setpoint_weight: 1.0,
        })
    }

    /// The same gains with proportional setpoint weight `b` in `[0, 1]` (default 1).
    pub fn with_setpoint_weight(self, b: f32) -> Result<Self, ConfigError> {
        let b = within("setpoint_weight", b, 0.0, 1.0)?;
        Ok(Self {
            setpoint_weight: b,
            ..self
        })
    }

    /// Proportional gain in V/A.
    pub fn kp_v_per_a(&self) -> f32 {
        self.kp_v_per_a
    }

    /// Integral gain in V/(A s).
    pub fn ki_v_per_a_s(&self) -> f32 {
        self.ki_v_per_a_s
    }

    /// Integral time `Kp / Ki` in seconds (infinite when `Ki = 0`).
    pub fn ti_s(&self) -> f32 {
        if self.ki_v_per_a_s > 0.0 {
            self.kp_v_per_a / self.ki_v_per_a_s
        } else {
            f32::INFINITY
        }
    }

    /// Proportional setpoint weight `b`.
    pub fn setpoint_weight(&self) -> f32 {
        self.setpoint_weight
    }
}

/// Validated output voltage limits `min_v < max_v`.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct OutputLimits {
    min_v: f32,
    max_v: f32,
}

impl OutputLimits {
    /// Limits in volts; both finite, `max_v > min_v`. A unidirectional drive may
    /// use `min_v = 0`.
    pub fn new(min_v: f32, max_v: f32) -> Result<Self, ConfigError> {
        let min_v = finite("min_v", min_v)?;
        let max_v = finite("max_v", max_v)?;
        if max_v <= min_v {
            return Err(ConfigError::new("max_v", max_v, Requirement::Above("min_v")));
        }
        Ok(Self { min_v, max_v })
    }

    /// Symmetric limits `-v_max .. v_max`, `v_max > 0`.
    pub fn symmetric(v_max: f32) -> Result<Self, ConfigError> {
        let v = positive("v_max", v_max)?;
        Self::new(-v, v)
    }

    /// Lower limit in volts.
    pub fn min_v(&self) -> f32 {
        self.min_v
    }

    /// Upper limit in volts.
    pub fn max_v(&self) -> f32 {
        self.max_v
    }
}

/// A validated PI configuration: gains, control period, limits, rules.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PiConfig {
    gains: PiGains,
    period_s: f32,
    limits: OutputLimits,
    rule: IntegratorRule,
    anti_windup: AntiWindup,
}

impl PiConfig {
    /// Configuration with backward-Euler integration and back-calculation
    /// anti-windup at the default tracking time.
    /// `period_s` is the control period `Ts` in seconds, finite and > 0.
    pub fn new(gains: PiGains, period_s: f32, limits: OutputLimits) -> Result<Self, ConfigError> {
        let period_s = positive("period_s", period_s)?;
        Ok(Self {
            gains,
            period_s,
            limits,
            rule: IntegratorRule::BackwardEuler,
            anti_windup: AntiWindup::default(),
        })
    }

    /// The same configuration with another integrator rule.
    pub fn with_rule(self, rule: IntegratorRule) -> Self {
        Self { rule, ..self }
    }

    /// The same configuration with another anti-windup scheme. A back-calculation
    /// tracking time must be finite and at least one control period.
    pub fn with_anti_windup(self, anti_windup: AntiWindup) -> Result<Self, ConfigError> {
        if let AntiWindup::BackCalculation {
            tracking_time_s: Some(tt),
        } = anti_windup
            && !(tt.is_finite() && tt >= self.period_s)
        {
            return Err(ConfigError::new(
                "tracking_time_s",
                tt,
                Requirement::Within {
                    min: self.period_s,
                    max: f32::MAX,
                },
            ));
        }
        Ok(Self { anti_windup, ..self })
    }

    /// The gains.
    pub fn gains(&self) -> PiGains {
        self.gains
    }

    /// Control period in seconds.
    pub fn period_s(&self) -> f32 {
        self.period_s
    }

    /// Output limits.
    pub fn limits(&self) -> OutputLimits {
        self.limits
    }

    /// The configuration with its lower output limit raised to `floor_v`
    /// where it is below (and still at most the upper one): a one-direction
    /// drive's PI never asks for less than 0 V, so its anti-windup acts there.
    pub(crate) fn with_floor(self, floor_v: f32) -> Self {
        let l = self.limits;
        let min_v = if l.min_v < floor_v && floor_v <= l.max_v {
            floor_v
        } else {
            l.min_v
        };
        Self {
            limits: OutputLimits { min_v, ..l },
            ..self
        }
    }

    /// Integrator rule.
    pub fn rule(&self) -> IntegratorRule {
        self.rule
    }

    /// Anti-windup scheme.
    pub fn anti_windup(&self) -> AntiWindup {
        self.anti_windup
    }

    /// The back-calculation tracking time in effect (seconds), `None` for clamping.
    pub fn tracking_time_s(&self) -> Option<f32> {
        match self.anti_windup {
            AntiWindup::Clamping => None,
            AntiWindup::BackCalculation {
                tracking_time_s: Some(tt),
            } => Some(tt),
            AntiWindup::BackCalculation {
                tracking_time_s: None,
            } => {
                let ts = self.period_s;
                let ti = self.gains.ti_s();
                // sqrt(Ti Ts) lies in [Ts, Ti] whenever Ti >= Ts; a Ti shorter than Ts
                // gives Ts. Without integral action (Ti infinite) there is nothing to
                // track and Tt is infinite.
                let tt = libm::sqrtf(ti * ts);
                Some(if tt < ts { ts } else { tt })
            }
        }
    }
}

/// Coefficients precomputed from a configuration so the update is multiply-adds.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Coefficients<K = f32> {
    /// `Kp`.
    kp: K,
    /// `Kp * b`.
    kp_b: K,
    /// `Kp * (1 - b)`.
    kp_unweighted: K,
    /// `Ki Ts` (backward Euler) or `Ki Ts / 2` (Tustin).
    ki_step: K,
    /// `Ts / Tt` for back-calculation, unused for clamping.
    tracking: K,
}

impl<K: Copy> Coefficients<K> {
    /// The proportional part `Kp (b r - y)`, volts.
    #[inline(always)]
    fn proportional<A: Arithmetic<Coefficient = K>>(&self, setpoint_a: A, measured_a: A) -> A {
        setpoint_a.times(self.kp_b).minus(measured_a.times(self.kp))
    }
}

/// [`path::WEIGHTED`] for gains whose setpoint weight is not exactly 1, else
/// 0. At a weight of 1, `Kp b` is `Kp` and `Kp (1 - b)` is 0 exactly, so the
/// common path's one-product form is the same law.
fn weight_path(gains: &PiGains) -> u8 {
    if gains.setpoint_weight == 1.0 {
        0
    } else {
        path::WEIGHTED
    }
}

impl Coefficients {
    fn from_config(c: &PiConfig) -> Self {
        let g = c.gains;
        let ki_ts = g.ki_v_per_a_s * c.period_s;
        let tracking = match c.tracking_time_s() {
            Some(tt) => c.period_s / tt,
            None => 0.0,
        };
        Self {
            kp: g.kp_v_per_a,
            kp_b: g.kp_v_per_a * g.setpoint_weight,
            kp_unweighted: g.kp_v_per_a * (1.0 - g.setpoint_weight),
            ki_step: if c.rule == IntegratorRule::Tustin {
                0.5 * ki_ts
            } else {
                ki_ts
            },
            tracking,
        }
    }
}

/// Which update path a controller takes; any bit set leaves the common path
/// (backward Euler, back-calculation, no retune waiting) for the general one.
mod path {
    /// Trapezoidal integration: the update also needs the previous error.
    pub const TUSTIN: u8 = 1;
    /// Conditional integration instead of back-calculation.
    pub const CLAMPING: u8 = 2;
    /// New gains wait to be handed over at the next update.
    pub const RETUNE: u8 = 4;
    /// A setpoint weight other than 1: the proportional part takes `Kp b r`
    /// and `Kp y` apart, and a saturated step the offset `Kp (1 - b) r`.
    pub const WEIGHTED: u8 = 8;
}

/// The control law and its state, written once over an [`Arithmetic`]: the
/// float controller ([`PiController`]) runs it on `f32`.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Law<A: Arithmetic> {
    k: Coefficients<A::Coefficient>,
    integrator: A,
    /// The last update's unlimited output `P + I`; above the output it
    /// saturated high, below it saturated low.
    demand: A,
    output: A,
    prev_error: A,
}

impl<A: Arithmetic> Law<A> {
    /// At rest with coefficients `k`.
    fn new(k: Coefficients<A::Coefficient>) -> Self {
        Self {
            k,
            integrator: A::ZERO,
            demand: A::ZERO,
            output: A::ZERO,
            prev_error: A::ZERO,
        }
    }

    /// The control law, one body for every rule and anti-windup scheme (the
    /// choices are compile-time here, so the common path carries none of the
    /// others). `UNITY`: the setpoint weight is 1, so the proportional part
    /// is one product and a saturated step has no offset (the general form
    /// gives the same: `Kp b = Kp`, `Kp (1 - b) = 0`).
    #[inline(always)]
    fn law<const TUSTIN: bool, const CLAMPING: bool, const UNITY: bool>(
        &mut self,
        setpoint_a: A,
        measured_a: A,
        lo: A,
        hi: A,
    ) -> A {
        let k = self.k;
        let e = setpoint_a.minus(measured_a);
        let p = if UNITY {
            setpoint_a.difference_times(measured_a, k.kp)
        } else {
            k.proportional(setpoint_a, measured_a)
        };
        let step = if TUSTIN {
            e.plus(self.prev_error).times(k.ki_step)
        } else {
            e.times(k.ki_step)
        };
        let candidate = self.integrator.plus(step);
        // `e - e` is 0 for a finite error and NaN otherwise, so a NaN or
        // infinite input (or an overflowing error) makes the demand NaN.
        let demand = p.plus(candidate).plus(e.minus(e));
        // Three outcomes from two comparisons: a NaN fails `<=` and joins the
        // high side, where it is sorted out.
        #[allow(clippy::neg_cmp_op_on_partial_ord)]
        if !(demand <= hi) {
            if demand.is_bad() {
                return self.refuse();
            }
            let (u, i) =
                self.saturated::<CLAMPING, UNITY>(demand, candidate, step, p, hi, lo, setpoint_a, true);
            self.commit::<TUSTIN>(e, i, demand, u)
        } else if demand >= lo {
            // Inside the limits the loop is linear: the integrator is exactly
            // `u - P`, so a retune is bumpless.
            self.commit::<TUSTIN>(e, candidate, demand, demand)
        } else {
            let (u, i) =
                self.saturated::<CLAMPING, UNITY>(demand, candidate, step, p, lo, hi, setpoint_a, false);
            self.commit::<TUSTIN>(e, i, demand, u)
        }
    }

    /// Stores the step's state and returns its output.
    #[inline(always)]
    fn commit<const TUSTIN: bool>(&mut self, e: A, integrator: A, demand: A, output: A) -> A {
        if TUSTIN {
            self.prev_error = e;
        }
        self.integrator = integrator;
        self.demand = demand;
        self.output = output;
        output
    }

    /// The output and integrator of a saturated step, written once for both sides:
    /// `limit` is the one the demand went past, `other` the opposite one, `high`
    /// says which side.
    ///
    /// The integrator is held on the far side of the range the output needs at
    /// steady state for this setpoint, `[lo, hi] + Kp (1 - b) r` (with a setpoint
    /// weight b < 1 the weighted proportional part keeps `-Kp (1 - b) r` at steady
    /// state, which the integrator must make up): saturated high it stays at or
    /// above `lo + Kp (1 - b) r`, where back-calculation would otherwise take it
    /// when the proportional part alone spans more than the range. On the near
    /// side, back-calculation pulls it toward the limit with time constant `Tt`.
    /// Clamping holds it inside both edges, as it has no pull of its own.
    #[allow(clippy::too_many_arguments)]
    #[inline(always)]
    fn saturated<const CLAMPING: bool, const UNITY: bool>(
        &self,
        demand: A,
        candidate: A,
        step: A,
        p: A,
        limit: A,
        other: A,
        setpoint_a: A,
        high: bool,
    ) -> (A, A) {
        let offset = if UNITY {
            A::ZERO
        } else {
            setpoint_a.times(self.k.kp_unweighted)
        };
        if CLAMPING {
            // Skip the integral step when it pushes further into the limit.
            let pushing = if high { step > A::ZERO } else { step < A::ZERO };
            let held = if pushing { self.integrator } else { candidate };
            let (lo, hi) = if high { (other, limit) } else { (limit, other) };
            (
                p.plus(held).limited(lo, hi),
                held.limited(lo.plus(offset), hi.plus(offset)),
            )
        } else {
            let tracked = candidate.plus(limit.minus(demand).times(self.k.tracking));
            let edge = other.plus(offset);
            let held = if high {
                if tracked >= edge { tracked } else { edge }
            } else if tracked <= edge {
                tracked
            } else {
                edge
            };
            (limit, held)
        }
    }

    /// The bad-input reaction: zero output, integrator untouched.
    #[inline(always)]
    fn refuse(&mut self) -> A {
        self.demand = A::ZERO;
        self.output = A::ZERO;
        A::ZERO
    }

    /// Installs coefficients `new`, moving the integrator by the change of the
    /// proportional part at this setpoint and measurement so that `P + I` is
    /// unchanged (the bumpless handover of a retune). False, and nothing
    /// changed, when that change is no number or infinite.
    fn hand_over(&mut self, new: Coefficients<A::Coefficient>, setpoint_a: A, measured_a: A) -> bool {
        let shift = self
            .k
            .proportional(setpoint_a, measured_a)
            .minus(new.proportional(setpoint_a, measured_a));
        // `shift - shift` is NaN for an infinite shift as well as a NaN one.
        if shift.minus(shift).is_bad() {
            return false;
        }
        self.integrator = self.integrator.plus(shift);
        self.k = new;
        true
    }

    /// Sets the integrator so that this setpoint and measurement give output
    /// `u` (inside `[min, max]`), held on the steady-state range
    /// `[min, max] + Kp (1 - b) r` when the proportional part alone is beyond it.
    fn track(&mut self, u: A, setpoint_a: A, measured_a: A, min: A, max: A) {
        let p = self.k.proportional(setpoint_a, measured_a);
        let offset = setpoint_a.times(self.k.kp_unweighted);
        self.integrator = u.minus(p).limited(min.plus(offset), max.plus(offset));
        self.prev_error = setpoint_a.minus(measured_a);
        self.demand = u;
        self.output = u;
    }

    /// Back to rest: integrator, remembered error and outputs zero.
    fn rest(&mut self) {
        self.integrator = A::ZERO;
        self.prev_error = A::ZERO;
        self.demand = A::ZERO;
        self.output = A::ZERO;
    }
}

/// The PI controller with its state.
#[derive(Clone, Debug)]
pub struct PiController {
    law: Law<f32>,
    /// The configured output limits, copied here for the update.
    min_v: f32,
    max_v: f32,
    path: u8,
    config: PiConfig,
}

impl PiController {
    /// A controller at rest (integrator 0 V).
    pub fn new(config: PiConfig) -> Self {
        let mut path = 0;
        if config.rule == IntegratorRule::Tustin {
            path |= path::TUSTIN;
        }
        if config.anti_windup == AntiWindup::Clamping {
            path |= path::CLAMPING;
        }
        path |= weight_path(&config.gains);
        Self {
            law: Law::new(Coefficients::from_config(&config)),
            min_v: config.limits.min_v,
            max_v: config.limits.max_v,
            path,
            config,
        }
    }

    /// One control step with the configured limits; returns the voltage to apply.
    #[inline]
    pub fn update(&mut self, setpoint_a: f32, measured_a: f32) -> f32 {
        // The configured limits are validated already: no need to intersect them.
        let (lo, hi) = (self.min_v, self.max_v);
        self.step(setpoint_a, measured_a, lo, hi)
    }

    /// One control step with limits narrower than the configured ones for this step
    /// only, for example the voltage the bus can give right now. The limits used are
    /// the intersection of `[min_v, max_v]` with the configured range; if that is
    /// empty both collapse onto the upper one of the two, so the output is still a
    /// single defined value inside the configured range. A NaN limit is replaced by
    /// the configured one.
    #[inline]
    pub fn update_within(&mut self, setpoint_a: f32, measured_a: f32, min_v: f32, max_v: f32) -> f32 {
        // Written so that a NaN bound fails the comparison and takes the configured one.
        let lo = if min_v > self.min_v { min_v } else { self.min_v };
        let hi = if max_v < self.max_v { max_v } else { self.max_v };
        if lo <= hi {
            self.step(setpoint_a, measured_a, lo, hi)
        } else {
            // Empty: both onto the upper bound, kept inside the configured range.
            let v = if hi > self.min_v { hi } else { self.min_v };
            self.step(setpoint_a, measured_a, v, v)
        }
    }

    /// One control step with limits the caller knows are ordered (`min_v <= max_v`)
    /// and inside the configured range, so no intersection is needed.
    #[inline]
    pub(crate) fn update_inside(&mut self, setpoint_a: f32, measured_a: f32, min_v: f32, max_v: f32) -> f32 {
        self.step(setpoint_a, measured_a, min_v, max_v)
    }

    /// One step with limits `lo <= hi` already inside the configured range: the
    /// common configuration inline, the others out of line.
    #[inline(always)]
    fn step(&mut self, setpoint_a: f32, measured_a: f32, lo: f32, hi: f32) -> f32 {
        // The common rule and anti-windup inline: a weight of 1 first (one
        // product for the proportional part), then any other weight (out of
        // line it cost a third more on Cortex-M0); the rest out of line.
        if self.path == 0 {
            self.law.law::<false, false, true>(setpoint_a, measured_a, lo, hi)
        } else if self.path == path::WEIGHTED {
            self.law
                .law::<false, false, false>(setpoint_a, measured_a, lo, hi)
        } else {
            self.step_general(setpoint_a, measured_a, lo, hi)
        }
    }

    /// Trapezoidal integration, clamping, and the update that hands a retune over.
    #[cold]
    #[inline(never)]
    fn step_general(&mut self, setpoint_a: f32, measured_a: f32, lo: f32, hi: f32) -> f32 {
        if self.path & path::RETUNE != 0 && !self.hand_over(setpoint_a, measured_a) {
            return self.refuse();
        }
        // The general form covers any weight (it equals the unity form at b = 1).
        match (self.path & path::TUSTIN != 0, self.path & path::CLAMPING != 0) {
            (false, false) => self
                .law
                .law::<false, false, false>(setpoint_a, measured_a, lo, hi),
            (false, true) => self.law.law::<false, true, false>(setpoint_a, measured_a, lo, hi),
            (true, false) => self.law.law::<true, false, false>(setpoint_a, measured_a, lo, hi),
            (true, true) => self.law.law::<true, true, false>(setpoint_a, measured_a, lo, hi),
        }
    }

    /// The bad-input reaction: 0 V, integrator untouched.
    #[inline(always)]
    fn refuse(&mut self) -> f32 {
        self.law.refuse()
    }

    /// Installs the configured gains, moving the integrator by the change of the
    /// proportional part at this sample so that `P + I` is unchanged. False (and
    /// nothing changed) when that change is not finite.
    fn hand_over(&mut self, setpoint_a: f32, measured_a: f32) -> bool {
        if !self
            .law
            .hand_over(Coefficients::from_config(&self.config), setpoint_a, measured_a)
        {
            return false;
        }
        self.path = (self.path & !(path::RETUNE | path::WEIGHTED)) | weight_path(&self.config.gains);
        true
    }

    fn install(&mut self, k: Coefficients) {
        self.law.k = k;
        self.path = (self.path & !(path::RETUNE | path::WEIGHTED)) | weight_path(&self.config.gains);
    }

    /// Installs the gains of a retune still waiting, without a handover.
    fn install_waiting(&mut self) {
        if self.path & path::RETUNE != 0 {
            self.install(Coefficients::from_config(&self.config));
        }
    }

    /// Bumpless retune: the new gains take over at the next update, which first
    /// moves the integrator by the change of the proportional part at its own
    /// setpoint and measurement, so that `P + I` is what the old gains had; that
    /// update's output therefore differs from what the old gains would have given
    /// only by the change of the integral step. The handover waits for an update
    /// with finite inputs. [`PiController::config`] shows the new gains at once.
    pub fn retune(&mut self, gains: PiGains) {
        self.config.gains = gains;
        self.path |= path::RETUNE;
    }

    /// Validates `Kp` and `Ti` and retunes bumplessly; on error the old gains stay.
    /// The setpoint weight in use is kept.
    pub fn retune_kp_ti(&mut self, kp_v_per_a: f32, ti_s: f32) -> Result<(), ConfigError> {
        let b = self.config.gains.setpoint_weight;
        let gains = PiGains::from_kp_ti(kp_v_per_a, ti_s)?.with_setpoint_weight(b)?;
        self.retune(gains);
        Ok(())
    }

    /// Track/preload: set the integrator so that the controller, at this setpoint
    /// and measurement, outputs `output_v`; used when taking over from open-loop
    /// drive without a step. `output_v` must lie within the configured limits and all
    /// values be finite. If the proportional part alone is beyond the output range the
    /// integrator is held at the range edge and the first output saturates. Gains
    /// waiting from a retune take effect here.
    pub fn track(&mut self, output_v: f32, setpoint_a: f32, measured_a: f32) -> Result<(), ConfigError> {
        let l = self.config.limits;
        let u = within("output_v", output_v, l.min_v, l.max_v)?;
        let r = finite("setpoint_a", setpoint_a)?;
        let y = finite("measured_a", measured_a)?;
        self.install_waiting();
        self.law.track(u, r, y, l.min_v, l.max_v);
        Ok(())
    }

    /// Return to rest: integrator and remembered error and output to zero. Gains
    /// waiting from a retune take effect here.
    pub fn reset(&mut self) {
        self.install_waiting();
        self.law.rest();
    }

    /// Integrator state in volts. After an unsaturated update it is `u - P`;
    /// after a saturated one it lies on the limit's side of the output range
    /// shifted by `Kp (1 - b) r` (see [`AntiWindup`]).
    pub fn integrator_v(&self) -> f32 {
        self.law.integrator
    }

    /// The output of the last update in volts (0 after a refused input).
    pub fn last_output_v(&self) -> f32 {
        self.law.output
    }

    /// The last update's unlimited output `P + I` in volts, before the limits.
    pub fn last_demand_v(&self) -> f32 {
        self.law.demand
    }

    /// Whether the last update saturated (its unlimited output was beyond a limit).
    pub fn saturation(&self) -> Saturation {
        if self.law.demand > self.law.output {
            Saturation::High
        } else if self.law.demand < self.law.output {
            Saturation::Low
        } else {
            Saturation::None
        }
    }

    /// The configuration in use (including gains set by retuning).
    pub fn config(&self) -> &PiConfig {
        &self.config
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn controller(rule: IntegratorRule, aw: AntiWindup) -> PiController {
        // Dyadic values so every product and sum below is exact in f32:
        // Ki Ts = 1024 * 2^-12 = 0.25.
        let gains = PiGains::from_kp_ki(0.5, 1024.0).unwrap();
        let cfg = PiConfig::new(gains, 1.0 / 4096.0, OutputLimits::symmetric(100.0).unwrap())
            .unwrap()
            .with_rule(rule)
            .with_anti_windup(aw)
            .unwrap();
        PiController::new(cfg)
    }

    // Discrete integrator sums of a constant error e from rest (a step at k = 1):
    // backward Euler I_k = k Ki Ts e; trapezoidal I_k = (k - 1/2) Ki Ts e, since
    // e[0] = 0 before the step. Franklin, Powell & Workman, Digital Control of
    // Dynamic Systems, 3rd ed., the chapter on discrete equivalents (the two rules
    // as recurrences; chapter cited from memory).
    #[test]
    fn backward_euler_integrator_is_exact_on_constant_error() {
        let mut pi = controller(IntegratorRule::BackwardEuler, AntiWindup::Clamping);
        for k in 1..=40 {
            let u = pi.update(1.5, 0.0);
            let expected_i = k as f32 * 0.25 * 1.5;
            assert_eq!(pi.integrator_v(), expected_i, "step {k}");
            assert_eq!(u, 0.5 * 1.5 + expected_i, "step {k}");
        }
    }

    #[test]
    fn tustin_integrator_is_exact_on_constant_error() {
        let mut pi = controller(IntegratorRule::Tustin, AntiWindup::Clamping);
        for k in 1..=40 {
            let u = pi.update(1.5, 0.0);
            let expected_i = (k as f32 - 0.5) * 0.25 * 1.5;
            assert_eq!(pi.integrator_v(), expected_i, "step {k}");
            assert_eq!(u, 0.75 + expected_i, "step {k}");
        }
    }

    /// The common path's one-product form at a weight of 1 is the general
    /// form: the two give the same output and state on the same inputs
    /// (within an f32 rounding of `Kp (r - y)` against `Kp r - Kp y`), in
    /// and out of saturation.
    #[test]
    fn the_unity_form_is_the_general_form_at_a_weight_of_one() {
        let gains = PiGains::from_kp_ti(12.06, 1.263e-3).unwrap();
        let cfg = PiConfig::new(gains, 50e-6, OutputLimits::symmetric(22.8).unwrap()).unwrap();
        let (mut a, mut b) = (PiController::new(cfg), PiController::new(cfg));
        assert_eq!(a.path, 0, "a weight of 1 takes the common path");
        for k in 0..400 {
            let (r, y) = (
                if k < 200 { 1.5 } else { -4.0 },
                1.2 * libm::sinf(k as f32 * 0.05),
            );
            let ua = a.law.law::<false, false, true>(r, y, -22.8, 22.8);
            let ub = b.law.law::<false, false, false>(r, y, -22.8, 22.8);
            assert!(
                (ua - ub).abs() <= 1e-5 * (1.0 + ua.abs()),
                "step {k}: {ua} against {ub}"
            );
            assert!((a.integrator_v() - b.integrator_v()).abs() <= 1e-4, "step {k}");
        }
    }

    /// A retune to another weight leaves the one-product form for the
    /// weighted one, and a retune back returns to it (the path follows the
    /// gains installed, not the ones configured first).
    #[test]
    fn a_retune_of_the_weight_switches_the_form() {
        let gains = PiGains::from_kp_ti(2.0, 1e-3).unwrap();
        let cfg = PiConfig::new(gains, 50e-6, OutputLimits::symmetric(20.0).unwrap()).unwrap();
        let mut pi = PiController::new(cfg);
        assert_eq!(pi.path, 0);
        pi.retune(gains.with_setpoint_weight(0.0).unwrap());
        pi.update(1.0, 0.5);
        assert_eq!(pi.path, path::WEIGHTED);
        // Weight 0: the proportional part is -Kp y alone.
        let before = pi.integrator_v();
        let u = pi.update(1.0, 0.5);
        let step = 2.0 / 1e-3 * 50e-6 * 0.5;
        assert!((u - (-2.0 * 0.5 + before + step)).abs() < 1e-5, "{u}");
        pi.retune(gains);
        pi.update(1.0, 0.5);
        assert_eq!(pi.path, 0);
    }

    #[test]
    fn setpoint_weight_scales_only_the_setpoint_path() {
        let gains = PiGains::from_kp_ki(2.0, 0.0)
            .unwrap()
            .with_setpoint_weight(0.25)
            .unwrap();
        let cfg = PiConfig::new(gains, 1e-4, OutputLimits::symmetric(50.0).unwrap()).unwrap();
        let mut pi = PiController::new(cfg);
        // P = Kp (b r - y) = 2 (0.25 * 4 - 1) = 0.
        assert_eq!(pi.update(4.0, 1.0), 0.0);
        // Disturbance path unchanged: P = 2 (0.25 * 4 - 3) = -4.
        assert_eq!(pi.update(4.0, 3.0), -4.0);
    }

    #[test]
    fn output_and_integrator_stay_inside_limits() {
        for aw in [
            AntiWindup::Clamping,
            AntiWindup::BackCalculation {
                tracking_time_s: None,
            },
        ] {
            let mut pi = controller(IntegratorRule::BackwardEuler, aw);
            for _ in 0..10_000 {
                let u = pi.update(1e4, 0.0);
                assert!(u <= 100.0);
                assert!(pi.integrator_v() <= 100.0);
            }
            assert_eq!(pi.saturation(), Saturation::High);
            for _ in 0..10_000 {
                let u = pi.update(-1e4, 0.0);
                assert!(u >= -100.0);
                assert!(pi.integrator_v() >= -100.0);
            }
            assert_eq!(pi.saturation(), Saturation::Low);
        }
    }

    #[test]
    fn clamping_freezes_the_integrator_while_pushing_into_the_limit() {
        let mut pi = controller(IntegratorRule::BackwardEuler, AntiWindup::Clamping);
        // P alone = 0.5 * 1000 = 500 V > 100 V: the first step already saturates,
        // so the integrator must not move at all.
        for _ in 0..100 {
            assert_eq!(pi.update(1000.0, 0.0), 100.0);
            assert_eq!(pi.integrator_v(), 0.0);
        }
        // An error of the other sign integrates at once.
        pi.update(-1.0, 0.0);
        assert_eq!(pi.integrator_v(), -0.25);
    }

    #[test]
    fn non_finite_error_gives_zero_volts_and_keeps_the_integrator() {
        let mut pi = controller(IntegratorRule::BackwardEuler, AntiWindup::Clamping);
        pi.update(1.0, 0.0);
        let held = pi.integrator_v();
        for (r, y) in [(f32::NAN, 0.0), (1.0, f32::INFINITY), (f32::NEG_INFINITY, 0.0)] {
            assert_eq!(pi.update(r, y), 0.0);
            assert_eq!(pi.integrator_v(), held);
        }
    }

    #[test]
    fn nan_limits_fall_back_to_configured_ones() {
        let mut pi = controller(IntegratorRule::BackwardEuler, AntiWindup::Clamping);
        let u = pi.update_within(1e6, 0.0, f32::NAN, f32::NAN);
        assert_eq!(u, 100.0);
        let u = pi.update_within(-1e6, 0.0, -3.0, 3.0);
        assert_eq!(u, -3.0);
    }

    #[test]
    fn retune_is_bumpless() {
        for rule in [IntegratorRule::BackwardEuler, IntegratorRule::Tustin] {
            let mut pi = controller(rule, AntiWindup::Clamping);
            let mut u_before = 0.0;
            for _ in 0..7 {
                u_before = pi.update(2.0, 0.5);
            }
            let new = PiGains::from_kp_ki(4.0, 300.0)
                .unwrap()
                .with_setpoint_weight(0.6)
                .unwrap();
            pi.retune(new);
            let u_after = pi.update(2.0, 0.5);
            // Only the new integral step separates the two outputs.
            // Backward Euler: Ki Ts e; Tustin: Ki Ts (e + e_prev) / 2; both 1.5 Ki Ts here.
            let ki_step = 300.0 / 4096.0 * 1.5;
            assert!(
                (u_after - u_before - ki_step).abs() < 1e-6,
                "{rule:?}: {u_before} -> {u_after}"
            );
            // The proportional jump a plain gain swap would cause is large.
            let naive_jump = 4.0 * (0.6 * 2.0 - 0.5) - 0.5 * 1.5;
            assert!(naive_jump > 1.0);
        }
    }

    #[test]
    fn retune_hands_over_at_the_next_update_with_its_inputs() {
        for rule in [IntegratorRule::BackwardEuler, IntegratorRule::Tustin] {
            let mut plain = controller(rule, AntiWindup::default());
            for _ in 0..5 {
                plain.update(2.0, 0.5);
            }
            let mut retuned = plain.clone();
            let new = PiGains::from_kp_ki(4.0, 300.0)
                .unwrap()
                .with_setpoint_weight(0.6)
                .unwrap();
            retuned.retune(new);
            assert_eq!(
                retuned.config().gains(),
                new,
                "the configuration shows the new gains at once"
            );
            // The next update comes with other inputs: the handover uses them, so
            // only the change of the integral step separates the two outputs.
            let (r, y) = (2.5, 0.75);
            let (u_plain, u_new) = (plain.update(r, y), retuned.update(r, y));
            let e = r - y;
            let step = |ki: f32| match rule {
                IntegratorRule::BackwardEuler => ki / 4096.0 * e,
                IntegratorRule::Tustin => ki / 4096.0 / 2.0 * (e + 1.5),
            };
            let expected = step(300.0) - step(1024.0);
            assert!(
                (u_new - u_plain - expected).abs() < 1e-5,
                "{rule:?}: {u_plain} -> {u_new}"
            );
        }
    }

    #[test]
    fn retune_waits_for_an_update_with_finite_inputs() {
        let mut pi = controller(IntegratorRule::BackwardEuler, AntiWindup::default());
        pi.update(2.0, 0.5);
        let held = pi.integrator_v();
        pi.retune(PiGains::from_kp_ki(4.0, 300.0).unwrap());
        assert_eq!(pi.update(2.0, f32::NAN), 0.0);
        assert_eq!(pi.integrator_v(), held, "no handover on a refused input");
        let mut reference = controller(IntegratorRule::BackwardEuler, AntiWindup::default());
        reference.update(2.0, 0.5);
        let u_old = reference.update(2.0, 0.5);
        // Handover now: P + I as the old gains had it, plus the new integral step.
        let u = pi.update(2.0, 0.5);
        assert!(
            (u - (u_old - 0.25 * 1.5 + 300.0 / 4096.0 * 1.5)).abs() < 1e-5,
            "{u} {u_old}"
        );
    }

    #[test]
    fn reset_installs_a_waiting_retune_from_rest() {
        let mut pi = controller(IntegratorRule::BackwardEuler, AntiWindup::default());
        pi.update(2.0, 0.5);
        pi.retune(PiGains::from_kp_ki(4.0, 256.0).unwrap());
        pi.reset();
        // From rest with the new gains: Kp e + Ki Ts e = 4 * 1 + 0.0625 * 1.
        assert_eq!(pi.update(1.0, 0.0), 4.0625);
    }

    /// Gain `kp`, Ki 1024 V/(A s), setpoint weight `b`, Ts 2^-12 s, limits +/-10 V.
    fn weighted(kp: f32, b: f32) -> PiController {
        let gains = PiGains::from_kp_ki(kp, 1024.0)
            .unwrap()
            .with_setpoint_weight(b)
            .unwrap();
        PiController::new(PiConfig::new(gains, 1.0 / 4096.0, OutputLimits::symmetric(10.0).unwrap()).unwrap())
    }

    #[test]
    fn saturated_high_holds_the_integrator_at_the_lower_edge_of_its_range() {
        // b = 0.5: the range the integrator may use is [lo, hi] + Kp (1 - b) r.
        let mut pi = weighted(8.0, 0.5);
        // The proportional part alone (8 * (0.5 * 4 + 6) = 64 V) spans more than
        // the 20 V range: back-calculation alone would drive the integrator far
        // below; it is held at -10 + 8 * 0.5 * 4 = 6 V.
        for _ in 0..50 {
            assert_eq!(pi.update(4.0, -6.0), 10.0);
        }
        assert_eq!(pi.saturation(), Saturation::High);
        assert_eq!(pi.integrator_v(), 6.0);
        assert!(pi.last_demand_v() > 10.0);
        for _ in 0..50 {
            assert_eq!(pi.update(-4.0, 6.0), -10.0);
        }
        assert_eq!(pi.saturation(), Saturation::Low);
        assert_eq!(pi.integrator_v(), 10.0 - 16.0);
    }

    #[test]
    fn overflowing_terms_count_as_a_bad_input() {
        let mut pi = controller(IntegratorRule::BackwardEuler, AntiWindup::default());
        pi.update(1.0, 0.0);
        let held = pi.integrator_v();
        // Finite inputs whose difference overflows f32.
        assert_eq!(pi.update(3e38, -3e38), 0.0);
        assert_eq!(pi.integrator_v(), held);
        assert_eq!(pi.saturation(), Saturation::None);
    }

    #[test]
    fn a_proportional_part_that_overflows_saturates() {
        let mut pi = weighted(10.0, 0.0);
        // r - y is finite, Kp y is not.
        assert_eq!(pi.update(0.0, 1e38), -10.0);
        assert_eq!(pi.saturation(), Saturation::Low);
        assert!(pi.integrator_v().is_finite());
        assert_eq!(pi.update(0.0, -1e38), 10.0);
        assert!(pi.integrator_v().is_finite());
    }

    #[test]
    fn invalid_retune_keeps_the_old_gains() {
        let mut pi = controller(IntegratorRule::BackwardEuler, AntiWindup::Clamping);
        let old = pi.config().gains();
        for (kp, ti) in [
            (f32::NAN, 1e-3),
            (-1.0, 1e-3),
            (1.0, 0.0),
            (1.0, -1e-3),
            (1.0, f32::NAN),
        ] {
            let err = pi.retune_kp_ti(kp, ti).unwrap_err();
            assert!(err.field == "kp_v_per_a" || err.field == "ti_s");
            assert_eq!(pi.config().gains(), old);
        }
    }

    #[test]
    fn track_preloads_the_output() {
        let mut pi = controller(IntegratorRule::BackwardEuler, AntiWindup::Clamping);
        pi.track(12.0, 3.0, 2.0).unwrap();
        // The next step at the same operating point adds only the integral step.
        let u = pi.update(3.0, 2.0);
        assert_eq!(u, 12.0 + 0.25);
        assert!(pi.track(120.0, 3.0, 2.0).is_err());
        pi.reset();
        assert_eq!(pi.integrator_v(), 0.0);
    }

    #[test]
    fn default_tracking_time_is_the_geometric_mean_of_ti_and_ts() {
        let l = OutputLimits::symmetric(10.0).unwrap();
        let g = PiGains::from_kp_ti(2.0, 1.6e-3).unwrap();
        let cfg = PiConfig::new(g, 1e-4, l).unwrap();
        assert!((cfg.tracking_time_s().unwrap() - 4e-4).abs() < 1e-9);
        // Ti below Ts: one period.
        let g = PiGains::from_kp_ti(2.0, 1e-5).unwrap();
        assert_eq!(PiConfig::new(g, 1e-4, l).unwrap().tracking_time_s(), Some(1e-4));
        let cfg = cfg.with_anti_windup(AntiWindup::Clamping).unwrap();
        assert_eq!(cfg.tracking_time_s(), None);
    }

    #[test]
    fn configuration_errors_name_the_field() {
        assert_eq!(PiGains::from_kp_ti(0.0, 1.0).unwrap_err().field, "kp_v_per_a");
        assert_eq!(PiGains::from_kp_ki(0.0, 0.0).unwrap_err().field, "kp_v_per_a");
        assert_eq!(PiGains::from_kp_ki(1.0, -1.0).unwrap_err().field, "ki_v_per_a_s");
        let g = PiGains::from_kp_ki(1.0, 1.0).unwrap();
        assert_eq!(g.with_setpoint_weight(1.5).unwrap_err().field, "setpoint_weight");
        let l = OutputLimits::symmetric(10.0).unwrap();
        assert_eq!(PiConfig::new(g, 0.0, l).unwrap_err().field, "period_s");
        assert_eq!(OutputLimits::new(1.0, 1.0).unwrap_err().field, "max_v");
        let cfg = PiConfig::new(g, 1e-4, l).unwrap();
        let bad = AntiWindup::BackCalculation {
            tracking_time_s: Some(1e-5),
        };
        assert_eq!(cfg.with_anti_windup(bad).unwrap_err().field, "tracking_time_s");
    }

    #[test]
    fn setpoint_weight_below_one_still_reaches_the_setpoint() {
        // A static plant y(k+1) = u(k) / 5 ohm at r = 1 A needs u = 5 V. With
        // b = 0.2 and Kp = 2 the proportional part sits at -1.6 V there, so the
        // integrator must hold 6.6 V: more than the 6 V output limit, which is
        // fine because the output (5 V) is inside it.
        let gains = PiGains::from_kp_ki(2.0, 10_000.0)
            .unwrap()
            .with_setpoint_weight(0.2)
            .unwrap();
        let cfg = PiConfig::new(gains, 50e-6, OutputLimits::symmetric(6.0).unwrap()).unwrap();
        let mut pi = PiController::new(cfg);
        let mut y = 0.0;
        for _ in 0..2000 {
            let u = pi.update(1.0, y);
            y = u / 5.0;
        }
        assert!((y - 1.0).abs() < 1e-4, "settled at {y} A");
        assert!((pi.integrator_v() - 6.6).abs() < 1e-3, "{}", pi.integrator_v());
    }

    #[test]
    fn narrower_limits_never_widen_the_configured_ones() {
        // Configured +/-100 V: limits asked for beyond them are cut back to them.
        let mut pi = controller(IntegratorRule::BackwardEuler, AntiWindup::default());
        assert_eq!(pi.update_within(1e6, 0.0, -200.0, 200.0), 100.0);
        assert_eq!(pi.update_within(-1e6, 0.0, -200.0, 200.0), -100.0);
        // Inside them they hold.
        assert_eq!(pi.update_within(1e6, 0.0, -3.0, 7.0), 7.0);
        assert_eq!(pi.update_within(-1e6, 0.0, -3.0, 7.0), -3.0);
    }

    #[test]
    fn limits_that_do_not_overlap_collapse_onto_the_upper_one_inside_the_range() {
        for aw in [AntiWindup::default(), AntiWindup::Clamping] {
            // Inverted (5 > 3): both onto 3 V, whatever the error.
            let mut pi = controller(IntegratorRule::BackwardEuler, aw);
            assert_eq!(pi.update_within(1e6, 0.0, 5.0, 3.0), 3.0);
            assert_eq!(pi.update_within(-1e6, 0.0, 5.0, 3.0), 3.0);
            // Entirely below the configured -100 V: the upper one, -200 V, is
            // outside the range, so both go to the range's edge, -100 V.
            assert_eq!(pi.update_within(1e6, 0.0, -300.0, -200.0), -100.0);
            assert_eq!(pi.update_within(-1e6, 0.0, -300.0, -200.0), -100.0);
            // Entirely above +100 V: 100 V.
            assert_eq!(pi.update_within(-1e6, 0.0, 200.0, 300.0), 100.0);
        }
    }

    #[test]
    fn clamping_gives_p_plus_the_held_integrator_when_that_is_inside_the_limits() {
        // Kp 0.5, Ki Ts 0.25, limits +/-100. The integrator first reaches 90 V;
        // then an error of 30 A: P = 15 V, candidate integrator 97.5 V, demand
        // 112.5 V over the limit and pushing, so the integrator stays at 90 V
        // and the output is P + 90 = 105 V, clamped to 100 V.
        let mut pi = controller(IntegratorRule::BackwardEuler, AntiWindup::Clamping);
        pi.track(90.0, 0.0, 0.0).unwrap();
        assert_eq!(pi.integrator_v(), 90.0);
        assert_eq!(pi.update(30.0, 0.0), 100.0);
        assert_eq!(pi.integrator_v(), 90.0);
        assert_eq!(pi.saturation(), Saturation::High);
        // An error of 16 A: P = 8 V, demand 8 + 94 = 102 V over the limit, held
        // integrator 90 V gives 98 V: inside the limits, so that is the output.
        let u = pi.update(16.0, 0.0);
        assert_eq!(pi.integrator_v(), 90.0);
        assert_eq!(u, 98.0);
        // The same below: -90 V held, error -16 A gives -98 V.
        pi.track(-90.0, 0.0, 0.0).unwrap();
        assert_eq!(pi.update(-16.0, 0.0), -98.0);
        assert_eq!(pi.integrator_v(), -90.0);
    }

    #[test]
    fn track_with_a_setpoint_weight_uses_the_shifted_integrator_range() {
        // Kp 8, b 0.5, limits +/-10: the integrator may hold [-10, 10] + Kp (1 - b) r.
        // At r = 4 A, y = 3 A: P = 8 (2 - 3) = -8 V; an output of 5 V needs an
        // integrator of 13 V, inside [6, 26] though outside [-10, 10].
        let mut pi = weighted(8.0, 0.5);
        pi.track(5.0, 4.0, 3.0).unwrap();
        assert_eq!(pi.integrator_v(), 13.0);
        // The next update at the same point adds only Ki Ts e = 0.25 V.
        assert_eq!(pi.update(4.0, 3.0), 5.25);
        // Beyond that range it is held at the edge: an output of -9 V at r = 4,
        // y = -6 (P = 64 V) would need -73 V; held at 6 V, so the output saturates.
        pi.track(-9.0, 4.0, -6.0).unwrap();
        assert_eq!(pi.integrator_v(), 6.0);
        assert_eq!(pi.update(4.0, -6.0), 10.0);
    }

    #[test]
    fn configuration_reads_back_what_was_built() {
        let g = PiGains::from_kp_ki(2.5, 400.0)
            .unwrap()
            .with_setpoint_weight(0.75)
            .unwrap();
        assert_eq!(
            (g.kp_v_per_a(), g.ki_v_per_a_s(), g.setpoint_weight()),
            (2.5, 400.0, 0.75)
        );
        assert_eq!(g.ti_s(), 2.5 / 400.0);
        assert_eq!(PiGains::from_kp_ki(2.0, 0.0).unwrap().ti_s(), f32::INFINITY);
        let l = OutputLimits::new(-3.0, 7.0).unwrap();
        assert_eq!((l.min_v(), l.max_v()), (-3.0, 7.0));
        let c = PiConfig::new(g, 1e-4, l)
            .unwrap()
            .with_rule(IntegratorRule::Tustin)
            .with_anti_windup(AntiWindup::Clamping)
            .unwrap();
        assert_eq!((c.gains(), c.period_s(), c.limits()), (g, 1e-4, l));
        assert_eq!(
            (c.rule(), c.anti_windup()),
            (IntegratorRule::Tustin, AntiWindup::Clamping)
        );
        let pi = PiController::new(c);
        assert_eq!(pi.config(), &c);
    }

    #[test]
    fn the_loops_update_inside_known_limits_is_the_general_update() {
        for (rule, aw) in [
            (IntegratorRule::BackwardEuler, AntiWindup::default()),
            (IntegratorRule::Tustin, AntiWindup::Clamping),
        ] {
            let mut a = controller(rule, aw);
            let mut b = a.clone();
            for (r, y, lo, hi) in [
                (1.0, 0.25, -5.0, 5.0),
                (40.0, 0.0, -5.0, 5.0),
                (-3.0, 1.0, -2.0, 0.5),
            ] {
                assert_eq!(a.update_inside(r, y, lo, hi), b.update_within(r, y, lo, hi));
                assert_eq!(a.integrator_v(), b.integrator_v());
            }
        }
    }

    #[test]
    fn an_overflowing_proportional_part_saturates_on_every_path() {
        // As `a_proportional_part_that_overflows_saturates`, for the
        // out-of-line path (trapezoidal, clamping) and a retune handover.
        for (rule, aw) in [
            (IntegratorRule::Tustin, AntiWindup::default()),
            (IntegratorRule::BackwardEuler, AntiWindup::Clamping),
        ] {
            let gains = PiGains::from_kp_ki(10.0, 1024.0).unwrap();
            let cfg = PiConfig::new(gains, 1.0 / 4096.0, OutputLimits::symmetric(10.0).unwrap())
                .unwrap()
                .with_rule(rule)
                .with_anti_windup(aw)
                .unwrap();
            let mut pi = PiController::new(cfg);
            assert_eq!(pi.update(0.0, 1e38), -10.0, "{rule:?} {aw:?}");
            assert_eq!(pi.saturation(), Saturation::Low);
            assert_eq!(pi.update(0.0, -1e38), 10.0, "{rule:?} {aw:?}");
            assert!(pi.integrator_v().is_finite());
        }
    }

    #[test]
    fn trapezoidal_back_calculation_tracks_instead_of_holding() {
        // Tustin with back-calculation: an error of 1000 A saturates at once
        // (P = 500 V). Back-calculation pulls the integrator down toward the
        // limit, held at the far edge, -100 V; clamping would have kept it at 0.
        let mut pi = controller(IntegratorRule::Tustin, AntiWindup::default());
        assert_eq!(pi.update(1000.0, 0.0), 100.0);
        assert_eq!(pi.integrator_v(), -100.0);
        let mut pi = controller(IntegratorRule::Tustin, AntiWindup::Clamping);
        assert_eq!(pi.update(1000.0, 0.0), 100.0);
        assert_eq!(pi.integrator_v(), 0.0);
    }

    #[test]
    fn back_calculation_pulls_the_integrator_by_ts_over_tt_of_the_excess() {
        // Kp 0.5, Ki Ts 0.25, +/-100 V. From rest, r = 180 A: P = 90 V, candidate
        // integrator 45 V, demand 135 V. Back-calculation: I = 45 + Ts / Tt (100 - 135).
        let mut pi = controller(IntegratorRule::BackwardEuler, AntiWindup::default());
        let ts_over_tt = pi.config().period_s() / pi.config().tracking_time_s().unwrap();
        assert_eq!(pi.update(180.0, 0.0), 100.0);
        let expected = 45.0 + ts_over_tt * (100.0 - 135.0);
        assert!(
            (pi.integrator_v() - expected).abs() < 1e-4,
            "{}",
            pi.integrator_v()
        );
        assert_eq!(pi.last_output_v(), 100.0);
        assert_eq!(pi.last_demand_v(), 135.0);
    }

    #[test]
    fn a_refused_input_clears_the_last_output_and_saturation() {
        let mut pi = controller(IntegratorRule::BackwardEuler, AntiWindup::default());
        pi.update(1e4, 0.0);
        assert_eq!(pi.saturation(), Saturation::High);
        assert_eq!(pi.update(f32::NAN, 0.0), 0.0);
        assert_eq!((pi.last_output_v(), pi.last_demand_v()), (0.0, 0.0));
        assert_eq!(pi.saturation(), Saturation::None);
    }

    #[test]
    fn after_a_retune_the_controller_keeps_its_rule() {
        // Backward Euler with back-calculation, retuned to Ki Ts = 0.125: the
        // integrator then sums exactly k Ki Ts e again, on the inline path.
        let mut pi = controller(IntegratorRule::BackwardEuler, AntiWindup::default());
        pi.retune(PiGains::from_kp_ki(0.5, 512.0).unwrap());
        pi.update(0.0, 0.0); // hands the retune over
        for k in 1..=20 {
            pi.update(1.0, 0.0);
            assert_eq!(pi.integrator_v(), k as f32 * 0.125, "step {k}");
        }
        assert_eq!(pi.path, 0, "back on the common path");
    }

    #[test]
    fn clamping_holds_the_integrator_inside_the_range_of_the_present_setpoint() {
        // Clamping, Kp 8, b 0.5, +/-10 V: the integrator range is [-10, 10] + 4 r.
        let gains = PiGains::from_kp_ki(8.0, 1024.0)
            .unwrap()
            .with_setpoint_weight(0.5)
            .unwrap();
        let cfg = PiConfig::new(gains, 1.0 / 4096.0, OutputLimits::symmetric(10.0).unwrap())
            .unwrap()
            .with_anti_windup(AntiWindup::Clamping)
            .unwrap();
        // Integrator 20 V (allowed at r = 4: [6, 26]); then r = 1 ([-6, 14]) with
        // a large error pushing high: held, and cut to 14 V.
        let mut pi = PiController::new(cfg);
        pi.track(4.0, 4.0, 4.0).unwrap();
        assert_eq!(pi.integrator_v(), 20.0);
        assert_eq!(pi.update(1.0, -5.0), 10.0);
        assert_eq!(pi.integrator_v(), 14.0);
        // Mirror: -20 V at r = -4, then r = -1 ([-14, 6]) pushing low: -14 V.
        let mut pi = PiController::new(cfg);
        pi.track(-4.0, -4.0, -4.0).unwrap();
        assert_eq!(pi.integrator_v(), -20.0);
        assert_eq!(pi.update(-1.0, 5.0), -10.0);
        assert_eq!(pi.integrator_v(), -14.0);
    }

    #[test]
    fn track_remembers_the_error_for_the_trapezoidal_rule() {
        // Tustin, Ki Ts / 2 = 0.125: after tracking at r = 3, y = 2 (e = 1) the
        // next step at the same point adds 0.125 (e + e_prev) = 0.25 V.
        let mut pi = controller(IntegratorRule::Tustin, AntiWindup::default());
        pi.track(12.0, 3.0, 2.0).unwrap();
        assert_eq!(pi.update(3.0, 2.0), 12.25);
        pi.track(-4.0, -1.0, 2.0).unwrap();
        // e = -3: 0.125 (-3 - 3) = -0.75 V.
        assert_eq!(pi.update(-1.0, 2.0), -4.75);
    }
}
