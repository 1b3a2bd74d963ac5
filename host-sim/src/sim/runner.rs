//! The closed-loop runner: the drive chain's blocks around a controller, stepped
//! PWM period by PWM period.
//!
//! Each PWM period the runner
//!
//! 1. applies the fault injectors for that moment (supply level, held rotor,
//!    extra load torque);
//! 2. loads the drive command whose time has come (see [`crate::plant::timing`]);
//! 3. asks the bridge for the period's intervals and steps the load through them
//!    (switching mode), or through their mean voltage (averaged mode), stopping at
//!    the sampling instant when a control tick falls in this period;
//! 4. at the sampling instant converts the filtered sense signal, passes the
//!    reading through the sensor injectors, reads the bus voltage at the bridge
//!    at that instant (ideal bus sensing), and calls the controller, which for a
//!    real run is the real [`pi_core::CurrentLoop`]: the same code the firmware
//!    runs, not a copy of it.
//!
//! Scenario events (enable, a new setpoint, a retune) are handed to the controller
//! before the first tick at or after their time, as the firmware's main loop would
//! between two interrupts; then a charger's turn ([`crate::sim::charger`]).

use std::collections::VecDeque;

use pi_core::{Command, DriveCommand};

pub use super::controller::{Controller, ControllerView, LinearPi, Measurement};

use crate::plant::bridge::{Bridge, BridgeState, Modulation, Output, Pattern};
use crate::plant::faults::Injectors;
use crate::plant::load::Load;
use crate::plant::motor::MotorDrive;
use crate::plant::sense_chain::SenseChain;
use crate::plant::timing::Timing;
use crate::sim::charger::{Charge, Charger};
use crate::sim::trace::{EdgePoint, LogEntry, Trace, TracePoint};

/// A scheduled command.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Event {
    /// When, seconds.
    pub at_s: f64,
    /// What.
    pub command: Command,
}

/// The plant side of the loop.
#[derive(Clone, Debug)]
pub struct DriveChain {
    /// The load between the bridge's terminals (a motor, a winding, ...).
    pub load: Box<dyn Load>,
    /// The bridge.
    pub bridge: Bridge,
    /// The current-sense chain.
    pub sense: SenseChain,
    /// Injected faults.
    pub injectors: Injectors,
    /// Load torque profile: from each time on, this torque (N m).
    pub load_profile: Vec<(f64, f64)>,
    /// Whether the firmware is given the shaft speed.
    pub speed_feedback: bool,
}

/// What happened at a tick besides its trace point, for whoever watches the
/// run tick by tick.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct TickNote {
    /// A retune command was handed to the controller before this tick.
    pub retuned: bool,
    /// The supply is off its nominal level (an injected dip or surge).
    pub bus_event: bool,
    /// An injected sensor fault changed the reading.
    pub sensor_fault: bool,
    /// A charger's voltage limit set the current this tick (constant
    /// voltage): the request follows the cell, not the scenario.
    pub charge_limited: bool,
}

/// The runner.
#[derive(Clone, Debug)]
pub struct Runner {
    chain: DriveChain,
    timing: Timing,
    events: Vec<Event>,
    next_event: usize,
    pending: VecDeque<(u64, DriveCommand)>,
    active: DriveCommand,
    period: u64,
    request_a: f64,
    record_edges: bool,
    record_every: u64,
    ticks: u64,
    charge_a_s: f64,
    charge_time_s: f64,
    charger: Option<Charger>,
    trace: Trace,
}

impl Runner {
    /// A runner at `t = 0` with the bridge off. Events are sorted by time.
    pub fn new(chain: DriveChain, timing: Timing, mut events: Vec<Event>) -> Self {
        events.sort_by(|a, b| a.at_s.total_cmp(&b.at_s));
        let chain_readouts = chain.load.readouts();
        Self {
            chain,
            timing,
            events,
            next_event: 0,
            pending: VecDeque::new(),
            active: DriveCommand::SAFE,
            period: 0,
            request_a: 0.0,
            record_edges: false,
            record_every: 1,
            ticks: 0,
            charge_a_s: 0.0,
            charge_time_s: 0.0,
            charger: None,
            trace: Trace {
                readouts: chain_readouts,
                ..Trace::default()
            },
        }
    }

    /// Records the current at every PWM edge as well (switching mode).
    pub fn record_edges(mut self, on: bool) -> Self {
        self.record_edges = on;
        self
    }

