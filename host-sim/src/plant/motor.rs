//! A brushed DC motor (or any resistive-inductive load with a back-EMF source).
//!
//! ```text
//! L di/dt = v - R(T) i - Ke w                      (electrical)
//! J dw/dt = Kt i - B w - Tc sign(w) - T_load(t)    (mechanical)
//! R(T)    = R20 (1 + alpha (T - 20 C))             (copper winding)
//! ```
//!
//! Signs: `v`, `i`, `w` and the torques are positive in the forward direction; a
//! positive load torque opposes forward rotation. `v` is the voltage across the
//! motor terminals, which the bridge decides.
//!
//! # Integration
//!
//! Between two events (a PWM edge, a sampling instant) the terminal voltage and the
//! load torque are constant, so the linear part `x = [i, w]` is advanced with its
//! exact discretisation ([`crate::plant::linear`]); the step therefore carries no
//! integration error of its own, and an RL step matches `V/R (1 - exp(-t R/L))`
//! to rounding. Two parts are not linear and are handled at event boundaries:
//!
//! * Coulomb friction `Tc` is a constant torque against the motion for each
//!   interval. If the speed changes sign within an interval the rotor is stopped
//!   at zero (it sticks), and it breaks away again only when `|Kt i - T_load|`
//!   exceeds `Tc`. This is the usual stick-slip simplification (common practice).
//! * The winding temperature is updated every [`THERMAL_STEP_S`] from the mean
//!   `i^2` over that time, and `R` with it; thermal time constants are seconds to
//!   minutes, so a millisecond staircase is far below anything the loop can see.
//!
//! A locked rotor (a held shaft, or the locked-rotor fault) keeps `w = 0` and
//! leaves the pure RL circuit.

use crate::model_error::ModelError;
use crate::plant::linear::{Discrete, Recent};
pub use crate::plant::saturation::{SATURATION_POINTS, Saturation};

/// Temperature coefficient of resistance of annealed copper at 20 C, 1/K:
/// 0.00393 (the International Annealed Copper Standard, IEC 60028; value cited
/// from memory; the same figure is in the CRC Handbook's table of resistivity).
pub const COPPER_ALPHA_PER_K: f64 = 0.00393;

/// The reference temperature of the winding resistance, C.
pub const REFERENCE_C: f64 = 20.0;

/// How often the winding temperature (and resistance) is updated, seconds.
pub const THERMAL_STEP_S: f64 = 1e-3;

/// The winding's thermal model: one thermal mass coupled to ambient.
///
/// `C dT/dt = i^2 R(T) - (T - T_amb) / R_th`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct WindingThermal {
    /// Ambient temperature, C.
    pub ambient_c: f64,
    /// Thermal resistance winding to ambient, K/W (> 0).
    pub resistance_k_per_w: f64,
    /// Thermal capacitance of the winding, J/K (> 0).
    pub capacitance_j_per_k: f64,
    /// Winding temperature at the start, C.
    pub initial_c: f64,
}

/// Motor parameters, SI units.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct MotorParams {
    /// Winding resistance at 20 C, ohm (> 0).
    pub resistance_ohm: f64,
    /// Winding inductance, H (> 0).
    pub inductance_h: f64,
    /// Back-EMF constant, V s/rad (>= 0; 0 for a plain RL load).
    pub back_emf_v_s_per_rad: f64,
    /// Torque constant, N m/A (>= 0). For an ideal machine in SI units this equals
    /// the back-EMF constant (energy balance, any machines text).
    pub torque_n_m_per_a: f64,
    /// Rotor inertia including the reflected load, kg m^2 (> 0).
    pub inertia_kg_m2: f64,
    /// Viscous friction, N m s/rad (>= 0).
    pub viscous_n_m_s_per_rad: f64,
    /// Coulomb friction, N m (>= 0).
    pub coulomb_n_m: f64,
    /// Rotor held at zero speed for the whole run (a locked-rotor bench test).
    pub locked_rotor: bool,
    /// Copper heating; `None` keeps the resistance at its 20 C value.
    pub thermal: Option<WindingThermal>,
    /// The iron's saturation: the inductance falls with the current.
    /// `None`: `inductance_h` at every current.
    pub saturation: Option<Saturation>,
}

