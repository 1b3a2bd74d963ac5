//! A resistive-inductive load: `L di/dt = v - R i - e`.
//!
//! `v` is the voltage applied across the terminals, `e` a series source (the
//! back-EMF of a motor, `Ke * speed`, or any opposing voltage), `i` the current;
//! all positive in the forward direction. Over an interval `dt` with `v` and `e`
//! held, the equation has the exact solution
//!
//! ```text
//! i(t + dt) = i_ss + (i(t) - i_ss) exp(-dt R / L),   i_ss = (v - e) / R
//! ```
//!
//! which [`RlLoad::step`] applies (in f64, with `expm1` to keep precision when
//! `dt` is much shorter than `L / R`). A sequence of steps therefore reproduces the
//! analytic step response `i(t) = V/R (1 - exp(-t R/L))` to rounding error.

use std::fmt;

/// Why a load could not be built.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LoadError {
    /// The parameter that was wrong.
    pub field: &'static str,
    /// The value given.
    pub value: f64,
}

impl fmt::Display for LoadError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{} = {} must be a finite number greater than zero; give a positive value",
            self.field, self.value
        )
    }
}

impl std::error::Error for LoadError {}

/// The load and its present current.
#[derive(Clone, Debug, PartialEq)]
pub struct RlLoad {
    resistance_ohm: f64,
    inductance_h: f64,
    current_a: f64,
}

impl RlLoad {
    /// A load at rest with winding resistance `R` (ohm) and inductance `L` (H), both > 0.
    pub fn new(resistance_ohm: f64, inductance_h: f64) -> Result<Self, LoadError> {
        for (field, value) in [("resistance_ohm", resistance_ohm), ("inductance_h", inductance_h)] {
            if !(value.is_finite() && value > 0.0) {
                return Err(LoadError { field, value });
            }
        }
        Ok(Self {
            resistance_ohm,
            inductance_h,
            current_a: 0.0,
        })
    }

    /// Advances `dt_s` seconds with terminal voltage `v` and series source `e` held,
    /// and returns the new current in amperes.
    pub fn step(&mut self, terminal_v: f64, source_v: f64, dt_s: f64) -> f64 {
        let r = self.resistance_ohm;
        let steady = (terminal_v - source_v) / r;
        // 1 - exp(-x) = -expm1(-x), exact for small x.
        let fraction = -(-dt_s * r / self.inductance_h).exp_m1();
        self.current_a += (steady - self.current_a) * fraction;
        self.current_a
    }

    /// Present current, amperes.
    pub fn current_a(&self) -> f64 {
        self.current_a
    }

    /// Sets the current (for starting from a known operating point).
    pub fn set_current_a(&mut self, current_a: f64) {
        self.current_a = current_a;
    }

    /// Resistance, ohm.
    pub fn resistance_ohm(&self) -> f64 {
        self.resistance_ohm
    }

    /// Inductance, henry.
    pub fn inductance_h(&self) -> f64 {
        self.inductance_h
    }

    /// Electrical time constant `L / R`, seconds.
    pub fn time_constant_s(&self) -> f64 {
        self.inductance_h / self.resistance_ohm
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn step_response_matches_the_analytic_solution() {
        // i(t) = V/R (1 - exp(-t R / L)): first-order RL circuit, any circuits
        // textbook (e.g. Hayt, Kemmerly & Durbin, Engineering Circuit Analysis, the
        // chapter on basic RL circuits; chapter cited from memory).
        let (r, l, v) = (1.9, 2.4e-3, 12.0);
        let mut load = RlLoad::new(r, l).unwrap();
        let dt = 50e-6;
        for k in 1..=2000 {
            let i = load.step(v, 0.0, dt);
            let t = k as f64 * dt;
            let exact = v / r * (1.0 - (-t * r / l).exp());
            assert!((i - exact).abs() <= 1e-9 * exact.abs(), "k={k}: {i} vs {exact}");
        }
    }

    #[test]
    fn refuses_bad_parameters() {
        assert_eq!(RlLoad::new(0.0, 1e-3).unwrap_err().field, "resistance_ohm");
        assert_eq!(RlLoad::new(1.0, f64::NAN).unwrap_err().field, "inductance_h");
    }
}
