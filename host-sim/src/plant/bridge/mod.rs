//! An H-bridge driven sign-magnitude with centre-aligned PWM, as `pi-core`'s
//! [`pi_core::DriveCommand`] asks for: a direction picks which leg switches, the
//! duty cycle sets its on-time, the other leg holds its low-side switch on.
//!
//! # One PWM period
//!
//! The switching leg's high side is on for `D T`, centred in the period:
//!
//! ```text
//! slow decay:  recirculate | dead | drive (D T) | dead | recirculate
//! fast decay:  all off     |        drive (D T)        | all off
//! ```
//!
//! * **drive**: the bus across the load, less two switch drops.
//! * **recirculate** (slow decay): both low sides on; the current circulates
//!   through them and decays slowly.
//! * **dead**: in slow decay the switching leg changes over with both of its
//!   switches off for the dead time; its body diode carries the current, so the
//!   leg sits one diode drop beyond the rail the current pushes it to. Dead time is
//!   inserted after each edge (the incoming switch is delayed). Fast decay has no
//!   complementary switch and so no dead time.
//! * **all off** (fast decay, or a disabled bridge): four diodes return the current
//!   to the bus; the load sees the bus, plus two diode drops, against its current.
//!   A current that reaches zero in a diode state stays at zero until the state
//!   ends (discontinuous conduction); conduction driven by a back-EMF above the bus
//!   plus two diode drops is not modelled.
//!
//! # Drops and the bus
//!
//! Each conducting switch drops `Rds_on * i` (MOSFET) or a fixed voltage against
//! the current (bipolar transistor); each diode a fixed forward voltage. The bus is
//! a source with a series resistance: `bus = supply - R_source * i_supply`, where
//! `i_supply` is positive when the bus delivers power and negative when the load
//! returns it (diode conduction into the bus). Within one interval the drops and
//! the bus use the current at the interval's start.
//!
//! # Averaged and switching modes
//!
//! In switching mode the runner steps the load through every interval, so the
//! current ripple is in the result. In averaged mode it applies, over the whole
//! period, the time-weighted mean of the same intervals' voltages; ripple is gone
//! and the simulation is several times faster.
//!
//! Sign convention: `terminal_v` is positive when it drives forward current.

use pi_core::{Direction, DriveCommand};

use crate::model_error::ModelError;

/// How the runner steps the bridge.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Modulation {
    /// The mean voltage over each PWM period.
    Averaged,
    /// Every edge of every PWM period.
    Switching,
}

/// What the switching leg does during the off-time.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Decay {
    /// Both low sides on: the current recirculates in the bridge.
    Slow,
    /// All switches off: the current returns to the bus through the diodes.
    Fast,
}

/// The voltage lost across one conducting switch.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum SwitchDrop {
    /// A MOSFET: `Rds_on * i`, ohm.
    OnResistance(f64),
    /// A bipolar transistor: a fixed saturation voltage against the current, volts.
    Fixed(f64),
}

impl SwitchDrop {
    fn volts(self, current_a: f64) -> f64 {
        match self {
            SwitchDrop::OnResistance(r) => r * current_a,
            SwitchDrop::Fixed(v) => {
                if current_a == 0.0 {
                    0.0
                } else {
                    v * current_a.signum()
                }
            }
        }
    }
}

/// Bridge parameters, SI units.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BridgeParams {
    /// Open-circuit supply voltage, volts (> 0).
    pub supply_v: f64,
    /// Series resistance of the supply and its wiring, ohm (>= 0).
    pub source_resistance_ohm: f64,
    /// PWM carrier frequency, hertz (> 0).
    pub pwm_frequency_hz: f64,
    /// Averaged or switching.
    pub modulation: Modulation,
    /// Dead time at each edge in slow decay, seconds (>= 0, below half a period).
    pub dead_time_s: f64,
    /// Drop of each conducting switch.
    pub switch: SwitchDrop,
    /// Forward voltage of each body or free-wheel diode, volts (>= 0).
    pub diode_drop_v: f64,
    /// Off-time behaviour (H-bridge only).
    pub decay: Decay,
    /// The switches.
    pub topology: Topology,
}