impl MotorParams {
    /// A plain RL load (locked rotor, no thermal model).
    pub fn rl(resistance_ohm: f64, inductance_h: f64) -> Self {
        Self {
            resistance_ohm,
            inductance_h,
            back_emf_v_s_per_rad: 0.0,
            torque_n_m_per_a: 0.0,
            inertia_kg_m2: 1.0,
            viscous_n_m_s_per_rad: 0.0,
            coulomb_n_m: 0.0,
            locked_rotor: true,
            thermal: None,
            saturation: None,
        }
    }

    fn validate(&self) -> Result<(), ModelError> {
        // Ranges wide enough for any winding on a bench, narrow enough that the
        // exact discretisation stays within f64.
        ModelError::within("motor.resistance_ohm", self.resistance_ohm, 1e-6, 1e6)?;
        ModelError::within("motor.inductance_h", self.inductance_h, 1e-9, 1e3)?;
        ModelError::within("motor.back_emf_v_s_per_rad", self.back_emf_v_s_per_rad, 0.0, 1e3)?;
        ModelError::within("motor.torque_n_m_per_a", self.torque_n_m_per_a, 0.0, 1e3)?;
        ModelError::within("motor.inertia_kg_m2", self.inertia_kg_m2, 1e-12, 1e3)?;
        ModelError::within(
            "motor.viscous_n_m_s_per_rad",
            self.viscous_n_m_s_per_rad,
            0.0,
            1e3,
        )?;
        ModelError::within("motor.coulomb_n_m", self.coulomb_n_m, 0.0, 1e4)?;
        if let Some(t) = &self.thermal {
            ModelError::finite("motor.thermal.ambient_c", t.ambient_c)?;
            ModelError::positive("motor.thermal.resistance_k_per_w", t.resistance_k_per_w)?;
            ModelError::positive("motor.thermal.capacitance_j_per_k", t.capacitance_j_per_k)?;
            ModelError::finite("motor.thermal.initial_c", t.initial_c)?;
            let r = self.resistance_ohm * (1.0 + COPPER_ALPHA_PER_K * (t.initial_c - REFERENCE_C));
            ModelError::positive("motor.thermal.initial_c (winding resistance there)", r)?;
        }
        Ok(())
    }
}

/// The motor's state: current, speed, angle, temperature.
#[derive(Clone, Debug)]
pub struct Motor {
    params: MotorParams,
    current_a: f64,
    speed_rad_s: f64,
    angle_rad: f64,
    temperature_c: f64,
    resistance_ohm: f64,
    heat_acc_a2s: f64,
    heat_time_s: f64,
    cache: Recent<(u64, u64, u64, bool), Discrete<2, 2>, 4>,
    /// Discretise through the augmented 4 x 4 exponential (tests compare).
    augmented: bool,
}

/// What drives the motor over one interval.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct MotorDrive {
    /// Terminal voltage, volts.
    pub terminal_v: f64,
    /// Load torque opposing forward rotation, N m.
    pub load_torque_n_m: f64,
    /// The rotor is held for this interval (locked-rotor fault).
    pub held: bool,
}

impl Motor {
    /// A motor at rest (and at its initial temperature).
    pub fn new(params: MotorParams) -> Result<Self, ModelError> {
        params.validate()?;
        let temperature_c = params.thermal.map_or(REFERENCE_C, |t| t.initial_c);
        let mut m = Self {
            params,
            current_a: 0.0,
            speed_rad_s: 0.0,
            angle_rad: 0.0,
            temperature_c,
            resistance_ohm: params.resistance_ohm,
            heat_acc_a2s: 0.0,
            heat_time_s: 0.0,
            cache: Recent::default(),
            augmented: false,
        };
        m.resistance_ohm = m.resistance_at(temperature_c);
        Ok(m)
    }

