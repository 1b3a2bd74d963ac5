//! Everything a run's report states, gathered on every control tick as the run
//! goes, so that thinning the stored trace (`record_every_ticks`) changes no
//! figure: peaks, the first fault, the winding's maximum, and each setpoint
//! step measured by pi-core's one step-metrics routine.
//!
//! A step is the window from a change of the requested current to the next
//! change or the end of the run. Its target is the request as the firmware's
//! setpoint limits let it through (a request beyond them is marked clamped).
//! A step is **interrupted**, and not scored, when during its window a fault
//! latches, the bus leaves its nominal level (an injected dip or surge), the
//! gains are retuned, or the run ends before it settles; the report says
//! which. A charger's voltage limit taking over the setpoint (constant
//! voltage) ends the open step there (interrupted if it had not settled);
//! while the limit sets the current its small changes open no steps: the
//! request follows the cell there, not a spec.

use std::collections::VecDeque;

use pi_core::design::step::StepMeter;

use crate::results::metrics::StepMetrics;
use crate::sim::runner::TickNote;
use crate::sim::trace::TracePoint;

/// Steps smaller than this are not measured, amperes.
pub const MIN_STEP_A: f64 = 1e-3;

/// The steady-state error is the mean over the last 10 % of the window, at
/// most this many ticks.
pub const MAX_TAIL_TICKS: usize = 10_000;

/// Why a step was not scored.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Interruption {
    /// A fault latched during the window.
    Fault,
    /// The bus left its nominal level (an injected dip or surge).
    BusEvent,
    /// The gains were retuned during the window.
    Retune,
    /// A charger's voltage limit took over the setpoint (constant voltage).
    ChargeVoltage,
    /// The run ended before the step settled.
    EndOfRun,
}

impl Interruption {
    /// In words.
    pub fn describe(self) -> &'static str {
        match self {
            Interruption::Fault => "a fault latched",
            Interruption::BusEvent => "the bus left its nominal level",
            Interruption::Retune => "the gains were retuned",
            Interruption::ChargeVoltage => "the charger's voltage limit took over the setpoint",
            Interruption::EndOfRun => "the run ended before it settled",
        }
    }
}

struct Window {
    t0: f64,
    from_a: f64,
    to_a: f64,
    clamped: bool,
    meter: StepMeter<f64>,
    ticks: usize,
    tail: VecDeque<f64>,
    iae_a_s: f64,
    last_t: f64,
    dt: f64,
    interrupted: Option<Interruption>,
}

/// The running summary of a run.
#[derive(Default)]
pub struct Summary {
    limits: (f64, f64),
    /// Ticks observed.
    pub ticks: u64,
    /// Largest true current magnitude, A, its time, and what the controller read then.
    pub peak_current: (f64, f64, f64),
    /// Largest duty magnitude.
    pub peak_duty: f64,
    /// Highest winding temperature, C.
    pub max_winding_c: f64,
    /// Every fault bit latched at any time.
    pub fault_bits: u16,
    /// The first tick with a fault latched: time and bits.
    pub first_fault: Option<(f64, u16)>,
    /// Whether an injected sensor fault was active at any time.
    pub sensor_fault_injected: bool,
    /// The duty limit (the PI is saturated when the duty sits at it).
    max_duty: f64,
    /// The last tick at which the duty sat at its limit, s.
    pub last_saturated_s: Option<f64>,
    /// The steps measured so far.
    pub steps: Vec<StepMetrics>,
    window: Option<Window>,
    last_request: Option<f64>,
}

impl std::fmt::Debug for Summary {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Summary")
            .field("ticks", &self.ticks)
            .field("steps", &self.steps.len())
            .finish()
    }
}

impl Summary {
    /// A summary for a loop whose setpoint limits are `min_a..=max_a`.
    pub fn new(min_a: f64, max_a: f64) -> Self {
        Self {
            limits: (min_a, max_a),
            max_winding_c: f64::NEG_INFINITY,
            max_duty: f64::INFINITY,
            ..Self::default()
        }
    }

    /// The same, knowing the duty limit, to tell when the PI is saturated.
    pub fn with_duty_limit(self, max_duty: f64) -> Self {
        Self { max_duty, ..self }
    }

    /// Starts from a known request (a window measured on its own).
    pub fn start_from(&mut self, request_a: f64) {
        self.last_request = Some(request_a);
    }

