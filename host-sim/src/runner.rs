//! A minimal closed-loop runner: an averaged H-bridge, an ideal ADC and an
//! [`RlLoad`], around the real [`pi_core::CurrentLoop`].
//!
//! Each control tick:
//!
//! 1. the ADC samples the load current (rounded to the nearest count, limited to
//!    the ADC range);
//! 2. [`CurrentLoop::tick`] computes the next drive command;
//! 3. the bridge applies, for one control period, the command computed on the
//!    *previous* tick: the one-sample computation delay of a loop that samples at
//!    the start of a PWM period and updates the duty for the next one.
//!
//! The bridge is averaged: an enabled bridge puts `signed_duty * bus_v` across the
//! load. A disabled bridge lets the current free-wheel through the switches' body
//! diodes back into the bus, which puts `-bus_v` (against the current) across the
//! load until the current reaches zero, where it stays (diode drops neglected).

use pi_core::{CurrentLoop, DriveCommand, TickInput};

use crate::rl_load::RlLoad;

/// An ideal ADC channel: `counts = round(offset + i / amps_per_count)` in `[0, full_scale]`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct IdealAdc {
    /// Counts at zero current.
    pub offset_counts: f64,
    /// Amperes per count (the same scale the firmware's calibration assumes).
    pub amps_per_count: f64,
    /// Largest count.
    pub full_scale_counts: u16,
}

impl IdealAdc {
    /// The reading for a current.
    pub fn sample(&self, current_a: f64) -> u16 {
        let c = (self.offset_counts + current_a / self.amps_per_count).round();
        c.clamp(0.0, self.full_scale_counts as f64) as u16
    }
}

/// What happened in one tick.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TickRecord {
    /// Time at the start of the tick, seconds.
    pub t_s: f64,
    /// The current the ADC sampled at `t_s`, amperes (true value).
    pub current_a: f64,
    /// The reading it gave.
    pub counts: u16,
    /// The command the loop returned at `t_s` (applied during the next period).
    pub command: DriveCommand,
    /// Volts the bridge put across the load during this period.
    pub applied_v: f64,
}

/// Load, ADC and bridge around one current loop.
#[derive(Clone, Debug)]
pub struct ClosedLoop {
    /// The load.
    pub load: RlLoad,
    /// The current-sense ADC.
    pub adc: IdealAdc,
    /// Bus voltage, volts (what the firmware measures and what the bridge applies).
    pub bus_v: f64,
    /// Series source voltage in the load (back-EMF or a disturbance), volts.
    pub source_v: f64,
    period_s: f64,
    pending: DriveCommand,
    t_s: f64,
}

impl ClosedLoop {
    /// A runner at rest for a loop with control period `period_s`.
    pub fn new(load: RlLoad, adc: IdealAdc, bus_v: f64, period_s: f64) -> Self {
        Self {
            load,
            adc,
            bus_v,
            source_v: 0.0,
            period_s,
            pending: DriveCommand::SAFE,
            t_s: 0.0,
        }
    }

    /// Runs one control tick of `cl` and one control period of the plant.
    pub fn tick(&mut self, cl: &mut CurrentLoop) -> TickRecord {
        let current_a = self.load.current_a();
        let counts = self.adc.sample(current_a);
        let command = cl.tick(&TickInput {
            current_counts: counts,
            bus_v: self.bus_v as f32,
            speed_rad_s: None,
        });
        let applied = std::mem::replace(&mut self.pending, command);
        let applied_v = self.advance(&applied);
        let record = TickRecord {
            t_s: self.t_s,
            current_a,
            counts,
            command,
            applied_v,
        };
        self.t_s += self.period_s;
        record
    }

    fn advance(&mut self, applied: &DriveCommand) -> f64 {
        if applied.enabled {
            let v = applied.signed_duty() as f64 * self.bus_v;
            self.load.step(v, self.source_v, self.period_s);
            return v;
        }
        let i0 = self.load.current_a();
        if i0 == 0.0 {
            return 0.0;
        }
        let v = -i0.signum() * self.bus_v;
        let i1 = self.load.step(v, self.source_v, self.period_s);
        if i1.signum() != i0.signum() {
            self.load.set_current_a(0.0);
        }
        v
    }

    /// Time of the next tick, seconds.
    pub fn time_s(&self) -> f64 {
        self.t_s
    }
}
