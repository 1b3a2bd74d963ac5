//! The wiring, generic over traits: what a firmware on any Cortex-M part
//! writes around pi-core, with no vendor HAL in sight.
//!
//! * The control interrupt ([`Control::tick`]) owns the loop, the capture,
//!   the bridge and the ADC: it drains the commands the main loop queued,
//!   reads the current and the bus, ticks the loop, writes the bridge and
//!   records the capture, in that order.
//! * The main loop ([`serve_link`]) feeds the UART's bytes to pi-core's link
//!   handler one at a time and writes each reply back; the handler reaches
//!   the interrupt only through [`Shared`], the `Board` below: commands go
//!   into the handoff queue, and the status and the capture are read under
//!   a critical section (a few dozen instructions: the control interrupt is
//!   held off for that long, never more than one chunk of eight samples).

use core::cell::RefCell;

use cortex_m::interrupt::{self, Mutex};
use embedded_hal::digital::OutputPin;
use embedded_hal::pwm::SetDutyCycle;
use embedded_io::{Read, ReadReady, Write};
use pi_core::capture::{Capture, CaptureSpec, CaptureState, Sample};
use pi_core::heapless::spsc::{Consumer, Producer};
use pi_core::link::{Board, Link};
use pi_core::prelude::*;
use pi_core::{ConfigError, LoopStatus};

/// The current-sense ADC and the bus-voltage divider, as the control
/// interrupt reads them (a trait of this example: ADCs differ too much for
/// one in embedded-hal).
pub trait Sensors {
    /// The current channel's last conversion, counts.
    fn current_counts(&mut self) -> u16;
    /// The bus voltage, volts (the divider's conversion scaled).
    fn bus_v(&mut self) -> f32;
}

/// Samples the capture holds: 2048 x 24 bytes = 48 KiB.
pub const CAPTURE: usize = 2048;

/// What the control interrupt owns (the capture is beside it, in a static
/// of its own: a new capture is all zero bytes and goes to .bss, where an
/// `Option` around it would need an initial image in flash as large as it).
pub struct Control<P, D, E, S> {
    /// The loop.
    pub cl: CurrentLoop,
    /// Commands from the main loop.
    pub commands: Consumer<'static, Command>,
    /// The H-bridge: PWM, direction and enable.
    pub bridge: SignMagnitude<P, D, E>,
    /// The ADC.
    pub sensors: S,
}

impl<P: SetDutyCycle, D: OutputPin, E: OutputPin, S: Sensors> Control<P, D, E, S> {
    /// One control tick (the body of the PWM-centre interrupt).
    pub fn tick(&mut self, capture: &mut Capture<CAPTURE>) {
        while let Some(command) = self.commands.dequeue() {
            // A command the loop refuses changes nothing; the host sees the
            // state in its next status.
            let _ = self.cl.apply(command);
        }
        let input = TickInput {
            current_counts: self.sensors.current_counts(),
            bus_v: self.sensors.bus_v(),
            speed_rad_s: None,
        };
        let command = self.cl.tick(&input);
        if self.bridge.apply(&command).is_err() {
            // The pins could not be written: stop; the next tick is safe.
            let _ = self.cl.apply(Command::Disable);
        }
        capture.record(&self.cl, &input);
    }
}

/// The loop and its capture as the main loop sees them: behind a critical
/// section.
pub type Shared<P, D, E, S> = Mutex<RefCell<Option<Control<P, D, E, S>>>>;

/// The capture, shared the same way.
pub type SharedCapture = Mutex<RefCell<Capture<CAPTURE>>>;

/// The link's way to the control interrupt.
pub struct Shared2Board<'a, P: 'static, D: 'static, E: 'static, S: 'static> {
    /// What the interrupt owns.
    pub shared: &'static Shared<P, D, E, S>,
    /// The capture.
    pub capture: &'static SharedCapture,
    /// The handoff queue's main-loop end.
    pub to_isr: &'a mut Producer<'static, Command>,
    /// What the loop was at start-up: the answers in the moment before the
    /// interrupt's state is in place (the main loop does not serve the link
    /// before then, so they are never sent).
    pub start: Snapshot,
}

/// The loop's figures at start-up.
#[derive(Clone, Copy, Debug)]
pub struct Snapshot {
    /// Status.
    pub status: LoopStatus,
    /// Gains.
    pub gains: PiGains,
    /// Setpoint limits.
    pub limits: SetpointLimits,
    /// Control period, s.
    pub period_s: f32,
    /// An idle capture's spec.
    pub spec: CaptureSpec,
}

impl<P, D, E, S> Shared2Board<'_, P, D, E, S> {
    /// `f` on the interrupt's state in a critical section; `None` before
    /// start-up put it there (or if it is borrowed, which a single core in a
    /// critical section never sees).
    fn with<R>(&mut self, f: impl FnOnce(&mut Control<P, D, E, S>, &mut Capture<CAPTURE>) -> R) -> Option<R> {
        interrupt::free(|cs| {
            let mut guard = self.shared.borrow(cs).try_borrow_mut().ok()?;
            let mut capture = self.capture.borrow(cs).try_borrow_mut().ok()?;
            guard.as_mut().map(|c| f(c, &mut capture))
        })
    }
}

impl<P, D, E, S> Board for Shared2Board<'_, P, D, E, S> {
    fn send(&mut self, command: Command) -> bool {
        self.to_isr.enqueue(command).is_ok()
    }
    fn status(&mut self) -> LoopStatus {
        self.with(|c, _| c.cl.status()).unwrap_or(self.start.status)
    }
    fn gains(&mut self) -> PiGains {
        self.with(|c, _| c.cl.pi().config().gains())
            .unwrap_or(self.start.gains)
    }
    fn limits(&mut self) -> SetpointLimits {
        self.with(|c, _| *c.cl.config().setpoint())
            .unwrap_or(self.start.limits)
    }
    fn period_s(&mut self) -> f32 {
        self.start.period_s
    }
    fn capture_capacity(&mut self) -> usize {
        CAPTURE
    }
    fn arm_capture(&mut self, spec: CaptureSpec) -> Result<(), ConfigError> {
        self.with(|c, capture| {
            let s = c.cl.status();
            capture.arm(spec, s.target_a, s.current_a)
        })
        .unwrap_or(Ok(()))
    }
    fn capture_progress(&mut self) -> (CaptureState, usize, CaptureSpec) {
        self.with(|_, capture| (capture.state(), capture.samples().len(), capture.spec()))
            .unwrap_or((CaptureState::Idle, 0, self.start.spec))
    }
    fn read_capture(&mut self, first: usize, out: &mut [Sample]) -> usize {
        self.with(|_, capture| capture.read(first, out)).unwrap_or(0)
    }
}

/// Drains the UART into the link handler and writes its replies: called
/// from the main loop as often as it likes (it returns when no byte is
/// waiting). A UART error drops the byte; the host's timeout and the frame
/// check recover the exchange.
pub fn serve_link<U: Read + ReadReady + Write, B: Board>(uart: &mut U, link: &mut Link, board: &mut B) {
    let mut byte = [0u8; 1];
    while let Ok(true) = uart.read_ready() {
        if !matches!(uart.read(&mut byte), Ok(1)) {
            continue;
        }
        if let Some(reply) = link.receive(byte[0], board) {
            let _ = uart.write_all(reply);
        }
    }
}
