//! Modulus optimum (the "Betragsoptimum" of drive engineering: Kessler, 1955;
//! as taught in e.g. Schröder, *Elektrische Antriebe: Regelung von
//! Antriebssystemen*; both cited from memory). The small lags of the loop are
//! lumped into one time constant
//!
//! ```text
//! T_sigma = D Ts (the sample-to-update delay) + Ts / 2 (PWM hold) + T_filter
//! ```
//!
//! the PI zero cancels the winding's pole (`Ti = L / R`), and `Kp = L / (2 T_sigma)`.
//! The open loop becomes `1 / (2 T_sigma s (1 + s T_sigma))` and the closed loop
//! second order with `zeta = 1 / sqrt(2)`: about 4.3 % overshoot.

use crate::design::{DesignError, Gains, Real, RlPlant, Sampling};

/// The lumped small time constant of a sampling description, s.
pub fn t_sigma<T: Real>(sampling: &Sampling<T>) -> T {
    let ts = sampling.period_s();
    sampling.delay_s() + ts * T::of(0.5) + sampling.filter_tau_s()
}

/// Gains by the modulus optimum.
pub fn design<T: Real>(plant: &RlPlant<T>, sampling: &Sampling<T>) -> Result<Gains<T>, DesignError<T>> {
    Ok(Gains {
        kp_v_per_a: plant.inductance_h() / (T::of(2.0) * t_sigma(sampling)),
        ti_s: plant.time_constant_s(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_lumped_loop_has_zeta_one_over_root_two_and_4_3_percent_overshoot() {
        let plant = RlPlant::new(1.9, 2.4e-3).unwrap();
        let sampling = Sampling::new(50e-6, 1.0, 0.0).unwrap();
        let g = design(&plant, &sampling).unwrap();
        let t = t_sigma(&sampling);
        // With Ti = L/R the open loop is Kp / (L s (1 + s T)); closed loop:
        // L T s^2 + L s + Kp = 0  ->  wn^2 = Kp / (L T), 2 zeta wn = 1 / T.
        let wn = (g.kp_v_per_a / (2.4e-3 * t)).sqrt();
        let zeta = 1.0 / (2.0 * t * wn);
        assert!((zeta - core::f64::consts::FRAC_1_SQRT_2).abs() < 1e-12);
        // Mp = exp(-zeta pi / sqrt(1 - zeta^2)) = exp(-pi) = 4.32 % (Ogata).
        let mp = (-zeta * core::f64::consts::PI / (1.0 - zeta * zeta).sqrt()).exp();
        assert!((mp - 0.0432).abs() < 1e-4, "{mp}");
    }
}
