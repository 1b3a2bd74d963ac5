//! Passing commands from the main loop to the control interrupt.
//!
//! The control interrupt owns the [`CurrentLoop`](crate::CurrentLoop); nothing
//! else touches it. The main loop (bench protocol, application logic) sends it
//! [`Command`]s through a single-producer single-consumer queue from `heapless`
//! (re-exported as [`crate::heapless`] so the versions match). The queue needs only
//! atomic loads and stores, which every Cortex-M has, including the M0 without
//! compare-and-swap, so no critical section and no lock is taken on either side.
//!
//! Gains are validated where they are built, in the main loop
//! ([`PiGains::from_kp_ti`](crate::pi::PiGains::from_kp_ti) returns an error for NaN,
//! negative or zero values), so the interrupt only ever receives good ones. Replies
//! (accepted, limited, refused) can go back through a second queue the same way.
//!
//! # A control-interrupt skeleton
//!
//! The statics below stand in for what a real firmware does with its framework
//! (RTIC resources, a `cortex_m::interrupt::Mutex`, ...); the shape is the point:
//! the interrupt drains the queue, runs one tick and writes the pins.
//!
//! ```
//! use pi_core::heapless::spsc::{Consumer, Producer, Queue};
//! use pi_core::prelude::*;
//!
//! static mut COMMANDS: Queue<Command, 8> = Queue::new();
//!
//! /// Split once at start-up, before the control interrupt is enabled.
//! fn split_queue() -> (Producer<'static, Command>, Consumer<'static, Command>) {
//!     // SAFETY: called once, before any other access to COMMANDS; edition 2024
//!     // forbids `&mut COMMANDS`, so take a raw pointer first.
//!     let queue: &'static mut Queue<Command, 8> = unsafe { &mut *(&raw mut COMMANDS) };
//!     queue.split()
//! }
//!
//! /// The body of the control interrupt (for example the PWM-centre ADC interrupt).
//! fn control_isr<P: DriveOutput>(
//!     cl: &mut CurrentLoop,
//!     commands: &mut Consumer<'static, Command>,
//!     bridge: &mut P,
//!     adc_counts: u16,
//!     bus_v: f32,
//! ) {
//!     while let Some(command) = commands.dequeue() {
//!         // A refused command changes nothing; a firmware would report it back.
//!         let _ = cl.apply(command);
//!     }
//!     let command = cl.tick(&TickInput { current_counts: adc_counts, bus_v, speed_rad_s: None });
//!     if bridge.apply(&command).is_err() {
//!         // The pins could not be written: stop the loop; the next tick is safe.
//!         let _ = cl.apply(Command::Disable);
//!     }
//! }
//!
//! # struct NoBridge;
//! # impl DriveOutput for NoBridge {
//! #     type Error = core::convert::Infallible;
//! #     fn apply(&mut self, _: &DriveCommand) -> Result<(), Self::Error> { Ok(()) }
//! # }
//! # fn main() -> Result<(), pi_core::ConfigError> {
//! # let config = LoopConfig::new(
//! #     CurrentSense::from_shunt(12, 3.3, 0.010, 20.0, 2048.0)?,
//! #     SetpointLimits::new(-4.0, 4.0, 2000.0)?,
//! #     SupervisorConfig::new(OvercurrentLimit::new(6.0, 3)?, BusWindow::new(18.0, 30.0)?),
//! #     PiConfig::new(PiGains::from_kp_ti(3.0, 1.26e-3)?, 50e-6, OutputLimits::symmetric(30.0)?)?,
//! #     DutyMapping::new(0.95, 12.0)?,
//! # )?;
//! # let mut cl = CurrentLoop::new(config)?;
//! let (mut to_isr, mut from_main) = split_queue();
//!
//! // Main loop: a bench command asked for new gains and 1.2 A.
//! let gains = PiGains::from_kp_ti(2.5, 1.3e-3)?; // validated here, not in the ISR
//! to_isr.enqueue(Command::Enable).ok();
//! to_isr.enqueue(Command::Retune(gains)).ok();
//! to_isr.enqueue(Command::SetCurrent(1.2)).ok();
//!
//! // Interrupt:
//! control_isr(&mut cl, &mut from_main, &mut NoBridge, 2048, 24.0);
//! assert_eq!(cl.state(), LoopState::Running);
//! assert_eq!(cl.pi().config().gains(), gains);
//! # Ok(()) }
//! ```

pub use crate::current_loop::Command;
