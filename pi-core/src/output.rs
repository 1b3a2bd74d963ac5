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
//! failing. In the assembled loop, a bus between the supervisor's under-voltage
//! level and `min_bus_v` leaves the loop running with the bridge off, so it rides
//! through the dip and drives again when the bus recovers. NaN or infinite volts
//! also give the safe command.

use crate::error::{ConfigError, positive, within};

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
    /// The lowest voltage as a share of what the bus gives: -1 for a bridge
    /// that reverses, 0 for a one-direction drive.
    floor_share: f32,
}

impl DutyMapping {
    /// `max_duty` in `(0, 1]`; `min_bus_v > 0` is the lowest bus that is divided by.
    /// The drive reverses (an H-bridge); see [`DutyMapping::one_direction`].
    pub fn new(max_duty: f32, min_bus_v: f32) -> Result<Self, ConfigError> {
        let max_duty = within("max_duty", max_duty, f32::MIN_POSITIVE, 1.0)?;
        let min_bus_v = positive("min_bus_v", min_bus_v)?;
        Ok(Self {
            max_duty,
            min_bus_v,
            floor_share: -1.0,
        })
    }

    /// The same mapping for a drive that applies the bus one way only: a
    /// low-side switch with a freewheel diode across the load (a valve, a
    /// solenoid, an LED string, a charger). Current flows one way; the
    /// lowest voltage asked for is 0 V (switch off: the current decays
    /// through the diode), a negative voltage gives duty 0, and the loop
    /// refuses a negative setpoint range ([`crate::LoopConfig::new`]).
    pub fn one_direction(self) -> Self {
        Self {
            floor_share: 0.0,
            ..self
        }
    }

    /// Whether the drive reverses (false for [`DutyMapping::one_direction`]).
    pub fn reverses(&self) -> bool {
        self.floor_share < 0.0
    }

    /// The lowest voltage the drive can ask for when it gives up to
    /// `available_v`: `-available_v` reversing, 0 one way.
    #[inline(always)]
    pub fn lowest_v(&self, available_v: f32) -> f32 {
        available_v * self.floor_share
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
            self.available_on_good_bus(bus_v)
        } else {
            0.0
        }
    }

    /// The command that applies `volts` from a bus of `bus_v`, enabled, with the
    /// duty limited to `max_duty`. Safe command for a low or NaN bus, and for NaN
    /// or infinite volts.
    #[inline]
    pub fn command(&self, volts: f32, bus_v: f32) -> DriveCommand {
        // One way only: a finite negative voltage (or -0) is the switch off
        // (NaN and infinities go on to the safe command).
        let volts = if !self.reverses() && volts <= 0.0 && volts > f32::NEG_INFINITY {
            0.0
        } else {
            volts
        };
        // A NaN bus fails this comparison too.
        if bus_v >= self.min_bus_v {
            self.command_on_good_bus(volts, bus_v)
        } else {
            DriveCommand::SAFE
        }
    }

    /// [`DutyMapping::command`] for volts the caller knows are at or above
    /// [`DutyMapping::lowest_v`] (+0 for a one-direction drive): the loop's.
    #[inline(always)]
    pub(crate) fn command_within_range(&self, volts: f32, bus_v: f32) -> DriveCommand {
        if bus_v >= self.min_bus_v {
            self.command_on_good_bus(volts, bus_v)
        } else {
            DriveCommand::SAFE
        }
    }

    /// [`DutyMapping::available_v`] for a bus the caller knows is at least `min_bus_v`.
    #[inline(always)]
    pub(crate) fn available_on_good_bus(&self, bus_v: f32) -> f32 {
        self.max_duty * bus_v
    }

    /// [`DutyMapping::command`] for a bus the caller knows is at least `min_bus_v`.
    #[inline(always)]
    pub(crate) fn command_on_good_bus(&self, volts: f32, bus_v: f32) -> DriveCommand {
        let duty = volts / bus_v;
        let magnitude = duty.abs();
        let magnitude = if magnitude <= self.max_duty {
            magnitude
        } else if magnitude < f32::INFINITY {
            self.max_duty
        } else {
            // NaN or infinite volts.
            return DriveCommand::SAFE;
        };
        DriveCommand {
            duty: magnitude,
            // The sign bit: a negative zero (the loop never asks for one) is
            // reverse at zero duty. (A one-direction drive's volts arrive here
            // at +0 or above: `command` and the loop see to it.)
            direction: if duty.is_sign_negative() {
                Direction::Reverse
            } else {
                Direction::Forward
            },
            enabled: true,
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
        assert_eq!(m.command(f32::INFINITY, 24.0), DriveCommand::SAFE);
        assert_eq!(m.command(f32::NEG_INFINITY, 24.0), DriveCommand::SAFE);
        assert_eq!(m.available_v(5.0), 0.0);
        assert_eq!(m.available_v(20.0), 19.0);
    }

    #[test]
    fn a_one_direction_drive_never_reverses() {
        let m = DutyMapping::new(0.95, 6.0).unwrap().one_direction();
        assert!(!m.reverses() && DutyMapping::new(0.95, 6.0).unwrap().reverses());
        let c = m.command(-12.0, 24.0);
        assert_eq!((c.duty, c.direction, c.enabled), (0.0, Direction::Forward, true));
        assert_eq!(m.command(-0.0, 24.0).direction, Direction::Forward);
        assert_eq!(m.command(6.0, 24.0).duty, 0.25);
        assert_eq!(m.command(f32::NAN, 24.0), DriveCommand::SAFE);
        assert_eq!(m.command(f32::NEG_INFINITY, 24.0), DriveCommand::SAFE);
        assert_eq!(
            (
                m.lowest_v(19.0),
                DutyMapping::new(0.95, 6.0).unwrap().lowest_v(19.0)
            ),
            (0.0, -19.0)
        );
    }

    #[test]
    fn bad_limits_are_refused() {
        assert_eq!(DutyMapping::new(0.0, 6.0).unwrap_err().field, "max_duty");
        assert_eq!(DutyMapping::new(1.2, 6.0).unwrap_err().field, "max_duty");
        assert_eq!(DutyMapping::new(0.9, 0.0).unwrap_err().field, "min_bus_v");
    }
}
