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
use crate::bench::link::{BoardCapture, BoardLink, Hello, LinkError, capture_csv, fault_names, state_name};
use crate::bench::rotor_current::{RotorFromCurrent, identify_from_current};
use crate::prepare::{self, Overrides};
use crate::results::compare::{Comparison, compare};
use crate::results::metrics::{Check, verdict};
use crate::results::report::Designed;
use crate::scenario::Params;

/// The low level of the identification's square wave as a share of the
/// high one. Above zero, the current never reaches zero, so the voltage a
/// bridge loses in its dead time and diodes keeps one sign and one size
/// through the test, and the fit takes it up as a constant offset instead of
/// reading it as resistance (common practice on the bench: keep the test
/// current one-signed and off zero).
pub const LOW_SHARE: f64 = 0.25;

mod report;

fn stop(s: impl Into<String>) -> LinkError {
    LinkError(s.into())
}

/// How the shaft is during an identification.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Rotor {
    /// Clamped: R and L alone.
    Held,
    /// Free to turn, with this inertia (rotor and load), kg m^2: Ke from the
    /// current as well.
    Free {
        /// kg m^2.
        inertia_kg_m2: f64,
    },
}

/// An identification run on the board.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct IdentifyPlan {
    /// The shaft.
    pub rotor: Rotor,
    /// The current the high level drives through the nominal resistance, A.
    pub test_current_a: f64,
    /// The high level, V (the low level is [`LOW_SHARE`] of it).
    pub volts: f64,
    /// Ticks at each level.
    pub hold_ticks: u32,
    /// Ticks it lasts.
    pub duration_ticks: u32,
    /// The measured current at which the board stops it, A.
    pub current_limit_a: f64,
    /// One tick kept in this many.
    pub decimation: u16,
    /// Samples kept.
    pub samples: u16,
    /// The board's control period, s.
    pub period_s: f64,
}

impl IdentifyPlan {
    /// The plan for a load of nominally `resistance_ohm` and `inductance_h`
    /// (the scenario's values: the identification finds the true ones) on a
    /// board that allows currents up to `max_a`.
    pub fn new(
        resistance_ohm: f64,
        inductance_h: f64,
        hello: &Hello,
        max_a: f64,
        test_current_a: Option<f64>,
        rotor: Rotor,
    ) -> Result<Self, LinkError> {
        let test = test_current_a.unwrap_or(0.5 * max_a);
        if !(test.is_finite() && test > 0.0 && test <= max_a) {
            return Err(stop(format!(
                "--test-current-a = {test} must be above 0 A and at most the board's limit of {max_a} A"
            )));
        }
        let t = hello.period_s;
        let tau = inductance_h / resistance_ohm;
        // Six time constants at each level, eight levels; one tick kept in
        // as few as lets that fit the capture, and each hold a whole number
        // of kept samples (the capture starts with the excitation, so every
        // level change falls on a kept sample).
        let hold = (6.0 * tau / t).round().max(8.0);
        let decimation = (8.0 * hold / hello.capture_capacity as f64)
            .ceil()
            .clamp(1.0, 1000.0) as u16;
        let d = decimation as u32;
        let hold_ticks = (hold as u32).div_ceil(d) * d;
        let samples = ((8 * hold_ticks) / d).clamp(64, hello.capture_capacity as u32) as u16;
        Ok(Self {
            rotor,
            test_current_a: test,
            volts: test * resistance_ohm,
            hold_ticks,
            duration_ticks: samples as u32 * decimation as u32,
            current_limit_a: (1.5 * test).min(max_a.max(test)),
            decimation,
            samples,
            period_s: t,
        })
    }

    /// What will happen, for the operator to read before it does.
    pub fn describe(&self) -> String {
        format!(
            "identification: the loop stays off; the board applies {:.3} V and {:.3} V in turn ({:.2} ms each, open loop, \
             {:.1} ms in all) to the load with its {}; the board stops at {:.3} A measured, and its supervisor stays on",
            LOW_SHARE * self.volts,
            self.volts,
            self.hold_ticks as f64 * self.period_s * 1e3,
            self.duration_ticks as f64 * self.period_s * 1e3,
            match self.rotor {
                Rotor::Held => "rotor held (clamp the shaft)".to_string(),
                Rotor::Free { .. } => "shaft free to turn".to_string(),
            },
            self.current_limit_a
        )
    }
}

/// A verification step on the board.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct StepPlan {
    /// The current before the step, A.
    pub from_a: f64,
    /// After, A.
    pub to_a: f64,
    /// One tick kept in this many.
    pub decimation: u16,
    /// Samples kept.
    pub samples: u16,
    /// The board's control period, s.
    pub period_s: f64,
}

impl StepPlan {
    /// A step from `from_a` to `to_a` whose capture lasts at least
    /// `window_s` (the decimation follows from the capture's capacity).
    pub fn new(from_a: f64, to_a: f64, window_s: f64, hello: &Hello) -> Result<Self, LinkError> {
        for (flag, v) in [("--from-a", from_a), ("--to-a", to_a)] {
            if !v.is_finite() {
                return Err(stop(format!("{flag} = {v} must be a current in amperes")));
            }
        }
        if !(window_s.is_finite() && window_s > 0.0 && window_s <= 60.0) {
            return Err(stop(format!(
                "--window-s = {window_s} must be above 0 s and at most 60 s"
            )));
        }
        let t = hello.period_s;
        let ticks = (window_s / t).ceil();
        let decimation = (ticks / hello.capture_capacity as f64)
            .ceil()
            .clamp(1.0, u16::MAX as f64) as u16;
        let samples = ((ticks / decimation as f64).ceil() as usize).clamp(16, hello.capture_capacity) as u16;
        Ok(Self {
            from_a,
            to_a,
            decimation,
            samples,
            period_s: t,
        })
    }

    /// What will happen.
    pub fn describe(&self) -> String {
        format!(
            "step: the loop is enabled at {} A, asked for {} A while {:.1} ms are captured, then set back to {} A and disabled",
            self.from_a,
            self.to_a,
            self.samples as f64 * self.decimation as f64 * self.period_s * 1e3,
            self.from_a
        )
    }
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
    Ok(Identified {
        csv,
        capture,
        rl,
        rotor,
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
        step_plan,
        step_csv,
        checks,
        comparison,
        params: ident,
        max_error_pct: options.max_error_pct,
    })
}
