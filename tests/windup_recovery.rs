//! Windup: after a long saturation the recovery must be no worse than a plain step.
//!
//! Bare PI (real `pi-core` code) on an RL load stepped exactly, with the one-sample
//! computation delay of a real firmware. The load and gains are the invented demo
//! values (1.9 ohm, 2.4 mH, Kp = L * 2 pi 800 Hz, Ti = L / R, Ts = 50 us, 22.8 V
//! available).
//!
//! Scenario A (setpoint swing). Baseline: steady at a reachable 11 A, then a step
//! to 2 A. Wound case: 1 s asking for an unreachable 15 A (output pinned at the
//! limit, the current stuck near 12 A), then the same step to 2 A.
//!
//! Scenario B (blocked). Baseline: a 1.5 A step from rest. Wound case: 1.5 A asked
//! for 1 s while an opposing 30 V source, more than the output can give, holds the
//! current negative; then the source vanishes.
//!
//! Overshoot is the largest excursion beyond the target in the direction of
//! travel, as a fraction of the step; a current that does not come within 2 % of
//! the target within 50 ms has failed to recover. The wound case may overshoot at most 1 percentage point more than the baseline
//! (the margin covers the slightly larger step, 10 A against 9 A). A naive PI
//! written here, with no anti-windup, must fail the same criterion, which shows the
//! test can tell the difference.

use host_sim::plant::motor::{Motor, MotorDrive, MotorParams};

/// The winding as a pure RL load (rotor held), with a series source voltage.
struct RlLoad(Motor);

impl RlLoad {
    fn new(r: f64, l: f64) -> Result<Self, host_sim::ModelError> {
        Motor::new(MotorParams::rl(r, l)).map(RlLoad)
    }
    fn current_a(&self) -> f64 {
        self.0.current_a()
    }
    fn step(&mut self, terminal_v: f64, source_v: f64, dt_s: f64) -> f64 {
        let drive = MotorDrive {
            terminal_v: terminal_v - source_v,
            load_torque_n_m: 0.0,
            held: false,
        };
        self.0.step(&drive, dt_s)
    }
}
use pi_core::{AntiWindup, IntegratorRule, OutputLimits, PiConfig, PiController, PiGains};

const R_OHM: f64 = 1.9;
const L_H: f64 = 2.4e-3;
const TS_S: f32 = 50e-6;
const V_MAX: f32 = 22.8;
const MARGIN: f64 = 0.01;

fn kp() -> f32 {
    (L_H * 2.0 * std::f64::consts::PI * 800.0) as f32
}

fn ti() -> f32 {
    (L_H / R_OHM) as f32
}

/// A controller under test: the real one, or the naive baseline.
trait Controller {
    fn update(&mut self, r: f32, y: f32) -> f32;
}

impl Controller for PiController {
    fn update(&mut self, r: f32, y: f32) -> f32 {
        PiController::update(self, r, y)
    }
}

/// Textbook PI with the output clamped and nothing else: the integrator winds up.
struct NaivePi {
    kp: f32,
    ki_ts: f32,
    integ: f32,
}

impl Controller for NaivePi {
    fn update(&mut self, r: f32, y: f32) -> f32 {
        let e = r - y;
        self.integ += self.ki_ts * e;
        (self.kp * e + self.integ).clamp(-V_MAX, V_MAX)
    }
}

/// Runs `ticks` control periods at setpoint `r`; returns the sampled currents.
fn run_with(
    c: &mut dyn Controller,
    load: &mut RlLoad,
    pending: &mut f32,
    r: f32,
    source_v: f64,
    ticks: usize,
) -> Vec<f64> {
    let mut out = Vec::with_capacity(ticks);
    for _ in 0..ticks {
        let y = load.current_a();
        out.push(y);
        let u = c.update(r, y as f32);
        load.step(*pending as f64, source_v, TS_S as f64);
        *pending = u;
    }
    out
}

