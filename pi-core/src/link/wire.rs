//! The messages, as they travel: plain data, separate from the validated
//! configuration types. A decoded value reaches the loop only through the
//! same constructors a firmware calls ([`crate::PiGains::from_kp_ti`],
//! [`crate::capture::CaptureSpec::new`]), and a refusal comes back as
//! [`Reply::Refused`] naming the field.
//!
//! Every frame's payload starts with the protocol's version byte
//! ([`VERSION`]), then a tag the host chooses and the device echoes (to pair
//! a reply with its request), then the body. A device reads the version
//! before anything else, so a frame from another version gets
//! [`Reply::WrongVersion`] however its body is laid out.
//!
//! Variants are only ever added at the end of each enum, so an older host
//! still decodes the replies it knows.
//!
//! Integers wider than a byte go as fixed little-endian (postcard's
//! `fixint`), names as fixed arrays, and a chunk as a fixed array with its
//! count: postcard's variable-length integers leave a bounds check in the
//! encoder that the optimiser cannot remove, and the no-panic link check
//! would fail on it.

use serde::{Deserialize, Serialize};

/// The protocol's version, the first byte of every payload.
pub const VERSION: u8 = 1;

/// Samples per [`Reply::Chunk`].
pub const CHUNK: usize = 8;

/// Longest field name a refusal carries.
pub const NAME_LEN: usize = 24;

/// A request with its header.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct RequestFrame {
    /// [`VERSION`].
    pub version: u8,
    /// Chosen by the host, echoed in the reply.
    #[serde(with = "postcard::fixint::le")]
    pub tag: u16,
    /// What is asked.
    pub body: Request,
}

/// A reply with its header.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ReplyFrame {
    /// [`VERSION`].
    pub version: u8,
    /// The request's tag (0 when the request could not be read).
    #[serde(with = "postcard::fixint::le")]
    pub tag: u16,
    /// The answer.
    pub body: Reply,
}

/// What the host asks.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub enum Request {
    /// The device's version, capture capacity and control period
    /// ([`Reply::Hello`]).
    Hello,
    /// The loop's state and faults ([`Reply::Status`]).
    Status,
    /// Start closed-loop control ([`Reply::Queued`]).
    Enable,
    /// Stop: safe output ([`Reply::Queued`]).
    Disable,
    /// Clear latched faults ([`Reply::Queued`]).
    ClearFaults,
    /// A new target current, amperes ([`Reply::Queued`]).
    SetCurrent {
        /// Amperes, positive forward.
        current_a: f32,
    },
    /// The gains in use ([`Reply::Gains`]).
    ReadGains,
    /// New gains, applied bumplessly ([`Reply::Queued`]).
    WriteGains {
        /// Proportional gain, V/A.
        kp_v_per_a: f32,
        /// Integral time, s.
        ti_s: f32,
        /// Share of the setpoint in the proportional term, 0 to 1 (the
        /// design method's; 1 is a plain PI).
        setpoint_weight: f32,
    },
    /// The setpoint limits in use ([`Reply::Limits`]).
    ReadLimits,
    /// Arm the capture ([`Reply::Armed`]).
    ArmCapture {
        /// What starts it.
        trigger: TriggerWire,
        /// One tick kept in this many (at least 1).
        #[serde(with = "postcard::fixint::le")]
        decimation: u16,
        /// Ticks to keep (1 to the capacity).
        #[serde(with = "postcard::fixint::le")]
        samples: u16,
    },
    /// Where the capture is ([`Reply::Capture`]).
    CaptureState,
    /// Up to [`CHUNK`] samples from index `first` ([`Reply::Chunk`]).
    ReadCapture {
        /// Index of the first sample, 0 the oldest.
        #[serde(with = "postcard::fixint::le")]
        first: u16,
    },
    /// Run an open-loop excitation from `Disabled` ([`Reply::Queued`]); see
    /// [`crate::excitation`].
    Excite {
        /// The waveform.
        waveform: WaveformWire,
        /// Control ticks it lasts.
        #[serde(with = "postcard::fixint::le")]
        duration_ticks: u32,
        /// The measured current that stops it, A.
        current_limit_a: f32,
    },
    /// Design gains on the device with pi-core's f32 design code
    /// ([`Reply::Designed`] or [`Reply::DesignRefused`]); nothing is
    /// applied (write them with [`Request::WriteGains`]).
    Design {
        /// The method.
        method: MethodWire,
        /// Winding resistance, ohm.
        resistance_ohm: f32,
        /// Winding inductance, H.
        inductance_h: f32,
        /// 2 % settling time asked, s.
        settling_time_s: f32,
        /// Overshoot allowed, percent.
        overshoot_pct: f32,
        /// Largest 10-90 % rise time, s; 0 for none.
        rise_time_s: f32,
        /// Sample-to-update delay, control periods (0 to 1).
        delay_periods: f32,
    },
    /// Identify R and L on the device from the capture's samples taken
    /// during an excitation, with pi-core's least squares in f32
    /// ([`Reply::Identified`] or [`Reply::NotIdentified`]).
    IdentifyCapture {
        /// Kept samples between a recorded duty and the current it first
        /// moves (0 to 7).
        delay_samples: u8,
    },
}