    /// Runs a charger's main loop (pi-core's charge limit) as well; see
    /// [`crate::sim::charger`].
    pub fn with_charge(mut self, charge: Option<Charge>) -> Self {
        self.charger = charge.map(Charger::new);
        self
    }

    /// Keeps one trace point in `every` ticks (1: all of them), for long runs.
    /// The controller still runs every tick; only the record is thinned.
    pub fn record_every(mut self, every: u64) -> Self {
        self.record_every = every.max(1);
        self
    }

    /// Time of the next PWM period's start, seconds.
    pub fn time_s(&self) -> f64 {
        self.period as f64 * self.chain.bridge.pwm_period_s()
    }

    /// The drive chain.
    pub fn chain(&self) -> &DriveChain {
        &self.chain
    }

    /// The drive chain, to change it mid-run.
    pub fn chain_mut(&mut self) -> &mut DriveChain {
        &mut self.chain
    }

    /// The trace so far.
    pub fn trace(&self) -> &Trace {
        &self.trace
    }

    /// Ends the run and hands over its trace.
    pub fn into_trace(mut self) -> Trace {
        self.trace.charge = self.charger.as_ref().map(Charger::record);
        self.trace
    }

    /// Runs until `duration_s`, calling `progress` with the fraction done about a
    /// hundred times.
    pub fn run<C: Controller + ?Sized>(
        &mut self,
        controller: &mut C,
        duration_s: f64,
        progress: &mut dyn FnMut(f64),
    ) {
        self.run_observed(controller, duration_s, progress, &mut |_, _| {});
    }

    /// [`Runner::run`], and `observe` called with every control tick's point
    /// and note, whether the trace keeps it or not.
    pub fn run_observed<C: Controller + ?Sized>(
        &mut self,
        controller: &mut C,
        duration_s: f64,
        progress: &mut dyn FnMut(f64),
        observe: &mut dyn FnMut(&TracePoint, &TickNote),
    ) {
        let t_pwm = self.chain.bridge.pwm_period_s();
        let total = (duration_s / t_pwm).round().max(0.0) as u64;
        let every = (total / 100).max(1);
        // The trace's length is known: one allocation, no copies as it grows.
        let kept = total.saturating_sub(self.period) / self.timing.periods_per_tick() / self.record_every + 1;
        self.trace.points.reserve(usize::try_from(kept).unwrap_or(0));
        while self.period < total {
            if let Some((p, note)) = self.step_period(controller) {
                observe(&p, &note);
            }
            if self.period.is_multiple_of(every) {
                progress(self.period as f64 / total as f64);
            }
        }
    }

    /// Runs `ticks` control ticks.
    pub fn run_ticks<C: Controller + ?Sized>(&mut self, controller: &mut C, ticks: u64) {
        let end = self.period + ticks * self.timing.periods_per_tick();
        self.trace
            .points
            .reserve(usize::try_from(ticks / self.record_every + 1).unwrap_or(0));
        while self.period < end {
            self.step_period(controller);
        }
    }

