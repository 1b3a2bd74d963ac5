//! The PI on integer arithmetic, for cores without an FPU: the same law as
//! the float controller (the crate's one `Law`), run on [`Fixed`].
//!
//! # Numbers
//!
//! Readings and outputs are Q15 fractions of a full scale each
//! ([`FixedScale`]: amperes for the setpoint and the measurement, volts for
//! the output): `i16` values, `32767` just under the full scale. Inside, every
//! value is an `i32` in Q27 of its full scale (twelve guard bits below Q15,
//! range +/-16 full scales), so the integrator keeps increments far smaller
//! than one output count. Each coefficient (`Kp`, `Kp b`, `Kp (1 - b)`,
//! `Ki Ts`, `Ts / Tt`, in full-scale units) is an `i16` mantissa with a power
//! of two, computed once from the validated float configuration, never in the
//! interrupt; every coefficient must be below 8 (full scale of voltage per
//! full scale of current: choose the full scales so), so each product is a
//! multiply and a right shift.
//!
//! # Why it cannot overflow
//!
//! * Sums and differences saturate (`i32::saturating_add`, `saturating_sub`).
//! * A product reduces its value to Q15 first, saturating to `i16`'s range,
//!   and multiplies it by the `i16` mantissa: `|x m| <= 2^30`, inside `i32`,
//!   one 32-bit multiply (the Cortex-M0 has no 32 x 32 -> 64 one, and none
//!   is needed). The power of two is then applied as a right shift (0 to
//!   31): coefficients are below 8, so none needs a left shift.
//! * At a setpoint weight of 1 the proportional part is one product of the
//!   difference of two Q15 values, which spans 17 bits: `|r - y| <= 65535`
//!   and `|m| <= 32767` (a rounded mantissa of 32768 is halved), so the
//!   product stays below `65535 x 32767 < 2^31`.
//! * Limits are `min` / `max`, never `clamp` (which has a panic path).
//!
//! So every input from the full `i16` range, and every configuration that
//! validates, gives a defined output (the property test in this module's
//! tests runs them); values beyond 16 full scales inside the law saturate
//! there, which only a gain far beyond any loop's can reach.

use super::{AntiWindup, Arithmetic, Coefficients, IntegratorRule, Law, PiConfig, PiGains};
use crate::error::{ConfigError, Requirement, positive};

/// Guard bits below Q15 inside the law.
pub const GUARD_BITS: u32 = 12;

/// A value inside the fixed-point law: Q27 of its full scale.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub struct Fixed(pub i32);

impl Fixed {
    /// From a Q15 reading.
    #[inline(always)]
    pub fn from_q15(x: i16) -> Self {
        Fixed((x as i32) << GUARD_BITS)
    }

    /// To Q15, rounded toward minus infinity and saturated to `i16`.
    // `i32::clamp` brings a panic path (inverted bounds) into thumb builds.
    #[allow(clippy::manual_clamp)]
    #[inline(always)]
    pub fn to_q15(self) -> i16 {
        (self.0 >> GUARD_BITS).max(i16::MIN as i32).min(i16::MAX as i32) as i16
    }
}

/// A coefficient below 8 in full-scale units: `mantissa * 2^(3 - right) /
/// 2^15`, so a product is `(x * mantissa) >> right` in Q27, a right shift
/// only.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct FixedGain {
    mantissa: i16,
    right: u8,
}

/// The largest coefficient, in full-scale units (exclusive).
pub const MAX_COEFFICIENT: f32 = 8.0;

impl FixedGain {
    /// The nearest coefficient to `k`: a mantissa of 14 to 15 significant
    /// bits, so the relative error is at most 2^-15 (coefficients below
    /// 2^-28 round to 0). `None` unless `|k| < 8`.
    #[allow(clippy::manual_clamp)]
    pub fn new(k: f32) -> Option<Self> {
        if k.is_nan() || k.abs() >= MAX_COEFFICIENT {
            return None;
        }
        if k == 0.0 {
            return Some(Self {
                mantissa: 0,
                right: 0,
            });
        }
        // k = m 2^e with 0.5 <= |m| < 1, e <= 3.
        let (m, e) = libm::frexpf(k);
        let mut mantissa = libm::roundf(m * 32768.0) as i32;
        let mut e = e;
        if mantissa.abs() > 32767 {
            mantissa /= 2;
            e += 1;
        }
        if e > 3 {
            return None;
        }
        let right = 3 - e;
        if right > 31 {
            return Some(Self {
                mantissa: 0,
                right: 0,
            });
        }
        Some(Self {
            mantissa: mantissa as i16,
            right: right as u8,
        })
    }

