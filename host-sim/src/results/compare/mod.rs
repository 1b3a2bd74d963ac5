//! A bench capture against the simulation of a scenario: the scenario is
//! driven the way the board was (the capture's setpoint sequence through the
//! real loop, or, without one, the capture's voltage applied open loop), and
//! the two currents are set side by side.
//!
//! What it reports:
//!
//! * the normalised RMS error, `rms(capture - simulation) / sd(capture)` over
//!   the capture's samples (the simulation's true current read at the
//!   capture's instants, linear between its ticks);
//! * each setpoint step measured on both (the one step-metrics routine,
//!   [`crate::results::metrics`]);
//! * the differences in words, largest first, each with its share of the
//!   mean-square error: an offset (the median difference where both have
//!   settled after a step, or, without steps, where the simulation is
//!   steady), a delay (the shift of the capture, whole samples refined by a
//!   parabola through the squared error at the best shift and its neighbours,
//!   that leaves the least squared error; called a delay only when it takes
//!   away at least half of what the offset leaves, else the response is of
//!   another speed or shape), what is left (the transients differ), then each
//!   step's overshoot (2 points apart or more), settling (a quarter slower or
//!   a fifth faster) and settled level (apart by more than the 2 % settling
//!   band of the step) where
//!   they differ. An offset, delay or the rest is stated when it takes at
//!   least 5 % of the mean-square error (a choice: smaller ones are noise on a
//!   bench).

use pi_core::{Command, Direction, DriveCommand};

use crate::bench::capture::Capture;
use crate::results::metrics::{self, StepMetrics};

mod findings;
mod report;

pub use findings::sig;
pub use report::within;

use crate::scenario::{Scenario, ScenarioError};
use crate::sim::runner::{Controller, ControllerView, Event, Measurement, Runner};
use crate::sim::trace::TracePoint;
use findings::explain;

/// A finding is stated when it explains at least this share of the
/// mean-square difference.
pub const MIN_SHARE: f64 = 0.05;

/// How the simulation was driven.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Drive {
    /// The capture's setpoint sequence, through the scenario's loop.
    Setpoint,
    /// The capture's voltage, open loop through the scenario's bridge.
    Voltage,
}

/// One step measured on the capture and on the simulation.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct StepPair {
    /// On the capture.
    pub capture: StepMetrics,
    /// On the simulation.
    pub simulated: StepMetrics,
}

/// A difference in words, with its share of the mean-square difference.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Finding {
    /// Share of the mean-square difference it explains (0 to 1), for the
    /// offset, gain and delay; the step findings carry 0 (they are read off the
    /// metrics, not the error).
    pub share: f64,
    /// The sentence.
    pub text: String,
}

/// The comparison.
#[derive(Clone, Debug, PartialEq)]
pub struct Comparison {
    /// How the simulation was driven.
    pub drive: Drive,
    /// The capture's instants from its start, s.
    pub time_s: Vec<f64>,
    /// The capture's current, A.
    pub capture_a: Vec<f64>,
    /// The simulation's true current at those instants, A.
    pub simulated_a: Vec<f64>,
    /// The capture's voltage, V.
    pub voltage_v: Vec<f64>,
    /// The steps, side by side (setpoint drive only).
    pub steps: Vec<StepPair>,
    /// `rms(capture - simulation) / sd(capture)`.
    pub nrmse: f64,
    /// Median of capture minus simulation, A.
    pub offset_a: f64,
    /// How far the capture lags the simulation, s (negative: it leads; 0 when
    /// no shift explains the difference).
    pub lag_s: f64,
    /// The differences in words, largest first.
    pub findings: Vec<Finding>,
}

/// Runs the scenario as the capture's board was driven and compares.
/// `setpoint_a` is the capture's setpoint per sample, if it has one; the
/// scenario's own events are replaced.
pub fn compare(
    capture: &Capture,
    setpoint_a: Option<&[f64]>,
    scenario: &Scenario,
) -> Result<Comparison, ScenarioError> {
    let t0 = capture.time_s.first().copied().unwrap_or(0.0);
    let time_s: Vec<f64> = capture.time_s.iter().map(|t| t - t0).collect();
    let duration_s = time_s.last().copied().unwrap_or(0.0) + capture.period_s;
    let mut runner = Runner::new(scenario.chain.clone(), scenario.timing.clone(), Vec::new());
    let (drive, trace) = match setpoint_a {
        Some(sp) => {
            let mut events = vec![Event {
                at_s: 0.0,
                command: Command::Enable,
            }];
            let mut last = f64::NAN;
            for (t, &a) in time_s.iter().zip(sp) {
                if a != last {
                    events.push(Event {
                        at_s: *t,
                        command: Command::SetCurrent(a as f32),
                    });
                    last = a;
                }
            }
            runner = Runner::new(scenario.chain.clone(), scenario.timing.clone(), events);
            let (mut cl, _) = scenario.start()?;
            runner.run(&mut cl, duration_s, &mut |_| {});
            (Drive::Setpoint, runner.into_trace())
        }
        None => {
            let mut replay = Replay {
                volts: &capture.voltage_v,
                period_s: capture.period_s,
                tick_s: scenario.timing.control_period_s(),
                sample_s: scenario.timing.sample_offset_s(),
                ticks: 0,
                last_v: 0.0,
            };
            runner.run(&mut replay, duration_s, &mut |_| {});
            (Drive::Voltage, runner.into_trace())
        }
    };
    let simulated_a = resample(&trace.points, &time_s);
    let steps = match setpoint_a {
        Some(sp) => pair_steps(&time_s, &capture.current_a, sp, &trace.points),
        None => Vec::new(),
    };
    let mut c = Comparison {
        drive,
        time_s,
        capture_a: capture.current_a.clone(),
        simulated_a,
        voltage_v: capture.voltage_v.clone(),
        steps,
        nrmse: 0.0,
        offset_a: 0.0,
        lag_s: 0.0,
        findings: Vec::new(),
    };
    explain(&mut c, capture.period_s);
    Ok(c)
}

