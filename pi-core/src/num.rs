//! Numeric helpers shared by the control path and the design math. A leaf: it
//! imports nothing from the rest of the crate.
//!
//! * [`clamp`]: limiting without the panic of `f32::clamp`.
//! * [`Real`]: the number type of the design math, `f32` on the device and
//!   `f64` on the host, one implementation for both.
//!
//! Every function goes through `libm`, never through `std` or an approximation
//! crate, so host tests exercise exactly the code the device runs (with `f32`).
//! `libm`'s functions are within about one unit in the last place; quick
//! approximations of sqrt, atan and ln were measured to be off by percent and
//! more, which is too coarse for gains.

use core::ops::{Add, Div, Mul, Neg, Sub};

/// `x` limited to `[lo, hi]`, without the panic that `f32::clamp` carries for
/// `lo > hi` or NaN bounds (the control path must not panic). A NaN `x` yields
/// `lo`; with `lo > hi` the result is `hi`.
#[inline(always)]
pub fn clamp(x: f32, lo: f32, hi: f32) -> f32 {
    let y = if x > lo { x } else { lo };
    if y < hi { y } else { hi }
}

/// A floating-point type the design math runs in.
pub trait Real:
    Copy
    + PartialOrd
    + Add<Output = Self>
    + Sub<Output = Self>
    + Mul<Output = Self>
    + Div<Output = Self>
    + Neg<Output = Self>
    + core::fmt::Debug
{
    /// 0.
    const ZERO: Self;
    /// 1.
    const ONE: Self;
    /// pi.
    const PI: Self;
    /// The nearest value to an `f64` constant.
    fn of(x: f64) -> Self;
    /// As `f64` (exact for both types).
    fn to_f64(self) -> f64;
    /// Square root.
    fn sqrt(self) -> Self;
    /// `e^x`.
    fn exp(self) -> Self;
    /// `e^x - 1`, accurate for small `x`.
    fn exp_m1(self) -> Self;
    /// Natural logarithm.
    fn ln(self) -> Self;
    /// Four-quadrant arctangent of `self / x`.
    fn atan2(self, x: Self) -> Self;
    /// Cosine.
    fn cos(self) -> Self;
    /// Sine.
    fn sin(self) -> Self;
    /// Magnitude.
    fn abs(self) -> Self {
        if self < Self::ZERO { -self } else { self }
    }
    /// Finite (not NaN, not infinite).
    fn is_finite(self) -> bool;
    /// The larger of two (NaN-free inputs).
    fn max(self, other: Self) -> Self {
        if self > other { self } else { other }
    }
    /// The smaller of two (NaN-free inputs).
    fn min(self, other: Self) -> Self {
        if self < other { self } else { other }
    }
}

impl Real for f32 {
    const ZERO: Self = 0.0;
    const ONE: Self = 1.0;
    const PI: Self = core::f32::consts::PI;
    fn of(x: f64) -> Self {
        x as f32
    }
    fn to_f64(self) -> f64 {
        self as f64
    }
    fn sqrt(self) -> Self {
        libm::sqrtf(self)
    }
    fn exp(self) -> Self {
        libm::expf(self)
    }
    fn exp_m1(self) -> Self {
        libm::expm1f(self)
    }
    fn ln(self) -> Self {
        libm::logf(self)
    }
    fn atan2(self, x: Self) -> Self {
        libm::atan2f(self, x)
    }
    fn cos(self) -> Self {
        libm::cosf(self)
    }
    fn sin(self) -> Self {
        libm::sinf(self)
    }
    fn is_finite(self) -> bool {
        f32::is_finite(self)
    }
}

impl Real for f64 {
    const ZERO: Self = 0.0;
    const ONE: Self = 1.0;
    const PI: Self = core::f64::consts::PI;
    fn of(x: f64) -> Self {
        x
    }
    fn to_f64(self) -> f64 {
        self
    }
    fn sqrt(self) -> Self {
        libm::sqrt(self)
    }
    fn exp(self) -> Self {
        libm::exp(self)
    }
    fn exp_m1(self) -> Self {
        libm::expm1(self)
    }
    fn ln(self) -> Self {
        libm::log(self)
    }
    fn atan2(self, x: Self) -> Self {
        libm::atan2(self, x)
    }
    fn cos(self) -> Self {
        libm::cos(self)
    }
    fn sin(self) -> Self {
        libm::sin(self)
    }
    fn is_finite(self) -> bool {
        f64::is_finite(self)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Each function of `Real` at one point, against the value printed by
    /// Python's `math` module (`repr(math.sqrt(2))` and so on, correctly
    /// rounded f64), within `tol` relative. The references are written out as
    /// printed, not taken from `core::f64::consts`, and `0 / 0` is the NaN.
    #[allow(clippy::approx_constant, clippy::eq_op)]
    fn functions_match_their_reference_values<T: Real>(tol: f64) {
        let close = |got: T, want: f64| {
            let g = got.to_f64();
            assert!((g - want).abs() <= tol * want.abs(), "{g} vs {want}");
        };
        close(T::of(2.0).sqrt(), 1.4142135623730951);
        close(T::ONE.exp(), 2.718281828459045);
        close(T::of(1e-5).exp_m1(), 1.0000050000166668e-05);
        close(T::of(10.0).ln(), 2.302585092994046);
        // The second quadrant: atan2 must use both signs.
        close(T::ONE.atan2(-T::ONE), 2.356194490192345);
        close(T::ONE.cos(), 0.5403023058681398);
        close(T::ONE.sin(), 0.8414709848078965);
        close(T::PI, core::f64::consts::PI);
        assert_eq!(T::of(0.25).to_f64(), 0.25);
        assert_eq!(T::of(-2.5).abs().to_f64(), 2.5);
        assert_eq!(T::of(3.0).abs().to_f64(), 3.0);
        let (two, three) = (T::of(2.0), T::of(3.0));
        assert_eq!((two.max(three).to_f64(), three.max(two).to_f64()), (3.0, 3.0));
        assert_eq!((two.min(three).to_f64(), three.min(two).to_f64()), (2.0, 2.0));
        assert!(T::ONE.is_finite());
        assert!(!(T::ONE / T::ZERO).is_finite());
        assert!(!(T::ZERO / T::ZERO).is_finite());
    }

    #[test]
    fn f32_functions_match_their_reference_values() {
        functions_match_their_reference_values::<f32>(2.0 * f32::EPSILON as f64);
    }

    #[test]
    fn f64_functions_match_their_reference_values() {
        functions_match_their_reference_values::<f64>(2.0 * f64::EPSILON);
    }

    #[test]
    fn clamp_limits_and_never_panics() {
        assert_eq!(clamp(5.0, -1.0, 2.0), 2.0);
        assert_eq!(clamp(-5.0, -1.0, 2.0), -1.0);
        assert_eq!(clamp(0.5, -1.0, 2.0), 0.5);
        assert_eq!(clamp(f32::NAN, -1.0, 2.0), -1.0);
        assert_eq!(clamp(0.5, 2.0, -1.0), -1.0, "inverted bounds: the upper one");
    }
}
