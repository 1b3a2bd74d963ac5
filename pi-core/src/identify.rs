//! Identification of an R-L load from samples, `no_std`, generic over `f32`
//! (on the device, during an excitation) and `f64` (on the host).
//!
//! Over one sample period `Ts` with the terminal voltage `v[k]` held, the
//! winding current obeys exactly (the zero-order-hold model)
//!
//! ```text
//! i[k+1] = a i[k] + b v[k] + c,    a = exp(-R Ts / L),  b = (1 - a) / R
//! ```
//!
//! fitted in its increment form `i[k+1] - i[k] = (a - 1) i[k] + b v[k] + c`,
//! whose small first parameter keeps `1 - a` (and so `R`) to its digits in
//! `f32` when `Ts << L / R`.
//!
//! where the constant `c` takes up what a single excitation cannot tell apart:
//! the current sensor's offset `o` (read `y = i + o`: `c` gains `o (1 - a)`)
//! and a voltage the bridge loses regardless of the duty (`c` gains
//! `-b v_loss`). These are the nuisance parameters: fitted, not reported as
//! the load. `(a, b, c)` are linear in the samples, so recursive least
//! squares ([`Rls3`]) finds them with a fixed 3 x 3 state, and
//! `R = (1 - a) / b`, `L = -R Ts / ln(a)` follow (Ljung, *System
//! Identification: Theory for the User*, the chapters on linear regression and
//! recursive estimation; cited from memory). Intervals come from the
//! estimate's covariance `s^2 (Phi' Phi)^-1` through the derivatives of `R`
//! and `L` with respect to `(a, b)`.

use crate::num::Real;

/// Recursive least squares for three parameters, `y = phi . theta + e`, with
/// no forgetting: every sample weighs alike, so after `N` samples this is the
/// batch least-squares solution up to the start-up prior of `P0 = p0 I`.
///
/// It keeps the square root of the information matrix, not the covariance:
/// an upper-triangular `R` with `R' R = Phi' Phi + P0^-1` and `z = R theta`,
/// into which each sample's row `[phi | y]` is rotated by three Givens
/// rotations; what is left of `y` is the sample's residual (Golub and Van
/// Loan, *Matrix Computations*, the section on updating the QR
/// factorisation; cited from memory). The covariance form `P <- P - ...`
/// squares the condition number and in f32 loses `P`'s positiveness over a
/// thousand samples of a slow winding (`1 - a` of a few hundredths); the
/// rotations keep it, so the device's f32 estimate stays within a fraction
/// of a percent of the host's f64 on the same samples.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Rls3<T> {
    /// Rows of `[R | z]`: `r[j][k]` for `k >= j`, zeros below the diagonal.
    r: [[T; 4]; 3],
    samples: u32,
    sse: T,
}

impl<T: Real> Rls3<T> {
    /// A fresh estimator with `P0 = p0 I` (large: a weak prior; 1e6 to 1e9
    /// in the units of the regressors squared inverted).
    pub fn new(p0: T) -> Self {
        let z = T::ZERO;
        let d = T::ONE / p0.sqrt();
        Self {
            r: [[d, z, z, z], [z, d, z, z], [z, z, d, z]],
            samples: 0,
            sse: z,
        }
    }

    /// One sample. Non-finite inputs are skipped (nothing changes) and the
    /// call says so by returning `false`.
    pub fn update(&mut self, phi: [T; 3], y: T) -> bool {
        if !(phi.iter().all(|v| v.is_finite()) && y.is_finite()) {
            return false;
        }
        let mut row = [phi[0], phi[1], phi[2], y];
        let mut next = self.r;
        for (j, rj) in next.iter_mut().enumerate() {
            // The rotation that zeroes row[j] against the diagonal rj[j].
            let (Some(&a), Some(&b)) = (rj.get(j), row.get(j)) else {
                continue;
            };
            if b == T::ZERO {
                continue;
            }
            let scale = a.abs().max(b.abs());
            let h = scale * ((a / scale) * (a / scale) + (b / scale) * (b / scale)).sqrt();
            let (c, s) = (a / h, b / h);
            for (x, w) in rj.iter_mut().zip(row.iter_mut()).skip(j) {
                let (u, v) = (*x, *w);
                *x = c * u + s * v;
                *w = c * v - s * u;
            }
        }
        let residual = row[3];
        if !(residual.is_finite() && next.iter().flatten().all(|v| v.is_finite())) {
            return false;
        }
        self.r = next;
        self.sse = self.sse + residual * residual;
        self.samples = self.samples.saturating_add(1);
        true
    }

