//! Exact discretisation of small linear time-invariant blocks.
//!
//! A block `x' = A x + B u` whose input is held (zero-order hold) or varies
//! linearly (first-order hold) over an interval `dt` has an exact solution in terms
//! of the matrix exponential of an augmented matrix (Van Loan's construction; see
//! Franklin, Powell & Workman, *Digital Control of Dynamic Systems*, the chapter on
//! discrete equivalents, chapter cited from memory):
//!
//! ```text
//! exp([[A, B], [0, 0]] dt)           = [[Phi, Gamma], [0, I]]            (hold)
//! exp([[A, B, 0], [0, 0, I], [0, 0, 0]] dt) = [[Phi, Gamma1, Gamma2], ...]  (ramp)
//! x(dt) = Phi x(0) + Gamma1 u(0) + Gamma2 (u(dt) - u(0)) / dt
//! ```
//!
//! The exponential is computed by scaling and squaring with a truncated Taylor
//! series, in f64. The blocks here have at most two states and two inputs, so the
//! augmented matrices are at most 6 x 6 and the result is accurate to rounding.

// Matrix code reads best with explicit indices.
#![allow(clippy::needless_range_loop)]

/// The largest augmented matrix used by the blocks (2 states + 2 inputs + 2 slopes).
pub const MAX_DIM: usize = 6;

/// A square matrix of dimension `n <= MAX_DIM`, stored densely.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Matrix {
    n: usize,
    a: [[f64; MAX_DIM]; MAX_DIM],
}

impl Matrix {
    /// The `n x n` zero matrix; `n` is capped at [`MAX_DIM`].
    pub fn zeros(n: usize) -> Self {
        Self {
            n: n.min(MAX_DIM),
            a: [[0.0; MAX_DIM]; MAX_DIM],
        }
    }

    /// The `n x n` identity.
    pub fn identity(n: usize) -> Self {
        let mut m = Self::zeros(n);
        for k in 0..m.n {
            m.a[k][k] = 1.0;
        }
        m
    }

    /// Dimension.
    pub fn dim(&self) -> usize {
        self.n
    }

    /// Element `(row, col)`.
    pub fn get(&self, row: usize, col: usize) -> f64 {
        self.a[row][col]
    }

    /// Sets element `(row, col)`.
    pub fn set(&mut self, row: usize, col: usize, value: f64) {
        self.a[row][col] = value;
    }

    fn scaled(&self, s: f64) -> Self {
        let mut m = *self;
        for row in m.a.iter_mut().take(self.n) {
            for v in row.iter_mut().take(self.n) {
                *v *= s;
            }
        }
        m
    }

    fn mul(&self, other: &Self) -> Self {
        let n = self.n;
        let mut m = Self::zeros(n);
        for i in 0..n {
            for k in 0..n {
                let aik = self.a[i][k];
                if aik == 0.0 {
                    continue;
                }
                for j in 0..n {
                    m.a[i][j] += aik * other.a[k][j];
                }
            }
        }
        m
    }

    fn add(&self, other: &Self) -> Self {
        let mut m = *self;
        for i in 0..self.n {
            for j in 0..self.n {
                m.a[i][j] += other.a[i][j];
            }
        }
        m
    }

    fn norm_inf(&self) -> f64 {
        (0..self.n)
            .map(|i| (0..self.n).map(|j| self.a[i][j].abs()).sum::<f64>())
            .fold(0.0, f64::max)
    }

    /// The matrix exponential `exp(self)`.
    pub fn exp(&self) -> Self {
        // Scale so the norm is at most 1/2, sum 15 Taylor terms (the remainder is
        // below 0.5^16 / 16! = 7e-19 relative), then square back.
        let norm = self.norm_inf();
        let mut squarings = 0u32;
        let mut scale = 1.0;
        // At most about 1100 halvings bring any finite norm below 1/2.
        while norm * scale > 0.5 && squarings < 1100 {
            scale *= 0.5;
            squarings += 1;
        }
        let x = self.scaled(scale);
        let mut term = Self::identity(self.n);
        let mut sum = term;
        for k in 1..=15 {
            term = term.mul(&x).scaled(1.0 / k as f64);
            sum = sum.add(&term);
        }
        for _ in 0..squarings {
            sum = sum.mul(&sum);
        }
        sum
    }
}

/// The last few discretisations of a block, by key (the interval's length and
/// whatever else the matrices depend on): a runner alternates between a few
/// interval lengths (before and after the sample), and recomputing a matrix
/// exponential each time would cost more than the rest of the step. Entries
/// are replaced oldest first; a hit returns exactly what was computed.
#[derive(Clone, Debug)]
pub struct Recent<K, V, const N: usize> {
    entries: [Option<(K, V)>; N],
    next: usize,
}

