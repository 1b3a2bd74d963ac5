//! A board made of the simulator: the real pi-core link handler, capture and
//! loop on the firmware side, a scenario's drive chain on the other, so the
//! host side of the bench link can be exercised without hardware.
//!
//! # Firmware side
//!
//! [`Firmware`] is what a firmware holds: a [`CurrentLoop`], a
//! [`Capture`] of [`CAPACITY`] samples and the handoff queue from the main
//! loop to the control interrupt. Its control tick (the runner calls it at
//! each sampling instant) drains the queue, ticks the loop and records the
//! capture, in that order, as the firmware example does; its main-loop side
//! lends pi-core's [`Link`] the loop and the capture through a
//! [`LoopBoard`].
//!
//! # Time
//!
//! Simulated time does not follow the wall clock: it stands still while a
//! request is read and answered, and advances by a fixed quantum
//! ([`VirtualBoard::new`], 2 ms by default on the command line) after each
//! reply, as if the next request took that long to arrive. A host that polls
//! a capture or an excitation therefore sees it progress one quantum per
//! poll, and the same requests give the same replies on every run.

use std::collections::VecDeque;
use std::io::{self, Read, Write};

use pi_core::capture::Capture;
use pi_core::heapless::spsc::Queue;
use pi_core::link::{Link, LoopBoard};
use pi_core::{Command, CurrentLoop, DriveCommand, TickInput};

use crate::scenario::{Scenario, ScenarioError};
use crate::sim::runner::{Controller, ControllerView, Measurement, Runner};

/// Samples the virtual board's capture holds (48 KiB on a target: what an
/// invented board with 64 KiB of RAM would give it).
pub const CAPACITY: usize = 2048;

/// The firmware side: the loop, the capture and the queue between them.
#[derive(Clone, Debug)]
pub struct Firmware {
    cl: CurrentLoop,
    queue: Queue<Command, 8>,
    capture: Capture<CAPACITY>,
    refused: u64,
}

impl Firmware {
    /// A firmware running `cl`.
    pub fn new(cl: CurrentLoop) -> Self {
        Self {
            cl,
            queue: Queue::new(),
            capture: Capture::new(),
            refused: 0,
        }
    }

    /// The loop.
    pub fn current_loop(&self) -> &CurrentLoop {
        &self.cl
    }

    /// Commands the loop refused when the interrupt applied them (the
    /// handler refuses what it can tell before queueing).
    pub fn refused(&self) -> u64 {
        self.refused
    }

    /// The capture.
    pub fn capture(&self) -> &Capture<CAPACITY> {
        &self.capture
    }

    /// The main loop's view of it for the link handler.
    fn board(&mut self) -> LoopBoard<'_, CAPACITY, impl FnMut(Command) -> bool + '_> {
        let queue = &mut self.queue;
        LoopBoard {
            cl: &self.cl,
            capture: &mut self.capture,
            send: move |c| queue.enqueue(c).is_ok(),
        }
    }
}

impl Controller for Firmware {
    fn tick(&mut self, m: &Measurement) -> DriveCommand {
        while let Some(command) = self.queue.dequeue() {
            if self.cl.apply(command).is_err() {
                self.refused += 1;
            }
        }
        let input = TickInput {
            current_counts: m.counts,
            bus_v: m.bus_v as f32,
            speed_rad_s: m.speed_rad_s.map(|w| w as f32),
        };
        let command = self.cl.tick(&input);
        self.capture.record(&self.cl, &input);
        command
    }

    fn command(&mut self, command: Command) -> Result<(), String> {
        Controller::command(&mut self.cl, command)
    }

    fn view(&self) -> ControllerView {
        Controller::view(&self.cl)
    }
}

/// The whole board: firmware, link handler and the simulated drive chain.
#[derive(Clone, Debug)]
pub struct VirtualBoard {
    runner: Runner,
    firmware: Firmware,
    link: Link,
    quantum_ticks: u64,
    period_s: f64,
    requests: u64,
}

