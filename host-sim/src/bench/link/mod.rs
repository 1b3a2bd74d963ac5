//! The bench link, host side: requests to a board (a real one on a serial
//! port, or the virtual board of [`super::virtual_board`]) and their replies,
//! with pi-core's own messages and framing ([`pi_core::link`]), so both ends
//! share one definition.
//!
//! Every request carries a tag the host counts up; a reply with another tag
//! (a late answer to an earlier request that timed out) is skipped. A reply
//! that does not come within the timeout, a frame that does not decode, and
//! each refusal of the board are a [`LinkError`] in one sentence.

use std::io::{self, Read, Write};
use std::time::{Duration, Instant};

use pi_core::link::frame::{self, FrameDecoder, MAX_FRAME};
use pi_core::link::{
    DesignReason, IdentifyReason, MethodWire, Reply, ReplyFrame, Request, RequestFrame, SampleWire,
    StatusWire, TriggerWire, VERSION,
};

/// Why a request got no usable answer, in one sentence.
#[derive(Clone, Debug, PartialEq)]
pub struct LinkError(pub String);

impl std::fmt::Display for LinkError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}", self.0)
    }
}

impl std::error::Error for LinkError {}

mod text;

pub use text::{capture_csv, fault_names, refusal_text, state_name};

fn fail(s: impl Into<String>) -> LinkError {
    LinkError(s.into())
}

/// Who the board is ([`Reply::Hello`]).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Hello {
    /// Samples its capture holds.
    pub capture_capacity: usize,
    /// Its control period, s.
    pub period_s: f64,
}

/// The gains a board runs ([`Reply::Gains`]).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BoardGains {
    /// V/A.
    pub kp_v_per_a: f64,
    /// s.
    pub ti_s: f64,
    /// 0 to 1.
    pub setpoint_weight: f64,
}

impl BoardGains {
    fn from_wire(kp_v_per_a: f32, ti_s: f32, setpoint_weight: f32) -> Self {
        Self {
            kp_v_per_a: kp_v_per_a as f64,
            ti_s: ti_s as f64,
            setpoint_weight: setpoint_weight as f64,
        }
    }
}

/// R and L the board identified itself, with standard deviations.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BoardEstimate {
    /// Ohm.
    pub resistance_ohm: f64,
    /// H.
    pub inductance_h: f64,
    /// Ohm.
    pub resistance_sd_ohm: f64,
    /// H.
    pub inductance_sd_h: f64,
    /// Samples used.
    pub samples: usize,
}

/// What the board is asked to design for.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DesignAsk {
    /// The method.
    pub method: MethodWire,
    /// Ohm.
    pub resistance_ohm: f64,
    /// H.
    pub inductance_h: f64,
    /// 2 % settling time, s.
    pub settling_time_s: f64,
    /// Percent.
    pub overshoot_pct: f64,
    /// Largest 10-90 % rise time, s.
    pub rise_time_s: Option<f64>,
    /// Sample-to-update delay, periods.
    pub delay_periods: f64,
}

/// A capture read back from a board.
#[derive(Clone, Debug, PartialEq)]
pub struct BoardCapture {
    /// Time between two kept samples, s (control period times decimation).
    pub period_s: f64,
    /// The samples, oldest first.
    pub samples: Vec<SampleWire>,
}

/// A link to one board over any byte stream whose reads time out (a
/// `serialport` port does; so does [`super::virtual_board::VirtualPort`]).
pub struct BoardLink<P> {
    port: P,
    tag: u16,
    decoder: FrameDecoder,
    timeout: Duration,
    /// How long to wait between two polls of a board that is busy.
    pub poll: Duration,
}

impl<P: Read + Write> BoardLink<P> {
    /// A link over `port`, waiting at most `timeout` for each reply.
    pub fn new(port: P, timeout: Duration) -> Self {
        Self {
            port,
            tag: 0,
            decoder: FrameDecoder::new(),
            timeout,
            poll: Duration::from_millis(2),
        }
    }

