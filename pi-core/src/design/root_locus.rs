//! Continuous pole placement on the root locus of `C(s) G(s)` with
//! `C = Kp (1 + 1 / (Ti s))` and `G = 1 / (L s + R)`.
//!
//! The closed loop's characteristic polynomial is
//! `L s^2 + (R + Kp) s + Kp / Ti`. Putting its roots at `-sigma +/- j wd`
//! (the angle and magnitude conditions of the locus, which for this second-order
//! loop reduce to matching coefficients) gives
//!
//! ```text
//! Kp = 2 sigma L - R,    Ti = Kp / (L wn^2)
//! ```
//!
//! which is positive only when `sigma > R / (2 L)`, i.e. a 2 % settling time
//! below `8 L / R`. The closed loop also has the PI zero at `-1 / Ti`, which adds
//! overshoot beyond the spec unless a setpoint weight removes it (`b = 0` leaves
//! the pure second-order response).

use crate::design::{DesignError, Gains, Real, RlPlant, Spec};

/// Gains placing the closed-loop poles for the spec.
pub fn design<T: Real>(plant: &RlPlant<T>, spec: &Spec<T>) -> Result<Gains<T>, DesignError<T>> {
    let (r, l) = (plant.resistance_ohm(), plant.inductance_h());
    let sigma = spec.sigma();
    let wn = spec.natural_frequency();
    let kp = T::of(2.0) * sigma * l - r;
    if !kp.is_finite() || kp <= T::ZERO {
        return Err(DesignError::SettlingTooSlow {
            settling_time_s: spec.settling_time_s(),
            // sigma > R / 2L  <=>  ts < 8 L / R; a little inside for a usable gain.
            max_settling_time_s: T::of(0.95 * 8.0) * l / r,
        });
    }
    Ok(Gains {
        kp_v_per_a: kp,
        ti_s: kp / (l * wn * wn),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::design::poly::Poly;

    #[test]
    fn closed_loop_poles_land_where_asked() {
        let plant = RlPlant::new(1.9, 2.4e-3).unwrap();
        let spec = Spec::new(2e-3, 0.05).unwrap();
        let g = design(&plant, &spec).unwrap();
        let p = Poly::new(&[2.4e-3, 1.9 + g.kp_v_per_a, g.kp_v_per_a / g.ti_s]).unwrap();
        for s in &p.roots()[..2] {
            assert!((s.re + spec.sigma()).abs() < 1e-6 * spec.sigma(), "{s:?}");
            assert!((s.im.abs() - spec.damped_frequency()).abs() < 1e-6 * spec.damped_frequency());
        }
    }

    #[test]
    fn too_slow_a_spec_is_refused_in_words() {
        let plant = RlPlant::new(1.9, 2.4e-3).unwrap(); // 8 L / R = 10.1 ms
        let e = design(&plant, &Spec::new(12e-3, 0.05).unwrap()).unwrap_err();
        match e {
            DesignError::SettlingTooSlow {
                max_settling_time_s, ..
            } => {
                assert!((max_settling_time_s - 0.95 * 8.0 * 2.4e-3 / 1.9).abs() < 1e-12)
            }
            other => panic!("{other:?}"),
        }
        let mut text = heapless::String::<256>::new();
        core::fmt::write(&mut text, format_args!("{e}")).unwrap();
        assert!(text.contains("negative Kp") && text.contains("or less"), "{text}");
    }
}