    /// Its value.
    pub fn value(self) -> f32 {
        self.mantissa as f32 / 32768.0 * libm::exp2f(3.0 - self.right as f32)
    }
}

impl Arithmetic for Fixed {
    type Coefficient = FixedGain;
    const ZERO: Fixed = Fixed(0);

    #[inline(always)]
    fn plus(self, other: Fixed) -> Fixed {
        Fixed(self.0.saturating_add(other.0))
    }

    #[inline(always)]
    fn minus(self, other: Fixed) -> Fixed {
        Fixed(self.0.saturating_sub(other.0))
    }

    #[inline(always)]
    fn times(self, k: FixedGain) -> Fixed {
        let x = self.to_q15() as i32;
        // x / 2^15 * m / 2^15 * 2^(3 - right) full scales, in Q27:
        // (x m) >> right; |x m| <= 2^30, and right <= 31.
        Fixed((x * k.mantissa as i32) >> (k.right & 31))
    }

    #[inline(always)]
    fn difference_times(self, other: Fixed, k: FixedGain) -> Fixed {
        // Both Q15 values: their difference spans 17 bits, and with
        // |m| <= 32767 the product stays below 65535 x 32767 < 2^31.
        let d = self.to_q15() as i32 - other.to_q15() as i32;
        Fixed((d * k.mantissa as i32) >> (k.right & 31))
    }

    #[inline(always)]
    fn is_bad(self) -> bool {
        false
    }

    #[allow(clippy::manual_clamp)]
    #[inline(always)]
    fn limited(self, lo: Fixed, hi: Fixed) -> Fixed {
        Fixed(self.0.max(lo.0).min(hi.0))
    }
}

/// The full scales of the fixed-point numbers: the current a reading of
/// `32767` stands for, and the voltage an output of `32767` stands for.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FixedScale {
    current_a: f32,
    voltage_v: f32,
}

impl FixedScale {
    /// Both finite and above zero.
    pub fn new(current_full_scale_a: f32, voltage_full_scale_v: f32) -> Result<Self, ConfigError> {
        Ok(Self {
            current_a: positive("current_full_scale_a", current_full_scale_a)?,
            voltage_v: positive("voltage_full_scale_v", voltage_full_scale_v)?,
        })
    }

    /// Amperes of a reading of 1 (Q15: `current_full_scale_a / 32768`).
    pub fn amperes_per_count(&self) -> f32 {
        self.current_a / 32768.0
    }

    /// Volts of an output of 1.
    pub fn volts_per_count(&self) -> f32 {
        self.voltage_v / 32768.0
    }

    /// The current full scale, amperes.
    pub fn current_full_scale_a(&self) -> f32 {
        self.current_a
    }

    /// The voltage full scale, volts.
    pub fn voltage_full_scale_v(&self) -> f32 {
        self.voltage_v
    }

    /// A voltage in Q27 of the voltage full scale, refused beyond 16 full
    /// scales (naming `voltage_full_scale_v`, too small for it).
    pub(crate) fn volts(&self, v: f32) -> Result<Fixed, ConfigError> {
        self.q27("voltage_full_scale_v", v / self.voltage_v, self.voltage_v)
    }

    /// A current limit in Q27 of the current full scale, rounded inward
    /// (`up` for a lower limit, so a limited value never passes the float
    /// limit); refused beyond 16 full scales (naming `current_full_scale_a`).
    pub(crate) fn amperes_inward(&self, a: f32, up: bool) -> Result<Fixed, ConfigError> {
        let Fixed(q) = self.q27("current_full_scale_a", a / self.current_a, self.current_a)?;
        let exact = a / self.current_a * (1u32 << (15 + GUARD_BITS)) as f32;
        let q = if up && (q as f32) < exact {
            q.saturating_add(1)
        } else if !up && (q as f32) > exact {
            q.saturating_sub(1)
        } else {
            q
        };
        Ok(Fixed(q))
    }

    fn q27(&self, field: &'static str, share: f32, full_scale: f32) -> Result<Fixed, ConfigError> {
        let q = share * (1u32 << (15 + GUARD_BITS)) as f32;
        if q.is_nan() || q.abs() >= i32::MAX as f32 {
            return Err(ConfigError::new(
                field,
                full_scale,
                Requirement::Above("a sixteenth of the values it must hold"),
            ));
        }
        Ok(Fixed(libm::roundf(q) as i32))
    }
}

/// New gains for a [`FixedPi`], converted to its coefficients ahead of time
/// (in the main loop, where float arithmetic may take its time), so the
/// interrupt that applies them does no float arithmetic.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FixedRetune {
    k: Coefficients<FixedGain>,
    config: PiConfig,
}