    /// One control tick, every tick of the run.
    pub fn observe(&mut self, p: &TracePoint, note: &TickNote) {
        self.ticks += 1;
        let i = p.current_a.abs();
        if i > self.peak_current.0 {
            self.peak_current = (i, p.t_s, p.measured_a);
        }
        self.peak_duty = self.peak_duty.max(p.duty.abs());
        // The duty is an f32 in the firmware: at its limit within that precision.
        if p.enabled && p.duty.abs() >= self.max_duty * (1.0 - 1e-6) {
            self.last_saturated_s = Some(p.t_s);
        }
        self.max_winding_c = self.max_winding_c.max(p.winding_c);
        self.fault_bits |= p.fault_bits;
        if p.fault_bits != 0 && self.first_fault.is_none() {
            self.first_fault = Some((p.t_s, p.fault_bits));
        }
        self.sensor_fault_injected |= note.sensor_fault;
        if note.charge_limited {
            self.close(Some(Interruption::ChargeVoltage));
        }
        let last = *self.last_request.get_or_insert(p.request_a);
        if (p.request_a - last).abs() >= MIN_STEP_A && !note.charge_limited {
            self.close(None);
            let (lo, hi) = self.limits;
            let target = |r: f64| r.clamp(lo, hi);
            self.window = Some(Window {
                t0: p.t_s,
                from_a: target(last),
                to_a: target(p.request_a),
                clamped: p.request_a < lo || p.request_a > hi,
                meter: StepMeter::new(),
                ticks: 0,
                tail: VecDeque::new(),
                iae_a_s: 0.0,
                last_t: p.t_s,
                dt: 0.0,
                interrupted: None,
            });
        }
        self.last_request = Some(p.request_a);
        if let Some(w) = &mut self.window {
            let dy = w.to_a - w.from_a;
            if dy.abs() >= MIN_STEP_A {
                w.meter.sample(p.t_s - w.t0, (p.current_a - w.from_a) / dy);
            }
            if w.ticks == 1 {
                w.dt = p.t_s - w.last_t;
            }
            w.last_t = p.t_s;
            w.ticks += 1;
            w.tail.push_back(p.current_a);
            if w.tail.len() > MAX_TAIL_TICKS {
                w.tail.pop_front();
            }
            w.iae_a_s += (w.to_a - p.current_a).abs();
            // On one tick the outside event comes first: a bus dip that trips
            // the undervoltage fault is a bus event.
            let cause = if note.bus_event {
                Some(Interruption::BusEvent)
            } else if note.retuned {
                Some(Interruption::Retune)
            } else if p.fault_bits != 0 {
                Some(Interruption::Fault)
            } else {
                None
            };
            if w.interrupted.is_none() {
                w.interrupted = cause;
            }
        }
    }

    /// Ends the run: the open step, if any, is measured.
    pub fn finish(&mut self) {
        self.close(Some(Interruption::EndOfRun));
    }

    /// Measures the open step; `unsettled` is why, if it has not settled.
    fn close(&mut self, unsettled: Option<Interruption>) {
        let Some(w) = self.window.take() else { return };
        if (w.to_a - w.from_a).abs() < MIN_STEP_A {
            return;
        }
        let Some(m) = w.meter.finish() else { return };
        let tail_n = (w.ticks / 10).clamp(1, MAX_TAIL_TICKS).min(w.tail.len());
        let tail_mean = w.tail.iter().rev().take(tail_n).sum::<f64>() / tail_n as f64;
        let mut interrupted = w.interrupted;
        if interrupted.is_none() && m.settling_time_s.is_none() {
            interrupted = unsettled;
        }
        let dy = w.to_a - w.from_a;
        self.steps.push(StepMetrics {
            at_s: w.t0,
            from_a: w.from_a,
            to_a: w.to_a,
            clamped: w.clamped,
            interrupted,
            rise_time_s: m.rise_time_s,
            overshoot_pct: m.overshoot * 100.0,
            peak_a: w.from_a + m.peak * dy,
            peak_time_s: m.peak_time_s,
            settling_time_s: m.settling_time_s,
            steady_state_error_a: w.to_a - tail_mean,
            iae_a_s: w.iae_a_s * w.dt,
        });
    }
}
