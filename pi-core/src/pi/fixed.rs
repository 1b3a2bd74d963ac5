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
//! interrupt.
//!
//! # Why it cannot overflow
//!
//! * Sums and differences saturate (`i32::saturating_add`, `saturating_sub`).
//! * A product reduces its value to Q15 first, saturating to `i16`'s range,
//!   and multiplies it by the `i16` mantissa: `|x m| <= 2^30`, inside `i32`,
//!   one 32-bit multiply (the Cortex-M0 has no 32 x 32 -> 64 one, and none
//!   is needed). The power of two is then applied as a right shift (at most
//!   31) or a left shift that saturates when the product would leave `i32`.
//! * Limits are `min` / `max`, never `clamp` (which has a panic path).
//!
//! So every input from the full `i16` range, and every configuration that
//! validates, gives a defined output (the property test in this module's
//! tests runs them); values beyond 16 full scales inside the law saturate
//! there, which only a gain far beyond any loop's can reach.

use super::{AntiWindup, Arithmetic, Coefficients, IntegratorRule, Law, PiConfig};
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

/// A coefficient: `mantissa * 2^(shift - 15)` in full-scale units.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct FixedGain {
    mantissa: i16,
    shift: i8,
}

impl FixedGain {
    /// The nearest coefficient to `k` (finite): a mantissa of 14 to 15
    /// significant bits, so the relative error is at most 2^-15.
    #[allow(clippy::manual_clamp)]
    pub fn new(k: f32) -> Self {
        if k == 0.0 || !k.is_finite() {
            return Self {
                mantissa: 0,
                shift: 0,
            };
        }
        // k = m 2^e with 0.5 <= |m| < 1.
        let (m, e) = libm::frexpf(k);
        let mut mantissa = libm::roundf(m * 32768.0) as i32;
        let mut e = e;
        if mantissa.abs() > 32767 {
            mantissa /= 2;
            e += 1;
        }
        Self {
            mantissa: mantissa as i16,
            shift: e.max(-100).min(100) as i8,
        }
    }

    /// Its value.
    pub fn value(self) -> f32 {
        self.mantissa as f32 / 32768.0 * libm::exp2f(self.shift as f32)
    }
}

/// `p << s` saturated to `i32`.
#[inline(always)]
fn shl_saturating(p: i32, s: u32) -> i32 {
    if s >= 31 {
        return if p > 0 {
            i32::MAX
        } else if p < 0 {
            i32::MIN
        } else {
            0
        };
    }
    let limit = i32::MAX >> s;
    if p > limit {
        i32::MAX
    } else if p < -limit {
        i32::MIN
    } else {
        p << s
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
        let p = x * k.mantissa as i32;
        // x / 2^15 * m / 2^15 * 2^shift full scales, in Q27: p * 2^(shift - 3).
        let s = k.shift as i32 - 3;
        Fixed(if s >= 0 {
            shl_saturating(p, s as u32)
        } else {
            p >> ((-s) as u32).min(31)
        })
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
}

/// The PI controller on integer arithmetic.
#[derive(Clone, Debug)]
pub struct FixedPi {
    law: Law<Fixed>,
    min: Fixed,
    max: Fixed,
    tustin: bool,
    clamping: bool,
    config: PiConfig,
    scale: FixedScale,
}

impl FixedPi {
    /// The controller of a validated float configuration at these full
    /// scales; refused when the output limits are beyond 16 voltage full
    /// scales (`voltage_full_scale_v` too small for them).
    pub fn new(config: PiConfig, scale: FixedScale) -> Result<Self, ConfigError> {
        let volts = |v: f32| -> Result<Fixed, ConfigError> {
            let q = v / scale.voltage_v * (1u32 << (15 + GUARD_BITS)) as f32;
            if q.abs() >= i32::MAX as f32 {
                return Err(ConfigError::new(
                    "voltage_full_scale_v",
                    scale.voltage_v,
                    Requirement::Above("a sixteenth of the output limits"),
                ));
            }
            Ok(Fixed(libm::roundf(q) as i32))
        };
        let limits = config.limits();
        Ok(Self {
            law: Law::new(coefficients(&config, &scale)),
            min: volts(limits.min_v())?,
            max: volts(limits.max_v())?,
            tustin: config.rule() == IntegratorRule::Tustin,
            clamping: config.anti_windup() == AntiWindup::Clamping,
            config,
            scale,
        })
    }

    /// One step: the setpoint and the measurement as Q15 of the current full
    /// scale; returns the voltage as Q15 of the voltage full scale, within
    /// the configured limits.
    #[inline]
    pub fn update(&mut self, setpoint_q15: i16, measured_q15: i16) -> i16 {
        let (r, y) = (Fixed::from_q15(setpoint_q15), Fixed::from_q15(measured_q15));
        let (lo, hi) = (self.min, self.max);
        let u = match (self.tustin, self.clamping) {
            (false, false) => self.law.law::<false, false>(r, y, lo, hi),
            (false, true) => self.law.law::<false, true>(r, y, lo, hi),
            (true, false) => self.law.law::<true, false>(r, y, lo, hi),
            (true, true) => self.law.law::<true, true>(r, y, lo, hi),
        };
        u.to_q15()
    }

    /// The integrator, Q27 of the voltage full scale.
    pub fn integrator(&self) -> Fixed {
        self.law.integrator
    }

    /// The configuration it was built from.
    pub fn config(&self) -> &PiConfig {
        &self.config
    }

    /// Its full scales.
    pub fn scale(&self) -> &FixedScale {
        &self.scale
    }
}

/// The float configuration's coefficients in full-scale units.
fn coefficients(c: &PiConfig, scale: &FixedScale) -> Coefficients<FixedGain> {
    let f = Coefficients::from_config(c);
    let ratio = scale.current_a / scale.voltage_v;
    Coefficients {
        kp: FixedGain::new(f.kp * ratio),
        kp_b: FixedGain::new(f.kp_b * ratio),
        kp_unweighted: FixedGain::new(f.kp_unweighted * ratio),
        ki_step: FixedGain::new(f.ki_step * ratio),
        tracking: FixedGain::new(f.tracking),
    }
}

#[cfg(test)]
mod tests;