    fn resistance_at(&self, temperature_c: f64) -> f64 {
        if self.params.thermal.is_none() {
            return self.params.resistance_ohm;
        }
        // Floor at 1 % of R20 so an absurd cold start cannot give R <= 0.
        let r = self.params.resistance_ohm * (1.0 + COPPER_ALPHA_PER_K * (temperature_c - REFERENCE_C));
        r.max(0.01 * self.params.resistance_ohm)
    }

    fn discrete(&mut self, dt_s: f64, locked: bool) -> &Discrete<2, 2> {
        let l = match &self.params.saturation {
            Some(s) => self.params.inductance_h * s.share(self.current_a),
            None => self.params.inductance_h,
        };
        let key = (dt_s.to_bits(), self.resistance_ohm.to_bits(), l.to_bits(), locked);
        let (p, r, augmented) = (self.params, self.resistance_ohm, self.augmented);
        self.cache
            .get(key, || Self::discretise(&p, r, l, dt_s, locked, augmented))
    }

    fn discretise(
        p: &MotorParams,
        r: f64,
        l: f64,
        dt_s: f64,
        locked: bool,
        augmented: bool,
    ) -> Discrete<2, 2> {
        // x = [i, w], u = [v, tau_ext] with tau_ext the sum of friction and load
        // torques (signed), so the friction sign is decided per interval.
        let (a, b) = if locked {
            ([[-r / l, 0.0], [0.0, 0.0]], [[1.0 / l, 0.0], [0.0, 0.0]])
        } else {
            let j = p.inertia_kg_m2;
            (
                [
                    [-r / l, -p.back_emf_v_s_per_rad / l],
                    [p.torque_n_m_per_a / j, -p.viscous_n_m_s_per_rad / j],
                ],
                [[1.0 / l, 0.0], [0.0, 1.0 / j]],
            )
        };
        if augmented {
            Discrete::zero_order_hold(a, b, dt_s)
        } else {
            Discrete::zero_order_hold_2(a, b, dt_s)
        }
    }

    /// Advances `dt_s` seconds with the drive held, and returns the new current.
    #[inline]
    pub fn step(&mut self, drive: &MotorDrive, dt_s: f64) -> f64 {
        if dt_s.is_nan() || dt_s <= 0.0 {
            return self.current_a;
        }
        let i0 = self.current_a;
        let p = self.params;
        let motor_torque = p.torque_n_m_per_a * i0 - drive.load_torque_n_m;
        let mut locked = p.locked_rotor || drive.held;
        let mut friction = 0.0;
        if !locked {
            if self.speed_rad_s != 0.0 {
                friction = -p.coulomb_n_m * self.speed_rad_s.signum();
            } else if p.coulomb_n_m > 0.0 && motor_torque.abs() <= p.coulomb_n_m {
                locked = true; // stuck: static friction holds the rotor
            } else {
                friction = -p.coulomb_n_m * motor_torque.signum();
            }
        }
        if locked {
            self.speed_rad_s = 0.0;
        }
        let u = [drive.terminal_v, friction - drive.load_torque_n_m];
        let w0 = self.speed_rad_s;
        let [i1, w1] = self.discrete(dt_s, locked).step_held(&[i0, w0], &u);
        self.current_a = i1;
        // A sign change of the speed under Coulomb friction: the rotor sticks.
        self.speed_rad_s = if !locked && p.coulomb_n_m > 0.0 && w1 * w0 < 0.0 {
            0.0
        } else {
            w1
        };
        self.angle_rad += 0.5 * (w0 + self.speed_rad_s) * dt_s;
        self.heat(i0, i1, dt_s);
        i1
    }

