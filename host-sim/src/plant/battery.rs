//! A battery behind the charger's inductor: an open-circuit voltage that
//! follows the state of charge (a table), a series resistance and one R-C
//! pair for the slow polarisation (the usual first-order equivalent circuit;
//! common practice), the charge integrated from the current.
//!
//! `L di/dt = v - R0 i - v1 - OCV(soc)`, `C1 dv1/dt = i - v1 / R1`,
//! `d soc/dt = i / Q` (positive current charges). The inductor's current is
//! stepped in short substeps with `v1` and `OCV` held; after each, the R-C
//! pair and the charge take the substep's mean current exactly
//! ([`Battery::take_current`]: `v1` by its exponential, the charge by the
//! current times the time).

use crate::model_error::ModelError;

use super::load::{Load, READOUTS, Readout, rl_time_to_zero_s};
use super::motor::MotorDrive;

/// The battery's parameters, SI units.
#[derive(Clone, Debug, PartialEq)]
pub struct BatteryParams {
    /// Open-circuit voltage against the state of charge: `(soc, volts)`
    /// points with `soc` rising from 0 to 1 (linear between them).
    pub ocv_table: Vec<(f64, f64)>,
    /// Capacity, ampere-hours.
    pub capacity_ah: f64,
    /// Series resistance, ohm.
    pub series_resistance_ohm: f64,
    /// The R-C pair's resistance, ohm.
    pub polarisation_ohm: f64,
    /// The R-C pair's capacitance, farad.
    pub polarisation_f: f64,
    /// State of charge at the start, 0 to 1.
    pub initial_soc: f64,
    /// The charger's inductor in series, henry.
    pub inductance_h: f64,
}

impl BatteryParams {
    /// The open-circuit voltage at a state of charge (held at the table's
    /// ends beyond them), volts.
    pub fn ocv_v(&self, soc: f64) -> f64 {
        let t = &self.ocv_table;
        if soc <= t[0].0 {
            return t[0].1;
        }
        for w in t.windows(2) {
            let ((s0, v0), (s1, v1)) = (w[0], w[1]);
            if soc <= s1 {
                return v0 + (v1 - v0) * (soc - s0) / (s1 - s0);
            }
        }
        t[t.len() - 1].1
    }
}

/// The battery and its state.
#[derive(Clone, Debug)]
pub struct Battery {
    params: BatteryParams,
    current_a: f64,
    polarisation_v: f64,
    soc: f64,
}

impl Battery {
    /// At its initial charge, relaxed, no current.
    pub fn new(params: BatteryParams) -> Result<Self, ModelError> {
        let p = &params;
        if p.ocv_table.len() < 2 {
            return Err(ModelError::new(
                "battery.ocv_table",
                p.ocv_table.len(),
                "at least two (soc, volts) points",
            ));
        }
        for (k, w) in p.ocv_table.windows(2).enumerate() {
            if w[1].0.is_nan() || w[0].0.is_nan() || w[1].0 <= w[0].0 {
                return Err(ModelError::new(
                    format!("battery.ocv_table[{}]", k + 1),
                    w[1].0,
                    "a state of charge above the point before it",
                ));
            }
        }
        for (k, &(s, v)) in p.ocv_table.iter().enumerate() {
            ModelError::within(&format!("battery.ocv_table[{k}]"), s, 0.0, 1.0)?;
            ModelError::within(&format!("battery.ocv_table[{k}]"), v, 0.0, 1e4)?;
        }
        ModelError::within("battery.capacity_ah", p.capacity_ah, 1e-6, 1e6)?;
        ModelError::within(
            "battery.series_resistance_ohm",
            p.series_resistance_ohm,
            1e-6,
            1e3,
        )?;
        ModelError::within("battery.polarisation_ohm", p.polarisation_ohm, 0.0, 1e3)?;
        ModelError::within("battery.polarisation_f", p.polarisation_f, 1e-9, 1e9)?;
        ModelError::within("battery.initial_soc", p.initial_soc, 0.0, 1.0)?;
        ModelError::within("battery.inductance_h", p.inductance_h, 1e-9, 1e3)?;
        Ok(Self {
            soc: params.initial_soc,
            params,
            current_a: 0.0,
            polarisation_v: 0.0,
        })
    }