    /// Advances one PWM period; returns the control tick's point and note when
    /// one fell in it (every tick's, whether the trace keeps it or not).
    pub fn step_period<C: Controller + ?Sized>(
        &mut self,
        controller: &mut C,
    ) -> Option<(TracePoint, TickNote)> {
        let t_pwm = self.chain.bridge.pwm_period_s();
        let t0 = self.period as f64 * t_pwm;
        let nominal = self.chain.bridge.params().supply_v;
        let supply = self.chain.injectors.supply_v(t0, nominal);
        self.chain.bridge.set_supply_v(supply);
        while let Some(&(at, cmd)) = self.pending.front() {
            if at > self.period {
                break;
            }
            self.active = cmd;
            self.pending.pop_front();
        }
        let load = self.load_torque(t0);
        let held = self.chain.injectors.rotor_held(t0);
        let drive = MotorDrive {
            terminal_v: 0.0,
            load_torque_n_m: load,
            held,
        };
        let tick_here = self.period.is_multiple_of(self.timing.periods_per_tick());
        let sample_at = self.timing.sample_offset_s();
        let mut tick = None;
        match self.chain.bridge.params().modulation {
            Modulation::Switching => {
                let pattern = self.chain.bridge.pattern(&self.active);
                let mut sampled = !tick_here;
                for iv in pattern.intervals() {
                    let mut start = iv.start_s;
                    if !sampled && sample_at >= start && sample_at < iv.end_s {
                        self.interval(&pattern, iv.state, &drive, t0 + start, sample_at - start);
                        let bus = self.bus_now(&pattern, sample_at);
                        tick = Some(self.sample(controller, t0 + sample_at, bus, self.period));
                        sampled = true;
                        start = sample_at;
                    }
                    self.interval(&pattern, iv.state, &drive, t0 + start, iv.end_s - start);
                }
            }
            Modulation::Averaged => {
                let mix = self.chain.bridge.mix(&self.active);
                let clamped = mix.diode_clamped();
                let mut mean = self.chain.bridge.mean_output(&mix, self.chain.load.current_a());
                let mut done = 0.0;
                if tick_here && sample_at > 0.0 {
                    self.averaged(&mean, clamped, &drive, sample_at);
                    done = sample_at;
                    // The bus at the sample and the rest of the period's drive both
                    // follow from the current now.
                    mean = self.chain.bridge.mean_output(&mix, self.chain.load.current_a());
                }
                if tick_here {
                    tick = Some(self.sample(controller, t0 + sample_at, mean.bus_v, self.period));
                }
                self.averaged(&mean, clamped, &drive, t_pwm - done);
            }
        }
        self.period += 1;
        tick
    }

    /// The bus voltage at the bridge now, in the state at `at_s` into the period
    /// (switching mode).
    fn bus_now(&self, pattern: &Pattern, at_s: f64) -> f64 {
        let i = self.chain.load.current_a();
        self.chain
            .bridge
            .output(pattern.state_at(at_s), pattern.sign, i)
            .bus_v
    }

    fn load_torque(&self, t_s: f64) -> f64 {
        let profile = self
            .chain
            .load_profile
            .iter()
            .take_while(|(at, _)| *at <= t_s)
            .last()
            .map_or(0.0, |(_, tq)| *tq);
        profile + self.chain.injectors.extra_torque_n_m(t_s)
    }

    /// One interval in one bridge state.
    fn interval(&mut self, pattern: &Pattern, state: BridgeState, drive: &MotorDrive, t_s: f64, dt_s: f64) {
        if dt_s <= 0.0 {
            return;
        }
        let i0 = self.chain.load.current_a();
        let out = self.chain.bridge.output(state, pattern.sign, i0);
        if state.diode_clamped() {
            self.clamped_step(out.terminal_v, drive, dt_s);
        } else {
            self.chain.load.step(
                &MotorDrive {
                    terminal_v: out.terminal_v,
                    ..*drive
                },
                dt_s,
            );
        }
        let i1 = self.chain.load.current_a();
        self.chain.sense.advance(i1, dt_s);
        self.charge_a_s += out.supply_a * dt_s;
        self.charge_time_s += dt_s;
        if self.record_edges {
            self.trace.edges.push(EdgePoint {
                t_s: t_s + dt_s,
                current_a: i1,
                terminal_v: out.terminal_v,
            });
        }
    }

    /// A step in which only diodes conduct: the current stops at zero.
    fn clamped_step(&mut self, terminal_v: f64, drive: &MotorDrive, dt_s: f64) {
        let load = &mut self.chain.load;
        let mut rest = dt_s;
        if load.current_a() != 0.0 {
            match load.time_to_zero_s(terminal_v, dt_s) {
                None => {
                    let i0 = load.current_a();
                    load.step(&MotorDrive { terminal_v, ..*drive }, dt_s);
                    if load.current_a() * i0 < 0.0 {
                        load.stop_current();
                    }
                    return;
                }
                Some(t) => {
                    load.step(&MotorDrive { terminal_v, ..*drive }, t);
                    load.stop_current();
                    rest = dt_s - t;
                }
            }
        }
        if rest > 0.0 {
            // No current: the terminals float at the back-EMF.
            let floating = load.open_circuit_v();
            load.step(
                &MotorDrive {
                    terminal_v: floating,
                    ..*drive
                },
                rest,
            );
            load.stop_current();
        }
    }