    fn heat(&mut self, i0: f64, i1: f64, dt_s: f64) {
        let Some(th) = self.params.thermal else { return };
        // Mean square over the interval (trapezoid on i^2).
        self.heat_acc_a2s += 0.5 * (i0 * i0 + i1 * i1) * dt_s;
        self.heat_time_s += dt_s;
        if self.heat_time_s < THERMAL_STEP_S {
            return;
        }
        let h = self.heat_time_s;
        let power_w = self.heat_acc_a2s / h * self.resistance_ohm;
        // Exact first-order step of C dT/dt = P - (T - Ta) / Rth with P held.
        let tau = th.resistance_k_per_w * th.capacitance_j_per_k;
        let steady = th.ambient_c + power_w * th.resistance_k_per_w;
        self.temperature_c = steady + (self.temperature_c - steady) * (-h / tau).exp();
        self.resistance_ohm = self.resistance_at(self.temperature_c);
        self.heat_acc_a2s = 0.0;
        self.heat_time_s = 0.0;
    }

    /// Sets the shaft speed, rad/s (to start from a moving operating point).
    pub fn set_speed_rad_s(&mut self, speed_rad_s: f64) {
        if speed_rad_s.is_finite() && !self.params.locked_rotor {
            self.speed_rad_s = speed_rad_s;
        }
    }

    /// Sets the current to exactly zero (a diode stopped conducting).
    pub fn stop_current(&mut self) {
        self.current_a = 0.0;
    }

    /// The time for the current to reach zero from its present value under a
    /// terminal voltage held at `terminal_v`, with the speed taken as constant;
    /// `None` if it does not reach zero in `within_s`.
    pub fn time_to_zero_s(&self, terminal_v: f64, within_s: f64) -> Option<f64> {
        let r = self.resistance_ohm;
        let emf = if self.params.locked_rotor {
            0.0
        } else {
            self.params.back_emf_v_s_per_rad * self.speed_rad_s
        };
        let steady = (terminal_v - emf) / r;
        super::load::rl_time_to_zero_s(self.current_a, steady, self.params.inductance_h / r, within_s)
    }

    /// Winding current, amperes.
    pub fn current_a(&self) -> f64 {
        self.current_a
    }

    /// Shaft speed, rad/s.
    pub fn speed_rad_s(&self) -> f64 {
        self.speed_rad_s
    }

    /// Shaft angle since the start, rad.
    pub fn angle_rad(&self) -> f64 {
        self.angle_rad
    }

    /// Winding temperature, C (20 C when there is no thermal model).
    pub fn temperature_c(&self) -> f64 {
        self.temperature_c
    }

    /// Present winding resistance, ohm.
    pub fn resistance_ohm(&self) -> f64 {
        self.resistance_ohm
    }

    /// Back-EMF at the present speed, volts.
    pub fn back_emf_v(&self) -> f64 {
        self.params.back_emf_v_s_per_rad * self.speed_rad_s
    }