    /// The parameters.
    pub fn params(&self) -> &BatteryParams {
        &self.params
    }

    /// State of charge, 0 to 1.
    pub fn soc(&self) -> f64 {
        self.soc
    }

    /// The R-C pair's voltage, volts.
    pub fn polarisation_v(&self) -> f64 {
        self.polarisation_v
    }

    /// The battery's terminal voltage at its present current, volts.
    pub fn terminal_v(&self) -> f64 {
        self.params.ocv_v(self.soc) + self.params.series_resistance_ohm * self.current_a + self.polarisation_v
    }

    /// The R-C pair and the charge under a current held for `dt_s`, exactly:
    /// `v1 = i R1 + (v1 - i R1) exp(-dt / (R1 C1))`, `soc += i dt / Q`.
    pub fn take_current(&mut self, current_a: f64, dt_s: f64) {
        let p = &self.params;
        let target = current_a * p.polarisation_ohm;
        let tau = p.polarisation_ohm * p.polarisation_f;
        self.polarisation_v = if tau > 0.0 {
            target + (self.polarisation_v - target) * (-dt_s / tau).exp()
        } else {
            target
        };
        self.soc += current_a * dt_s / (3600.0 * p.capacity_ah);
    }
}

impl Load for Battery {
    fn step(&mut self, drive: &MotorDrive, dt_s: f64) -> f64 {
        if dt_s.is_nan() || dt_s <= 0.0 {
            return self.current_a;
        }
        // Substeps short against the inductor's L / R0 and the pair's R1 C1.
        let p = &self.params;
        let tau_l = p.inductance_h / p.series_resistance_ohm;
        let tau_rc = p.polarisation_ohm * p.polarisation_f;
        let h_max = (0.05 * tau_l).min(if tau_rc > 0.0 {
            0.05 * tau_rc
        } else {
            f64::INFINITY
        });
        let n = (dt_s / h_max).ceil().clamp(1.0, 1e6) as u32;
        let h = dt_s / n as f64;
        for _ in 0..n {
            let p = &self.params;
            // The inductor's current with v1 and the OCV held: exact.
            let behind = p.ocv_v(self.soc) + self.polarisation_v;
            let steady = (drive.terminal_v - behind) / p.series_resistance_ohm;
            let a = (-p.series_resistance_ohm * h / p.inductance_h).exp();
            let i0 = self.current_a;
            let i1 = steady + (i0 - steady) * a;
            // Its mean over the substep, for the pair and the charge.
            let mean = steady + (i0 - steady) * (1.0 - a) * p.inductance_h / (p.series_resistance_ohm * h);
            self.current_a = i1;
            self.take_current(mean, h);
        }
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
        let steady = (terminal_v - self.open_circuit_v()) / p.series_resistance_ohm;
        rl_time_to_zero_s(
            self.current_a,
            steady,
            p.inductance_h / p.series_resistance_ohm,
            within_s,
        )
    }

    fn open_circuit_v(&self) -> f64 {
        self.params.ocv_v(self.soc) + self.polarisation_v
    }

    fn resistance_ohm(&self) -> f64 {
        self.params.series_resistance_ohm
    }

    fn readouts(&self) -> &'static [Readout] {
        &[
            Readout {
                column: "soc_pct",
                name: "state of charge",
                unit: "%",
            },
            Readout {
                column: "cell_v",
                name: "cell terminal voltage",
                unit: "V",
            },
        ]
    }

    fn readings(&self) -> [f64; READOUTS] {
        [100.0 * self.soc, self.terminal_v()]
    }

    fn sensed_v(&self) -> Option<f64> {
        Some(self.terminal_v())
    }

    fn boxed(&self) -> Box<dyn Load> {
        Box::new(self.clone())
    }
}
