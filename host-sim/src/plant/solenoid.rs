//! A solenoid: a coil on a magnetic circuit whose air gap is the plunger's
//! position, the plunger on a spring between two end stops.
//!
//! * Magnetic circuit (one gap, iron of finite permeability, no leakage or
//!   saturation): `L(x) = N^2 mu0 A / (x + l_fe / mu_r)`, `x` the air gap.
//! * Coil: `d(L i)/dt = v - R i`, i.e. `L di/dt = v - R i - i L'(x) x'`
//!   (the motional voltage `i L' x'`).
//! * Force from the co-energy `W' = L(x) i^2 / 2` at constant current:
//!   `F = i^2 L'(x) / 2`, negative (it closes the gap, `L' < 0`).
//! * Plunger: `m x'' = F + k (x_s - x) - b x'`, the spring pushing the gap
//!   open towards its free position `x_s`; stops at `x_closed` and
//!   `x_open` take the plunger to rest (an inelastic stop).
//!
//! These are the magnetic-circuit and co-energy relations of electric
//! machinery texts (Fitzgerald, Kingsley and Umans, "Electric Machinery",
//! chapters 1 and 3; cited from memory). The state `(i, x, x')` is advanced
//! by the classical fourth-order Runge-Kutta method in substeps short
//! against the coil's time constant `L / R` and the spring-mass period.
//! Along with it the model integrates the energy delivered at the terminals,
//! lost in the copper and done by the magnetic force on the plunger, so a
//! test can hold the balance `supply = copper + stored + work`.

use crate::model_error::ModelError;

use super::load::{Load, READOUTS, Readout};
use super::motor::MotorDrive;

/// The magnetic constant, H/m (CODATA 2018).
pub const MU0_H_PER_M: f64 = 1.256_637_062_12e-6;

/// The solenoid's parameters, SI units.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SolenoidParams {
    /// Coil resistance, ohm.
    pub resistance_ohm: f64,
    /// Turns.
    pub turns: f64,
    /// Pole face area, m^2.
    pub pole_area_m2: f64,
    /// Length of the iron path, m.
    pub iron_path_m: f64,
    /// Relative permeability of the iron.
    pub iron_relative_permeability: f64,
    /// Plunger mass, kg.
    pub plunger_mass_kg: f64,
    /// Spring rate, N/m.
    pub spring_n_per_m: f64,
    /// The gap at which the spring is free, m (beyond the open stop: a preload).
    pub spring_free_gap_m: f64,
    /// Viscous damping of the plunger, N s/m.
    pub damping_n_s_per_m: f64,
    /// The gap when closed (a stop; a residual gap keeps the iron apart), m.
    pub closed_gap_m: f64,
    /// The gap when open (the other stop), m.
    pub open_gap_m: f64,
}

impl SolenoidParams {
    /// `L(x)`, henry.
    pub fn inductance_h(&self, gap_m: f64) -> f64 {
        self.turns * self.turns * MU0_H_PER_M * self.pole_area_m2 / self.reluctance_length(gap_m)
    }

    /// `dL/dx`, henry per metre (negative).
    pub fn inductance_slope_h_per_m(&self, gap_m: f64) -> f64 {
        let d = self.reluctance_length(gap_m);
        -self.turns * self.turns * MU0_H_PER_M * self.pole_area_m2 / (d * d)
    }

    /// The magnetic force on the plunger at a current, newtons (negative
    /// closes the gap).
    pub fn force_n(&self, current_a: f64, gap_m: f64) -> f64 {
        0.5 * current_a * current_a * self.inductance_slope_h_per_m(gap_m)
    }

    fn reluctance_length(&self, gap_m: f64) -> f64 {
        gap_m + self.iron_path_m / self.iron_relative_permeability
    }
}

/// The energy the model has integrated since its start, joules.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Energies {
    /// Delivered at the terminals, `integral v i dt`.
    pub supply_j: f64,
    /// Lost in the coil's resistance, `integral R i^2 dt`.
    pub copper_j: f64,
    /// Done by the magnetic force on the plunger, `integral F x' dt`.
    pub work_j: f64,
}