    /// The parameters.
    pub fn params(&self) -> &MotorParams {
        &self.params
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_two_state_hold_leaves_a_heating_run_within_1e_9_of_the_augmented_one() {
        // The demo's invented motor, heating at 3 A against a light load for
        // 2 s in 25 us steps (the winding's R changes every millisecond, so
        // the discretisation is recomputed 2000 times).
        let params = MotorParams {
            back_emf_v_s_per_rad: 0.031,
            torque_n_m_per_a: 0.031,
            inertia_kg_m2: 5e-6,
            viscous_n_m_s_per_rad: 2e-6,
            coulomb_n_m: 12e-3,
            thermal: Some(WindingThermal {
                ambient_c: 25.0,
                resistance_k_per_w: 8.0,
                capacitance_j_per_k: 0.5,
                initial_c: 25.0,
            }),
            ..MotorParams::rl(1.9, 2.4e-3)
        };
        let mut fast = Motor::new(params).unwrap();
        let mut reference = Motor::new(params).unwrap();
        reference.augmented = true;
        let drive = MotorDrive {
            terminal_v: 6.0,
            load_torque_n_m: 0.08,
            held: false,
        };
        let mut worst = 0.0f64;
        for _ in 0..80_000 {
            let (a, b) = (fast.step(&drive, 25e-6), reference.step(&drive, 25e-6));
            worst = worst.max((a - b).abs() / b.abs().max(1e-3));
            worst = worst.max(
                (fast.speed_rad_s() - reference.speed_rad_s()).abs() / reference.speed_rad_s().abs().max(1.0),
            );
        }
        assert!(fast.temperature_c() > 30.0, "{}", fast.temperature_c());
        println!("largest relative difference {worst:e}");
        assert!(worst < 1e-9, "{worst:e}");
    }

    /// A free rotor: 2 ohm, 1 mH, Ke = Kt = 0.05, J = 1e-5, no friction.
    fn free_rotor() -> MotorParams {
        let mut p = MotorParams::rl(2.0, 1e-3);
        p.locked_rotor = false;
        p.back_emf_v_s_per_rad = 0.05;
        p.torque_n_m_per_a = 0.05;
        p.inertia_kg_m2 = 1e-5;
        p
    }

    #[test]
    fn free_running_speed_settles_at_the_no_load_value() {
        // Steady state with B = 0, Tc = 0, no load: i -> 0, w -> V / Ke.
        let mut m = Motor::new(free_rotor()).unwrap();
        let drive = MotorDrive {
            terminal_v: 10.0,
            load_torque_n_m: 0.0,
            held: false,
        };
        for _ in 0..20_000 {
            m.step(&drive, 50e-6);
        }
        assert!((m.speed_rad_s() - 200.0).abs() < 1e-6, "{}", m.speed_rad_s());
        assert!(m.current_a().abs() < 1e-6);
    }

    #[test]
    fn coulomb_friction_holds_a_weak_drive() {
        let mut p = free_rotor();
        p.coulomb_n_m = 0.02; // breakaway needs 0.4 A
        let mut m = Motor::new(p).unwrap();
        let weak = MotorDrive {
            terminal_v: 0.6,
            load_torque_n_m: 0.0,
            held: false,
        }; // 0.3 A
        for _ in 0..1000 {
            m.step(&weak, 50e-6);
        }
        assert_eq!(m.speed_rad_s(), 0.0);
        let strong = MotorDrive {
            terminal_v: 2.0,
            ..weak
        };
        for _ in 0..1000 {
            m.step(&strong, 50e-6);
        }
        assert!(m.speed_rad_s() > 1.0);
    }

    #[test]
    fn copper_heats_and_resistance_follows_the_coefficient() {
        let mut p = MotorParams::rl(2.0, 1e-3);
        p.thermal = Some(WindingThermal {
            ambient_c: 20.0,
            resistance_k_per_w: 5.0,
            capacitance_j_per_k: 0.2,
            initial_c: 20.0,
        });
        let mut m = Motor::new(p).unwrap();
        let drive = MotorDrive {
            terminal_v: 4.0,
            load_torque_n_m: 0.0,
            held: false,
        };
        for _ in 0..200_000 {
            m.step(&drive, 50e-6); // 10 s = 10 thermal time constants
        }
        // At steady state T - 20 = 5 K/W * i^2 R and R = 2 (1 + alpha (T - 20)).
        let t = m.temperature_c();
        let r = m.resistance_ohm();
        assert!((r - 2.0 * (1.0 + COPPER_ALPHA_PER_K * (t - 20.0))).abs() < 1e-12);
        let i = m.current_a();
        assert!((t - 20.0 - 5.0 * i * i * r).abs() < 0.05, "T {t}, i {i}, R {r}");
        assert!(t > 30.0);
    }
}
