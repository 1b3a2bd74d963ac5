//! Open-loop excitations for identifying the load on the device: voltage
//! steps, a pseudo-random binary sequence (PRBS) and a linear chirp.
//!
//! An [`Excitation`] is handed to the loop with
//! [`Command::Excite`](crate::Command::Excite) while it is disabled. Each tick
//! the loop asks the waveform for a voltage, limits it to the PI's output
//! limits and to what the bus gives, and maps it to a duty exactly as the
//! closed loop does ([`crate::DutyMapping`]). The supervisor runs as always:
//! any fault ends the excitation in `Faulted`. It ends by itself, in
//! `Disabled` with the safe output, when its duration is over, or at the first
//! tick whose measured current exceeds the excitation's own current limit
//! ([`ExcitationEnd`] says which).
//!
//! # The waveforms
//!
//! * Steps: `low_v` for `hold_ticks`, then `high_v` for `hold_ticks`, and so
//!   on: a square wave, the classic voltage-step test repeated.
//! * PRBS: a maximal-length sequence from a Fibonacci linear-feedback shift
//!   register of `order` 5 to 16 bits, each bit held `bit_ticks`: the
//!   sequence repeats every `2^order - 1` bits and holds `2^(order-1)` ones
//!   per period (Golomb, *Shift Register Sequences*, on m-sequences); a one
//!   is `offset_v + amplitude_v`, a zero `offset_v - amplitude_v`.
//! * Chirp: `offset_v + amplitude_v sin(phi)`, the frequency sweeping
//!   linearly from `f0_hz` to `f1_hz` over the duration; the phase advances
//!   by `2 pi f Ts` each tick and is kept within one turn, so it stays exact
//!   in `f32` however long the sweep.

use core::f32::consts::PI;

use crate::error::{ConfigError, Requirement, finite, positive};

/// Feedback taps of maximal-length Fibonacci LFSRs, orders 5 to 16: bit `k`
/// set means stage `k + 1` feeds back (primitive trinomials and pentanomials
/// as commonly tabulated, e.g. in Xilinx application note XAPP052; from
/// memory, each checked by the test that the period is `2^n - 1`).
const TAPS: [u16; 12] = [
    0x0014, // 5: x^5 + x^3 + 1
    0x0030, // 6: x^6 + x^5 + 1
    0x0060, // 7: x^7 + x^6 + 1
    0x00B8, // 8: x^8 + x^6 + x^5 + x^4 + 1
    0x0110, // 9: x^9 + x^5 + 1
    0x0240, // 10: x^10 + x^7 + 1
    0x0500, // 11: x^11 + x^9 + 1
    0x0829, // 12: x^12 + x^6 + x^4 + x + 1
    0x100D, // 13: x^13 + x^4 + x^3 + x + 1
    0x2015, // 14: x^14 + x^5 + x^3 + x + 1
    0x6000, // 15: x^15 + x^14 + 1
    0xD008, // 16: x^16 + x^15 + x^13 + x^4 + 1
];

/// The waveform of an excitation, volts.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Waveform {
    /// A square wave between two levels.
    Steps {
        /// First level, volts.
        low_v: f32,
        /// Second level, volts.
        high_v: f32,
        /// Ticks at each level.
        hold_ticks: u32,
    },
    /// A maximal-length pseudo-random binary sequence.
    Prbs {
        /// Midpoint, volts.
        offset_v: f32,
        /// Half the swing, volts.
        amplitude_v: f32,
        /// Shift-register length, 5 to 16.
        order: u8,
        /// Ticks each bit is held.
        bit_ticks: u32,
    },
    /// A sine whose frequency sweeps linearly over the duration.
    Chirp {
        /// Midpoint, volts.
        offset_v: f32,
        /// Amplitude, volts.
        amplitude_v: f32,
        /// Frequency at the start, Hz.
        f0_hz: f32,
        /// Frequency at the end, Hz.
        f1_hz: f32,
    },
}

/// A validated excitation: a waveform, how long, and the current at which it
/// stops.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Excitation {
    waveform: Waveform,
    duration_ticks: u32,
    current_limit_a: f32,
}