/// The solenoid and its state.
#[derive(Clone, Debug)]
pub struct Solenoid {
    params: SolenoidParams,
    current_a: f64,
    gap_m: f64,
    velocity_m_per_s: f64,
    energies: Energies,
}

/// The state the integrator carries: `i, x, x'` and the three energies.
type State = [f64; 6];

impl Solenoid {
    /// At rest, open, no current.
    pub fn new(params: SolenoidParams) -> Result<Self, ModelError> {
        let p = &params;
        ModelError::within("solenoid.resistance_ohm", p.resistance_ohm, 1e-3, 1e6)?;
        ModelError::within("solenoid.turns", p.turns, 1.0, 1e6)?;
        ModelError::within("solenoid.pole_area_m2", p.pole_area_m2, 1e-9, 1.0)?;
        ModelError::within("solenoid.iron_path_m", p.iron_path_m, 0.0, 10.0)?;
        ModelError::within(
            "solenoid.iron_relative_permeability",
            p.iron_relative_permeability,
            1.0,
            1e6,
        )?;
        ModelError::within("solenoid.plunger_mass_kg", p.plunger_mass_kg, 1e-6, 1e3)?;
        ModelError::within("solenoid.spring_n_per_m", p.spring_n_per_m, 0.0, 1e7)?;
        ModelError::within("solenoid.damping_n_s_per_m", p.damping_n_s_per_m, 0.0, 1e6)?;
        ModelError::within("solenoid.closed_gap_m", p.closed_gap_m, 1e-7, 1.0)?;
        ModelError::within(
            "solenoid.open_gap_m",
            p.open_gap_m,
            p.closed_gap_m * (1.0 + 1e-9),
            1.0,
        )?;
        ModelError::within(
            "solenoid.spring_free_gap_m",
            p.spring_free_gap_m,
            p.open_gap_m,
            10.0,
        )?;
        Ok(Self {
            params,
            current_a: 0.0,
            gap_m: p.open_gap_m,
            velocity_m_per_s: 0.0,
            energies: Energies::default(),
        })
    }

    /// The parameters.
    pub fn params(&self) -> &SolenoidParams {
        &self.params
    }

    /// The air gap, m.
    pub fn gap_m(&self) -> f64 {
        self.gap_m
    }

    /// The plunger's velocity (positive opens), m/s.
    pub fn velocity_m_per_s(&self) -> f64 {
        self.velocity_m_per_s
    }

    /// The energies integrated since the start.
    pub fn energies(&self) -> Energies {
        self.energies
    }

    /// The magnetic field's stored energy now, `L i^2 / 2`, joules.
    pub fn stored_j(&self) -> f64 {
        0.5 * self.params.inductance_h(self.gap_m) * self.current_a * self.current_a
    }

    /// `d/dt` of the state at terminal voltage `v`, the plunger free.
    fn derivative(&self, s: &State, v: f64) -> State {
        let p = &self.params;
        let (i, x, u) = (s[0], s[1], s[2]);
        let l = p.inductance_h(x);
        let dl = p.inductance_slope_h_per_m(x);
        let force = 0.5 * i * i * dl;
        let accel = (force + p.spring_n_per_m * (p.spring_free_gap_m - x) - p.damping_n_s_per_m * u)
            / p.plunger_mass_kg;
        [
            (v - p.resistance_ohm * i - i * dl * u) / l,
            u,
            accel,
            v * i,
            p.resistance_ohm * i * i,
            force * u,
        ]
    }

    /// Whether the plunger rests on a stop with the net force pushing it in.
    fn held_at_stop(&self, s: &State) -> bool {
        let p = &self.params;
        let net = p.force_n(s[0], s[1]) + p.spring_n_per_m * (p.spring_free_gap_m - s[1]);
        s[2] == 0.0 && ((s[1] <= p.closed_gap_m && net <= 0.0) || (s[1] >= p.open_gap_m && net >= 0.0))
    }

    fn state(&self) -> State {
        [
            self.current_a,
            self.gap_m,
            self.velocity_m_per_s,
            self.energies.supply_j,
            self.energies.copper_j,
            self.energies.work_j,
        ]
    }