    /// The port, for whoever needs it back.
    pub fn port_mut(&mut self) -> &mut P {
        &mut self.port
    }

    /// Sends one request and waits for its reply.
    pub fn request(&mut self, body: Request) -> Result<Reply, LinkError> {
        self.tag = self.tag.wrapping_add(1).max(1);
        let request = RequestFrame {
            version: VERSION,
            tag: self.tag,
            body,
        };
        let mut out = [0u8; MAX_FRAME];
        let n = frame::encode(&request, &mut out)
            .map_err(|_| fail("a request did not fit in one frame (a fault of this program)"))?;
        self.port
            .write_all(&out[..n])
            .and_then(|()| self.port.flush())
            .map_err(|e| fail(format!("cannot write to the board: {e}")))?;
        let deadline = Instant::now() + self.timeout;
        let mut byte = [0u8; 1];
        loop {
            match self.port.read(&mut byte) {
                Ok(1) => {}
                Ok(_) => return Err(fail("the board's port closed")),
                Err(e) if matches!(e.kind(), io::ErrorKind::TimedOut | io::ErrorKind::WouldBlock) => {}
                Err(e) if e.kind() == io::ErrorKind::Interrupted => continue,
                Err(e) => return Err(fail(format!("cannot read from the board: {e}"))),
            }
            if Instant::now() > deadline {
                return Err(fail(format!(
                    "the board did not answer within {} ms; check the port, the wiring and the baud rate, and that the firmware runs the link",
                    self.timeout.as_millis()
                )));
            }
            let Some(Ok(payload)) = self.decoder.push(byte[0]) else {
                continue;
            };
            let Some(reply) = frame::parse::<ReplyFrame>(payload) else {
                if payload.first() != Some(&VERSION) {
                    return Err(fail(format!(
                        "the board speaks protocol version {}, this program {VERSION}; update one of them",
                        payload.first().copied().unwrap_or(0)
                    )));
                }
                return Err(fail("the board's reply could not be read; check the baud rate"));
            };
            match reply.body {
                Reply::WrongVersion { device } => {
                    return Err(fail(format!(
                        "the board speaks protocol version {device}, this program {VERSION}; update one of them"
                    )));
                }
                Reply::Malformed if reply.tag == 0 => {
                    return Err(fail(
                        "the board could not read a request (damaged on the line); check the wiring and the baud rate",
                    ));
                }
                Reply::Oversized => return Err(fail("the board received a frame too long to be a request")),
                body if reply.tag == self.tag => return Ok(body),
                _ => {} // a late reply to an earlier request
            }
        }
    }

    /// Sends a command; `Ok` once the board queued it for its control
    /// interrupt. A full queue is retried for up to the timeout.
    pub fn command(&mut self, body: Request) -> Result<(), LinkError> {
        let deadline = Instant::now() + self.timeout;
        loop {
            match self.request(body)? {
                Reply::Queued | Reply::Armed => return Ok(()),
                Reply::Busy if Instant::now() < deadline => std::thread::sleep(self.poll),
                other => return Err(refused(&body, &other)),
            }
        }
    }

    /// The board's version, capture capacity and period.
    pub fn hello(&mut self) -> Result<Hello, LinkError> {
        match self.request(Request::Hello)? {
            Reply::Hello {
                capture_capacity,
                period_s,
                ..
            } => Ok(Hello {
                capture_capacity: capture_capacity as usize,
                period_s: period_s as f64,
            }),
            other => Err(refused(&Request::Hello, &other)),
        }
    }

    /// The loop's state now.
    pub fn status(&mut self) -> Result<StatusWire, LinkError> {
        match self.request(Request::Status)? {
            Reply::Status(s) => Ok(s),
            other => Err(refused(&Request::Status, &other)),
        }
    }

