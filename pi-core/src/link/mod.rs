//! The bench link, firmware side (feature `link`): messages ([`wire`]),
//! framing ([`frame`]) and the handler that answers them ([`Link`]).
//!
//! The handler runs in the main loop, never in the control interrupt. It
//! reaches the loop only through a [`Board`], which the firmware implements
//! over whatever it shares with the interrupt: commands go through the
//! handoff queue ([`crate::handoff`]), the status and the capture are read
//! where the interrupt leaves them. Bytes come in one at a time
//! ([`Link::receive`]: a UART interrupt can push them into a byte queue
//! that the main loop drains), and each complete request gives one reply
//! frame to send.
//!
//! # What every frame gets
//!
//! | what arrived | reply |
//! |---|---|
//! | a checked request of this version | its answer |
//! | a value the validating constructor refuses | [`Reply::Refused`] naming the field |
//! | a command while faults are latched (enable, a current) | [`Reply::Faulted`] |
//! | a command when the queue to the interrupt is full | [`Reply::Busy`] |
//! | an excitation while the loop is not disabled | [`Reply::NotDisabled`] |
//! | a design the design code refuses, or whose loop is unstable | [`Reply::DesignRefused`] with the reason |
//! | an identification the samples do not support | [`Reply::NotIdentified`] with the reason |
//! | another version (the payload's first byte) | [`Reply::WrongVersion`] |
//! | a checked payload that is not a request | [`Reply::Malformed`] |
//! | a bad COBS code or CRC | [`Reply::Malformed`], tag 0 |
//! | more than [`frame::MAX_FRAME`] bytes before a zero | [`Reply::Oversized`], tag 0 |
//! | zeros alone | nothing |
//!
//! Nothing reaches the loop from a frame that is not a checked request of
//! this version, and nothing in the handler panics (the no-panic link check
//! covers it, and a property test feeds it a million random and mutated
//! frames).

mod device;
pub mod frame;
pub mod wire;

pub use device::MAX_DELAY_SAMPLES;

use crate::capture::{Capture, CaptureSpec, CaptureState, Sample, Trigger};
use crate::current_loop::{Command, CurrentLoop, LoopState, LoopStatus};
use crate::error::{ConfigError, Requirement};
use crate::excitation::{Excitation, ExcitationEnd, Waveform};
use crate::pi::PiGains;
use crate::setpoint::SetpointLimits;
use frame::{FrameDecoder, FrameError, MAX_FRAME};
pub use wire::{
    DesignReason, IdentifyReason, MethodWire, Name, Needs, Refusal, Reply, ReplyFrame, Request, RequestFrame,
    SampleWire, StatusWire, TriggerWire, VERSION, WaveformWire,
};

/// What the handler needs of the firmware: the way to the control interrupt
/// and to what it leaves behind.
pub trait Board {
    /// Hands a command to the control interrupt (through the handoff queue);
    /// `false` when the queue is full.
    fn send(&mut self, command: Command) -> bool;
    /// The loop's latest status.
    fn status(&mut self) -> LoopStatus;
    /// The gains in use.
    fn gains(&mut self) -> PiGains;
    /// The setpoint limits in use.
    fn limits(&mut self) -> SetpointLimits;
    /// The control period, s.
    fn period_s(&mut self) -> f32;
    /// Samples the capture holds.
    fn capture_capacity(&mut self) -> usize;
    /// Arms the capture ([`crate::capture::Capture::arm`]).
    fn arm_capture(&mut self, spec: CaptureSpec) -> Result<(), ConfigError>;
    /// The capture's state, samples kept and the spec it was armed with.
    fn capture_progress(&mut self) -> (CaptureState, usize, CaptureSpec);
    /// Copies samples from index `first` into `out`; returns how many.
    fn read_capture(&mut self, first: usize, out: &mut [Sample]) -> usize;
}

/// A [`Board`] for a firmware that can lend the handler its loop and capture
/// between two ticks (a single context, or one where the main loop holds
/// them under a lock): every answer is read from them, and commands go to
/// the interrupt through `send` (the handoff queue's producer, usually).
/// A firmware that shares them across contexts writes its own [`Board`]
/// (the firmware example reads them under a critical section).
pub struct LoopBoard<'a, const N: usize, S: FnMut(Command) -> bool> {
    /// The loop.
    pub cl: &'a CurrentLoop,
    /// Its capture.
    pub capture: &'a mut Capture<N>,
    /// Hands a command to the control interrupt; `false` when it cannot.
    pub send: S,
}