    fn set(&mut self, s: &State) {
        self.current_a = s[0];
        self.gap_m = s[1];
        self.velocity_m_per_s = s[2];
        self.energies = Energies {
            supply_j: s[3],
            copper_j: s[4],
            work_j: s[5],
        };
    }

    /// One fourth-order Runge-Kutta substep from `s0`; a plunger held at a
    /// stop stays there (no velocity, no acceleration).
    fn rk4(&self, s0: &State, v: f64, h: f64) -> State {
        let held = self.held_at_stop(s0);
        let d = |s: &State| {
            let mut k = self.derivative(s, v);
            if held {
                k[1] = 0.0;
                k[2] = 0.0;
                k[5] = 0.0;
            }
            k
        };
        let add = |s: &State, k: &State, f: f64| -> State {
            let mut out = *s;
            for (o, kk) in out.iter_mut().zip(k) {
                *o += f * kk;
            }
            out
        };
        let k1 = d(s0);
        let k2 = d(&add(s0, &k1, 0.5 * h));
        let k3 = d(&add(s0, &k2, 0.5 * h));
        let k4 = d(&add(s0, &k3, h));
        let mut s1 = *s0;
        for j in 0..6 {
            s1[j] += h / 6.0 * (k1[j] + 2.0 * k2[j] + 2.0 * k3[j] + k4[j]);
        }
        s1
    }

    /// Advances `h` seconds: a substep that would carry the plunger past a
    /// stop is cut where it reaches it (bisection on the substep's length),
    /// the plunger comes to rest there (an inelastic stop), and the rest of
    /// `h` follows. Returns the time advanced.
    fn substep(&mut self, v: f64, h: f64) -> f64 {
        let p = self.params;
        let s0 = self.state();
        let s1 = self.rk4(&s0, v, h);
        let beyond = |s: &State| s[1] < p.closed_gap_m || s[1] > p.open_gap_m;
        if !beyond(&s1) {
            self.set(&s1);
            return h;
        }
        let stop = if s1[1] < p.closed_gap_m {
            p.closed_gap_m
        } else {
            p.open_gap_m
        };
        let (mut lo, mut hi) = (0.0, h);
        for _ in 0..60 {
            let mid = 0.5 * (lo + hi);
            if beyond(&self.rk4(&s0, v, mid)) {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        let mut s = self.rk4(&s0, v, lo);
        s[1] = stop;
        s[2] = 0.0;
        self.set(&s);
        lo.max(f64::MIN_POSITIVE)
    }

    /// The substep: short against the coil's `L / R` at the present gap and
    /// the spring-mass period, at most a quarter of the interval.
    fn substep_s(&self, dt_s: f64) -> f64 {
        let p = &self.params;
        let tau_e = p.inductance_h(self.gap_m) / p.resistance_ohm;
        let omega = (p.spring_n_per_m / p.plunger_mass_kg).sqrt();
        let mech = if omega > 0.0 { 1.0 / omega } else { f64::INFINITY };
        (0.02 * tau_e).min(0.02 * mech).min(0.25 * dt_s)
    }
}

impl Load for Solenoid {
    fn step(&mut self, drive: &MotorDrive, dt_s: f64) -> f64 {
        if dt_s.is_nan() || dt_s <= 0.0 {
            return self.current_a;
        }
        let mut left = dt_s;
        let mut guard = 0;
        while left > 0.0 && guard < 1_000_000 {
            let h = self.substep_s(dt_s).min(left);
            left -= self.substep(drive.terminal_v, h);
            guard += 1;
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
        self.params.resistance_ohm
    }

    fn readouts(&self) -> &'static [Readout] {
        &[
            Readout {
                column: "travel_mm",
                name: "plunger travel from open",
                unit: "mm",
            },
            Readout {
                column: "inductance_mh",
                name: "coil inductance",
                unit: "mH",
            },
        ]
    }

    fn readings(&self) -> [f64; READOUTS] {
        let p = &self.params;
        [
            1e3 * (p.open_gap_m - self.gap_m),
            1e3 * p.inductance_h(self.gap_m),
        ]
    }

    fn boxed(&self) -> Box<dyn Load> {
        Box::new(self.clone())
    }
}
