//! Direct design of the sampled loop: the dominant closed-loop poles placed at
//! `z = exp(s Ts)` of the desired continuous ones `s = -sigma +/- j wd`.
//!
//! The loop is the firmware's: the winding held over each period and applied
//! `D Ts` after the sample (`0 <= D <= 1`). Over one period the current moves
//! by `i[k+1] = a i[k] + b0 u[k] + b1 u[k-1]` with `a = exp(-x)`, `x = R Ts / L`,
//!
//! ```text
//! b0 = (1 - exp(-(1 - D) x)) / R          (the new duty, for the last 1 - D of the period)
//! b1 = (exp(-(1 - D) x) - exp(-x)) / R    (the old duty, for the first D)
//! ```
//!
//! so the plant is `(b0 z + b1) / (z (z - a))` (`b / (z - a)` at `D = 0`, the
//! zero-order-hold equivalent, and `b / (z (z - a))` at `D = 1`; Franklin,
//! Powell & Workman, *Digital Control of Dynamic Systems*, cited from memory).
//! With `pi-core`'s backward-Euler PI `C(z) = (k1 z - k0) / (z - 1)`,
//! `k1 = Kp + Ki Ts`, `k0 = Kp`, the characteristic polynomial is
//!
//! ```text
//! z^3 + (k1 b0 - 1 - a) z^2 + (a + k1 b1 - k0 b0) z - k0 b1
//! ```
//!
//! Matching it to `(z^2 - 2 Re(p) z + |p|^2)(z - c)` is linear in `k1`, `k0`
//! and the remaining pole `c`, solved in closed form below; `c` must lie
//! inside the unit circle. At `D = 0` it gives `c = 0` and the two poles exactly.

use crate::design::{DesignError, Gains, Real, RlPlant, Sampling, Spec};

/// `(a, b)` of the zero-order-hold winding, with `1 - a` from `expm1` so `f32`
/// keeps its digits when `Ts << L / R`.
pub fn zoh_plant<T: Real>(plant: &RlPlant<T>, period_s: T) -> (T, T) {
    let x = plant.resistance_ohm() * period_s / plant.inductance_h();
    let one_minus_a = -(-x).exp_m1();
    (T::ONE - one_minus_a, one_minus_a / plant.resistance_ohm())
}

/// The desired dominant pole in z (upper half plane).
pub fn target_pole<T: Real>(spec: &Spec<T>, period_s: T) -> (T, T) {
    let r = (-spec.sigma() * period_s).exp();
    let w = spec.damped_frequency() * period_s;
    (r * w.cos(), r * w.sin())
}

/// Gains placing the sampled loop's dominant poles for the spec.
pub fn design<T: Real>(
    plant: &RlPlant<T>,
    sampling: &Sampling<T>,
    spec: &Spec<T>,
) -> Result<Gains<T>, DesignError<T>> {
    if sampling.filter_tau_s() != T::ZERO {
        return Err(DesignError::FilterUnsupported);
    }
    let ts = sampling.period_s();
    let (kp, ki_ts) = solve(plant, sampling, spec)?;
    if !(kp.is_finite() && ki_ts.is_finite()) || kp <= T::ZERO || ki_ts <= T::ZERO {
        return Err(DesignError::SettlingTooSlow {
            settling_time_s: spec.settling_time_s(),
            max_settling_time_s: T::of(0.95 * 8.0) * plant.time_constant_s(),
        });
    }
    Ok(Gains {
        kp_v_per_a: kp,
        ti_s: kp * ts / ki_ts,
    })
}

/// `(b0, b1)` of the held, delayed winding (module docs).
pub fn delayed_inputs<T: Real>(plant: &RlPlant<T>, sampling: &Sampling<T>) -> (T, T) {
    let x = plant.resistance_ohm() * sampling.period_s() / plant.inductance_h();
    let d = sampling.delay_periods();
    let late = -(-(T::ONE - d) * x).exp_m1(); // 1 - exp(-(1 - D) x)
    let early = (-(T::ONE - d) * x).exp() * -(-d * x).exp_m1(); // exp(-(1-D)x) (1 - exp(-D x))
    (late / plant.resistance_ohm(), early / plant.resistance_ohm())
}

/// `(k1, k0, c)`: the gains' coefficients and the remaining pole.
fn place<T: Real>(plant: &RlPlant<T>, sampling: &Sampling<T>, spec: &Spec<T>) -> (T, T, T) {
    let ts = sampling.period_s();
    let (a, _) = zoh_plant(plant, ts);
    let (b0, b1) = delayed_inputs(plant, sampling);
    let (re, im) = target_pole(spec, ts);
    let m2 = re * re + im * im;
    let two_re = T::of(2.0) * re;
    let alpha = T::ONE + a - two_re;
    let g = m2 * b0 + two_re * b1;
    let k1 = (b1 * (m2 - a) + alpha * g) / (b1 * b1 + b0 * g);
    let c = alpha - k1 * b0;
    let k0 = if b1.abs() >= b0.abs() {
        m2 * c / b1
    } else {
        (a + k1 * b1 - m2 - two_re * c) / b0
    };
    (k1, k0, c)
}

/// `(Kp, Ki Ts)` for the spec, or the reason the remaining pole is unstable.
fn solve<T: Real>(
    plant: &RlPlant<T>,
    sampling: &Sampling<T>,
    spec: &Spec<T>,
) -> Result<(T, T), DesignError<T>> {
    let (k1, k0, c) = place(plant, sampling, spec);
    if c.abs() >= T::ONE || !c.is_finite() {
        return Err(DesignError::UnstableRemainder {
            magnitude: c.abs(),
            min_settling_time_s: slowest_needed(plant, sampling, spec),
        });
    }
    Ok((k0, k1 - k0))
}

/// The shortest settling time (same overshoot) that keeps the remaining pole
/// at `|c| <= 0.9`, by bisection.
fn slowest_needed<T: Real>(plant: &RlPlant<T>, sampling: &Sampling<T>, spec: &Spec<T>) -> T {
    let remainder = |settling: T| -> T {
        match spec.with_settling_time(settling) {
            Ok(s) => place(plant, sampling, &s).2.abs(),
            Err(_) => T::of(2.0),
        }
    };
    let mut lo = spec.settling_time_s();
    let mut hi = lo;
    for _ in 0..60 {
        if remainder(hi) <= T::of(0.9) {
            break;
        }
        hi = hi * T::of(2.0);
    }
    for _ in 0..50 {
        let mid = (lo + hi) * T::of(0.5);
        if remainder(mid) <= T::of(0.9) {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    hi
}