impl FixedRetune {
    /// The gains `gains` on the rest of configuration `base` (period, rule,
    /// anti-windup, limits) at full scales `scale`; refused like
    /// [`FixedPi::new`] when a coefficient reaches 8 full scales.
    pub fn new(base: &PiConfig, gains: PiGains, scale: &FixedScale) -> Result<Self, ConfigError> {
        let mut config = *base;
        config.gains = gains;
        Ok(Self {
            k: coefficients(&config, scale)?,
            config,
        })
    }

    /// The configuration the retune installs.
    pub fn config(&self) -> &PiConfig {
        &self.config
    }
}

/// The PI controller on integer arithmetic.
#[derive(Clone, Debug)]
// The law and its limits first, the configuration last: a Cortex-M0 load
// reaches only 124 bytes past its base register.
#[repr(C)]
pub struct FixedPi {
    law: Law<Fixed>,
    min: Fixed,
    max: Fixed,
    /// Which update path ([`path`] bits): 0 is the common one.
    path: u8,
    /// Coefficients waiting for the next update's handover.
    waiting: Coefficients<FixedGain>,
    config: PiConfig,
    scale: FixedScale,
}

impl FixedPi {
    /// The controller of a validated float configuration at these full
    /// scales; refused when the output limits are beyond 16 voltage full
    /// scales (`voltage_full_scale_v` too small for them).
    pub fn new(config: PiConfig, scale: FixedScale) -> Result<Self, ConfigError> {
        let limits = config.limits();
        let k = coefficients(&config, &scale)?;
        let mut path = 0;
        if config.rule() == IntegratorRule::Tustin {
            path |= super::path::TUSTIN;
        }
        if config.anti_windup() == AntiWindup::Clamping {
            path |= super::path::CLAMPING;
        }
        path |= super::weight_path(&config.gains);
        Ok(Self {
            law: Law::new(k),
            min: scale.volts(limits.min_v())?,
            max: scale.volts(limits.max_v())?,
            path,
            waiting: k,
            config,
            scale,
        })
    }

    /// One step: the setpoint and the measurement as Q15 of the current full
    /// scale; returns the voltage as Q15 of the voltage full scale, within
    /// the configured limits.
    #[inline]
    pub fn update(&mut self, setpoint_q15: i16, measured_q15: i16) -> i16 {
        let (lo, hi) = (self.min, self.max);
        self.step(
            Fixed::from_q15(setpoint_q15),
            Fixed::from_q15(measured_q15),
            lo,
            hi,
        )
        .to_q15()
    }

    /// One step with limits narrower than the configured ones for this step
    /// only (Q15 of the voltage full scale), for example what the bus gives
    /// now: the intersection with the configured range; when that is empty
    /// both collapse onto the upper one, kept inside the configured range (as
    /// [`super::PiController::update_within`]).
    #[inline]
    pub fn update_within(&mut self, setpoint_q15: i16, measured_q15: i16, min_q15: i16, max_q15: i16) -> i16 {
        self.step_within(
            Fixed::from_q15(setpoint_q15),
            Fixed::from_q15(measured_q15),
            Fixed::from_q15(min_q15),
            Fixed::from_q15(max_q15),
        )
        .to_q15()
    }

    /// One step in Q27 with limits for this step intersected with the
    /// configured ones (as [`FixedPi::update_within`]).
    #[inline(always)]
    pub(crate) fn step_within(&mut self, r: Fixed, y: Fixed, lo: Fixed, hi: Fixed) -> Fixed {
        let lo = self.min.max(lo);
        let hi = self.max.min(hi);
        let (lo, hi) = if lo <= hi {
            (lo, hi)
        } else {
            let v = hi.max(self.min);
            (v, v)
        };
        self.step(r, y, lo, hi)
    }

    /// The configured output limits in Q27 of the voltage full scale.
    pub(crate) fn limits_q27(&self) -> (Fixed, Fixed) {
        (self.min, self.max)
    }

    /// One step in Q27 with limits `lo <= hi` inside the configured range.
    #[inline(always)]
    pub(crate) fn step(&mut self, r: Fixed, y: Fixed, lo: Fixed, hi: Fixed) -> Fixed {
        if self.path == 0 {
            self.law.law::<false, false, true>(r, y, lo, hi)
        } else if self.path == super::path::WEIGHTED {
            // Inline as well: out of line it cost a third more on Cortex-M0.
            self.law.law::<false, false, false>(r, y, lo, hi)
        } else {
            self.general(r, y, lo, hi)
        }
    }