impl BridgeParams {
    /// An ideal bridge: no drops, no dead time, stiff supply, slow decay, averaged.
    pub fn ideal(supply_v: f64, pwm_frequency_hz: f64) -> Self {
        Self {
            supply_v,
            source_resistance_ohm: 0.0,
            pwm_frequency_hz,
            modulation: Modulation::Averaged,
            dead_time_s: 0.0,
            switch: SwitchDrop::OnResistance(0.0),
            diode_drop_v: 0.0,
            decay: Decay::Slow,
            topology: Topology::HBridge,
        }
    }

    /// The resistance the switches put in series with the load while the
    /// bridge drives it, ohm: two MOSFETs' on-resistance (a high side and
    /// the other leg's low side; in slow decay the two low sides), 0 for
    /// bipolar switches, whose drop is a voltage. A bench measurement of R
    /// through the bridge reads the winding plus this.
    pub fn series_resistance_ohm(&self) -> f64 {
        let switches = match self.topology {
            Topology::HBridge => 2.0,
            Topology::LowSide => 1.0,
        };
        match self.switch {
            SwitchDrop::OnResistance(r) => switches * r,
            SwitchDrop::Fixed(_) => 0.0,
        }
    }
}

/// The state of the bridge during one interval of a PWM period.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum BridgeState {
    /// Bus across the load.
    Drive,
    /// Both low sides on.
    Recirculate,
    /// The switching leg in its dead time.
    Dead,
    /// All switches off.
    AllOff,
}

impl BridgeState {
    /// Every state, in the order of their discriminants.
    pub const ALL: [BridgeState; 4] = [
        BridgeState::Drive,
        BridgeState::Recirculate,
        BridgeState::Dead,
        BridgeState::AllOff,
    ];

    /// Diodes carry the current, so it cannot pass through zero.
    pub fn diode_clamped(self) -> bool {
        matches!(self, BridgeState::Dead | BridgeState::AllOff)
    }
}

/// The share of one PWM period spent in each bridge state: what the averaged
/// mode applies. The shares sum to one.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Mix {
    /// Share per state, indexed as [`BridgeState::ALL`].
    shares: [f64; 4],
    /// +1 forward, -1 reverse.
    pub sign: f64,
}

impl Mix {
    /// Each state present in the period with its share of it.
    pub fn shares(&self) -> impl Iterator<Item = (BridgeState, f64)> + '_ {
        BridgeState::ALL
            .into_iter()
            .zip(self.shares)
            .filter(|&(_, w)| w > 0.0)
    }

    /// Whether only diodes conduct in every state of the mix (the current can
    /// stop at zero).
    pub fn diode_clamped(&self) -> bool {
        self.shares().all(|(state, _)| state.diode_clamped())
    }
}

/// +1 for a forward command, -1 for a reverse one.
fn direction_sign(command: &DriveCommand) -> f64 {
    match command.direction {
        Direction::Forward => 1.0,
        Direction::Reverse => -1.0,
    }
}

/// What the bridge puts on the load in one state.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Output {
    /// Voltage across the load, volts (positive drives forward current).
    pub terminal_v: f64,
    /// Current drawn from the supply, amperes (negative: returned to it).
    pub supply_a: f64,
    /// Voltage at the bridge's supply terminals, volts.
    pub bus_v: f64,
}

/// The bridge.
#[derive(Clone, Debug)]
pub struct Bridge {
    params: BridgeParams,
    supply_v: f64,
}

