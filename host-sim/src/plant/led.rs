//! A string of light-emitting diodes with its series inductor:
//! `L di/dt = v - n (N V_T ln(1 + i / I_s) + R_s i)`.
//!
//! Each of the `n` diodes follows the Shockley equation with an ideality
//! factor `N` and a series resistance `R_s`; `V_T = k T / q` is the thermal
//! voltage at the junction temperature (SI values of `k` and `q`, which the
//! SI defines exactly). The string conducts forward only: a current driven
//! to zero stays there (the diodes block; their reverse leakage, about
//! `-I_s`, is left out).
//!
//! The forward voltage rises steeply with the current, so the step is not
//! linear: each interval is cut into substeps, each solved by the
//! trapezoidal rule (implicit, so the steep knee cannot make it unstable),
//! short against the time constant `L / g` (`g = dv/di` where the current
//! heads) and against the rate at which the current moves. Against scipy's
//! Radau solver at tolerances of 1e-12 the current stays within 0.1 % of
//! the target (tests/led_string.rs, with tests/reference/led_reference.py).

use crate::model_error::ModelError;

use super::load::{Load, READOUTS, Readout};
use super::motor::MotorDrive;

/// Boltzmann's constant, J/K (exact in the SI since 2019).
pub const BOLTZMANN_J_PER_K: f64 = 1.380649e-23;
/// The elementary charge, C (exact in the SI since 2019).
pub const ELEMENTARY_CHARGE_C: f64 = 1.602176634e-19;

/// The string's parameters, SI units.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LedParams {
    /// Diodes in series (1 to 1000).
    pub count: u32,
    /// Saturation current of one diode, amperes (> 0).
    pub saturation_current_a: f64,
    /// Ideality factor of one diode (1 to 10).
    pub ideality: f64,
    /// Series resistance of one diode, ohm (>= 0).
    pub series_resistance_ohm: f64,
    /// Junction temperature, C.
    pub junction_c: f64,
    /// The inductor in series with the string, henry (> 0).
    pub inductance_h: f64,
}

impl LedParams {
    /// The thermal voltage `k T / q` at the junction temperature, volts.
    pub fn thermal_voltage_v(&self) -> f64 {
        BOLTZMANN_J_PER_K * (self.junction_c + 273.15) / ELEMENTARY_CHARGE_C
    }

    /// The string's forward voltage at a forward current `i >= 0`, volts.
    pub fn voltage_at(&self, i: f64) -> f64 {
        let nvt = self.ideality * self.thermal_voltage_v();
        self.count as f64 * (nvt * (i / self.saturation_current_a).ln_1p() + self.series_resistance_ohm * i)
    }

    /// Its slope `dv/di` at `i >= 0`, ohm.
    pub fn slope_at(&self, i: f64) -> f64 {
        let nvt = self.ideality * self.thermal_voltage_v();
        self.count as f64 * (nvt / (self.saturation_current_a + i) + self.series_resistance_ohm)
    }

    /// The forward current at a string voltage `v`, amperes (0 at or below
    /// zero volts): Newton's method on `voltage_at(i) = v`, from above (the
    /// function is convex in `i`'s logarithm, so it converges monotonically).
    pub fn current_at(&self, v: f64) -> f64 {
        if v <= 0.0 {
            return 0.0;
        }
        // Start above the answer: the current with the resistance alone, or
        // the exponential alone, whichever is smaller.
        let nvt = self.ideality * self.thermal_voltage_v();
        let per_diode = v / self.count as f64;
        let by_r = if self.series_resistance_ohm > 0.0 {
            per_diode / self.series_resistance_ohm
        } else {
            f64::INFINITY
        };
        let by_exp = self.saturation_current_a * (per_diode / nvt).exp_m1();
        let mut i = by_r.min(by_exp);
        for _ in 0..200 {
            let step = (self.voltage_at(i) - v) / self.slope_at(i);
            let next = (i - step).max(0.0);
            if (next - i).abs() <= 1e-15 * i.max(1e-300) {
                return next;
            }
            i = next;
        }
        i
    }
}