fn run(c: &mut dyn Controller, load: &mut RlLoad, pending: &mut f32, r: f32, ticks: usize) -> Vec<f64> {
    run_with(c, load, pending, r, 0.0, ticks)
}

/// Recovery overshoot: the largest excursion beyond `target` in the direction of
/// travel from `from`, as a fraction of the step (the usual step-response
/// overshoot and 2 % settling band of Ogata, Modern Control Engineering, the
/// transient-response chapter; section cited from memory). The current must also
/// come within the 2 % settling band of the target inside the window; if it never
/// does the recovery has failed and counts as infinite overshoot.
fn overshoot(trace: &[f64], from: f64, target: f64) -> f64 {
    let step = target - from;
    let dir = step.signum();
    if !trace.iter().any(|i| (i - target).abs() <= 0.02 * step.abs()) {
        return f64::INFINITY;
    }
    let beyond = trace.iter().map(|i| (i - target) * dir).fold(0.0, f64::max);
    beyond / step.abs()
}

/// Scenario A, saturation by an unreachable setpoint: (baseline, wound) overshoot.
fn swing_scenario(make: &dyn Fn() -> Box<dyn Controller>, sign: f32) -> (f64, f64) {
    let ticks_settle = (0.2 / TS_S as f64) as usize;
    let ticks_1s = (1.0 / TS_S as f64) as usize;
    let ticks_after = (0.05 / TS_S as f64) as usize;

    let mut c = make();
    let mut load = RlLoad::new(R_OHM, L_H).unwrap();
    let mut pending = 0.0;
    let settled = run(c.as_mut(), &mut load, &mut pending, 11.0 * sign, ticks_settle);
    let from = *settled.last().unwrap();
    assert!(
        (from - 11.0 * sign as f64).abs() < 0.01,
        "baseline did not settle: {from}"
    );
    let base = run(c.as_mut(), &mut load, &mut pending, 2.0 * sign, ticks_after);
    let base_os = overshoot(&base, from, 2.0 * sign as f64);

    let mut c = make();
    let mut load = RlLoad::new(R_OHM, L_H).unwrap();
    let mut pending = 0.0;
    let pinned = run(c.as_mut(), &mut load, &mut pending, 15.0 * sign, ticks_1s);
    let from = *pinned.last().unwrap();
    let wound = run(c.as_mut(), &mut load, &mut pending, 2.0 * sign, ticks_after);
    let wound_os = overshoot(&wound, from, 2.0 * sign as f64);
    (base_os, wound_os)
}

fn real(aw: AntiWindup, rule: IntegratorRule) -> Box<dyn Controller> {
    let gains = PiGains::from_kp_ti(kp(), ti()).unwrap();
    let cfg = PiConfig::new(gains, TS_S, OutputLimits::symmetric(V_MAX).unwrap())
        .unwrap()
        .with_rule(rule)
        .with_anti_windup(aw)
        .unwrap();
    Box::new(PiController::new(cfg))
}

/// Scenario B, saturation by a disturbance: (baseline, wound) overshoot.
/// Baseline: a 1.5 A step from rest. Wound: 1.5 A asked while an opposing 30 V
/// source (more than the 22.8 V available) holds the current negative for 1 s, then
/// the source vanishes and the current recovers to 1.5 A.
fn blocked_scenario(make: &dyn Fn() -> Box<dyn Controller>, sign: f32) -> (f64, f64) {
    let ticks_1s = (1.0 / TS_S as f64) as usize;
    let ticks_after = (0.05 / TS_S as f64) as usize;
    let target = 1.5 * sign;

    let mut c = make();
    let mut load = RlLoad::new(R_OHM, L_H).unwrap();
    let mut pending = 0.0;
    let base = run(c.as_mut(), &mut load, &mut pending, target, ticks_after);
    let base_os = overshoot(&base, 0.0, target as f64);

    let mut c = make();
    let mut load = RlLoad::new(R_OHM, L_H).unwrap();
    let mut pending = 0.0;
    let held = run_with(
        c.as_mut(),
        &mut load,
        &mut pending,
        target,
        30.0 * sign as f64,
        ticks_1s,
    );
    let from = *held.last().unwrap();
    let wound = run(c.as_mut(), &mut load, &mut pending, target, ticks_after);
    (base_os, overshoot(&wound, from, target as f64))
}