impl<K, V, const N: usize> Default for Recent<K, V, N> {
    fn default() -> Self {
        Self {
            entries: std::array::from_fn(|_| None),
            next: 0,
        }
    }
}

impl<K: PartialEq + Copy, V, const N: usize> Recent<K, V, N> {
    /// The value for `key`, computed by `make` if it is not among the recent ones.
    #[inline]
    pub fn get(&mut self, key: K, make: impl FnOnce() -> V) -> &V {
        const { assert!(N > 0, "a cache of no entries") };
        // A hit hands out a reference, not a copy; a miss empties the oldest
        // slot and fills it.
        let mut slot = None;
        for (i, e) in self.entries.iter().enumerate() {
            if matches!(e, Some((k, _)) if *k == key) {
                slot = Some(i);
                break;
            }
        }
        let slot = slot.unwrap_or_else(|| {
            let i = self.next;
            self.entries[i] = None;
            self.next = (i + 1) % N;
            i
        });
        &self.entries[slot].get_or_insert_with(|| (key, make())).1
    }
}

/// A linear block discretised exactly for one interval with a first-order hold on
/// its inputs: `x(dt) = phi x + gamma0 u(0) + gamma1 u(dt)`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Discrete<const N: usize, const M: usize> {
    /// State transition over the interval.
    pub phi: [[f64; N]; N],
    /// Weight of the input at the start of the interval.
    pub gamma_start: [[f64; M]; N],
    /// Weight of the input at the end of the interval.
    pub gamma_end: [[f64; M]; N],
}

impl<const N: usize, const M: usize> Discrete<N, M> {
    /// Discretises `x' = a x + b u` over `dt_s` seconds with the input varying
    /// linearly from `u(0)` to `u(dt)`. With `u(0) = u(dt)` this is the zero-order
    /// hold. `N + 2 M` must not exceed [`MAX_DIM`] (checked at compile time).
    pub fn first_order_hold(a: [[f64; N]; N], b: [[f64; M]; N], dt_s: f64) -> Self {
        const { assert!(N + 2 * M <= MAX_DIM) };
        let e = Self::augmented_exp(a, b, dt_s, true);
        Self::from_exp(&e, |i, j| {
            // x = phi x0 + hold u0 + ramp (u1 - u0)
            let (hold, ramp) = (e.get(i, N + j), e.get(i, N + M + j));
            (hold - ramp, ramp)
        })
    }

    /// Discretises `x' = a x + b u` over `dt_s` seconds with the input held (zero-
    /// order hold); cheaper than [`Self::first_order_hold`], same result for a held
    /// input. `N + M` must not exceed [`MAX_DIM`].
    pub fn zero_order_hold(a: [[f64; N]; N], b: [[f64; M]; N], dt_s: f64) -> Self {
        const { assert!(N + M <= MAX_DIM) };
        let e = Self::augmented_exp(a, b, dt_s, false);
        Self::from_exp(&e, |i, j| (e.get(i, N + j), 0.0))
    }

    /// `exp` of `[[A, B], [0, 0]] dt`, with the ramp block `[[.., 0], [0, I], [0, 0]]`
    /// appended when `ramp`.
    fn augmented_exp(a: [[f64; N]; N], b: [[f64; M]; N], dt_s: f64, ramp: bool) -> Matrix {
        let mut big = Matrix::zeros(if ramp { N + 2 * M } else { N + M });
        for i in 0..N {
            for j in 0..N {
                big.set(i, j, a[i][j] * dt_s);
            }
            for j in 0..M {
                big.set(i, N + j, b[i][j] * dt_s);
            }
        }
        if ramp {
            // The input ramps: u' = (u(dt) - u(0)) / dt, carried as a state with
            // slope 1 in the scaled time; its block is the identity times dt / dt = 1.
            for j in 0..M {
                big.set(N + j, N + M + j, 1.0);
            }
        }
        big.exp()
    }

    /// Reads `phi` off the exponential and the two input weights from `gammas(i, j)`.
    fn from_exp(e: &Matrix, gammas: impl Fn(usize, usize) -> (f64, f64)) -> Self {
        let mut out = Self {
            phi: [[0.0; N]; N],
            gamma_start: [[0.0; M]; N],
            gamma_end: [[0.0; M]; N],
        };
        for i in 0..N {
            for j in 0..N {
                out.phi[i][j] = e.get(i, j);
            }
            for j in 0..M {
                (out.gamma_start[i][j], out.gamma_end[i][j]) = gammas(i, j);
            }
        }
        out
    }