/// The string and its current.
#[derive(Clone, Debug)]
pub struct LedString {
    params: LedParams,
    current_a: f64,
}

impl LedString {
    /// The string with no current.
    pub fn new(params: LedParams) -> Result<Self, ModelError> {
        ModelError::within("led.count", params.count as f64, 1.0, 1000.0)?;
        ModelError::within(
            "led.saturation_current_a",
            params.saturation_current_a,
            1e-40,
            1e-3,
        )?;
        ModelError::within("led.ideality", params.ideality, 1.0, 10.0)?;
        ModelError::within(
            "led.series_resistance_ohm",
            params.series_resistance_ohm,
            0.0,
            1e3,
        )?;
        ModelError::within("led.junction_c", params.junction_c, -55.0, 200.0)?;
        ModelError::within("led.inductance_h", params.inductance_h, 1e-9, 1e3)?;
        Ok(Self {
            params,
            current_a: 0.0,
        })
    }

    /// The parameters.
    pub fn params(&self) -> &LedParams {
        &self.params
    }

    /// One substep of `h` seconds by the trapezoidal rule,
    /// `L (i1 - i0) = h/2 (2 v - f(i0) - f(i1))`, solved for `i1` by Newton's
    /// method kept inside a bracket (the left side minus the right rises
    /// with `i1`, so the root is unique); a current that would go below zero
    /// stops there.
    fn substep(&mut self, v: f64, h: f64, reach_a: f64) {
        let p = &self.params;
        let i0 = self.current_a;
        let f0 = p.voltage_at(i0);
        let l = p.inductance_h;
        let residual = |i1: f64| l * (i1 - i0) - 0.5 * h * (2.0 * v - f0 - p.voltage_at(i1));
        if residual(0.0) >= 0.0 {
            self.current_a = 0.0;
            return;
        }
        let (mut lo, mut hi) = (0.0, 2.0 * reach_a.max(i0) + 1e-9);
        let mut guard = 0;
        while residual(hi) < 0.0 && guard < 200 {
            hi *= 2.0;
            guard += 1;
        }
        let mut i1 = hi;
        for _ in 0..100 {
            let r = residual(i1);
            if r > 0.0 {
                hi = i1;
            } else {
                lo = i1;
            }
            let mut next = i1 - r / (l + 0.5 * h * p.slope_at(i1));
            if !(next > lo && next < hi) {
                next = 0.5 * (lo + hi);
            }
            if (next - i1).abs() <= 1e-15 * next.max(1e-12) {
                i1 = next;
                break;
            }
            i1 = next;
        }
        self.current_a = i1;
    }
}

/// Substeps per interval: each at most a quarter of the interval, a
/// twentieth of the time constant `L / g` at the current the string heads
/// for, and the time the present rate `(v - f(i)) / L` takes to move the
/// current by 2 % of that; at least 1/4096 of the interval.
const SUBSTEP_OF_TAU: f64 = 0.05;
const SUBSTEP_OF_CURRENT: f64 = 0.005;
const MIN_SUBSTEP_SHARE: f64 = 1.0 / 4096.0;

impl Load for LedString {
    fn step(&mut self, drive: &MotorDrive, dt_s: f64) -> f64 {
        if dt_s.is_nan() || dt_s <= 0.0 {
            return self.current_a;
        }
        let p = self.params;
        let v = drive.terminal_v;
        // Where the current heads: what the string takes at this voltage.
        let reach = p.current_at(v).max(self.current_a);
        let tau = p.inductance_h / p.slope_at(reach);
        let mut left = dt_s;
        while left > 0.0 {
            let rate = (v - p.voltage_at(self.current_a)).abs() / p.inductance_h;
            let by_rate = if rate > 0.0 {
                SUBSTEP_OF_CURRENT * reach.max(1e-3) / rate
            } else {
                dt_s
            };
            let h = (0.25 * dt_s)
                .min(SUBSTEP_OF_TAU * tau)
                .min(by_rate)
                .max(MIN_SUBSTEP_SHARE * dt_s)
                .min(left);
            self.substep(v, h, reach);
            left -= h;
        }
        self.current_a
    }