/// A design method on the wire ([`crate::design::Method`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum MethodWire {
    /// The sampled loop's poles placed directly.
    DirectDiscrete,
    /// Continuous pole placement.
    RootLocus,
    /// The lumped small time constant.
    ModulusOptimum,
    /// The PI zero on the winding's pole.
    Cancellation,
}

/// Why the device could not design, on the wire ([`crate::design::DesignError`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum DesignReason {
    /// `field` must be finite and above zero (`value`).
    NotPositive,
    /// The overshoot (`value`, a fraction) must be from 0 up to 1.
    OvershootOutOfRange,
    /// The settling time (`value`) is slower than the winding by itself;
    /// `nearest` is the slowest this method can give.
    SettlingTooSlow,
    /// The spec is too fast for the period; `nearest` is about the fastest
    /// settling time that stays stable.
    UnstableRemainder,
    /// This method does not handle a current filter.
    FilterUnsupported,
    /// The delay (`value`, periods) must be between 0 and 1.
    DelayOutOfRange,
    /// The gains came out, but the sampled loop with them is unstable.
    Unstable,
    /// Another reason.
    Other,
}

/// Why the device could not identify, on the wire
/// ([`crate::identify::IdentifyError`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum IdentifyReason {
    /// Fewer than four usable samples (no excitation in the capture?).
    TooFewSamples,
    /// The samples do not fit an R-L load at this period.
    NotAnRlLoad,
    /// Another reason.
    Other,
}

/// An excitation's waveform on the wire ([`crate::excitation::Waveform`]).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub enum WaveformWire {
    /// A square wave between two levels.
    Steps {
        /// V.
        low_v: f32,
        /// V.
        high_v: f32,
        /// Ticks at each level.
        #[serde(with = "postcard::fixint::le")]
        hold_ticks: u32,
    },
    /// A maximal-length pseudo-random binary sequence.
    Prbs {
        /// V.
        offset_v: f32,
        /// V.
        amplitude_v: f32,
        /// Register length, 5 to 16.
        order: u8,
        /// Ticks per bit.
        #[serde(with = "postcard::fixint::le")]
        bit_ticks: u32,
    },
    /// A linear frequency sweep.
    Chirp {
        /// V.
        offset_v: f32,
        /// V.
        amplitude_v: f32,
        /// Hz.
        f0_hz: f32,
        /// Hz.
        f1_hz: f32,
    },
}

/// A capture trigger on the wire.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub enum TriggerWire {
    /// At once.
    Immediate,
    /// When the target current changes.
    SetpointChange,
    /// When the measured current crosses a level.
    Level {
        /// Amperes.
        level_a: f32,
        /// Upward (`true`) or downward.
        rising: bool,
    },
    /// When an excitation starts.
    Excitation,
}

/// What the device answers.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub enum Reply {
    /// Who the device is.
    Hello {
        /// The device's [`VERSION`].
        version: u8,
        /// Samples its capture holds.
        #[serde(with = "postcard::fixint::le")]
        capture_capacity: u16,
        /// Its control period, s.
        period_s: f32,
    },
    /// The loop's state.
    Status(StatusWire),
    /// The command was handed to the control interrupt, which applies it at
    /// its next tick (a request the loop would refuse is refused here first
    /// where the handler can tell: a current while faulted, bad gains).
    Queued,
    /// The gains in use.
    Gains {
        /// V/A.
        kp_v_per_a: f32,
        /// s.
        ti_s: f32,
        /// Setpoint weight, 0 to 1.
        setpoint_weight: f32,
    },
    /// The setpoint limits in use.
    Limits {
        /// Lowest target, A.
        min_a: f32,
        /// Highest target, A.
        max_a: f32,
        /// Slew rate, A/s.
        slew_a_per_s: f32,
    },
    /// The capture is armed.
    Armed,
    /// The capture's progress.
    Capture {
        /// 0 idle, 1 armed, 2 filling, 3 done.
        state: u8,
        /// Samples kept so far.
        #[serde(with = "postcard::fixint::le")]
        filled: u16,
        /// Samples wanted.
        #[serde(with = "postcard::fixint::le")]
        wanted: u16,
        /// One tick kept in this many.
        #[serde(with = "postcard::fixint::le")]
        decimation: u16,
    },
    /// Samples `first..first + count` (none past the end).
    Chunk {
        /// Index of the first.
        #[serde(with = "postcard::fixint::le")]
        first: u16,
        /// How many of `samples` are meant (the rest are zero).
        count: u8,
        /// The samples.
        samples: [SampleWire; CHUNK],
    },
    /// A value was refused; nothing changed.
    Refused(Refusal),
    /// A command was refused because faults are latched (their bits).
    Faulted {
        /// The latched faults ([`crate::FaultSet::bits`]).
        #[serde(with = "postcard::fixint::le")]
        latched: u16,
    },
    /// The queue to the control interrupt is full; try again.
    Busy,
    /// The request's version is not the device's.
    WrongVersion {
        /// The device's [`VERSION`].
        device: u8,
    },
    /// The frame's check failed, or its payload is not a request.
    Malformed,
    /// The frame was longer than the device's buffer.
    Oversized,
    /// An excitation was asked while the loop is running or exciting;
    /// disable it first.
    NotDisabled,
    /// Gains designed on the device (not applied).
    Designed {
        /// V/A.
        kp_v_per_a: f32,
        /// s.
        ti_s: f32,
        /// The method's setpoint weight.
        setpoint_weight: f32,
    },
    /// The device could not design.
    DesignRefused {
        /// Why.
        reason: DesignReason,
        /// The field concerned, where one is.
        field: Name,
        /// The value concerned.
        value: f32,
        /// The nearest value that works, where the reason gives one (else 0).
        nearest: f32,
    },
    /// R and L identified on the device, with standard deviations.
    Identified {
        /// Ohm.
        resistance_ohm: f32,
        /// H.
        inductance_h: f32,
        /// Ohm.
        resistance_sd_ohm: f32,
        /// H.
        inductance_sd_h: f32,
        /// Samples used.
        #[serde(with = "postcard::fixint::le")]
        samples: u16,
    },
    /// The device could not identify.
    NotIdentified {
        /// Why.
        reason: IdentifyReason,
    },
}

