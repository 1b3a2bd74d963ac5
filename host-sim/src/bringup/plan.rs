//! What a board command will do, worked out before anything is driven, so
//! it can be printed for the operator first.

use super::stop;
use crate::bench::link::{Hello, LinkError};

/// The low level of the identification's square wave as a share of the
/// high one. Above zero, the current never reaches zero, so the voltage a
/// bridge loses in its dead time and diodes keeps one sign and one size
/// through the test, and the fit takes it up as a constant offset instead of
/// reading it as resistance (common practice on the bench: keep the test
/// current one-signed and off zero).
pub const LOW_SHARE: f64 = 0.25;

/// How the shaft is during an identification.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Rotor {
    /// Clamped: R and L alone.
    Held,
    /// Free to turn, with this inertia (rotor and load), kg m^2: Ke from the
    /// current as well.
    Free {
        /// kg m^2.
        inertia_kg_m2: f64,
    },
}

/// An identification run on the board.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct IdentifyPlan {
    /// The shaft.
    pub rotor: Rotor,
    /// The current the high level drives through the nominal resistance, A.
    pub test_current_a: f64,
    /// The high level, V (the low level is [`LOW_SHARE`] of it).
    pub volts: f64,
    /// Ticks at each level.
    pub hold_ticks: u32,
    /// Ticks it lasts.
    pub duration_ticks: u32,
    /// The measured current at which the board stops it, A.
    pub current_limit_a: f64,
    /// One tick kept in this many.
    pub decimation: u16,
    /// Samples kept.
    pub samples: u16,
    /// The board's control period, s.
    pub period_s: f64,
}

impl IdentifyPlan {
    /// The plan for a load of nominally `resistance_ohm` and `inductance_h`
    /// (the scenario's values: the identification finds the true ones) on a
    /// board that allows currents up to `max_a`.
    pub fn new(
        resistance_ohm: f64,
        inductance_h: f64,
        hello: &Hello,
        max_a: f64,
        test_current_a: Option<f64>,
        rotor: Rotor,
    ) -> Result<Self, LinkError> {
        let test = test_current_a.unwrap_or(0.5 * max_a);
        if !(test.is_finite() && test > 0.0 && test <= max_a) {
            return Err(stop(format!(
                "--test-current-a = {test} must be above 0 A and at most the board's limit of {max_a} A"
            )));
        }
        let t = hello.period_s;
        let tau = inductance_h / resistance_ohm;
        // Six time constants at each level, eight levels; one tick kept in
        // as few as lets that fit the capture, and each hold a whole number
        // of kept samples (the capture starts with the excitation, so every
        // level change falls on a kept sample).
        let hold = (6.0 * tau / t).round().max(8.0);
        let decimation = (8.0 * hold / hello.capture_capacity as f64)
            .ceil()
            .clamp(1.0, 1000.0) as u16;
        let d = decimation as u32;
        let hold_ticks = (hold as u32).div_ceil(d) * d;
        let samples = ((8 * hold_ticks) / d).clamp(64, hello.capture_capacity as u32) as u16;
        Ok(Self {
            rotor,
            test_current_a: test,
            volts: test * resistance_ohm,
            hold_ticks,
            duration_ticks: samples as u32 * decimation as u32,
            current_limit_a: (1.5 * test).min(max_a.max(test)),
            decimation,
            samples,
            period_s: t,
        })
    }

    /// What will happen, for the operator to read before it does.
    pub fn describe(&self) -> String {
        format!(
            "identification: the loop stays off; the board applies {:.3} V and {:.3} V in turn ({:.2} ms each, open loop, \
             {:.1} ms in all) to the load with its {}; the board stops at {:.3} A measured, and its supervisor stays on",
            LOW_SHARE * self.volts,
            self.volts,
            self.hold_ticks as f64 * self.period_s * 1e3,
            self.duration_ticks as f64 * self.period_s * 1e3,
            match self.rotor {
                Rotor::Held => "rotor held (clamp the shaft)".to_string(),
                Rotor::Free { .. } => "shaft free to turn".to_string(),
            },
            self.current_limit_a
        )
    }
}

/// A verification step on the board.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct StepPlan {
    /// The current before the step, A.
    pub from_a: f64,
    /// After, A.
    pub to_a: f64,
    /// One tick kept in this many.
    pub decimation: u16,
    /// Samples kept.
    pub samples: u16,
    /// The board's control period, s.
    pub period_s: f64,
}

impl StepPlan {
    /// A step from `from_a` to `to_a` whose capture lasts at least
    /// `window_s` (the decimation follows from the capture's capacity).
    pub fn new(from_a: f64, to_a: f64, window_s: f64, hello: &Hello) -> Result<Self, LinkError> {
        for (flag, v) in [("--from-a", from_a), ("--to-a", to_a)] {
            if !v.is_finite() {
                return Err(stop(format!("{flag} = {v} must be a current in amperes")));
            }
        }
        if !(window_s.is_finite() && window_s > 0.0 && window_s <= 60.0) {
            return Err(stop(format!(
                "--window-s = {window_s} must be above 0 s and at most 60 s"
            )));
        }
        let t = hello.period_s;
        let ticks = (window_s / t).ceil();
        let decimation = (ticks / hello.capture_capacity as f64)
            .ceil()
            .clamp(1.0, u16::MAX as f64) as u16;
        let samples = ((ticks / decimation as f64).ceil() as usize).clamp(16, hello.capture_capacity) as u16;
        Ok(Self {
            from_a,
            to_a,
            decimation,
            samples,
            period_s: t,
        })
    }

    /// What will happen.
    pub fn describe(&self) -> String {
        format!(
            "step: the loop is enabled at {} A, asked for {} A while {:.1} ms are captured, then set back to {} A and disabled",
            self.from_a,
            self.to_a,
            self.samples as f64 * self.decimation as f64 * self.period_s * 1e3,
            self.from_a
        )
    }
}