/// Asserts the windup criterion in the chosen scenarios for both signs of travel.
fn check(aw: AntiWindup, rule: IntegratorRule, swing: bool, blocked: bool) {
    for sign in [1.0, -1.0] {
        let make = || real(aw, rule);
        let mut cases = Vec::new();
        if swing {
            cases.push(("setpoint swing", swing_scenario(&make, sign)));
        }
        if blocked {
            cases.push(("blocked by a disturbance", blocked_scenario(&make, sign)));
        }
        for (name, (base, wound)) in cases {
            println!(
                "{aw:?} {rule:?}, {name}, sign {sign}: baseline {:.3} %, after 1 s saturated {:.3} %",
                base * 100.0,
                wound * 100.0
            );
            assert!(
                wound <= base + MARGIN,
                "{aw:?} {rule:?}, {name}, sign {sign}: overshoot after saturation {:.2} % > baseline {:.2} % + {:.0} %",
                wound * 100.0,
                base * 100.0,
                MARGIN * 100.0
            );
        }
    }
}

#[test]
fn default_back_calculation_recovers_like_a_plain_step() {
    let aw = AntiWindup::default();
    check(aw, IntegratorRule::BackwardEuler, true, true);
    check(aw, IntegratorRule::Tustin, true, true);
}

#[test]
fn clamping_recovers_from_a_blocking_disturbance() {
    check(AntiWindup::Clamping, IntegratorRule::BackwardEuler, false, true);
    check(AntiWindup::Clamping, IntegratorRule::Tustin, false, true);
}

/// Known limitation, documented on `AntiWindup`: after a swing from one limit to the
/// other, conditional integration holds a stale integrator and overshoots by a few
/// percent. Pinned here so a change in either direction is noticed.
#[test]
fn clamping_after_a_full_swing_overshoots_by_a_few_percent() {
    let (base, wound) = swing_scenario(&|| real(AntiWindup::Clamping, IntegratorRule::BackwardEuler), 1.0);
    println!(
        "clamping swing: baseline {:.3} %, after {:.3} %",
        base * 100.0,
        wound * 100.0
    );
    assert!(wound > base + MARGIN && wound < 0.05, "{base} {wound}");
}

/// Back-calculation with the tracking time at Ti (the upper end of the published
/// range) winds the integrator to the limit and fails the blocked scenario, which
/// is why the default is shorter.
#[test]
fn tracking_at_ti_fails_the_blocked_scenario() {
    let aw = AntiWindup::BackCalculation {
        tracking_time_s: Some(ti()),
    };
    let (base, wound) = blocked_scenario(&|| real(aw, IntegratorRule::BackwardEuler), 1.0);
    println!(
        "Tt = Ti, blocked: baseline {:.3} %, after {:.3} %",
        base * 100.0,
        wound * 100.0
    );
    assert!(wound > base + MARGIN);
}

#[test]
fn the_criterion_catches_a_winding_integrator() {
    let make = || -> Box<dyn Controller> {
        Box::new(NaivePi {
            kp: kp(),
            ki_ts: kp() / ti() * TS_S,
            integ: 0.0,
        })
    };
    for scenario in [swing_scenario, blocked_scenario] {
        let (base, wound) = scenario(&make, 1.0);
        println!(
            "naive: baseline {:.3} %, after saturation {:.3} %",
            base * 100.0,
            wound * 100.0
        );
        assert!(wound > base + MARGIN, "naive PI: {wound} vs {base}");
    }
}
