//! What a run leaves behind: one point per control tick, optionally the current at
//! every PWM edge, and a log of commands the controller refused.

use std::io::{self, Write};

/// One control tick.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TracePoint {
    /// Sampling instant, seconds.
    pub t_s: f64,
    /// The latest current requested by the scenario's events, amperes.
    pub request_a: f64,
    /// The setpoint the controller used this tick (limited and slewed), amperes.
    pub setpoint_a: f64,
    /// The true winding current at the sampling instant, amperes.
    pub current_a: f64,
    /// The current the controller read, amperes.
    pub measured_a: f64,
    /// The ADC reading it came from (after any injected sensor fault).
    pub counts: u16,
    /// The voltage the controller asked for, volts.
    pub commanded_v: f64,
    /// The duty it returned, signed by direction (0 when disabled).
    pub duty: f64,
    /// Whether the returned command enables the bridge.
    pub enabled: bool,
    /// Shaft speed, rad/s.
    pub speed_rad_s: f64,
    /// Bus voltage the controller was given, volts.
    pub bus_v: f64,
    /// Mean current drawn from the supply since the previous tick, amperes
    /// (negative: returned to it).
    pub supply_a: f64,
    /// Winding temperature, C.
    pub winding_c: f64,
    /// Latched faults (the bits of [`pi_core::FaultSet`]).
    pub fault_bits: u16,
    /// The controller's state: 0 disabled, 1 running, 2 faulted.
    pub state: u8,
}

/// The current at a PWM edge (switching mode only, when asked for).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct EdgePoint {
    /// Time, seconds.
    pub t_s: f64,
    /// Winding current, amperes.
    pub current_a: f64,
    /// Terminal voltage during the interval that ends here, volts.
    pub terminal_v: f64,
}

/// Something that happened during a run and is worth telling.
#[derive(Clone, Debug, PartialEq)]
pub struct LogEntry {
    /// When, seconds.
    pub t_s: f64,
    /// What, in one sentence.
    pub text: String,
}

/// A whole run.
#[derive(Clone, Debug, Default)]
pub struct Trace {
    /// One point per control tick.
    pub points: Vec<TracePoint>,
    /// PWM edges, if recorded.
    pub edges: Vec<EdgePoint>,
    /// Refused commands and other notes.
    pub log: Vec<LogEntry>,
}

/// The CSV header of [`Trace::write_csv`].
pub const CSV_HEADER: &str = "t_s,request_a,setpoint_a,current_a,measured_a,counts,commanded_v,duty,enabled,speed_rad_s,bus_v,supply_a,winding_c,fault_bits,state";

impl Trace {
    /// Writes the per-tick points as CSV (header [`CSV_HEADER`], SI units,
    /// `.` decimal point, one row per tick).
    pub fn write_csv(&self, out: &mut dyn Write) -> io::Result<()> {
        writeln!(out, "{CSV_HEADER}")?;
        for p in &self.points {
            writeln!(
                out,
                "{:.9e},{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
                p.t_s,
                p.request_a,
                p.setpoint_a,
                p.current_a,
                p.measured_a,
                p.counts,
                p.commanded_v,
                p.duty,
                u8::from(p.enabled),
                p.speed_rad_s,
                p.bus_v,
                p.supply_a,
                p.winding_c,
                p.fault_bits,
                p.state
            )?;
        }
        Ok(())
    }

    /// Writes the edge points as CSV (`t_s,current_a,terminal_v`).
    pub fn write_edges_csv(&self, out: &mut dyn Write) -> io::Result<()> {
        writeln!(out, "t_s,current_a,terminal_v")?;
        for e in &self.edges {
            writeln!(out, "{:.9e},{},{}", e.t_s, e.current_a, e.terminal_v)?;
        }
        Ok(())
    }
}
