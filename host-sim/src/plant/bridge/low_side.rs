//! One low-side switch with a freewheel diode across the load: the
//! topology that drives current one way only.

use super::{Bridge, BridgeState, Output};

/// Which switches drive the load.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Topology {
    /// An H-bridge, sign-magnitude: either direction.
    HBridge,
    /// One low-side switch with a freewheel diode across the load: the bus
    /// while the switch is on, the diode's drop against the current while
    /// it is off; current one way only (a valve, a solenoid, an LED string,
    /// a charger). No dead time, no direction: a reverse command is off.
    LowSide,
}

impl Bridge {
    /// [`Bridge::output`] of a low-side switch: on, the bus less the switch's
    /// drop; off, the freewheel diode holds the load at one drop below zero
    /// while the current flows forward, the switch's body diode one drop
    /// above the bus while a source drives it backward, and nothing at zero.
    #[inline]
    pub(super) fn low_side(&self, state: BridgeState, i: f64, drop: f64) -> Output {
        let p = &self.params;
        let vd = p.diode_drop_v;
        let on = state == BridgeState::Drive;
        // Forward current in the off-time circulates through the freewheel
        // diode, away from the supply.
        let supply_a = if on || i < 0.0 { i } else { 0.0 };
        let bus_v = self.supply_v - p.source_resistance_ohm * supply_a;
        let terminal_v = if on {
            bus_v - drop
        } else if i > 0.0 {
            -vd
        } else if i < 0.0 {
            bus_v + vd
        } else {
            0.0
        };
        Output {
            terminal_v,
            supply_a,
            bus_v,
        }
    }

    /// Whether the load's current can only flow one way (a low-side switch).
    pub fn one_way(&self) -> bool {
        self.params.topology == Topology::LowSide
    }
}
