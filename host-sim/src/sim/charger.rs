//! A charger's main loop in the simulation: pi-core's real
//! [`pi_core::charge::ChargeLimit`] (the code a firmware runs), called every
//! `every_ticks` control ticks from `start_s` on with the cell's terminal
//! voltage, its current setpoint handed to the loop as a `SetCurrent`
//! command before the tick, as a firmware's main loop would between two
//! interrupts. The voltage is read ideally at the tick's sampling instant
//! (no divider, filter or ADC: the cell's own terminals).
//!
//! When the charge ends (the taper current, the time limit, or a reading
//! that is no number) the main loop sets 0 A and disables the loop: a
//! finished charger leaves its switch off.

use pi_core::Command;
use pi_core::charge::{ChargeConfig, ChargeEnd, ChargeLimit, ChargePhase};

/// A charge the scenario asks for.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Charge {
    /// The validated settings (pi-core).
    pub config: ChargeConfig,
    /// When the main loop starts it, s.
    pub start_s: f64,
    /// Its period in control ticks.
    pub every_ticks: u64,
}

/// What a charge did, for the report and the pictures.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ChargeRecord {
    /// The set (constant-voltage) level, V.
    pub voltage_v: f64,
    /// The constant current, A.
    pub current_a: f64,
    /// The current that ends the constant-voltage phase, A.
    pub taper_a: f64,
    /// When the limit first took the setpoint below the constant current, s.
    pub constant_voltage_from_s: Option<f64>,
    /// When and why the charge ended.
    pub ended: Option<(f64, ChargeEnd)>,
    /// The highest terminal voltage the limit read, V.
    pub peak_v: f64,
}

/// The charge in words.
pub fn describe_end(end: ChargeEnd) -> &'static str {
    match end {
        ChargeEnd::Taper => "the current tapered to its end level",
        ChargeEnd::TimeLimit => "the time limit passed",
        ChargeEnd::BadReading => "the terminal voltage read as no number",
    }
}

/// The f64 of the shortest decimal that reads back as `x` (the value the
/// scenario wrote, not the f32's binary neighbour of it).
fn decimal(x: f32) -> f64 {
    x.to_string().parse().unwrap_or(x as f64)
}

/// The main loop's charge task (see the module).
#[derive(Clone, Debug)]
pub(crate) struct Charger {
    limit: ChargeLimit,
    plan: Charge,
    ticks: u64,
    record: ChargeRecord,
}

impl Charger {
    pub(crate) fn new(plan: Charge) -> Self {
        let c = plan.config;
        Self {
            limit: ChargeLimit::new(c),
            plan,
            ticks: 0,
            record: ChargeRecord {
                voltage_v: decimal(c.voltage_v()),
                current_a: decimal(c.current_a()),
                taper_a: decimal(c.taper_a()),
                constant_voltage_from_s: None,
                ended: None,
                peak_v: f64::NEG_INFINITY,
            },
        }
    }

    /// One control tick's turn of the main loop at `t_s` with the terminal
    /// voltage (`None`: the load has none, read as no number): the commands
    /// to hand to the loop, in order.
    pub(crate) fn pass(&mut self, t_s: f64, terminal_v: Option<f64>) -> [Option<Command>; 2] {
        if t_s + 1e-12 < self.plan.start_s || self.record.ended.is_some() {
            return [None, None];
        }
        let due = self.ticks.is_multiple_of(self.plan.every_ticks);
        self.ticks += 1;
        if !due {
            return [None, None];
        }
        let v = terminal_v.unwrap_or(f64::NAN);
        if v.is_finite() {
            self.record.peak_v = self.record.peak_v.max(v);
        }
        let setpoint = self.limit.update(v as f32);
        match self.limit.phase() {
            ChargePhase::Ended(why) => {
                self.record.ended = Some((t_s, why));
                [Some(Command::SetCurrent(0.0)), Some(Command::Disable)]
            }
            ChargePhase::ConstantVoltage => {
                self.record.constant_voltage_from_s.get_or_insert(t_s);
                [Some(Command::SetCurrent(setpoint)), None]
            }
            _ => [Some(Command::SetCurrent(setpoint)), None],
        }
    }

    /// Whether the voltage limit sets the current now (constant voltage).
    pub(crate) fn limiting(&self) -> bool {
        self.limit.phase() == ChargePhase::ConstantVoltage
    }

    pub(crate) fn record(&self) -> ChargeRecord {
        self.record
    }
}