    /// The estimate, `R^-1 z` by back-substitution (literal indices: no
    /// bounds check, no panic path on the device).
    pub fn theta(&self) -> [T; 3] {
        let r = &self.r;
        let t2 = r[2][3] / r[2][2];
        let t1 = (r[1][3] - r[1][2] * t2) / r[1][1];
        let t0 = (r[0][3] - r[0][1] * t1 - r[0][2] * t2) / r[0][0];
        [t0, t1, t2]
    }

    /// `(Phi' Phi + P0^-1)^-1 = R^-1 R^-T`, the unscaled covariance.
    pub fn p(&self) -> [[T; 3]; 3] {
        let r = &self.r;
        let z = T::ZERO;
        // U = R^-1, upper triangular.
        let u00 = T::ONE / r[0][0];
        let u11 = T::ONE / r[1][1];
        let u22 = T::ONE / r[2][2];
        let u01 = -r[0][1] * u00 * u11;
        let u12 = -r[1][2] * u11 * u22;
        let u02 = -(r[0][1] * u12 + r[0][2] * u22) * u00;
        let u = [[u00, u01, u02], [z, u11, u12], [z, z, u22]];
        let mut p = [[z; 3]; 3];
        for (pi, ui) in p.iter_mut().zip(u.iter()) {
            for (pij, uj) in pi.iter_mut().zip(u.iter()) {
                *pij = ui[0] * uj[0] + ui[1] * uj[1] + ui[2] * uj[2];
            }
        }
        p
    }

    /// Samples taken.
    pub fn samples(&self) -> u32 {
        self.samples
    }

    /// The residual variance `s^2 = SSE / (N - 3)` (`None` below 4 samples).
    pub fn residual_variance(&self) -> Option<T> {
        (self.samples > 3).then(|| self.sse / T::of(f64::from(self.samples - 3)))
    }
}

/// An identified R-L load.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RlEstimate<T> {
    /// Resistance, ohm.
    pub resistance_ohm: T,
    /// Inductance, H.
    pub inductance_h: T,
    /// The nuisance constant `c`, A per sample (offset and voltage loss).
    pub constant_a: T,
    /// Standard deviation of the resistance, ohm.
    pub resistance_sd_ohm: T,
    /// Standard deviation of the inductance, H.
    pub inductance_sd_h: T,
}

/// Why no estimate could be made.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum IdentifyError {
    /// Fewer than four usable samples.
    TooFewSamples,
    /// The fitted discrete pole is not in `(0, 1)` or the gain not positive:
    /// the data is not the step response of an R-L load at this period.
    NotAnRlLoad,
}

impl core::fmt::Display for IdentifyError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            IdentifyError::TooFewSamples => {
                write!(f, "fewer than four usable samples; capture more of the transient")
            }
            IdentifyError::NotAnRlLoad => write!(
                f,
                "the samples do not fit an R-L load at this sample period (the fitted pole is outside (0, 1)); check the columns, their scales and the voltage"
            ),
        }
    }
}

impl core::error::Error for IdentifyError {}

/// An R-L identification in progress: feed `(v[k], i[k])` pairs in time order.
#[derive(Clone, Copy, Debug)]
pub struct RlIdentifier<T> {
    rls: Rls3<T>,
    period_s: T,
    last: Option<(T, T)>,
}

impl<T: Real> RlIdentifier<T> {
    /// An identifier for samples `period_s` apart.
    pub fn new(period_s: T) -> Self {
        Self {
            // A weak prior that f32 still carries without losing the data's
            // digits in the covariance update.
            rls: Rls3::new(T::of(1e6)),
            period_s,
            last: None,
        }
    }

    /// The next sample: the voltage held over the period that starts now, V,
    /// and the current measured now, A.
    pub fn sample(&mut self, voltage_v: T, current_a: T) {
        if let Some((v0, i0)) = self.last {
            self.rls.update([i0, v0, T::ONE], current_a - i0);
        }
        self.last = Some((voltage_v, current_a));
    }

    /// The least-squares estimator inside.
    pub fn rls(&self) -> &Rls3<T> {
        &self.rls
    }