    /// The gains in use.
    pub fn gains(&mut self) -> Result<BoardGains, LinkError> {
        match self.request(Request::ReadGains)? {
            Reply::Gains {
                kp_v_per_a,
                ti_s,
                setpoint_weight,
            } => Ok(BoardGains::from_wire(kp_v_per_a, ti_s, setpoint_weight)),
            other => Err(refused(&Request::ReadGains, &other)),
        }
    }

    /// The setpoint limits in use: lowest and highest target, A, and slew, A/s.
    pub fn limits(&mut self) -> Result<(f64, f64, f64), LinkError> {
        match self.request(Request::ReadLimits)? {
            Reply::Limits {
                min_a,
                max_a,
                slew_a_per_s,
            } => Ok((min_a as f64, max_a as f64, slew_a_per_s as f64)),
            other => Err(refused(&Request::ReadLimits, &other)),
        }
    }

    /// Gains designed on the board with its own f32 design code (not
    /// applied).
    pub fn design(&mut self, ask: &DesignAsk) -> Result<BoardGains, LinkError> {
        let request = Request::Design {
            method: ask.method,
            resistance_ohm: ask.resistance_ohm as f32,
            inductance_h: ask.inductance_h as f32,
            settling_time_s: ask.settling_time_s as f32,
            overshoot_pct: ask.overshoot_pct as f32,
            rise_time_s: ask.rise_time_s.unwrap_or(0.0) as f32,
            delay_periods: ask.delay_periods as f32,
        };
        match self.request(request)? {
            Reply::Designed {
                kp_v_per_a,
                ti_s,
                setpoint_weight,
            } => Ok(BoardGains::from_wire(kp_v_per_a, ti_s, setpoint_weight)),
            Reply::DesignRefused {
                reason,
                field,
                value,
                nearest,
            } => Err(fail(format!(
                "the board could not design: {}",
                match reason {
                    DesignReason::NotPositive => format!("{} = {value} must be above 0", field.as_str()),
                    DesignReason::OvershootOutOfRange => {
                        format!("the overshoot, {value} %, must be from 0 % up to 100 %")
                    }
                    DesignReason::SettlingTooSlow => format!(
                        "a settling time of {value:.3e} s is slower than the winding settles by itself; ask for {nearest:.3e} s or less, or use the cancellation method"
                    ),
                    DesignReason::UnstableRemainder => format!(
                        "the settling time asked is too fast for the board's period; ask for about {nearest:.3e} s or more"
                    ),
                    DesignReason::FilterUnsupported =>
                        "this method does not handle a current filter".to_string(),
                    DesignReason::DelayOutOfRange => {
                        format!("the delay, {value} periods, must be from 0 to 1 period")
                    }
                    DesignReason::Unstable => {
                        "the gains would make the sampled loop unstable; ask for a slower settling time"
                            .to_string()
                    }
                    _ => "the board gave a reason this program does not know".to_string(),
                }
            ))),
            other => Err(refused(&request, &other)),
        }
    }

    /// R and L the board fits to its capture's excitation with its own
    /// least squares; `delay_samples` kept samples between a recorded duty
    /// and the current it first moves.
    pub fn identify_on_board(&mut self, delay_samples: u8) -> Result<BoardEstimate, LinkError> {
        let request = Request::IdentifyCapture { delay_samples };
        match self.request(request)? {
            Reply::Identified {
                resistance_ohm,
                inductance_h,
                resistance_sd_ohm,
                inductance_sd_h,
                samples,
            } => Ok(BoardEstimate {
                resistance_ohm: resistance_ohm as f64,
                inductance_h: inductance_h as f64,
                resistance_sd_ohm: resistance_sd_ohm as f64,
                inductance_sd_h: inductance_sd_h as f64,
                samples: samples as usize,
            }),
            Reply::NotIdentified { reason } => Err(fail(match reason {
                IdentifyReason::TooFewSamples => {
                    "the board could not identify: its capture holds no excitation (run `ampwright board PORT identify` first)"
                }
                IdentifyReason::NotAnRlLoad => {
                    "the board could not identify: its capture does not fit an R-L load at its period"
                }
                _ => "the board could not identify, for a reason this program does not know",
            })),
            other => Err(refused(&request, &other)),
        }
    }

