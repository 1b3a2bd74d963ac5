//! The bench over the link: what the board commands of `ampwright board` do
//! on a board, step by step, and the guided bring-up that chains them.
//!
//! * Identification ([`IdentifyPlan`]): the capture is armed at once, then an
//!   open-loop voltage square wave between 0 V and the test voltage runs on
//!   the board (its own current limit and supervisor on); the samples taken
//!   while it ran are fitted by the host's full identification
//!   ([`crate::bench::identify`]).
//! * A step ([`StepPlan`]): the loop is enabled at the `from` current, the
//!   capture armed, the `to` current asked, the capture read, the current set
//!   back and the loop disabled.
//! * The bring-up ([`bring_up`]): identify, design from the scenario's spec
//!   with the identified R and L ([`crate::prepare::choose`]), write the
//!   gains, run a verification step, compare it with the simulation of the
//!   identified scenario ([`crate::results::compare`]) and judge the step by
//!   the spec ([`crate::results::metrics::verdict`]).
//!
//! Every CSV written here is a capture `identify` and `compare` read.

use std::io::{Read, Write};
use std::time::Duration;

use pi_core::link::{Request, TriggerWire, WaveformWire};

use crate::bench::capture::{self, Capture, Columns};
use crate::bench::identify::{Estimate, RlFit, identify_rl};
use crate::bench::link::{
    BoardCapture, BoardEstimate, BoardGains, BoardLink, DesignAsk, LinkError, capture_csv, fault_names,
    state_name,
};
use crate::bench::rotor_current::{RotorFromCurrent, identify_from_current};
use crate::prepare::{self, Overrides};
use crate::results::compare::{Comparison, compare};
use crate::results::metrics::{Check, verdict};
use crate::results::report::Designed;
use crate::scenario::Params;

mod plan;
mod report;

pub use plan::{IdentifyPlan, LOW_SHARE, Rotor, StepPlan};

fn stop(s: impl Into<String>) -> LinkError {
    LinkError(s.into())
}

/// What an identification found.
#[derive(Clone, Debug)]
pub struct Identified {
    /// The capture the board took, as a CSV.
    pub csv: String,
    /// The capture as read back.
    pub capture: Capture,
    /// The R-L fit.
    pub rl: RlFit,
    /// With the shaft free: the fit from the current, inertia given.
    pub rotor: Option<RotorFromCurrent>,
    /// The board's own f32 least squares on the same capture, at the host
    /// fit's delay (or why it gave none).
    pub on_board: Result<BoardEstimate, String>,
}

impl Identified {
    /// R, ohm.
    pub fn resistance_ohm(&self) -> Estimate {
        self.rotor
            .as_ref()
            .map_or(self.rl.resistance_ohm, |r| r.resistance_ohm)
    }
    /// L, H.
    pub fn inductance_h(&self) -> Estimate {
        self.rotor
            .as_ref()
            .map_or(self.rl.inductance_h, |r| r.inductance_h)
    }
}

fn ready<P: Read + Write>(link: &mut BoardLink<P>) -> Result<(), LinkError> {
    let s = link.status()?;
    if s.latched != 0 {
        return Err(stop(format!(
            "the board has faults latched ({}); find the cause, then `ampwright board PORT clear`",
            fault_names(s.latched)
        )));
    }
    if s.state != 0 {
        return Err(stop(format!(
            "the board's loop is {}; `ampwright board PORT disable` first",
            state_name(s.state)
        )));
    }
    Ok(())
}

/// Time a capture of `ticks` control ticks may take on the wall clock: the
/// ticks themselves, plus slack for the line.
fn patience(ticks: f64, period_s: f64) -> Duration {
    Duration::from_secs_f64(ticks * period_s * 2.0 + 5.0)
}

/// Runs the identification on the board and fits it.
pub fn identify<P: Read + Write>(
    link: &mut BoardLink<P>,
    plan: &IdentifyPlan,
) -> Result<Identified, LinkError> {
    ready(link)?;
    link.arm(TriggerWire::Excitation, plan.decimation, plan.samples)?;
    link.command(Request::Excite {
        waveform: WaveformWire::Steps {
            low_v: (LOW_SHARE * plan.volts) as f32,
            high_v: plan.volts as f32,
            hold_ticks: plan.hold_ticks,
        },
        duration_ticks: plan.duration_ticks,
        current_limit_a: plan.current_limit_a as f32,
    })?;
    let ticks = plan.duration_ticks as f64;
    let board = link.collect(patience(ticks, plan.period_s), plan.period_s)?;
    let s = link.wait_for(patience(ticks, plan.period_s), "end the excitation", |s| {
        s.state != 3
    })?;
    match s.excitation_end {
        2 => {
            return Err(stop(format!(
                "the current reached the excitation's limit of {:.3} A: the resistance is lower than the scenario's; lower --test-current-a",
                plan.current_limit_a
            )));
        }
        3 => {
            return Err(stop(format!(
                "a fault stopped the excitation ({}); find its cause before identifying",
                fault_names(s.latched)
            )));
        }
        4 => return Err(stop("the excitation was stopped by a disable")),
        _ => {}
    }
    // Only the samples taken while the excitation ran: after it the bridge
    // is off and the voltage is not duty times bus.
    let running = BoardCapture {
        period_s: board.period_s,
        samples: board.samples.iter().copied().filter(|s| s.state == 3).collect(),
    };
    let csv = capture_csv(&running, None);
    let capture =
        capture::read(csv.as_bytes(), "the board's capture", &Columns::default()).map_err(|e| stop(e.0))?;
    let rl = identify_rl(&capture, "the board's capture", None).map_err(|e| stop(e.0))?;
    let rotor = match plan.rotor {
        Rotor::Held => None,
        Rotor::Free { inertia_kg_m2 } => identify_from_current(&capture, &rl, inertia_kg_m2),
    };
    let delay = rl.delay_samples.min(pi_core::link::MAX_DELAY_SAMPLES) as u8;
    let on_board = link.identify_on_board(delay).map_err(|e| e.0);
    Ok(Identified {
        csv,
        capture,
        rl,
        rotor,
        on_board,
    })
}

