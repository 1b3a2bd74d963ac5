//! Direct design of the sampled loop: the dominant closed-loop poles placed at
//! `z = exp(s Ts)` of the desired continuous ones `s = -sigma +/- j wd`.
//!
//! The loop is the firmware's: the winding held over each period,
//! `G(z) = b / (z - a)` with `a = exp(-R Ts / L)`, `b = (1 - a) / R` (the
//! zero-order-hold equivalent; Franklin, Powell & Workman, *Digital Control of
//! Dynamic Systems*, cited from memory), `pi-core`'s backward-Euler PI
//! `C(z) = Kp + Ki Ts z / (z - 1)`, and optionally the one-period delay `1 / z`.
//! Its characteristic polynomial is
//!
//! ```text
//! no delay:  z^2 + (b (Kp + Ki Ts) - 1 - a) z + (a - b Kp)
//! delay:     z^3 - (1 + a) z^2 + (a + b (Kp + Ki Ts)) z - b Kp
//! ```
//!
//! Without the delay both poles are placed exactly. With it, matching
//! `(z^2 - 2 Re(p) z + |p|^2)(z - c)` fixes the third pole at
//! `c = 1 + a - 2 Re(p)`, which must lie inside the unit circle.

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

/// `(Kp, Ki Ts)` for the spec, or the reason the remaining pole is unstable.
fn solve<T: Real>(
    plant: &RlPlant<T>,
    sampling: &Sampling<T>,
    spec: &Spec<T>,
) -> Result<(T, T), DesignError<T>> {
    let ts = sampling.period_s();
    let (a, b) = zoh_plant(plant, ts);
    let (re, im) = target_pole(spec, ts);
    let m2 = re * re + im * im;
    if !sampling.one_period_delay() {
        let kp = (a - m2) / b;
        return Ok((kp, (T::ONE + a - T::of(2.0) * re) / b - kp));
    }
    let c = T::ONE + a - T::of(2.0) * re;
    if c.abs() >= T::ONE {
        return Err(DesignError::UnstableRemainder {
            magnitude: c.abs(),
            min_settling_time_s: slowest_needed(plant, sampling, spec),
        });
    }
    let kp = m2 * c / b;
    Ok((kp, (m2 + T::of(2.0) * re * c - a) / b - kp))
}

/// The shortest settling time (same overshoot) that keeps the third pole at
/// `|c| <= 0.9`, by bisection.
fn slowest_needed<T: Real>(plant: &RlPlant<T>, sampling: &Sampling<T>, spec: &Spec<T>) -> T {
    let ts = sampling.period_s();
    let (a, _) = zoh_plant(plant, ts);
    let third = |settling: T| -> T {
        match Spec::new(settling, spec.overshoot()) {
            Ok(s) => (T::ONE + a - T::of(2.0) * target_pole(&s, ts).0).abs(),
            Err(_) => T::of(2.0),
        }
    };
    let mut lo = spec.settling_time_s();
    let mut hi = lo;
    for _ in 0..60 {
        if third(hi) <= T::of(0.9) {
            break;
        }
        hi = hi * T::of(2.0);
    }
    for _ in 0..50 {
        let mid = (lo + hi) * T::of(0.5);
        if third(mid) <= T::of(0.9) {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    hi
}