/// The capture's voltage applied open loop: at each tick the duty that puts
/// the capture's voltage at that instant (held from sample to sample) across
/// the load on the present bus, limited to full duty.
struct Replay<'a> {
    volts: &'a [f64],
    period_s: f64,
    tick_s: f64,
    sample_s: f64,
    ticks: u64,
    last_v: f64,
}

impl Controller for Replay<'_> {
    fn tick(&mut self, m: &Measurement) -> DriveCommand {
        let t = self.ticks as f64 * self.tick_s + self.sample_s;
        self.ticks += 1;
        let k =
            ((t / self.period_s + 1e-9).floor().max(0.0) as usize).min(self.volts.len().saturating_sub(1));
        let v = self.volts.get(k).copied().unwrap_or(0.0);
        self.last_v = v;
        let duty = if m.bus_v > 0.0 {
            (v.abs() / m.bus_v).min(1.0)
        } else {
            0.0
        };
        DriveCommand {
            duty: duty as f32,
            direction: if v < 0.0 {
                Direction::Reverse
            } else {
                Direction::Forward
            },
            enabled: true,
        }
    }

    fn command(&mut self, _: Command) -> Result<(), String> {
        Ok(())
    }

    fn view(&self) -> ControllerView {
        ControllerView {
            commanded_v: self.last_v,
            state: 1,
            ..ControllerView::default()
        }
    }
}

/// The trace's true current at each instant of `at_s` (linear between ticks,
/// held beyond the ends).
fn resample(points: &[TracePoint], at_s: &[f64]) -> Vec<f64> {
    let mut j = 0;
    at_s.iter()
        .map(|&t| {
            while j + 1 < points.len() && points[j + 1].t_s <= t {
                j += 1;
            }
            match (points.get(j), points.get(j + 1)) {
                (Some(a), Some(b)) if b.t_s > a.t_s && t > a.t_s => {
                    let f = ((t - a.t_s) / (b.t_s - a.t_s)).min(1.0);
                    a.current_a + f * (b.current_a - a.current_a)
                }
                (Some(a), _) => a.current_a,
                _ => 0.0,
            }
        })
        .collect()
}

/// The capture's steps and the simulation's, paired by their time.
fn pair_steps(time_s: &[f64], current_a: &[f64], setpoint_a: &[f64], sim: &[TracePoint]) -> Vec<StepPair> {
    let points: Vec<TracePoint> = time_s
        .iter()
        .zip(current_a)
        .zip(setpoint_a)
        .map(|((&t_s, &i), &sp)| TracePoint {
            t_s,
            request_a: sp,
            setpoint_a: sp,
            current_a: i,
            measured_a: i,
            counts: 0,
            commanded_v: 0.0,
            duty: 0.0,
            enabled: true,
            speed_rad_s: 0.0,
            bus_v: 0.0,
            supply_a: 0.0,
            winding_c: 0.0,
            fault_bits: 0,
            state: 1,
            i2t_level: 0.0,
            load: [f64::NAN; crate::plant::load::READOUTS],
        })
        .collect();
    let ours = metrics::steps(&points);
    let theirs = metrics::steps(sim);
    let tick = sim.get(1).map_or(0.0, |p| p.t_s) - sim.first().map_or(0.0, |p| p.t_s);
    let period = time_s.get(1).copied().unwrap_or(0.0) - time_s.first().copied().unwrap_or(0.0);
    let near = 1.5 * tick.max(period);
    ours.into_iter()
        .filter_map(|capture| {
            let simulated = *theirs.iter().find(|s| (s.at_s - capture.at_s).abs() <= near)?;
            Some(StepPair { capture, simulated })
        })
        .collect()
}