    /// The estimate so far.
    pub fn estimate(&self) -> Result<RlEstimate<T>, IdentifyError> {
        if self.rls.samples() < 4 {
            return Err(IdentifyError::TooFewSamples);
        }
        let [a_minus_1, b, c] = self.rls.theta();
        let a = T::ONE + a_minus_1;
        if !(a_minus_1 < T::ZERO && a > T::ZERO && b > T::ZERO) {
            return Err(IdentifyError::NotAnRlLoad);
        }
        let ts = self.period_s;
        let r = -a_minus_1 / b;
        let ln_a = a.ln();
        let l = -r * ts / ln_a;
        // Delta method: dR/da = -1/b, dR/db = -(1 - a)/b^2;
        // L = -Ts (1 - a) / (b ln a): dL/da = Ts/(b ln a) + Ts (1 - a)/(b a ln^2 a),
        // dL/db = Ts (1 - a) / (b^2 ln a).
        let s2 = self.rls.residual_variance().unwrap_or(T::ZERO);
        let p = self.rls.p();
        let (paa, pab, pbb) = (p[0][0] * s2, p[0][1] * s2, p[1][1] * s2);
        let var = |ga: T, gb: T| ga * ga * paa + T::of(2.0) * ga * gb * pab + gb * gb * pbb;
        let one_minus_a = -a_minus_1;
        let (dr_da, dr_db) = (-T::ONE / b, -one_minus_a / (b * b));
        let dl_da = ts / (b * ln_a) + ts * one_minus_a / (b * a * ln_a * ln_a);
        let dl_db = ts * one_minus_a / (b * b * ln_a);
        Ok(RlEstimate {
            resistance_ohm: r,
            inductance_h: l,
            constant_a: c,
            resistance_sd_ohm: var(dr_da, dr_db).max(T::ZERO).sqrt(),
            inductance_sd_h: var(dl_da, dl_db).max(T::ZERO).sqrt(),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// An exact ZOH R-L response to a few voltage steps, with an offset.
    fn capture(r: f64, l: f64, ts: f64, offset: f64) -> ([f64; 400], [f64; 400]) {
        let a = (-r * ts / l).exp();
        let b = (1.0 - a) / r;
        let (mut v, mut y) = ([0.0; 400], [0.0; 400]);
        let mut i = 0.0;
        for k in 0..400 {
            v[k] = match k / 100 {
                0 => 2.0,
                1 => 6.0,
                2 => -3.0,
                _ => 4.0,
            };
            y[k] = i + offset;
            i = a * i + b * v[k];
        }
        (v, y)
    }

    #[test]
    fn an_exact_response_gives_back_r_and_l_with_the_offset_taken_up() {
        for (r, l) in [(27.0, 0.12), (0.35, 60e-6), (3.3, 1.5e-3)] {
            let ts = 0.05 * l / r;
            let (v, y) = capture(r, l, ts, 0.04);
            let mut id = RlIdentifier::new(ts);
            for k in 0..400 {
                id.sample(v[k], y[k]);
            }
            let e = id.estimate().unwrap();
            assert!((e.resistance_ohm - r).abs() < 1e-6 * r, "{r}: {e:?}");
            assert!((e.inductance_h - l).abs() < 1e-6 * l, "{l}: {e:?}");
            // c = o (1 - a) for an offset o.
            let a = (-r * ts / l).exp();
            assert!((e.constant_a - 0.04 * (1.0 - a)).abs() < 1e-6, "{e:?}");
        }
    }

    #[test]
    fn f32_on_the_device_is_within_a_percent_of_f64() {
        let (r, l) = (3.3, 1.5e-3);
        let ts = 0.05 * l / r;
        let (v, y) = capture(r, l, ts, 0.0);
        let mut id32 = RlIdentifier::new(ts as f32);
        let mut id64 = RlIdentifier::new(ts);
        for k in 0..400 {
            id32.sample(v[k] as f32, y[k] as f32);
            id64.sample(v[k], y[k]);
        }
        let (e32, e64) = (id32.estimate().unwrap(), id64.estimate().unwrap());
        assert!(((e32.resistance_ohm as f64) - e64.resistance_ohm).abs() < 0.01 * e64.resistance_ohm);
        assert!(((e32.inductance_h as f64) - e64.inductance_h).abs() < 0.01 * e64.inductance_h);
    }

    #[test]
    fn a_bad_sample_changes_nothing_and_too_few_are_refused() {
        let mut id = RlIdentifier::new(1e-4);
        id.sample(1.0, 0.0);
        id.sample(1.0, 0.1);
        assert_eq!(id.estimate(), Err(IdentifyError::TooFewSamples));
        let before = *id.rls();
        let mut r = before;
        assert!(!r.update([f64::NAN, 1.0, 1.0], 0.2));
        assert_eq!(r, before);
    }
}
