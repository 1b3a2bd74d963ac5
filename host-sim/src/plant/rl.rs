//! A plain winding with a constant counter-voltage: `L di/dt = v - R i - E`.
//!
//! The load of a valve or a relay coil held still (`E = 0`), or the simplest
//! model of anything that pushes back with a steady voltage: a battery near
//! one state of charge, an LED string near one current, a motor held at one
//! speed. `E` opposes forward current. Stepped with the exact solution of the
//! held interval, `i1 = a i0 + (1 - a) (v - E) / R`, `a = exp(-R dt / L)`,
//! so a step matches the analytic response to rounding.

use crate::model_error::ModelError;

use super::load::{Load, rl_time_to_zero_s};
use super::motor::MotorDrive;

/// The winding's parameters, SI units.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RlParams {
    /// Resistance, ohm (> 0).
    pub resistance_ohm: f64,
    /// Inductance, henry (> 0).
    pub inductance_h: f64,
    /// Counter-voltage opposing forward current, volts.
    pub counter_v: f64,
}

/// The winding and its current.
#[derive(Clone, Debug)]
pub struct RlLoad {
    params: RlParams,
    current_a: f64,
}

impl RlLoad {
    /// The winding with no current.
    pub fn new(params: RlParams) -> Result<Self, ModelError> {
        // The ranges of the motor's winding (a milliohm to a megohm, a
        // nanohenry to a kilohenry) and a counter-voltage within +/-10 kV.
        ModelError::within("winding.resistance_ohm", params.resistance_ohm, 1e-3, 1e6)?;
        ModelError::within("winding.inductance_h", params.inductance_h, 1e-9, 1e3)?;
        ModelError::within("winding.counter_v", params.counter_v, -1e4, 1e4)?;
        Ok(Self {
            params,
            current_a: 0.0,
        })
    }

    /// The parameters.
    pub fn params(&self) -> &RlParams {
        &self.params
    }
}

impl Load for RlLoad {
    fn step(&mut self, drive: &MotorDrive, dt_s: f64) -> f64 {
        if dt_s.is_nan() || dt_s <= 0.0 {
            return self.current_a;
        }
        let p = &self.params;
        let a = (-p.resistance_ohm * dt_s / p.inductance_h).exp();
        let steady = (drive.terminal_v - p.counter_v) / p.resistance_ohm;
        self.current_a = steady + (self.current_a - steady) * a;
        self.current_a
    }

    fn current_a(&self) -> f64 {
        self.current_a
    }

    fn stop_current(&mut self) {
        self.current_a = 0.0;
    }

    fn time_to_zero_s(&self, terminal_v: f64, within_s: f64) -> Option<f64> {
        let p = &self.params;
        let steady = (terminal_v - p.counter_v) / p.resistance_ohm;
        rl_time_to_zero_s(
            self.current_a,
            steady,
            p.inductance_h / p.resistance_ohm,
            within_s,
        )
    }

    fn open_circuit_v(&self) -> f64 {
        self.params.counter_v
    }

    fn resistance_ohm(&self) -> f64 {
        self.params.resistance_ohm
    }

    fn boxed(&self) -> Box<dyn Load> {
        Box::new(self.clone())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn drive(v: f64) -> MotorDrive {
        MotorDrive {
            terminal_v: v,
            load_torque_n_m: 0.0,
            held: false,
        }
    }

    #[test]
    fn a_step_against_the_counter_voltage_is_the_analytic_one() {
        // i(t) = (V - E) / R (1 - exp(-t R / L)): the first-order RL circuit
        // with a constant source (any circuits text; from memory).
        let p = RlParams {
            resistance_ohm: 2.0,
            inductance_h: 0.01,
            counter_v: 9.0,
        };
        let mut w = RlLoad::new(p).unwrap();
        for k in 1..=400 {
            w.step(&drive(24.0), 25e-6);
            let t = k as f64 * 25e-6;
            let exact = (24.0 - 9.0) / 2.0 * (1.0 - (-t * 2.0 / 0.01).exp());
            assert!(
                (w.current_a() - exact).abs() < 1e-12,
                "{t}: {} against {exact}",
                w.current_a()
            );
        }
        // Below the counter-voltage the current falls and reaches zero when
        // the same solution says.
        let i0 = w.current_a();
        let t0 = w.time_to_zero_s(0.0, 1.0).unwrap();
        let steady = -9.0 / 2.0;
        let expected = -0.01 / 2.0 * (steady / (steady - i0)).ln();
        assert!((t0 - expected).abs() < 1e-15);
        w.step(&drive(0.0), t0);
        assert!(w.current_a().abs() < 1e-9, "{}", w.current_a());
        assert_eq!(w.open_circuit_v(), 9.0);
    }

    #[test]
    fn values_outside_the_ranges_are_refused_by_name() {
        let ok = RlParams {
            resistance_ohm: 1.0,
            inductance_h: 1e-3,
            counter_v: 0.0,
        };
        for (p, field) in [
            (
                RlParams {
                    resistance_ohm: 0.0,
                    ..ok
                },
                "winding.resistance_ohm",
            ),
            (
                RlParams {
                    inductance_h: f64::NAN,
                    ..ok
                },
                "winding.inductance_h",
            ),
            (RlParams { counter_v: 1e5, ..ok }, "winding.counter_v"),
        ] {
            assert_eq!(RlLoad::new(p).unwrap_err().field, field);
        }
    }
}
