//! Complex numbers and the roots of the small polynomials of a discrete current
//! loop (degree 5 at most: integrator, plant, delay, filter).
//!
//! Roots are found with the Aberth-Ehrlich simultaneous iteration (Aberth,
//! "Iteration methods for finding all zeros of a polynomial simultaneously",
//! Mathematics of Computation, 1973), started on a circle of the Cauchy bound's
//! radius, which converges for the well-separated and the clustered roots these
//! loops have; a fixed iteration cap keeps it bounded on the device.

use crate::num::Real;

/// The largest degree handled.
pub const MAX_DEGREE: usize = 5;

/// A complex number.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Complex<T> {
    /// Real part.
    pub re: T,
    /// Imaginary part.
    pub im: T,
}

impl<T: Real> Complex<T> {
    /// `re + j im`.
    pub fn new(re: T, im: T) -> Self {
        Self { re, im }
    }
    /// A real number.
    pub fn real(re: T) -> Self {
        Self { re, im: T::ZERO }
    }
    /// `e^(j w)`.
    pub fn unit(w: T) -> Self {
        Self::new(w.cos(), w.sin())
    }
    /// Sum.
    pub fn plus(self, o: Self) -> Self {
        Self::new(self.re + o.re, self.im + o.im)
    }
    /// Difference.
    pub fn minus(self, o: Self) -> Self {
        Self::new(self.re - o.re, self.im - o.im)
    }
    /// Product.
    pub fn times(self, o: Self) -> Self {
        Self::new(self.re * o.re - self.im * o.im, self.re * o.im + self.im * o.re)
    }
    /// Scaled by a real number.
    pub fn scale(self, k: T) -> Self {
        Self::new(self.re * k, self.im * k)
    }
    /// Quotient (the caller keeps `o` nonzero).
    pub fn over(self, o: Self) -> Self {
        let d = o.re * o.re + o.im * o.im;
        Self::new(
            (self.re * o.re + self.im * o.im) / d,
            (self.im * o.re - self.re * o.im) / d,
        )
    }
    /// Magnitude.
    pub fn abs(self) -> T {
        (self.re * self.re + self.im * self.im).sqrt()
    }
    /// Angle, radians in `(-pi, pi]`.
    pub fn arg(self) -> T {
        self.im.atan2(self.re)
    }
}

/// A real polynomial `c[0] z^n + c[1] z^(n-1) + ... + c[n]`, highest power first.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Poly<T> {
    c: [T; MAX_DEGREE + 1],
    degree: usize,
}

impl<T: Real> Poly<T> {
    /// From coefficients, highest power first; `None` if there are more than
    /// `MAX_DEGREE + 1` or the leading one is zero.
    pub fn new(coefficients: &[T]) -> Option<Self> {
        let n = coefficients.len();
        if n == 0 || n > MAX_DEGREE + 1 || coefficients[0] == T::ZERO {
            return None;
        }
        let mut c = [T::ZERO; MAX_DEGREE + 1];
        c[..n].copy_from_slice(coefficients);
        Some(Self { c, degree: n - 1 })
    }

    /// Degree.
    pub fn degree(&self) -> usize {
        self.degree
    }

    /// Coefficients, highest power first.
    pub fn coefficients(&self) -> &[T] {
        // `degree <= MAX_DEGREE` by construction; written so that no bounds
        // check (and no panic path) is left for firmware builds.
        let (used, _) = self.c.split_at(self.degree.min(MAX_DEGREE) + 1);
        used
    }

    /// Value at a complex point (Horner).
    pub fn eval(&self, z: Complex<T>) -> Complex<T> {
        let mut v = Complex::real(T::ZERO);
        for &k in self.coefficients() {
            v = v.times(z).plus(Complex::real(k));
        }
        v
    }

    /// Value of the derivative at a complex point.
    pub fn eval_derivative(&self, z: Complex<T>) -> Complex<T> {
        let n = self.degree;
        let mut v = Complex::real(T::ZERO);
        for (k, &c) in self.coefficients().iter().take(n).enumerate() {
            v = v.times(z).plus(Complex::real(c * T::of((n - k) as f64)));
        }
        v
    }

    /// All roots; the array holds `degree()` of them.
    pub fn roots(&self) -> [Complex<T>; MAX_DEGREE] {
        let n = self.degree.min(MAX_DEGREE);
        let mut z = [Complex::real(T::ZERO); MAX_DEGREE];
        if n == 0 {
            return z;
        }
        // Cauchy bound: every root lies within 1 + max |c_k / c_0|.
        let lead = self.c[0];
        let mut bound = T::ZERO;
        for &k in self.coefficients().iter().skip(1) {
            bound = bound.max((k / lead).abs());
        }
        let radius = T::ONE + bound;
        for (k, zk) in z.iter_mut().enumerate().take(n) {
            // Off the real axis and not symmetric, so conjugate pairs separate.
            let angle = T::of(2.0 * core::f64::consts::PI * k as f64 / n as f64 + 0.4);
            *zk = Complex::unit(angle).scale(radius * T::of(0.5));
        }
        let tiny = T::of(1e-300_f64.max(f32::MIN_POSITIVE as f64));
        for _ in 0..200 {
            let mut moved = T::ZERO;
            for i in 0..n {
                let p = self.eval(z[i]);
                let dp = self.eval_derivative(z[i]);
                if p.abs() <= tiny {
                    continue;
                }
                let ratio = p.over(dp);
                let mut sum = Complex::real(T::ZERO);
                for (j, zj) in z.iter().enumerate().take(n) {
                    if j != i {
                        let d = z[i].minus(*zj);
                        if d.abs() > tiny {
                            sum = sum.plus(Complex::real(T::ONE).over(d));
                        }
                    }
                }
                let denom = Complex::real(T::ONE).minus(ratio.times(sum));
                let step = if denom.abs() > tiny {
                    ratio.over(denom)
                } else {
                    ratio
                };
                z[i] = z[i].minus(step);
                moved = moved.max(step.abs() / (T::ONE + z[i].abs()));
            }
            if moved < T::of(1e-15_f64.max(f32::EPSILON as f64 * 0.25)) {
                break;
            }
        }
        z
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn roots_of_a_known_quartic() {
        // (z - 0.5)(z + 0.25)(z^2 - 1.2 z + 0.72): roots 0.5, -0.25, 0.6 +/- 0.6j.
        let p = Poly::<f64>::new(&[1.0, -1.45, 0.895, -0.03, -0.09]).unwrap();
        let r = p.roots();
        let mut expected = [(0.5, 0.0), (-0.25, 0.0), (0.6, 0.6), (0.6, -0.6)];
        for z in &r[..4] {
            let k = expected
                .iter()
                .position(|(re, im)| (z.re - re).abs() < 1e-9 && (z.im - im).abs() < 1e-9)
                .unwrap_or_else(|| panic!("unexpected root {z:?}"));
            expected[k] = (f64::NAN, f64::NAN);
        }
    }

    #[test]
    fn double_root_and_f32() {
        let p = Poly::<f32>::new(&[1.0, -1.6, 0.64]).unwrap(); // (z - 0.8)^2
        for z in &p.roots()[..2] {
            assert!((z.re - 0.8).abs() < 2e-3 && z.im.abs() < 2e-3, "{z:?}");
        }
    }
}
