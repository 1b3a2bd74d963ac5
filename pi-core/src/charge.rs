//! A charger's outer voltage limit: constant current until the terminal
//! voltage reaches its set value, then a current setpoint that tapers to
//! hold it; the charge ends when the taper falls to a set current, or at a
//! time limit.
//!
//! [`ChargeLimit::update`] runs in the main loop (or a slower interrupt) at
//! its own period with the measured terminal voltage and returns the
//! current setpoint for the current loop (`Command::SetCurrent`). Inside it
//! is the crate's one PI law ([`crate::pi::PiController`]) on the voltage
//! error, its output limited to `0 ..= current_a`, with the same
//! back-calculation anti-windup: while the voltage is below its set value
//! the PI sits at the current limit (constant current) without winding up,
//! and takes over the moment the voltage arrives (constant voltage). A
//! charge that starts below the set voltage asks the full current from its
//! first update (the integral preloaded there); one that starts at or above
//! it starts from 0 A in constant voltage.
//!
//! Units: the PI's gains here are amperes per volt (`PiGains`' field names
//! are the current loop's, V/A).
//!
//! A reading that is no number ends the charge at once with 0 A
//! ([`ChargeEnd::BadReading`]): nothing drives a cell whose voltage is
//! unknown.

use crate::error::{ConfigError, Requirement, positive};
use crate::pi::{OutputLimits, PiConfig, PiController, PiGains};

/// Validated charge settings.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ChargeConfig {
    current_a: f32,
    voltage_v: f32,
    taper_a: f32,
    time_limit_s: f32,
    pi: PiConfig,
}

impl ChargeConfig {
    /// Constant current `current_a` up to `voltage_v`, then constant
    /// voltage until the current tapers to `taper_a` (above 0, below
    /// `current_a`) or `time_limit_s` passes; the outer PI's `gains` (A/V)
    /// updated every `period_s`. Refused by field name.
    pub fn new(
        current_a: f32,
        voltage_v: f32,
        taper_a: f32,
        time_limit_s: f32,
        gains: PiGains,
        period_s: f32,
    ) -> Result<Self, ConfigError> {
        let current_a = positive("charge_current_a", current_a)?;
        let voltage_v = positive("charge_voltage_v", voltage_v)?;
        let taper_a = positive("taper_current_a", taper_a)?;
        if taper_a >= current_a {
            return Err(ConfigError::new(
                "taper_current_a",
                taper_a,
                Requirement::Below("charge_current_a"),
            ));
        }
        let time_limit_s = positive("time_limit_s", time_limit_s)?;
        let pi = PiConfig::new(gains, period_s, OutputLimits::new(0.0, current_a)?)?;
        Ok(Self {
            current_a,
            voltage_v,
            taper_a,
            time_limit_s,
            pi,
        })
    }

    /// The constant current, A.
    pub fn current_a(&self) -> f32 {
        self.current_a
    }

    /// The constant voltage, V.
    pub fn voltage_v(&self) -> f32 {
        self.voltage_v
    }

    /// The current that ends the constant-voltage phase, A.
    pub fn taper_a(&self) -> f32 {
        self.taper_a
    }

    /// The longest a charge may last, s.
    pub fn time_limit_s(&self) -> f32 {
        self.time_limit_s
    }
}

/// Why a charge ended.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ChargeEnd {
    /// The current tapered to `taper_a` at the constant voltage: full.
    Taper,
    /// The time limit passed first.
    TimeLimit,
    /// The terminal voltage reading was no number.
    BadReading,
}

/// Where a charge stands.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ChargePhase {
    /// At the current limit, the voltage below its set value.
    ConstantCurrent,
    /// Holding the voltage, the current tapering.
    ConstantVoltage,
    /// Over (the setpoint is 0 A from here on).
    Ended(ChargeEnd),
}

/// The outer voltage limit of a charge.
#[derive(Clone, Debug)]
pub struct ChargeLimit {
    config: ChargeConfig,
    pi: PiController,
    elapsed_s: f32,
    phase: ChargePhase,
    setpoint_a: f32,
}

impl ChargeLimit {
    /// A charge about to start (constant current).
    pub fn new(config: ChargeConfig) -> Self {
        Self {
            pi: PiController::new(config.pi),
            config,
            elapsed_s: 0.0,
            phase: ChargePhase::ConstantCurrent,
            setpoint_a: 0.0,
        }
    }

    /// One update with the measured terminal voltage: the current setpoint,
    /// amperes (0 once the charge has ended). Never panics or blocks.
    pub fn update(&mut self, terminal_v: f32) -> f32 {
        if let ChargePhase::Ended(_) = self.phase {
            return 0.0;
        }
        if terminal_v.is_nan() || terminal_v.is_infinite() {
            return self.end(ChargeEnd::BadReading);
        }
        if self.elapsed_s == 0.0 && terminal_v < self.config.voltage_v {
            // A cell below the set voltage starts at the constant current
            // (the current loop's setpoint slew softens the step), not on a
            // ramp of the integral; one at or above it starts from 0 A.
            let _ = self
                .pi
                .track(self.config.current_a, self.config.voltage_v, terminal_v);
        }
        self.elapsed_s += self.config.pi.period_s();
        if self.elapsed_s >= self.config.time_limit_s {
            return self.end(ChargeEnd::TimeLimit);
        }
        // The PI on the voltage error; the "setpoint" and "measurement" of
        // the law are the set voltage and the measured one.
        let i = self.pi.update(self.config.voltage_v, terminal_v);
        self.setpoint_a = i;
        self.phase = if i >= self.config.current_a {
            ChargePhase::ConstantCurrent
        } else {
            ChargePhase::ConstantVoltage
        };
        if self.phase == ChargePhase::ConstantVoltage && i <= self.config.taper_a {
            return self.end(ChargeEnd::Taper);
        }
        i
    }

    fn end(&mut self, why: ChargeEnd) -> f32 {
        self.phase = ChargePhase::Ended(why);
        self.setpoint_a = 0.0;
        0.0
    }

    /// Where the charge stands.
    pub fn phase(&self) -> ChargePhase {
        self.phase
    }

    /// The last setpoint, A.
    pub fn setpoint_a(&self) -> f32 {
        self.setpoint_a
    }

    /// Time since the start, s.
    pub fn elapsed_s(&self) -> f32 {
        self.elapsed_s
    }
}

#[cfg(test)]
mod tests;