/// Runs a step on the board; returns its capture as a CSV with the request.
pub fn step<P: Read + Write>(link: &mut BoardLink<P>, plan: &StepPlan) -> Result<String, LinkError> {
    ready(link)?;
    link.command(Request::Enable)?;
    link.command(Request::SetCurrent {
        current_a: plan.from_a as f32,
    })?;
    let settled = (0.05 * plan.from_a.abs()).max(0.02);
    link.wait_for(Duration::from_secs(5), "settle at the starting current", |s| {
        s.state == 1 && ((s.current_a as f64) - plan.from_a).abs() <= settled
    })?;
    link.arm(TriggerWire::Immediate, plan.decimation, plan.samples)?;
    link.command(Request::SetCurrent {
        current_a: plan.to_a as f32,
    })?;
    let ticks = plan.samples as f64 * plan.decimation as f64;
    let board = link.collect(patience(ticks, plan.period_s), plan.period_s);
    // Whatever the capture did, the load is left off.
    let back = link
        .command(Request::SetCurrent {
            current_a: plan.from_a as f32,
        })
        .and_then(|()| link.command(Request::Disable));
    let board = board?;
    back?;
    if let Some(s) = board.samples.iter().find(|s| s.state == 2) {
        let _ = s;
        let st = link.status()?;
        return Err(stop(format!(
            "the loop faulted during the step ({}); the capture is not a step response",
            fault_names(st.latched)
        )));
    }
    Ok(capture_csv(&board, Some((plan.from_a, plan.to_a))))
}

/// Options of the bring-up.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BringUpOptions {
    /// The shaft during identification.
    pub rotor: Rotor,
    /// The identification's test current, A (default: half the board's
    /// limit).
    pub test_current_a: Option<f64>,
    /// The verification step's size, A (default: the test current).
    pub step_a: Option<f64>,
    /// The comparison's tolerance, normalised RMS error in percent.
    pub max_error_pct: f64,
}

/// What the bring-up found and did.
#[derive(Clone, Debug)]
pub struct BringUp {
    /// The identification plan run.
    pub identify_plan: IdentifyPlan,
    /// Its result.
    pub identified: Identified,
    /// The scenario's R and L, ohm and H.
    pub nominal: (f64, f64),
    /// The winding's R (the identified one less the scenario's switches,
    /// [`crate::plant::bridge::BridgeParams::series_resistance_ohm`]) and L,
    /// ohm and H: what the design and the comparison used.
    pub winding: (f64, f64),
    /// The gains designed from the identified load and written.
    pub designed: Designed,
    /// The board's own f32 design with the same method, winding and spec
    /// (or why it gave none).
    pub on_board_gains: Result<BoardGains, String>,
    /// The verification step run.
    pub step_plan: StepPlan,
    /// Its capture (CSV).
    pub step_csv: String,
    /// The spec checked on the captured step.
    pub checks: Vec<Check>,
    /// The captured step against the simulation of the identified scenario.
    pub comparison: Comparison,
    /// The identified scenario's parameters, gains in place.
    pub params: Params,
    /// The comparison's tolerance, percent.
    pub max_error_pct: f64,
}

impl BringUp {
    /// Whether the step met the spec and agreed with the simulation.
    pub fn passed(&self) -> bool {
        !self.checks.is_empty() && self.checks.iter().all(|c| c.pass) && self.within_tolerance()
    }

    /// Whether the comparison is within its tolerance.
    pub fn within_tolerance(&self) -> bool {
        self.comparison.nrmse * 100.0 <= self.max_error_pct
    }
}

