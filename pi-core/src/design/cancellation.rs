//! Pole-zero cancellation: the PI zero on the winding's pole (`Ti = L / R`), and
//! `Kp = L wc` for a crossover `wc`. The open loop is then `wc / s` and, without
//! sampling effects, the closed loop is first order with time constant `1 / wc`
//! (common practice for current loops).

use crate::design::{DesignError, Gains, Real, RlPlant};

/// Gains for a loop bandwidth of `bandwidth_hz`.
pub fn design<T: Real>(plant: &RlPlant<T>, bandwidth_hz: T) -> Result<Gains<T>, DesignError<T>> {
    if !(bandwidth_hz.is_finite() && bandwidth_hz > T::ZERO) {
        return Err(DesignError::NotPositive {
            field: "bandwidth_hz",
            value: bandwidth_hz,
        });
    }
    let wc = T::of(2.0) * T::PI * bandwidth_hz;
    Ok(Gains {
        kp_v_per_a: plant.inductance_h() * wc,
        ti_s: plant.time_constant_s(),
    })
}
