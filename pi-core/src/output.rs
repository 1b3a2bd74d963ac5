//! The drive command and the volts-to-duty mapping.
//!
//! The PI asks for a voltage across the load, `v` (positive drives positive
//! current). An H-bridge averaged over a PWM period applies `d * V_bus` with duty
//! `d` in `[0, 1]` in the selected direction, so the mapping is
//! `d = |v| / V_bus`, direction = sign of `v`, then `d` is limited to `max_duty`
//! (bootstrap gate drivers need a short off-time each period; common practice is
//! 95-98 %).
//!
//! With a bus below `min_bus_v` (or a NaN one) the mapping gives the safe command:
//! dividing by a collapsing bus would ask for full duty from a supply that is
//! failing. In the assembled loop the bus under-voltage fault trips first; this
//! guard is the backstop for stand-alone use.

use crate::error::{ConfigError, positive, within};
use crate::pi::clamp;

/// Which way the bridge drives the load.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Direction {
    /// Positive voltage and current across the load.
    #[default]
    Forward,
    /// Negative voltage and current across the load.
    Reverse,
}

/// What the bridge should do for the next PWM period.
///
/// `duty` is the fraction of the period the bridge applies the bus across the load
/// in `direction`, in `[0, max_duty]`. With `enabled = false` the bridge must be off
/// (all switches open, the load current free-wheels through the body diodes into
/// the bus) regardless of the other fields.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DriveCommand {
    /// Duty fraction, 0 to 1.
    pub duty: f32,
    /// Polarity.
    pub direction: Direction,
    /// Bridge enabled.
    pub enabled: bool,
}

impl DriveCommand {
    /// Bridge disabled, duty 0: the state every fault leads to.
    pub const SAFE: DriveCommand = DriveCommand {
        duty: 0.0,
        direction: Direction::Forward,
        enabled: false,
    };

    /// The duty with its sign: positive forward, negative reverse, 0 when disabled.
    pub fn signed_duty(&self) -> f32 {
        match (self.enabled, self.direction) {
            (false, _) => 0.0,
            (true, Direction::Forward) => self.duty,
            (true, Direction::Reverse) => -self.duty,
        }
    }
}

/// Validated volts-to-duty mapping.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DutyMapping {
    max_duty: f32,
    min_bus_v: f32,
}

impl DutyMapping {
    /// `max_duty` in `(0, 1]`; `min_bus_v > 0` is the lowest bus that is divided by.
    pub fn new(max_duty: f32, min_bus_v: f32) -> Result<Self, ConfigError> {
        let max_duty = within("max_duty", max_duty, f32::MIN_POSITIVE, 1.0)?;
        let min_bus_v = positive("min_bus_v", min_bus_v)?;
        Ok(Self { max_duty, min_bus_v })
    }

    /// Highest duty fraction.
    pub fn max_duty(&self) -> f32 {
        self.max_duty
    }

    /// Lowest bus voltage the mapping divides by.
    pub fn min_bus_v(&self) -> f32 {
        self.min_bus_v
    }

    /// The largest voltage magnitude available from this bus, volts.
    #[inline]
    pub fn available_v(&self, bus_v: f32) -> f32 {
        if bus_v >= self.min_bus_v {
            self.max_duty * bus_v
        } else {
            0.0
        }
    }

    /// The command that applies `volts` from a bus of `bus_v`, enabled, with the
    /// duty limited to `max_duty`. Safe command for a low or NaN bus or NaN volts.
    #[inline]
    pub fn command(&self, volts: f32, bus_v: f32) -> DriveCommand {
        // A NaN bus fails this comparison too.
        let bus_ok = bus_v >= self.min_bus_v;
        if !bus_ok || volts.is_nan() {
            return DriveCommand::SAFE;
        }
        let duty = clamp(volts / bus_v, -self.max_duty, self.max_duty);
        if duty < 0.0 {
            DriveCommand {
                duty: -duty,
                direction: Direction::Reverse,
                enabled: true,
            }
        } else {
            DriveCommand {
                duty,
                direction: Direction::Forward,
                enabled: true,
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn volts_map_to_duty_and_direction() {
        let m = DutyMapping::new(0.95, 6.0).unwrap();
        let c = m.command(6.0, 24.0);
        assert_eq!((c.duty, c.direction, c.enabled), (0.25, Direction::Forward, true));
        let c = m.command(-12.0, 24.0);
        assert_eq!((c.duty, c.direction), (0.5, Direction::Reverse));
        assert_eq!(c.signed_duty(), -0.5);
        assert_eq!(m.command(100.0, 24.0).duty, 0.95);
        assert_eq!(m.command(-100.0, 24.0).signed_duty(), -0.95);
    }

    #[test]
    fn low_or_bad_bus_gives_the_safe_command() {
        let m = DutyMapping::new(0.95, 6.0).unwrap();
        assert_eq!(m.command(3.0, 5.9), DriveCommand::SAFE);
        assert_eq!(m.command(3.0, f32::NAN), DriveCommand::SAFE);
        assert_eq!(m.command(f32::NAN, 24.0), DriveCommand::SAFE);
        assert_eq!(m.available_v(5.0), 0.0);
        assert_eq!(m.available_v(20.0), 19.0);
    }

    #[test]
    fn bad_limits_are_refused() {
        assert_eq!(DutyMapping::new(0.0, 6.0).unwrap_err().field, "max_duty");
        assert_eq!(DutyMapping::new(1.2, 6.0).unwrap_err().field, "max_duty");
        assert_eq!(DutyMapping::new(0.9, 0.0).unwrap_err().field, "min_bus_v");
    }
}