/// Identify, design, write the gains, verify, compare. `note` is told each
/// stage as it starts.
pub fn bring_up<P: Read + Write>(
    link: &mut BoardLink<P>,
    params: &Params,
    options: &BringUpOptions,
    note: &mut dyn FnMut(&str),
) -> Result<BringUp, LinkError> {
    let hello = link.hello()?;
    let (_, max_a, _) = link.limits()?;
    let nominal = (params.motor.resistance_ohm, params.motor.inductance_h);
    let identify_plan = IdentifyPlan::new(
        nominal.0,
        nominal.1,
        &hello,
        max_a,
        options.test_current_a,
        options.rotor,
    )?;
    note(&identify_plan.describe());
    let identified = identify(link, &identify_plan)?;
    let (circuit, l) = (identified.resistance_ohm().value, identified.inductance_h().value);
    // The measurement saw the switches in series; the scenario's bridge adds
    // them again in the simulation.
    let switches = params.bridge.series_resistance_ohm();
    let r = circuit - switches;
    if r <= 0.0 {
        return Err(stop(format!(
            "the identified resistance, {circuit:.4} ohm, is not above the scenario's bridge switches ({switches:.4} ohm, two times bridge.rds_on_ohm); check bridge.rds_on_ohm"
        )));
    }
    note(&format!(
        "identified {circuit:.4} ohm through the bridge, so a winding of R = {r:.4} ohm (less {switches:.4} ohm of switches), L = {:.4} mH; designing from the scenario's spec",
        l * 1e3
    ));
    let overrides = Overrides {
        resistance_ohm: Some(r),
        inductance_h: Some(l),
        ..Overrides::default()
    };
    let mut ident = overrides.apply(params).map_err(|e| stop(e.to_string()))?;
    ident.controller.gains = None;
    // The verification step is run as the identification was: a held shaft
    // is simulated held.
    if options.rotor == Rotor::Held {
        ident.motor.locked_rotor = true;
    }
    let designed = prepare::choose(&ident, &Overrides::default()).map_err(|e| stop(e.to_string()))?;
    ident.controller.gains = Some(crate::scenario::params::GainParams {
        kp_v_per_a: designed.kp_v_per_a,
        ti_s: designed.ti_s,
    });
    ident.controller.setpoint_weight = Some(designed.setpoint_weight);
    let on_board_gains = board_design(link, &ident, &designed);
    note(&format!(
        "writing Kp = {:.5} V/A, Ti = {:.5} ms, setpoint weight {} ({} design)",
        designed.kp_v_per_a,
        designed.ti_s * 1e3,
        designed.setpoint_weight,
        designed.method
    ));
    link.command(Request::WriteGains {
        kp_v_per_a: designed.kp_v_per_a as f32,
        ti_s: designed.ti_s as f32,
        setpoint_weight: designed.setpoint_weight as f32,
    })?;
    let step_a = options.step_a.unwrap_or(identify_plan.test_current_a);
    let settle = ident.spec.settling_time_s.unwrap_or(20.0 * l / r);
    let step_plan = StepPlan::new(0.0, step_a, 5.0 * settle, &hello)?;
    note(&step_plan.describe());
    let step_csv = step(link, &step_plan)?;
    let capture = capture::read(step_csv.as_bytes(), "the verification step", &Columns::default())
        .map_err(|e| stop(e.0))?;
    let prepared = prepare::prepare(ident.clone()).map_err(|e| stop(e.to_string()))?;
    let comparison = compare(&capture, capture.setpoint_a.as_deref(), &prepared.scenario)
        .map_err(|e| stop(e.to_string()))?;
    let steps: Vec<_> = comparison.steps.iter().map(|p| p.capture).collect();
    let checks = verdict(&steps, &prepared.scenario.spec);
    Ok(BringUp {
        identify_plan,
        identified,
        nominal,
        winding: (r, l),
        designed,
        on_board_gains,
        step_plan,
        step_csv,
        checks,
        comparison,
        params: ident,
        max_error_pct: options.max_error_pct,
    })
}

/// The same design asked of the board: its f32 code, the host's method,
/// winding, spec and delay (the board's plant is a held R-L without filter).
fn board_design<P: Read + Write>(
    link: &mut BoardLink<P>,
    ident: &Params,
    designed: &Designed,
) -> Result<BoardGains, String> {
    use pi_core::design::Method;
    use pi_core::link::MethodWire;
    let method = match Method::ALL.iter().find(|m| m.name() == designed.method) {
        Some(Method::DirectDiscrete) => MethodWire::DirectDiscrete,
        Some(Method::RootLocus) => MethodWire::RootLocus,
        Some(Method::ModulusOptimum) => MethodWire::ModulusOptimum,
        Some(Method::Cancellation) => MethodWire::Cancellation,
        None => return Err(format!("the board has no {} method", designed.method)),
    };
    let basis = prepare::basis(ident, &Overrides::default()).map_err(|e| e.to_string())?;
    link.design(&DesignAsk {
        method,
        resistance_ohm: basis.resistance_ohm,
        inductance_h: basis.inductance_h,
        settling_time_s: basis.settling_time_s,
        overshoot_pct: basis.overshoot * 100.0,
        rise_time_s: basis.rise_time_s,
        delay_periods: basis.delay_periods,
    })
    .map_err(|e| e.0)
}