impl VirtualBoard {
    /// A board running `scenario`'s loop on its drive chain (its events are
    /// not used: commands come over the link), advancing `quantum_s` of
    /// simulated time after each reply (at least one control tick).
    pub fn new(scenario: &Scenario, quantum_s: f64) -> Result<Self, ScenarioError> {
        if scenario.fixed_point.is_some() {
            return Err(crate::model_error::ModelError::new(
                "controller.arithmetic",
                "fixed",
                "\"float\" (left out) for the virtual board: its firmware, the bench link's, runs the float loop",
            )
            .into());
        }
        if scenario.charge.is_some() {
            return Err(crate::model_error::ModelError::new(
                "charge",
                "(given)",
                "left out for the virtual board: its firmware, the bench link's, takes its setpoint over the link and has no charge limit",
            )
            .into());
        }
        let cl = scenario.float_loop()?;
        let period_s = scenario.timing.control_period_s();
        Ok(Self {
            // One trace point is all the runner keeps: the board's record is
            // its capture.
            runner: Runner::new(scenario.chain.clone(), scenario.timing.clone(), Vec::new())
                .record_every(u64::MAX),
            firmware: Firmware::new(cl),
            link: Link::new(),
            quantum_ticks: ((quantum_s / period_s).round() as u64).max(1),
            period_s,
            requests: 0,
        })
    }

    /// Simulated time, s.
    pub fn time_s(&self) -> f64 {
        self.runner.time_s()
    }

    /// Requests answered so far.
    pub fn requests(&self) -> u64 {
        self.requests
    }

    /// The firmware side.
    pub fn firmware(&self) -> &Firmware {
        &self.firmware
    }

    /// The simulated drive chain.
    pub fn runner(&self) -> &Runner {
        &self.runner
    }

    /// One byte from the host; the reply's bytes when it closes a frame.
    pub fn receive(&mut self, byte: u8) -> Option<Vec<u8>> {
        let reply = self.link.receive(byte, &mut self.firmware.board())?.to_vec();
        self.requests += 1;
        Some(reply)
    }

    /// Runs the drive chain and the firmware's control interrupt for one
    /// quantum.
    pub fn advance(&mut self) {
        self.runner.run_ticks(&mut self.firmware, self.quantum_ticks);
    }

    /// Runs for `seconds` of simulated time (whole ticks).
    pub fn run_for(&mut self, seconds: f64) {
        let ticks = (seconds / self.period_s).round().max(0.0) as u64;
        self.runner.run_ticks(&mut self.firmware, ticks);
    }

    /// Serves requests from `port` until `keep_going` says stop (it is asked
    /// after every read, which times out on an idle line) or the port fails.
    pub fn serve<P: Read + Write>(
        &mut self,
        port: &mut P,
        mut keep_going: impl FnMut(&Self) -> bool,
    ) -> io::Result<()> {
        let mut buf = [0u8; 256];
        while keep_going(self) {
            let n = match port.read(&mut buf) {
                Ok(n) => n,
                Err(e) if matches!(e.kind(), io::ErrorKind::TimedOut | io::ErrorKind::WouldBlock) => 0,
                Err(e) if e.kind() == io::ErrorKind::Interrupted => 0,
                Err(e) => return Err(e),
            };
            for &b in &buf[..n] {
                if let Some(reply) = self.receive(b) {
                    port.write_all(&reply)?;
                    port.flush()?;
                    self.advance();
                }
            }
        }
        Ok(())
    }
}

/// The virtual board as a byte stream, in the same process: what is written
/// to it is answered at once, and reads return the replies (a read with
/// nothing to return times out, as a serial port's does). For tests, and for
/// running the host side without a pseudo-terminal.
#[derive(Clone, Debug)]
pub struct VirtualPort {
    /// The board.
    pub board: VirtualBoard,
    pending: VecDeque<u8>,
}

impl VirtualPort {
    /// A port to `board`.
    pub fn new(board: VirtualBoard) -> Self {
        Self {
            board,
            pending: VecDeque::new(),
        }
    }
}

impl Write for VirtualPort {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        for &b in buf {
            if let Some(reply) = self.board.receive(b) {
                self.pending.extend(reply);
                self.board.advance();
            }
        }
        Ok(buf.len())
    }

    fn flush(&mut self) -> io::Result<()> {
        Ok(())
    }
}

impl Read for VirtualPort {
    fn read(&mut self, buf: &mut [u8]) -> io::Result<usize> {
        if self.pending.is_empty() {
            return Err(io::Error::new(io::ErrorKind::TimedOut, "no reply waiting"));
        }
        let n = buf.len().min(self.pending.len());
        for (o, b) in buf.iter_mut().zip(self.pending.drain(..n)) {
            *o = b;
        }
        Ok(n)
    }
}