    /// Advances a state over the interval.
    pub fn step(&self, x: &[f64; N], u_start: &[f64; M], u_end: &[f64; M]) -> [f64; N] {
        let mut next = [0.0; N];
        for i in 0..N {
            let mut v = 0.0;
            for j in 0..N {
                v += self.phi[i][j] * x[j];
            }
            for j in 0..M {
                v += self.gamma_start[i][j] * u_start[j] + self.gamma_end[i][j] * u_end[j];
            }
            next[i] = v;
        }
        next
    }

    /// [`Discrete::step`] with the input held over the interval (`u_start = u_end`),
    /// for a block discretised with [`Discrete::zero_order_hold`] or
    /// [`Discrete::zero_order_hold_2`], whose `gamma_end` is zero: the same sums
    /// without the zero terms, so the same result to the bit.
    pub fn step_held(&self, x: &[f64; N], u: &[f64; M]) -> [f64; N] {
        let mut next = [0.0; N];
        for i in 0..N {
            let mut v = 0.0;
            for j in 0..N {
                v += self.phi[i][j] * x[j];
            }
            for j in 0..M {
                v += self.gamma_start[i][j] * u[j];
            }
            next[i] = v;
        }
        next
    }
}

impl<const M: usize> Discrete<2, M> {
    /// [`Discrete::zero_order_hold`] for two states, computed on 2 x 2 matrices
    /// instead of the augmented 4 x 4: `Phi = exp(A dt)` and `Gamma = P B dt`
    /// with `P = sum (A dt)^k / (k + 1)!`, both by scaling and squaring (a
    /// halving of `A dt` is undone by `P <- (I + E) P / 2`, `E <- E E`, from
    /// `P(2X) = (I + exp(X)) P(X) / 2`). The same result to rounding, about ten
    /// times cheaper: the motor's matrices change every millisecond as the
    /// winding heats.
    pub fn zero_order_hold_2(a: [[f64; 2]; 2], b: [[f64; M]; 2], dt_s: f64) -> Self {
        let m = [[a[0][0] * dt_s, a[0][1] * dt_s], [a[1][0] * dt_s, a[1][1] * dt_s]];
        let norm = (m[0][0].abs() + m[0][1].abs()).max(m[1][0].abs() + m[1][1].abs());
        let mut squarings = 0u32;
        let mut scale = 1.0;
        while norm * scale > 0.5 && squarings < 1100 {
            scale *= 0.5;
            squarings += 1;
        }
        let x = [
            [m[0][0] * scale, m[0][1] * scale],
            [m[1][0] * scale, m[1][1] * scale],
        ];
        let mul = |p: &[[f64; 2]; 2], q: &[[f64; 2]; 2]| {
            [
                [
                    p[0][0] * q[0][0] + p[0][1] * q[1][0],
                    p[0][0] * q[0][1] + p[0][1] * q[1][1],
                ],
                [
                    p[1][0] * q[0][0] + p[1][1] * q[1][0],
                    p[1][0] * q[0][1] + p[1][1] * q[1][1],
                ],
            ]
        };
        // E = sum X^k / k!, P = sum X^k / (k + 1)!, 17 terms (the remainder is
        // below 0.5^17 / 17! relative).
        // 1 / k! for k = 0..=18, so the series multiplies instead of divides.
        const INV_FACT: [f64; 19] = {
            let mut inv = [1.0; 19];
            let mut k = 1;
            while k < 19 {
                inv[k] = inv[k - 1] / k as f64;
                k += 1;
            }
            inv
        };
        let mut power = [[1.0, 0.0], [0.0, 1.0]];
        let mut e = power;
        let mut p = power;
        for k in 1..=17 {
            power = mul(&power, &x);
            for i in 0..2 {
                for j in 0..2 {
                    e[i][j] += power[i][j] * INV_FACT[k];
                    p[i][j] += power[i][j] * INV_FACT[k + 1];
                }
            }
        }
        for _ in 0..squarings {
            let half = [
                [0.5 * (1.0 + e[0][0]), 0.5 * e[0][1]],
                [0.5 * e[1][0], 0.5 * (1.0 + e[1][1])],
            ];
            p = mul(&half, &p);
            e = mul(&e, &e);
        }
        let mut out = Discrete {
            phi: e,
            gamma_start: [[0.0; M]; 2],
            gamma_end: [[0.0; M]; 2],
        };
        for i in 0..2 {
            for j in 0..M {
                out.gamma_start[i][j] = (p[i][0] * b[0][j] + p[i][1] * b[1][j]) * dt_s;
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_two_state_hold_agrees_with_the_augmented_exponential() {
        // A motor's matrices from a held rotor to a light, fast one, over
        // intervals from a microsecond to a second.
        // The last column: the agreement asked over a PWM period. A 1e-9
        // kg m^2 rotor (a mechanical pole near 1e8 rad/s) needs many
        // squarings, and the two computations round differently there.
        for (r, l, ke, j, bv, tol_period) in [
            (1.9, 2.4e-3, 0.031, 5e-6, 2e-6, 1e-12),
            (0.2, 1e-4, 0.5, 1e-2, 0.0, 1e-12),
            (50.0, 0.3, 0.0, 1.0, 0.0, 1e-12),
            (1.9, 2.4e-3, 0.031, 1e-9, 1e-3, 1e-9),
        ] {
            let a = [[-r / l, -ke / l], [ke / j, -bv / j]];
            let b = [[1.0 / l, 0.0], [0.0, 1.0 / j]];
            for dt in [1e-6, 25e-6, 1e-3, 1.0] {
                let fast = Discrete::zero_order_hold_2(a, b, dt);
                let reference = Discrete::zero_order_hold(a, b, dt);
                // Over a whole second (values near 1e-51 after many
                // squarings) within 1e-9.
                let tol = if dt <= 1e-3 { tol_period } else { 1e-9 };
                let close = |x: f64, y: f64, scale: f64| (x - y).abs() <= tol * scale.max(1e-300);
                let scale_phi = reference.phi.iter().flatten().fold(0.0f64, |m, v| m.max(v.abs()));
                for i in 0..2 {
                    for k in 0..2 {
                        assert!(
                            close(fast.phi[i][k], reference.phi[i][k], scale_phi),
                            "phi {r} {j} {dt}: {:?} vs {:?}",
                            fast.phi,
                            reference.phi
                        );
                        let col = (reference.gamma_start[0][k].abs()).max(reference.gamma_start[1][k].abs());
                        assert!(
                            close(fast.gamma_start[i][k], reference.gamma_start[i][k], col),
                            "gamma {r} {j} {dt}: {:?} vs {:?}",
                            fast.gamma_start,
                            reference.gamma_start
                        );
                    }
                }
            }
        }
    }

    #[test]
    fn scalar_exponential_and_hold() {
        // x' = -a x + u: Phi = exp(-a dt), hold gain (1 - exp(-a dt)) / a.
        let (a, dt) = (3.0, 0.2);
        let d = Discrete::<1, 1>::first_order_hold([[-a]], [[1.0]], dt);
        assert!((d.phi[0][0] - (-a * dt).exp()).abs() < 1e-15);
        let hold = d.gamma_start[0][0] + d.gamma_end[0][0];
        assert!((hold - (1.0 - (-a * dt).exp()) / a).abs() < 1e-15);
    }

    #[test]
    fn ramp_input_matches_the_closed_form() {
        // x' = -a x + t/dt (ramp from 0 to 1) from x = 0:
        // x(dt) = 1/a - (1 - exp(-a dt)) / (a^2 dt).
        let (a, dt) = (2.0, 0.5);
        let d = Discrete::<1, 1>::first_order_hold([[-a]], [[1.0]], dt);
        let x = d.step(&[0.0], &[0.0], &[1.0])[0];
        let exact = 1.0 / a - (1.0 - (-a * dt).exp()) / (a * a * dt);
        assert!((x - exact).abs() < 1e-14, "{x} vs {exact}");
    }

    #[test]
    fn hold_forms_agree_for_a_held_input() {
        let a = [[-3.0, -0.5], [2.0, -0.1]];
        let b = [[1.0, 0.0], [0.0, 4.0]];
        let f = Discrete::<2, 2>::first_order_hold(a, b, 1e-3);
        let z = Discrete::<2, 2>::zero_order_hold(a, b, 1e-3);
        let (x, u) = ([0.3, -1.0], [2.0, 0.5]);
        let (xf, xz) = (f.step(&x, &u, &u), z.step(&x, &u, &u));
        for k in 0..2 {
            assert!((xf[k] - xz[k]).abs() < 1e-15, "{xf:?} {xz:?}");
        }
    }

    #[test]
    fn rotation_is_exact() {
        // x'' = -w^2 x: exp over dt is a rotation by w dt.
        let (w, dt) = (50.0, 0.1);
        let d = Discrete::<2, 1>::first_order_hold([[0.0, 1.0], [-w * w, 0.0]], [[0.0], [0.0]], dt);
        assert!((d.phi[0][0] - (w * dt).cos()).abs() < 1e-12);
        assert!((d.phi[0][1] - (w * dt).sin() / w).abs() < 1e-12);
    }
}