    fn current_a(&self) -> f64 {
        self.current_a
    }

    fn stop_current(&mut self) {
        self.current_a = 0.0;
    }

    fn resistance_ohm(&self) -> f64 {
        self.params.slope_at(self.current_a)
    }

    fn readouts(&self) -> &'static [Readout] {
        &[Readout {
            column: "string_v",
            name: "string voltage",
            unit: "V",
        }]
    }

    fn readings(&self) -> [f64; READOUTS] {
        [self.params.voltage_at(self.current_a), f64::NAN]
    }

    fn boxed(&self) -> Box<dyn Load> {
        Box::new(self.clone())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// An invented white string: six diodes near 2.96 V each at 350 mA.
    fn white() -> LedParams {
        LedParams {
            count: 6,
            saturation_current_a: 1e-24,
            ideality: 2.0,
            series_resistance_ohm: 0.5,
            junction_c: 25.0,
            inductance_h: 100e-6,
        }
    }

    fn drive(v: f64) -> MotorDrive {
        MotorDrive {
            terminal_v: v,
            load_torque_n_m: 0.0,
            held: false,
        }
    }

    #[test]
    fn the_current_settles_where_the_string_takes_the_voltage() {
        let p = white();
        let mut s = LedString::new(p).unwrap();
        let v = p.voltage_at(0.35);
        for _ in 0..20_000 {
            s.step(&drive(v), 50e-6);
        }
        assert!((s.current_a() - 0.35).abs() < 1e-9, "{}", s.current_a());
        // Below the string's knee nothing flows backward: driven at 0 V it
        // falls to zero and stays.
        for _ in 0..2000 {
            s.step(&drive(0.0), 50e-6);
        }
        assert_eq!(s.current_a(), 0.0);
    }

    #[test]
    fn halving_the_interval_changes_the_current_by_less_than_a_tenth_of_a_percent() {
        // A 50 us PWM period's worth of steps from 0 to a level above the
        // knee, stepped as one interval and as two halves.
        let p = white();
        let v = p.voltage_at(0.7);
        let (mut one, mut two) = (LedString::new(p).unwrap(), LedString::new(p).unwrap());
        let mut worst = 0.0f64;
        for _ in 0..400 {
            one.step(&drive(v), 50e-6);
            two.step(&drive(v), 25e-6);
            two.step(&drive(v), 25e-6);
            worst = worst.max((one.current_a() - two.current_a()).abs());
        }
        std::eprintln!("largest difference {worst:e} A");
        // Second order: the difference of two step sizes bounds the error.
        assert!(worst < 1e-3 * 0.7, "{worst}");
    }

    #[test]
    fn current_at_inverts_voltage_at() {
        let p = white();
        for i in [1e-6, 1e-3, 0.1, 0.35, 1.5] {
            let back = p.current_at(p.voltage_at(i));
            assert!((back - i).abs() <= 1e-12 * i.max(1e-3), "{i}: {back}");
        }
        assert_eq!(p.current_at(-1.0), 0.0);
    }

    #[test]
    fn values_outside_the_ranges_are_refused_by_name() {
        let ok = white();
        for (p, field) in [
            (LedParams { count: 0, ..ok }, "led.count"),
            (LedParams { ideality: 0.5, ..ok }, "led.ideality"),
            (
                LedParams {
                    inductance_h: 0.0,
                    ..ok
                },
                "led.inductance_h",
            ),
        ] {
            assert_eq!(LedString::new(p).unwrap_err().field, field);
        }
    }
}