impl Bridge {
    /// A bridge from validated parameters.
    pub fn new(params: BridgeParams) -> Result<Self, ModelError> {
        // Ranges past any board this models: a 10 kV bus, 1 kohm of source,
        // PWM from 10 Hz to 10 MHz.
        ModelError::within("bridge.supply_v", params.supply_v, 1e-3, 1e4)?;
        ModelError::within(
            "bridge.source_resistance_ohm",
            params.source_resistance_ohm,
            0.0,
            1e3,
        )?;
        ModelError::within("bridge.pwm_frequency_hz", params.pwm_frequency_hz, 10.0, 1e7)?;
        ModelError::non_negative("bridge.dead_time_s", params.dead_time_s)?;
        if params.dead_time_s >= 0.5 / params.pwm_frequency_hz {
            return Err(ModelError::new(
                "bridge.dead_time_s",
                params.dead_time_s,
                "shorter than half a PWM period",
            ));
        }
        match params.switch {
            SwitchDrop::OnResistance(r) => ModelError::within("bridge.rds_on_ohm", r, 0.0, 1e3)?,
            SwitchDrop::Fixed(v) => ModelError::within("bridge.switch_drop_v", v, 0.0, 1e3)?,
        };
        ModelError::within("bridge.diode_drop_v", params.diode_drop_v, 0.0, 1e3)?;
        if params.topology == Topology::LowSide && params.dead_time_s != 0.0 {
            return Err(ModelError::new(
                "bridge.dead_time_s",
                params.dead_time_s,
                "0 (left out) with topology = \"low_side\": one switch has no complementary one to wait for",
            ));
        }
        Ok(Self {
            supply_v: params.supply_v,
            params,
        })
    }

    /// The parameters.
    pub fn params(&self) -> &BridgeParams {
        &self.params
    }

    /// PWM period, seconds.
    pub fn pwm_period_s(&self) -> f64 {
        1.0 / self.params.pwm_frequency_hz
    }

    /// Present open-circuit supply voltage, volts.
    pub fn supply_v(&self) -> f64 {
        self.supply_v
    }

    /// Changes the supply voltage (a bus dip or surge), volts.
    pub fn set_supply_v(&mut self, supply_v: f64) {
        self.supply_v = supply_v;
    }

    /// The intervals of one PWM period for a drive command. A disabled command, and
    /// a duty of zero in fast decay, leave everything off; a duty of one drives the
    /// whole period. The duty is taken as given (the controller limits it).
    pub fn pattern(&self, command: &DriveCommand) -> Pattern {
        let mut p = Pattern {
            intervals: [Interval {
                start_s: 0.0,
                end_s: 0.0,
                state: BridgeState::AllOff,
            }; 5],
            len: 0,
            sign: self.sign(command),
        };
        self.lay_out(command, |start_s, end_s, state| p.push(start_s, end_s, state));
        p
    }

    /// The share of the period each state of [`Bridge::pattern`] takes, without
    /// the intervals: what the averaged mode needs, built in registers.
    #[inline]
    pub fn mix(&self, command: &DriveCommand) -> Mix {
        let period_s = self.pwm_period_s();
        // Summed in locals, not in an array: a vector load of lanes written one by
        // one just before stalls the processor for longer than the sums take.
        let (mut drive, mut recirculate, mut dead, mut off) = (0.0, 0.0, 0.0, 0.0);
        self.lay_out(command, |start_s, end_s, state| {
            if end_s > start_s {
                let w = (end_s - start_s) / period_s;
                match state {
                    BridgeState::Drive => drive += w,
                    BridgeState::Recirculate => recirculate += w,
                    BridgeState::Dead => dead += w,
                    BridgeState::AllOff => off += w,
                }
            }
        });
        Mix {
            shares: [drive, recirculate, dead, off],
            sign: self.sign(command),
        }
    }

    /// +1 forward, -1 reverse; a low-side switch drives one way only.
    #[inline]
    fn sign(&self, command: &DriveCommand) -> f64 {
        match self.params.topology {
            Topology::HBridge => direction_sign(command),
            Topology::LowSide => 1.0,
        }
    }