impl Excitation {
    /// Checks the waveform against the control period `period_s` (a chirp
    /// must stay below the Nyquist frequency), `duration_ticks` at least 1,
    /// and a positive current limit.
    pub fn new(
        waveform: Waveform,
        duration_ticks: u32,
        current_limit_a: f32,
        period_s: f32,
    ) -> Result<Self, ConfigError> {
        let period_s = positive("period_s", period_s)?;
        if duration_ticks == 0 {
            return Err(ConfigError::new("duration_ticks", 0.0, Requirement::AtLeastOne));
        }
        positive("current_limit_a", current_limit_a)?;
        match waveform {
            Waveform::Steps {
                low_v,
                high_v,
                hold_ticks,
            } => {
                finite("low_v", low_v)?;
                finite("high_v", high_v)?;
                if high_v == low_v {
                    return Err(ConfigError::new(
                        "high_v",
                        high_v,
                        Requirement::DifferentFrom("low_v"),
                    ));
                }
                if hold_ticks == 0 {
                    return Err(ConfigError::new("hold_ticks", 0.0, Requirement::AtLeastOne));
                }
            }
            Waveform::Prbs {
                offset_v,
                amplitude_v,
                order,
                bit_ticks,
            } => {
                finite("offset_v", offset_v)?;
                positive("amplitude_v", amplitude_v)?;
                if !(5..=16).contains(&order) {
                    return Err(ConfigError::new(
                        "order",
                        order as f32,
                        Requirement::Within { min: 5.0, max: 16.0 },
                    ));
                }
                if bit_ticks == 0 {
                    return Err(ConfigError::new("bit_ticks", 0.0, Requirement::AtLeastOne));
                }
            }
            Waveform::Chirp {
                offset_v,
                amplitude_v,
                f0_hz,
                f1_hz,
            } => {
                finite("offset_v", offset_v)?;
                positive("amplitude_v", amplitude_v)?;
                let nyquist = 0.5 / period_s;
                for (field, f) in [("f0_hz", f0_hz), ("f1_hz", f1_hz)] {
                    if !(f.is_finite() && f > 0.0 && f < nyquist) {
                        return Err(ConfigError::new(
                            field,
                            f,
                            Requirement::Below("half the control rate"),
                        ));
                    }
                }
            }
        }
        Ok(Self {
            waveform,
            duration_ticks,
            current_limit_a,
        })
    }

    /// The waveform.
    pub fn waveform(&self) -> Waveform {
        self.waveform
    }

    /// Ticks it lasts.
    pub fn duration_ticks(&self) -> u32 {
        self.duration_ticks
    }

    /// The measured current magnitude that stops it, amperes.
    pub fn current_limit_a(&self) -> f32 {
        self.current_limit_a
    }
}

/// How the last excitation ended.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ExcitationEnd {
    /// It ran its whole duration.
    Completed,
    /// The measured current exceeded its limit.
    CurrentLimit,
    /// A fault latched.
    Fault,
    /// A disable command stopped it.
    Disabled,
}

/// A running excitation: the waveform's state.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) struct Generator {
    excitation: Excitation,
    tick: u32,
    lfsr: u16,
    phase: f32,
    ts: f32,
}

impl Generator {
    pub(crate) fn new(excitation: Excitation, period_s: f32) -> Self {
        Self {
            excitation,
            tick: 0,
            lfsr: 1,
            phase: 0.0,
            ts: period_s,
        }
    }

    pub(crate) fn current_limit_a(&self) -> f32 {
        self.excitation.current_limit_a
    }

    /// The next tick's voltage, or `None` when the duration is over.
    pub(crate) fn next(&mut self) -> Option<f32> {
        let k = self.tick;
        if k >= self.excitation.duration_ticks {
            return None;
        }
        self.tick = k + 1;
        let v = match self.excitation.waveform {
            Waveform::Steps {
                low_v,
                high_v,
                hold_ticks,
            } => {
                if (k / hold_ticks.max(1)).is_multiple_of(2) {
                    low_v
                } else {
                    high_v
                }
            }
            Waveform::Prbs {
                offset_v,
                amplitude_v,
                order,
                bit_ticks,
            } => {
                if k > 0 && k.is_multiple_of(bit_ticks.max(1)) {
                    self.lfsr = lfsr_step(self.lfsr, order);
                }
                if self.lfsr & 1 == 1 {
                    offset_v + amplitude_v
                } else {
                    offset_v - amplitude_v
                }
            }
            Waveform::Chirp {
                offset_v,
                amplitude_v,
                f0_hz,
                f1_hz,
            } => {
                let v = offset_v + amplitude_v * libm::sinf(self.phase);
                let t = k as f32 / self.excitation.duration_ticks as f32;
                let f = f0_hz + (f1_hz - f0_hz) * t;
                self.phase += 2.0 * PI * f * self.ts;
                if self.phase >= 2.0 * PI {
                    self.phase -= 2.0 * PI;
                }
                v
            }
        };
        Some(v)
    }
}

/// One shift of a Fibonacci LFSR of `order` bits (5 to 16; others are
/// taken as 16): the new bit is the parity of the tapped stages.
pub fn lfsr_step(state: u16, order: u8) -> u16 {
    // Not `clamp`: its argument check is a panic path.
    #[allow(clippy::manual_clamp)]
    let order = if order < 5 {
        5
    } else if order > 16 {
        16
    } else {
        order
    };
    let taps = TAPS.get((order - 5) as usize).copied().unwrap_or(0xD008);
    let bit = (state & taps).count_ones() as u16 & 1;
    let mask = if order >= 16 {
        u16::MAX
    } else {
        (1u16 << order) - 1
    };
    ((state << 1) | bit) & mask
}

#[cfg(test)]
mod tests;