impl<const N: usize, S: FnMut(Command) -> bool> Board for LoopBoard<'_, N, S> {
    fn send(&mut self, command: Command) -> bool {
        (self.send)(command)
    }
    fn status(&mut self) -> LoopStatus {
        self.cl.status()
    }
    fn gains(&mut self) -> PiGains {
        self.cl.pi().config().gains()
    }
    fn limits(&mut self) -> SetpointLimits {
        *self.cl.config().setpoint()
    }
    fn period_s(&mut self) -> f32 {
        self.cl.config().period_s()
    }
    fn capture_capacity(&mut self) -> usize {
        N
    }
    fn arm_capture(&mut self, spec: CaptureSpec) -> Result<(), ConfigError> {
        let s = self.cl.status();
        self.capture.arm(spec, s.target_a, s.current_a)
    }
    fn capture_progress(&mut self) -> (CaptureState, usize, CaptureSpec) {
        (
            self.capture.state(),
            self.capture.samples().len(),
            self.capture.spec(),
        )
    }
    fn read_capture(&mut self, first: usize, out: &mut [Sample]) -> usize {
        self.capture.read(first, out)
    }
}

/// The handler: a frame decoder and a reply buffer.
#[derive(Clone, Debug)]
pub struct Link {
    decoder: FrameDecoder,
    out: [u8; MAX_FRAME],
}

impl Default for Link {
    fn default() -> Self {
        Self::new()
    }
}

impl Link {
    /// A handler waiting for its first frame.
    pub const fn new() -> Self {
        Self {
            decoder: FrameDecoder::new(),
            out: [0; MAX_FRAME],
        }
    }

    /// One received byte. When it closes a frame, the frame is handled and
    /// the reply frame's bytes are returned for sending.
    pub fn receive<B: Board>(&mut self, byte: u8, board: &mut B) -> Option<&[u8]> {
        let reply = match self.decoder.push(byte)? {
            Ok(payload) => answer(payload, board),
            Err(FrameError::Oversized) => reply(0, Reply::Oversized),
            Err(_) => reply(0, Reply::Malformed),
        };
        let n = frame::encode(&reply, &mut self.out).ok()?;
        self.out.get(..n)
    }
}

fn reply(tag: u16, body: Reply) -> ReplyFrame {
    ReplyFrame {
        version: VERSION,
        tag,
        body,
    }
}

/// The reply to one checked payload.
fn answer<B: Board>(payload: &[u8], board: &mut B) -> ReplyFrame {
    if payload.first() != Some(&VERSION) {
        return reply(0, Reply::WrongVersion { device: VERSION });
    }
    match frame::parse::<RequestFrame>(payload) {
        Some(request) => reply(request.tag, handle(&request.body, board)),
        None => reply(0, Reply::Malformed),
    }
}