/// The loop's state on the wire.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct StatusWire {
    /// 0 disabled, 1 running, 2 faulted, 3 exciting.
    pub state: u8,
    /// Latched faults ([`crate::FaultSet::bits`]).
    #[serde(with = "postcard::fixint::le")]
    pub latched: u16,
    /// The first cause since the last clear (its bit), 0 for none.
    #[serde(with = "postcard::fixint::le")]
    pub first_fault: u16,
    /// The slewed setpoint, A.
    pub setpoint_a: f32,
    /// The target, A.
    pub target_a: f32,
    /// The last measured current, A.
    pub current_a: f32,
    /// The last commanded volts.
    pub commanded_v: f32,
    /// The last signed duty, -1 to 1.
    pub duty: f32,
    /// Normalised I^2t heat (1 = rated), 0 without a thermal model.
    pub heat: f32,
    /// How the last excitation ended: 0 running or none yet, 1 completed,
    /// 2 at its current limit, 3 by a fault, 4 by a disable.
    pub excitation_end: u8,
}

/// One captured tick on the wire ([`crate::capture::Sample`]).
#[derive(Clone, Copy, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct SampleWire {
    /// A.
    pub setpoint_a: f32,
    /// A.
    pub current_a: f32,
    /// V.
    pub commanded_v: f32,
    /// V.
    pub bus_v: f32,
    /// Signed duty in units of 1/32767.
    #[serde(with = "postcard::fixint::le")]
    pub duty_q15: i16,
    /// 0 disabled, 1 running, 2 faulted, 3 exciting.
    pub state: u8,
}

/// A name of at most [`NAME_LEN`] bytes of UTF-8, padded with zeros.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Name(pub [u8; NAME_LEN]);

impl Name {
    /// `text`, cut at [`NAME_LEN`] bytes on a character boundary.
    pub fn new(text: &str) -> Self {
        let mut bytes = [0u8; NAME_LEN];
        let mut end = 0;
        for (i, c) in text.char_indices() {
            let next = i + c.len_utf8();
            if next > NAME_LEN {
                break;
            }
            end = next;
        }
        for (b, t) in bytes.iter_mut().zip(text.as_bytes().iter().take(end)) {
            *b = *t;
        }
        Self(bytes)
    }

    /// The text (up to the first zero; empty when not UTF-8).
    pub fn as_str(&self) -> &str {
        let end = self.0.iter().position(|b| *b == 0).unwrap_or(NAME_LEN);
        core::str::from_utf8(self.0.get(..end).unwrap_or(&[])).unwrap_or("")
    }
}

/// A refused value: which field, the value, what it needs.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Refusal {
    /// The field as the request names it (for example `kp_v_per_a`).
    pub field: Name,
    /// The value given.
    pub value: f32,
    /// What it must be.
    pub needs: Needs,
}

/// What a refused value must be ([`crate::Requirement`] on the wire).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub enum Needs {
    /// A finite number.
    Finite,
    /// Finite and above zero.
    Positive,
    /// Finite and zero or more.
    NonNegative,
    /// Within `[min, max]`.
    Within {
        /// Smallest.
        min: f32,
        /// Largest.
        max: f32,
    },
    /// Above the named quantity.
    Above(Name),
    /// Below the named quantity.
    Below(Name),
    /// Different from the named quantity.
    DifferentFrom(Name),
    /// A whole number of at least 1.
    AtLeastOne,
    /// Something else the device could not say.
    Other,
}