    /// Polls the status until `done` holds for it, or `limit` passes.
    pub fn wait_for(
        &mut self,
        limit: Duration,
        what: &str,
        mut done: impl FnMut(&StatusWire) -> bool,
    ) -> Result<StatusWire, LinkError> {
        let deadline = Instant::now() + limit;
        loop {
            let s = self.status()?;
            if done(&s) {
                return Ok(s);
            }
            if Instant::now() > deadline {
                return Err(fail(format!(
                    "the board did not {what} within {} s",
                    limit.as_secs_f64()
                )));
            }
            std::thread::sleep(self.poll);
        }
    }

    /// Arms the capture.
    pub fn arm(&mut self, trigger: TriggerWire, decimation: u16, samples: u16) -> Result<(), LinkError> {
        self.command(Request::ArmCapture {
            trigger,
            decimation,
            samples,
        })
    }

    /// Waits until the capture is full, then reads it.
    pub fn collect(&mut self, limit: Duration, period_s: f64) -> Result<BoardCapture, LinkError> {
        let deadline = Instant::now() + limit;
        let (wanted, decimation) = loop {
            match self.request(Request::CaptureState)? {
                Reply::Capture {
                    state: 3,
                    filled,
                    decimation,
                    ..
                } => break (filled, decimation),
                Reply::Capture { state: 0, .. } => {
                    return Err(fail(
                        "the board's capture is not armed (it was cancelled or never armed)",
                    ));
                }
                Reply::Capture { filled, wanted, .. } if Instant::now() > deadline => {
                    return Err(fail(format!(
                        "the capture kept {filled} of {wanted} samples in {} s; its trigger may not have come",
                        limit.as_secs_f64()
                    )));
                }
                Reply::Capture { .. } => std::thread::sleep(self.poll),
                other => return Err(refused(&Request::CaptureState, &other)),
            }
        };
        let mut samples = Vec::with_capacity(wanted as usize);
        while samples.len() < wanted as usize {
            let first = samples.len() as u16;
            match self.request(Request::ReadCapture { first })? {
                Reply::Chunk {
                    first: f,
                    count,
                    samples: chunk,
                } if f == first && count > 0 => samples.extend(chunk.iter().take(count as usize)),
                _ => {
                    return Err(fail(format!(
                        "the board stopped sending its capture at sample {first} of {wanted}"
                    )));
                }
            }
        }
        Ok(BoardCapture {
            period_s: period_s * decimation.max(1) as f64,
            samples,
        })
    }
}

/// A reply that is not the one a request wants, in one sentence.
fn refused(request: &Request, reply: &Reply) -> LinkError {
    let what = match request {
        Request::Enable => "enable the loop",
        Request::Disable => "disable the loop",
        Request::ClearFaults => "clear the faults",
        Request::SetCurrent { .. } => "take the new current",
        Request::WriteGains { .. } => "take the new gains",
        Request::ArmCapture { .. } => "arm the capture",
        Request::Excite { .. } => "run the excitation",
        _ => "answer",
    };
    match reply {
        Reply::Refused(r) => fail(format!("the board would not {what}: {}", refusal_text(r))),
        Reply::Faulted { latched } => fail(format!(
            "the board would not {what}: faults are latched ({}); find the cause, then `ampwright board PORT clear`",
            fault_names(*latched)
        )),
        Reply::Busy => fail(format!(
            "the board would not {what}: its command queue stayed full"
        )),
        Reply::NotDisabled => fail(format!(
            "the board would not {what}: the loop must be disabled first"
        )),
        _ => fail(format!(
            "the board gave an unexpected answer when asked to {what}"
        )),
    }
}
