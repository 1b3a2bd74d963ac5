//! What the runner needs of a load between the bridge's terminals, and
//! nothing more: stepped over an interval with its terminal voltage held,
//! its current, whether and when that current reaches zero (a diode stops
//! it there), and the voltage its terminals float at with no current. The
//! motor is one load ([`super::motor`]); a plain winding with a constant
//! counter-voltage another ([`super::rl`]). Adding a load is a file of its
//! own implementing [`Load`], and its section in the scenario.

use std::fmt;

use super::motor::{Motor, MotorDrive};

/// How many quantities a load can show besides its current.
pub const READOUTS: usize = 2;

/// A quantity a load shows besides its current (a plunger's travel, a
/// cell's state of charge): its trace column (the unit in its name), its
/// name in words and its unit, for the CSV and the plots.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Readout {
    /// The CSV column, e.g. `travel_mm`.
    pub column: &'static str,
    /// In words, e.g. `plunger travel`.
    pub name: &'static str,
    /// The unit, e.g. `mm`.
    pub unit: &'static str,
}

/// A load the runner steps.
pub trait Load: fmt::Debug + Send + Sync {
    /// Advances `dt_s` seconds with the drive held; returns the new current,
    /// amperes (positive forward).
    fn step(&mut self, drive: &MotorDrive, dt_s: f64) -> f64;
    /// The current, amperes.
    fn current_a(&self) -> f64;
    /// Sets the current to exactly zero (a diode stopped conducting).
    fn stop_current(&mut self);
    /// The time for the current to reach zero under `terminal_v` held, or
    /// `None` if it does not within `within_s`. By default the load is
    /// stepped whole through a diode-clamped interval: `Some(0)` only when
    /// it carries no current, and a current that crosses zero in the step is
    /// stopped by the runner after it (a load whose own diodes block, a
    /// stepped nonlinear coil).
    fn time_to_zero_s(&self, _terminal_v: f64, _within_s: f64) -> Option<f64> {
        (self.current_a() == 0.0).then_some(0.0)
    }
    /// The voltage across the terminals with no current flowing, volts: a
    /// motor's back-EMF, a source's counter-voltage; 0 by default (a load
    /// that holds no voltage of its own without current).
    fn open_circuit_v(&self) -> f64 {
        0.0
    }
    /// Shaft speed, rad/s (0 for a load without a shaft).
    fn speed_rad_s(&self) -> f64 {
        0.0
    }
    /// Winding temperature, C; the reference temperature by default (a load
    /// without a thermal model).
    fn temperature_c(&self) -> f64 {
        super::motor::REFERENCE_C
    }
    /// Present resistance, ohm.
    fn resistance_ohm(&self) -> f64;
    /// Whether its copper heats (a thermal model is on).
    fn heats(&self) -> bool {
        false
    }
    /// What the load shows besides its current and speed (at most
    /// [`READOUTS`]); none by default.
    fn readouts(&self) -> &'static [Readout] {
        &[]
    }
    /// The present values of [`Load::readouts`], in their order and units
    /// (NaN past them).
    fn readings(&self) -> [f64; READOUTS] {
        [f64::NAN; READOUTS]
    }
    /// The voltage across the load itself that a charger's outer limit
    /// reads (a cell's terminals, behind the charger's inductor), volts;
    /// `None` for a load a charger does not charge.
    fn sensed_v(&self) -> Option<f64> {
        None
    }
    /// The motor, when the load is one.
    fn motor(&self) -> Option<&Motor> {
        None
    }
    /// The motor, when the load is one, to set its state.
    fn motor_mut(&mut self) -> Option<&mut Motor> {
        None
    }
    /// A boxed copy (a run's chain is cloned for sweeps and second runs).
    fn boxed(&self) -> Box<dyn Load>;
}

/// When a current `i0` heading exponentially for `steady_a` with time
/// constant `tau_s` (an R-L behind a held voltage) reaches zero, seconds;
/// `None` if it does not within `within_s`. The one solution of
/// `i(t) = steady + (i0 - steady) exp(-t / tau) = 0` the loads share.
pub fn rl_time_to_zero_s(i0: f64, steady_a: f64, tau_s: f64, within_s: f64) -> Option<f64> {
    if i0 == 0.0 {
        return Some(0.0);
    }
    let ratio = steady_a / (steady_a - i0);
    if !(ratio > 0.0 && ratio < 1.0) {
        return None;
    }
    let t = -tau_s * ratio.ln();
    (t <= within_s).then_some(t)
}

impl Clone for Box<dyn Load> {
    fn clone(&self) -> Self {
        self.boxed()
    }
}

impl Load for Motor {
    #[inline]
    fn step(&mut self, drive: &MotorDrive, dt_s: f64) -> f64 {
        Motor::step(self, drive, dt_s)
    }
    fn current_a(&self) -> f64 {
        Motor::current_a(self)
    }
    fn stop_current(&mut self) {
        Motor::stop_current(self)
    }
    fn time_to_zero_s(&self, terminal_v: f64, within_s: f64) -> Option<f64> {
        Motor::time_to_zero_s(self, terminal_v, within_s)
    }
    fn open_circuit_v(&self) -> f64 {
        self.back_emf_v()
    }
    fn speed_rad_s(&self) -> f64 {
        Motor::speed_rad_s(self)
    }
    fn temperature_c(&self) -> f64 {
        Motor::temperature_c(self)
    }
    fn resistance_ohm(&self) -> f64 {
        Motor::resistance_ohm(self)
    }
    fn heats(&self) -> bool {
        self.params().thermal.is_some()
    }
    fn motor(&self) -> Option<&Motor> {
        Some(self)
    }
    fn motor_mut(&mut self) -> Option<&mut Motor> {
        Some(self)
    }
    fn boxed(&self) -> Box<dyn Load> {
        Box::new(self.clone())
    }
}