/// The answer to one request.
pub fn handle<B: Board>(request: &Request, board: &mut B) -> Reply {
    match *request {
        Request::Hello => Reply::Hello {
            version: VERSION,
            capture_capacity: board.capture_capacity().min(u16::MAX as usize) as u16,
            period_s: board.period_s(),
        },
        Request::Status => Reply::Status(status_wire(&board.status())),
        Request::Enable => {
            let latched = board.status().latched;
            if !latched.is_empty() {
                return Reply::Faulted {
                    latched: latched.bits(),
                };
            }
            queue(board, Command::Enable)
        }
        Request::Disable => queue(board, Command::Disable),
        Request::ClearFaults => queue(board, Command::ClearFaults),
        Request::SetCurrent { current_a } => {
            if !current_a.is_finite() {
                return Reply::Refused(refusal(&ConfigError::new(
                    "current_a",
                    current_a,
                    Requirement::Finite,
                )));
            }
            let latched = board.status().latched;
            if !latched.is_empty() {
                return Reply::Faulted {
                    latched: latched.bits(),
                };
            }
            queue(board, Command::SetCurrent(current_a))
        }
        Request::ReadGains => {
            let g = board.gains();
            Reply::Gains {
                kp_v_per_a: g.kp_v_per_a(),
                ti_s: g.ti_s(),
                setpoint_weight: g.setpoint_weight(),
            }
        }
        Request::WriteGains {
            kp_v_per_a,
            ti_s,
            setpoint_weight,
        } => match PiGains::from_kp_ti(kp_v_per_a, ti_s) {
            Ok(g) => match g.with_setpoint_weight(setpoint_weight) {
                Ok(g) => queue(board, Command::Retune(g)),
                Err(e) => Reply::Refused(refusal(&e)),
            },
            Err(e) => Reply::Refused(refusal(&e)),
        },
        Request::ReadLimits => {
            let l = board.limits();
            Reply::Limits {
                min_a: l.min_a(),
                max_a: l.max_a(),
                slew_a_per_s: l.slew_a_per_s(),
            }
        }
        Request::ArmCapture {
            trigger,
            decimation,
            samples,
        } => {
            let trigger = match trigger {
                TriggerWire::Immediate => Trigger::Immediate,
                TriggerWire::SetpointChange => Trigger::SetpointChange,
                TriggerWire::Level { level_a, rising } => Trigger::Level { level_a, rising },
                TriggerWire::Excitation => Trigger::Excitation,
            };
            let capacity = board.capture_capacity();
            match CaptureSpec::new(trigger, decimation, samples, capacity).and_then(|s| board.arm_capture(s))
            {
                Ok(()) => Reply::Armed,
                Err(e) => Reply::Refused(refusal(&e)),
            }
        }
        Request::CaptureState => {
            let (state, filled, spec) = board.capture_progress();
            Reply::Capture {
                state: state as u8,
                filled: filled.min(u16::MAX as usize) as u16,
                wanted: spec.samples(),
                decimation: spec.decimation(),
            }
        }
        Request::ReadCapture { first } => {
            let mut buf = [Sample::default(); wire::CHUNK];
            let n = board.read_capture(first as usize, &mut buf).min(wire::CHUNK);
            let mut samples = [SampleWire::default(); wire::CHUNK];
            for (w, s) in samples.iter_mut().zip(buf.iter().take(n)) {
                *w = SampleWire {
                    setpoint_a: s.setpoint_a,
                    current_a: s.current_a,
                    commanded_v: s.commanded_v,
                    bus_v: s.bus_v,
                    // |duty| <= 1, so the product fits (`as` saturates).
                    duty_q15: (s.signed_duty() * 32767.0) as i16,
                    state: crate::capture::state_code(s.state),
                };
            }
            Reply::Chunk {
                first,
                count: n as u8,
                samples,
            }
        }
        Request::Excite {
            waveform,
            duration_ticks,
            current_limit_a,
        } => {
            let waveform = match waveform {
                WaveformWire::Steps {
                    low_v,
                    high_v,
                    hold_ticks,
                } => Waveform::Steps {
                    low_v,
                    high_v,
                    hold_ticks,
                },
                WaveformWire::Prbs {
                    offset_v,
                    amplitude_v,
                    order,
                    bit_ticks,
                } => Waveform::Prbs {
                    offset_v,
                    amplitude_v,
                    order,
                    bit_ticks,
                },
                WaveformWire::Chirp {
                    offset_v,
                    amplitude_v,
                    f0_hz,
                    f1_hz,
                } => Waveform::Chirp {
                    offset_v,
                    amplitude_v,
                    f0_hz,
                    f1_hz,
                },
            };
            let excitation =
                match Excitation::new(waveform, duration_ticks, current_limit_a, board.period_s()) {
                    Ok(e) => e,
                    Err(e) => return Reply::Refused(refusal(&e)),
                };
            let status = board.status();
            if !status.latched.is_empty() {
                return Reply::Faulted {
                    latched: status.latched.bits(),
                };
            }
            if status.state != LoopState::Disabled {
                return Reply::NotDisabled;
            }
            queue(board, Command::Excite(excitation))
        }
        Request::Design {
            method,
            resistance_ohm,
            inductance_h,
            settling_time_s,
            overshoot_pct,
            rise_time_s,
            delay_periods,
        } => device::design(
            &device::DesignAsk {
                method,
                resistance_ohm,
                inductance_h,
                settling_time_s,
                overshoot_pct,
                rise_time_s,
                delay_periods,
            },
            board,
        ),
        Request::IdentifyCapture { delay_samples } => device::identify(delay_samples, board),
    }
}

fn queue<B: Board>(board: &mut B, command: Command) -> Reply {
    if board.send(command) {
        Reply::Queued
    } else {
        Reply::Busy
    }
}

fn status_wire(s: &LoopStatus) -> StatusWire {
    StatusWire {
        state: crate::capture::state_code(s.state),
        latched: s.latched.bits(),
        first_fault: s.first_fault.map_or(0, |f| f as u16),
        setpoint_a: s.setpoint_a,
        target_a: s.target_a,
        current_a: s.current_a,
        commanded_v: s.commanded_v,
        duty: s.command.signed_duty(),
        heat: s.heat,
        excitation_end: match s.excitation_end {
            None => 0,
            Some(ExcitationEnd::Completed) => 1,
            Some(ExcitationEnd::CurrentLimit) => 2,
            Some(ExcitationEnd::Fault) => 3,
            Some(ExcitationEnd::Disabled) => 4,
        },
    }
}

/// A configuration error as the wire carries it.
pub fn refusal(e: &ConfigError) -> Refusal {
    let needs = match e.needs {
        Requirement::Finite => Needs::Finite,
        Requirement::Positive => Needs::Positive,
        Requirement::NonNegative => Needs::NonNegative,
        Requirement::Within { min, max } => Needs::Within { min, max },
        Requirement::Above(other) => Needs::Above(Name::new(other)),
        Requirement::Below(other) => Needs::Below(Name::new(other)),
        Requirement::DifferentFrom(other) => Needs::DifferentFrom(Name::new(other)),
        Requirement::AtLeastOne => Needs::AtLeastOne,
        _ => Needs::Other,
    };
    Refusal {
        field: Name::new(e.field),
        value: e.value,
        needs,
    }
}

#[cfg(test)]
mod tests;
