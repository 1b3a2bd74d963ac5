//! The work the device does for the host in the main loop: gains designed
//! with pi-core's own f32 design code, and R and L identified from the
//! capture with its least squares. Neither touches the loop: the host
//! writes the gains it accepts with [`super::Request::WriteGains`].

use super::Board;
use super::wire::{DesignReason, IdentifyReason, MethodWire, Name, Reply};
use crate::capture::Sample;
use crate::current_loop::LoopState;
use crate::design::analysis::OpenLoop;
use crate::design::{DesignError, Method, RlPlant, Sampling, Spec};
use crate::identify::{IdentifyError, RlIdentifier};

/// What [`super::Request::Design`] carries.
#[derive(Clone, Copy, Debug)]
pub(crate) struct DesignAsk {
    pub method: MethodWire,
    pub resistance_ohm: f32,
    pub inductance_h: f32,
    pub settling_time_s: f32,
    pub overshoot_pct: f32,
    pub rise_time_s: f32,
    pub delay_periods: f32,
}

fn refused(reason: DesignReason, field: &str, value: f32, nearest: f32) -> Reply {
    Reply::DesignRefused {
        reason,
        field: Name::new(field),
        value,
        nearest,
    }
}

fn design_error(e: DesignError<f32>) -> Reply {
    match e {
        DesignError::NotPositive { field, value } => refused(DesignReason::NotPositive, field, value, 0.0),
        DesignError::OvershootOutOfRange { overshoot } => refused(
            DesignReason::OvershootOutOfRange,
            "overshoot_pct",
            overshoot * 100.0,
            0.0,
        ),
        DesignError::SettlingTooSlow {
            settling_time_s,
            max_settling_time_s,
        } => refused(
            DesignReason::SettlingTooSlow,
            "settling_time_s",
            settling_time_s,
            max_settling_time_s,
        ),
        DesignError::UnstableRemainder {
            min_settling_time_s,
            magnitude,
        } => refused(
            DesignReason::UnstableRemainder,
            "settling_time_s",
            magnitude,
            min_settling_time_s,
        ),
        DesignError::FilterUnsupported => refused(DesignReason::FilterUnsupported, "method", 0.0, 0.0),
        DesignError::DelayOutOfRange { delay_periods } => {
            refused(DesignReason::DelayOutOfRange, "delay_periods", delay_periods, 0.0)
        }
    }
}

/// Designs gains for the board's period; refuses what the design code
/// refuses, and gains whose sampled loop would be unstable.
pub(crate) fn design<B: Board>(ask: &DesignAsk, board: &mut B) -> Reply {
    let method = match ask.method {
        MethodWire::DirectDiscrete => Method::DirectDiscrete,
        MethodWire::RootLocus => Method::RootLocus,
        MethodWire::ModulusOptimum => Method::ModulusOptimum,
        MethodWire::Cancellation => Method::Cancellation,
    };
    let plant = match RlPlant::new(ask.resistance_ohm, ask.inductance_h) {
        Ok(p) => p,
        Err(e) => return design_error(e),
    };
    let sampling = match Sampling::new(board.period_s(), ask.delay_periods, 0.0) {
        Ok(s) => s,
        Err(e) => return design_error(e),
    };
    let mut spec = match Spec::new(ask.settling_time_s, ask.overshoot_pct / 100.0) {
        Ok(s) => s,
        Err(e) => return design_error(e),
    };
    if ask.rise_time_s != 0.0 {
        spec = match spec.with_rise_time(ask.rise_time_s) {
            Ok(s) => s,
            Err(e) => return design_error(e),
        };
    }
    let gains = match method.design(&plant, &sampling, &spec) {
        Ok(g) => g,
        Err(e) => return design_error(e),
    };
    if !OpenLoop::new(&plant, &sampling, &gains).is_stable() {
        return refused(
            DesignReason::Unstable,
            "settling_time_s",
            ask.settling_time_s,
            0.0,
        );
    }
    Reply::Designed {
        kp_v_per_a: gains.kp_v_per_a,
        ti_s: gains.ti_s,
        setpoint_weight: method.setpoint_weight::<f32>(),
    }
}

/// Longest delay, in kept samples, that [`super::Request::IdentifyCapture`] takes.
pub const MAX_DELAY_SAMPLES: usize = 7;

/// Fits R and L to the capture's first run of samples taken during an
/// excitation: the voltage is the recorded signed duty times the bus, the
/// duty of sample `k - delay` taken as held from sample `k` on.
pub(crate) fn identify<B: Board>(delay_samples: u8, board: &mut B) -> Reply {
    let (_, filled, spec) = board.capture_progress();
    let period = board.period_s() * spec.decimation() as f32;
    let delay = (delay_samples as usize).min(MAX_DELAY_SAMPLES);
    let mut id = RlIdentifier::<f32>::new(period);
    // The last volts, by kept index modulo 8 (the delay is at most 7).
    let mut volts = [0.0f32; MAX_DELAY_SAMPLES + 1];
    let mut buf = [Sample::default(); 8];
    let (mut first, mut used, mut started) = (0usize, 0usize, false);
    'read: while first < filled {
        let n = board.read_capture(first, &mut buf).min(buf.len());
        if n == 0 {
            break;
        }
        for s in buf.iter().take(n) {
            if s.state != LoopState::Exciting {
                if started {
                    break 'read;
                }
                continue;
            }
            started = true;
            volts[used % volts.len()] = s.signed_duty() * s.bus_v;
            if used >= delay {
                id.sample(volts[(used - delay) % volts.len()], s.current_a);
            }
            used += 1;
        }
        first += n;
    }
    match id.estimate() {
        Ok(e) if e.resistance_ohm.is_finite() && e.inductance_h.is_finite() => Reply::Identified {
            resistance_ohm: e.resistance_ohm,
            inductance_h: e.inductance_h,
            resistance_sd_ohm: e.resistance_sd_ohm,
            inductance_sd_h: e.inductance_sd_h,
            samples: used.saturating_sub(delay).min(u16::MAX as usize) as u16,
        },
        Ok(_) => Reply::NotIdentified {
            reason: IdentifyReason::NotAnRlLoad,
        },
        Err(IdentifyError::TooFewSamples) => Reply::NotIdentified {
            reason: IdentifyReason::TooFewSamples,
        },
        Err(IdentifyError::NotAnRlLoad) => Reply::NotIdentified {
            reason: IdentifyReason::NotAnRlLoad,
        },
    }
}