    /// The period's intervals in order, handed to `emit` as (start, end, state);
    /// empty ones included (the receiver drops them).
    #[inline]
    fn lay_out(&self, command: &DriveCommand, mut emit: impl FnMut(f64, f64, BridgeState)) {
        let t = self.pwm_period_s();
        let duty = if command.duty.is_finite() {
            (command.duty as f64).clamp(0.0, 1.0)
        } else {
            0.0
        };
        let low_side = self.params.topology == Topology::LowSide;
        // A low-side switch cannot reverse: a reverse command leaves it off.
        if !command.enabled || (low_side && command.direction == Direction::Reverse) {
            emit(0.0, t, BridgeState::AllOff);
            return;
        }
        let off = match (low_side, self.params.decay) {
            (false, Decay::Slow) => BridgeState::Recirculate,
            _ => BridgeState::AllOff,
        };
        if duty <= 0.0 {
            emit(0.0, t, off);
            return;
        }
        if duty >= 1.0 {
            emit(0.0, t, BridgeState::Drive);
            return;
        }
        let t1 = 0.5 * (1.0 - duty) * t;
        let t2 = 0.5 * (1.0 + duty) * t;
        let td = match (low_side, self.params.decay) {
            (false, Decay::Slow) => self.params.dead_time_s,
            _ => 0.0,
        };
        emit(0.0, t1, off);
        let on_start = (t1 + td).min(t2);
        emit(t1, on_start, BridgeState::Dead);
        emit(on_start, t2, BridgeState::Drive);
        let off_start = (t2 + td).min(t);
        emit(t2, off_start, BridgeState::Dead);
        emit(off_start, t, off);
    }

    /// The time-weighted mean of [`Bridge::output`] over a period's mix of
    /// states, with the load carrying `current_a` throughout.
    #[inline]
    pub fn mean_output(&self, mix: &Mix, current_a: f64) -> Output {
        let (i, drop) = self.frame(mix.sign, current_a);
        let mut mean = Output {
            terminal_v: 0.0,
            supply_a: 0.0,
            bus_v: 0.0,
        };
        // Over the four states by index, so the compiler unrolls the loop and
        // resolves each state's match at build time.
        for (state, w) in BridgeState::ALL.into_iter().zip(mix.shares) {
            if w <= 0.0 {
                continue;
            }
            let out = self.output_in_frame(state, mix.sign, i, drop);
            mean.terminal_v += out.terminal_v * w;
            mean.supply_a += out.supply_a * w;
            mean.bus_v += out.bus_v * w;
        }
        mean
    }

    /// What the bridge puts on the load in `state` with the load carrying
    /// `current_a`, for the direction `sign` (+1 forward, -1 reverse).
    pub fn output(&self, state: BridgeState, sign: f64, current_a: f64) -> Output {
        let (i, drop) = self.frame(sign, current_a);
        self.output_in_frame(state, sign, i, drop)
    }

    /// The current in the frame of the switching leg (`i' = sign * i`; the load
    /// voltage is `v = sign * v'`), and one conducting switch's drop at it.
    #[inline]
    fn frame(&self, sign: f64, current_a: f64) -> (f64, f64) {
        let i = sign * current_a;
        (i, self.params.switch.volts(i))
    }

    /// [`Bridge::output`] with the current `i` already in the leg's frame and
    /// the switch drop `drop` at it.
    #[inline]
    fn output_in_frame(&self, state: BridgeState, sign: f64, i: f64, drop: f64) -> Output {
        let p = &self.params;
        let vd = p.diode_drop_v;
        if p.topology == Topology::LowSide {
            return self.low_side(state, i, drop);
        }
        // Supply current first (it sets the bus), then the voltage on the load.
        let supply_a = match state {
            BridgeState::Drive => i,
            BridgeState::Recirculate => 0.0,
            BridgeState::Dead => i.min(0.0),
            BridgeState::AllOff => -i.abs(),
        };
        let bus_v = self.supply_v - p.source_resistance_ohm * supply_a;
        let v = match state {
            BridgeState::Drive => bus_v - 2.0 * drop,
            BridgeState::Recirculate => -2.0 * drop,
            BridgeState::Dead if i >= 0.0 => -vd - drop,
            BridgeState::Dead => bus_v + vd - drop,
            BridgeState::AllOff if i > 0.0 => -(bus_v + 2.0 * vd),
            BridgeState::AllOff if i < 0.0 => bus_v + 2.0 * vd,
            BridgeState::AllOff => 0.0,
        };
        Output {
            terminal_v: sign * v,
            supply_a,
            bus_v,
        }
    }
}

mod low_side;
mod pattern;
pub use low_side::Topology;
pub use pattern::{Interval, Pattern};

#[cfg(test)]
mod tests;