    /// Trapezoidal integration, clamping and the handover of a retune, out
    /// of line (the common configuration keeps the update short).
    #[cold]
    #[inline(never)]
    fn general(&mut self, r: Fixed, y: Fixed, lo: Fixed, hi: Fixed) -> Fixed {
        if self.path & super::path::RETUNE != 0 {
            // Saturating arithmetic: the handover always succeeds.
            self.law.hand_over(self.waiting, r, y);
            self.path = (self.path & !(super::path::RETUNE | super::path::WEIGHTED))
                | super::weight_path(&self.config.gains);
        }
        match (
            self.path & super::path::TUSTIN != 0,
            self.path & super::path::CLAMPING != 0,
        ) {
            (false, false) => self.law.law::<false, false, false>(r, y, lo, hi),
            (false, true) => self.law.law::<false, true, false>(r, y, lo, hi),
            (true, false) => self.law.law::<true, false, false>(r, y, lo, hi),
            (true, true) => self.law.law::<true, true, false>(r, y, lo, hi),
        }
    }

    /// Bumpless retune, as [`super::PiController::retune`]: the new gains take
    /// over at the next update, which first moves the integrator by the
    /// change of the proportional part at its own setpoint and measurement.
    /// No float arithmetic: the coefficients were computed by
    /// [`FixedRetune::new`]. A retune for other limits or another period
    /// than this controller's takes only its gains.
    pub fn retune(&mut self, retune: &FixedRetune) {
        self.waiting = retune.k;
        self.config.gains = retune.config.gains;
        self.path |= super::path::RETUNE;
    }

    /// Track/preload, as [`super::PiController::track`]: the integrator set
    /// so that this setpoint and measurement give `output_q15` (limited to
    /// the configured range). Gains waiting from a retune take effect here.
    pub fn track(&mut self, output_q15: i16, setpoint_q15: i16, measured_q15: i16) {
        self.install_waiting();
        let u = Fixed::from_q15(output_q15).limited(self.min, self.max);
        let (r, y) = (Fixed::from_q15(setpoint_q15), Fixed::from_q15(measured_q15));
        self.law.track(u, r, y, self.min, self.max);
    }

    /// Back to rest (integrator, remembered error and output zero); gains
    /// waiting from a retune take effect here.
    pub fn reset(&mut self) {
        self.install_waiting();
        self.law.rest();
    }

    fn install_waiting(&mut self) {
        if self.path & super::path::RETUNE != 0 {
            self.law.k = self.waiting;
            self.path = (self.path & !(super::path::RETUNE | super::path::WEIGHTED))
                | super::weight_path(&self.config.gains);
        }
    }

    /// The integrator, Q27 of the voltage full scale.
    pub fn integrator(&self) -> Fixed {
        self.law.integrator
    }

    /// The last update's output, Q27 of the voltage full scale.
    pub fn last_output(&self) -> Fixed {
        self.law.output
    }

    /// Whether the last update saturated.
    pub fn saturation(&self) -> super::Saturation {
        if self.law.demand > self.law.output {
            super::Saturation::High
        } else if self.law.demand < self.law.output {
            super::Saturation::Low
        } else {
            super::Saturation::None
        }
    }

    /// The configuration in use (with the gains of the last retune).
    pub fn config(&self) -> &PiConfig {
        &self.config
    }

    /// Its full scales.
    pub fn scale(&self) -> &FixedScale {
        &self.scale
    }
}

/// The float configuration's coefficients in full-scale units; refused
/// (naming the full scale that would fix it) when `Kp` or `Ki Ts` reaches 8
/// full scales of voltage per full scale of current.
fn coefficients(c: &PiConfig, scale: &FixedScale) -> Result<Coefficients<FixedGain>, ConfigError> {
    let f = Coefficients::from_config(c);
    let ratio = scale.current_a / scale.voltage_v;
    let gain = |k: f32| {
        FixedGain::new(k * ratio).ok_or(ConfigError::new(
            "voltage_full_scale_v",
            scale.voltage_v,
            Requirement::Above("Kp times current_full_scale_a over 8"),
        ))
    };
    Ok(Coefficients {
        kp: gain(f.kp)?,
        kp_b: gain(f.kp_b)?,
        kp_unweighted: gain(f.kp_unweighted)?,
        ki_step: gain(f.ki_step)?,
        // Ts / Tt is at most 1.
        tracking: FixedGain::new(f.tracking).unwrap_or(FixedGain {
            mantissa: 16384,
            right: 2,
        }),
    })
}

#[cfg(test)]
mod tests;
