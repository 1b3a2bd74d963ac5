//! Fault causes and sets of them: what the supervisor latches and telemetry
//! reports. A leaf: it imports nothing from the rest of the crate.

use core::fmt;

/// One fault cause. The order is the tie-break for the first cause kept
/// ([`crate::supervisor::Supervisor::first`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(u16)]
pub enum Fault {
    /// Current magnitude above the overcurrent threshold for the set samples.
    Overcurrent = 1 << 0,
    /// I^2t thermal model reached its trip level.
    Overload = 1 << 1,
    /// Current reading NaN or infinite.
    CurrentInvalid = 1 << 2,
    /// ADC reading at a rail: sensor open, shorted or clipping.
    SensorRail = 1 << 3,
    /// ADC reading frozen while the drive is large.
    SensorStuck = 1 << 4,
    /// Bus voltage below the window.
    BusUndervoltage = 1 << 5,
    /// Bus voltage above the window.
    BusOvervoltage = 1 << 6,
    /// Bus voltage reading NaN or infinite.
    BusInvalid = 1 << 7,
    /// Speed reading NaN or infinite.
    SpeedInvalid = 1 << 8,
    /// Speed reading beyond the configured largest speed: a runaway drive or a
    /// bad speed sensor.
    SpeedImplausible = 1 << 9,
}

impl Fault {
    /// Every cause, in tie-break order.
    pub const ALL: [Fault; 10] = [
        Fault::Overcurrent,
        Fault::Overload,
        Fault::CurrentInvalid,
        Fault::SensorRail,
        Fault::SensorStuck,
        Fault::BusUndervoltage,
        Fault::BusOvervoltage,
        Fault::BusInvalid,
        Fault::SpeedInvalid,
        Fault::SpeedImplausible,
    ];

    /// A short description for people.
    pub fn describe(self) -> &'static str {
        match self {
            Fault::Overcurrent => "over-current",
            Fault::Overload => "winding overload (I^2t)",
            Fault::CurrentInvalid => "invalid current reading",
            Fault::SensorRail => "current sensor at a rail",
            Fault::SensorStuck => "current sensor stuck",
            Fault::BusUndervoltage => "bus under-voltage",
            Fault::BusOvervoltage => "bus over-voltage",
            Fault::BusInvalid => "invalid bus voltage reading",
            Fault::SpeedInvalid => "invalid speed reading",
            Fault::SpeedImplausible => "speed beyond its largest plausible value",
        }
    }
}

impl fmt::Display for Fault {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.describe())
    }
}

/// A set of fault causes (a bit per [`Fault`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FaultSet(pub(crate) u16);

impl FaultSet {
    /// No causes.
    pub const EMPTY: FaultSet = FaultSet(0);

    /// True when no cause is in the set.
    #[inline]
    pub fn is_empty(self) -> bool {
        self.0 == 0
    }

    /// True when `fault` is in the set.
    #[inline]
    pub fn contains(self, fault: Fault) -> bool {
        self.0 & fault as u16 != 0
    }

    /// The set with `fault` added.
    #[inline]
    pub fn with(self, fault: Fault) -> FaultSet {
        FaultSet(self.0 | fault as u16)
    }

    /// The set with `fault` added when `condition` holds.
    #[inline]
    pub(crate) fn with_if(self, fault: Fault, condition: bool) -> FaultSet {
        FaultSet(self.0 | ((condition as u16) * fault as u16))
    }

    /// Causes in either set.
    #[inline]
    pub fn union(self, other: FaultSet) -> FaultSet {
        FaultSet(self.0 | other.0)
    }

    /// The raw bits (bit values are those of [`Fault`]), for telemetry.
    pub fn bits(self) -> u16 {
        self.0
    }

    /// The set a telemetry word stands for (the inverse of [`FaultSet::bits`]);
    /// bits that are no cause are dropped.
    pub fn from_bits(bits: u16) -> FaultSet {
        FaultSet(bits & ((1 << Fault::ALL.len()) - 1))
    }

    /// The earliest cause in tie-break order, if any.
    pub fn earliest(self) -> Option<Fault> {
        Fault::ALL.into_iter().find(|f| self.contains(*f))
    }

    /// The causes in tie-break order.
    pub fn iter(self) -> impl Iterator<Item = Fault> {
        Fault::ALL.into_iter().filter(move |f| self.contains(*f))
    }
}

impl fmt::Display for FaultSet {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.is_empty() {
            return f.write_str("no fault");
        }
        for (k, fault) in self.iter().enumerate() {
            if k > 0 {
                f.write_str(", ")?;
            }
            f.write_str(fault.describe())?;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fault_set_display_lists_causes() {
        let set = FaultSet::EMPTY.with(Fault::SensorRail).with(Fault::Overcurrent);
        let mut buf = heapless::String::<96>::new();
        core::fmt::write(&mut buf, format_args!("{set}")).unwrap();
        assert_eq!(buf.as_str(), "over-current, current sensor at a rail");
    }

    #[test]
    fn each_fault_is_its_own_bit() {
        let mut seen = 0u16;
        for f in Fault::ALL {
            let bit = f as u16;
            assert_eq!(bit.count_ones(), 1, "{f:?}");
            assert_eq!(seen & bit, 0, "{f:?} shares a bit");
            seen |= bit;
            let set = FaultSet::EMPTY.with(f);
            assert!(set.contains(f) && set.with(f).contains(f), "{f:?}");
            assert_eq!(set.earliest(), Some(f));
        }
        assert_eq!(seen, (1 << Fault::ALL.len()) - 1, "the bits are 0 to 9 in order");
    }

    #[test]
    fn faults_display_as_their_description() {
        let mut buf = heapless::String::<64>::new();
        core::fmt::write(&mut buf, format_args!("{}", Fault::Overload)).unwrap();
        assert_eq!(buf.as_str(), "winding overload (I^2t)");
        buf.clear();
        core::fmt::write(&mut buf, format_args!("{}", FaultSet::EMPTY)).unwrap();
        assert_eq!(buf.as_str(), "no fault");
    }

    #[test]
    fn a_telemetry_word_reads_back_as_its_set() {
        let set = FaultSet::EMPTY.with(Fault::BusInvalid).with(Fault::SensorStuck);
        assert_eq!(FaultSet::from_bits(set.bits()), set);
        assert_eq!(FaultSet::from_bits(0xffff).iter().count(), Fault::ALL.len());
        assert_eq!(FaultSet::from_bits(0xfc00), FaultSet::EMPTY);
    }
}