    /// `dt_s` of the period at the mean of the bridge's output over the period
    /// (averaged mode), taken at the current at the step's start; `clamped`
    /// when only diodes conduct.
    fn averaged(&mut self, mean: &Output, clamped: bool, drive: &MotorDrive, dt_s: f64) {
        if dt_s <= 0.0 {
            return;
        }
        self.charge_a_s += mean.supply_a * dt_s;
        self.charge_time_s += dt_s;
        // A one-way drive's current that the mean voltage pulls down stops at
        // zero, as its diode would within the period.
        let falling = self.chain.bridge.one_way() && mean.terminal_v < self.chain.load.open_circuit_v();
        if clamped || falling {
            self.clamped_step(mean.terminal_v, drive, dt_s);
        } else {
            self.chain.load.step(
                &MotorDrive {
                    terminal_v: mean.terminal_v,
                    ..*drive
                },
                dt_s,
            );
        }
        let i1 = self.chain.load.current_a();
        self.chain.sense.advance(i1, dt_s);
    }

    fn sample<C: Controller + ?Sized>(
        &mut self,
        controller: &mut C,
        t_s: f64,
        bus_v: f64,
        period: u64,
    ) -> (TracePoint, TickNote) {
        let mut note = TickNote::default();
        // The scenario's commands due by now.
        while let Some(ev) = self.events.get(self.next_event) {
            if ev.at_s > t_s + 1e-12 {
                break;
            }
            match ev.command {
                Command::SetCurrent(a) => self.request_a = a as f64,
                Command::Retune(_) => note.retuned = true,
                _ => {}
            }
            if let Err(why) = controller.command(ev.command) {
                self.trace.log.push(LogEntry {
                    t_s,
                    text: format!("{} refused: {why}", describe(&ev.command)),
                });
            }
            self.next_event += 1;
        }
        if let Some(ch) = &mut self.charger {
            for cmd in ch.pass(t_s, self.chain.load.sensed_v()).into_iter().flatten() {
                if let Command::SetCurrent(a) = cmd {
                    self.request_a = a as f64;
                }
                if let Err(why) = controller.command(cmd) {
                    self.trace.log.push(LogEntry {
                        t_s,
                        text: format!("the charger's {} refused: {why}", describe(&cmd)),
                    });
                }
            }
            note.charge_limited = ch.limiting();
        }
        let full_scale = ((1u32 << self.chain.sense.params().adc_bits) - 1) as u16;
        let raw = self.chain.sense.convert();
        let counts = self.chain.injectors.reading(t_s, raw, full_scale);
        note.sensor_fault = counts != raw;
        let nominal = self.chain.bridge.params().supply_v;
        note.bus_event = self.chain.injectors.supply_v(t_s, nominal) != nominal;
        let speed = self.chain.load.speed_rad_s();
        let m = Measurement {
            counts,
            filtered_a: self.chain.sense.filtered_a(),
            bus_v,
            speed_rad_s: self.chain.speed_feedback.then_some(speed),
        };
        let command = controller.tick(&m);
        let load_at = self.timing.load_period(period);
        self.pending.push_back((load_at, command));
        let view = controller.view();
        let supply_a = if self.charge_time_s > 0.0 {
            self.charge_a_s / self.charge_time_s
        } else {
            0.0
        };
        self.charge_a_s = 0.0;
        self.charge_time_s = 0.0;
        let keep = self.ticks.is_multiple_of(self.record_every);
        self.ticks += 1;
        let point = TracePoint {
            t_s,
            request_a: self.request_a,
            setpoint_a: view.setpoint_a,
            current_a: self.chain.load.current_a(),
            measured_a: view.measured_a,
            counts,
            commanded_v: view.commanded_v,
            duty: command.signed_duty() as f64,
            enabled: command.enabled,
            speed_rad_s: speed,
            bus_v,
            supply_a,
            winding_c: self.chain.load.temperature_c(),
            fault_bits: view.fault_bits,
            state: view.state,
            i2t_level: view.i2t_level,
            load: self.chain.load.readings(),
        };
        if keep {
            self.trace.points.push(point);
        }
        (point, note)
    }
}

/// A command in words, for the run's log.
fn describe(c: &Command) -> String {
    match c {
        Command::Enable => "enable".into(),
        Command::Disable => "disable".into(),
        Command::ClearFaults => "clear_faults".into(),
        Command::SetCurrent(a) => format!("set_current to {a} A"),
        Command::Retune(_) => "retune".into(),
        Command::Excite(_) => "excite".into(),
    }
}
