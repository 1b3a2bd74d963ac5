//! The solenoid (host-sim/src/plant/solenoid.rs) against the magnetic-circuit
//! and co-energy relations (Fitzgerald, Kingsley and Umans, "Electric
//! Machinery", chapters 1 and 3; cited from memory) and its own energy
//! balance; an INVENTED 24 V valve actuator.

use host_sim::plant::load::Load;
use host_sim::plant::motor::MotorDrive;
use host_sim::plant::solenoid::{MU0_H_PER_M, Solenoid, SolenoidParams};

/// An invented actuator: 800 turns on a 1 cm^2 pole, 60 mm of iron at
/// mu_r 2000, a 20 g plunger on a 400 N/m spring (free at 5 mm), gaps from
/// 0.1 mm (closed) to 3 mm (open).
fn actuator() -> SolenoidParams {
    SolenoidParams {
        resistance_ohm: 12.0,
        turns: 800.0,
        pole_area_m2: 1e-4,
        iron_path_m: 0.06,
        iron_relative_permeability: 2000.0,
        plunger_mass_kg: 0.02,
        spring_n_per_m: 400.0,
        spring_free_gap_m: 5e-3,
        damping_n_s_per_m: 0.5,
        closed_gap_m: 1e-4,
        open_gap_m: 3e-3,
    }
}

fn drive(v: f64) -> MotorDrive {
    MotorDrive {
        terminal_v: v,
        load_torque_n_m: 0.0,
        held: false,
    }
}

#[test]
fn the_inductance_is_the_gapped_magnetic_circuits() {
    // L = N^2 mu0 A / (g + l / mu_r): one gap in series with the iron.
    let p = actuator();
    for g in [1e-4, 5e-4, 1e-3, 3e-3] {
        let expected = 800.0 * 800.0 * 4e-7 * std::f64::consts::PI * 1e-4 / (g + 0.06 / 2000.0);
        // The SI's mu0 since 2019 differs from 4 pi 1e-7 by 5.5e-10 relative.
        assert!((p.inductance_h(g) - expected).abs() <= 1e-9 * expected, "{g}");
        assert!((MU0_H_PER_M / (4e-7 * std::f64::consts::PI) - 1.0).abs() < 1e-9);
    }
}

#[test]
fn the_force_is_the_co_energys_derivative_at_constant_current() {
    // F = dW'/dx at constant i, W' = L(x) i^2 / 2: against a central
    // difference of the co-energy.
    let p = actuator();
    for (i, g) in [(0.5, 1e-3), (2.0, 2e-4), (1.0, 2.5e-3)] {
        let w = |x: f64| 0.5 * p.inductance_h(x) * i * i;
        let h = 1e-9;
        let numeric = (w(g + h) - w(g - h)) / (2.0 * h);
        let f = p.force_n(i, g);
        assert!(f < 0.0, "the force closes the gap");
        assert!(
            (f - numeric).abs() <= 1e-6 * f.abs(),
            "{i} A at {g} m: {f} N against {numeric} N"
        );
    }
}

#[test]
fn over_a_stroke_the_energy_balances_to_a_millionth() {
    // Energised at 24 V until the plunger has closed and the current has
    // settled, then switched to 0 V (the current decays through the coil's
    // own resistance: a freewheel with no diode drop) until it has reopened:
    // the terminals' energy equals the copper's, the field's and the
    // magnetic force's work on the plunger.
    let mut s = Solenoid::new(actuator()).unwrap();
    let mut closed_at = None;
    for k in 0..4000 {
        s.step(&drive(24.0), 50e-6);
        if closed_at.is_none() && s.gap_m() <= 1e-4 {
            closed_at = Some(k);
        }
    }
    assert!(
        closed_at.is_some(),
        "the plunger never closed (gap {} m)",
        s.gap_m()
    );
    for _ in 0..8000 {
        s.step(&drive(0.0), 50e-6);
    }
    assert!(
        s.gap_m() >= 3e-3 - 1e-12,
        "the plunger did not reopen: {}",
        s.gap_m()
    );
    let e = s.energies();
    let balance = e.supply_j - e.copper_j - s.stored_j() - e.work_j;
    eprintln!(
        "supply {} J, copper {} J, stored {} J, work {} J: off by {balance:e} J",
        e.supply_j,
        e.copper_j,
        s.stored_j(),
        e.work_j
    );
    assert!(e.work_j > 0.0);
    assert!(balance.abs() <= 1e-6 * e.supply_j, "{balance}");
    // And to a millionth of the mechanical work alone.
    assert!(balance.abs() <= 1e-6 * e.work_j, "{balance}");
}

#[test]
fn the_motional_voltage_shows_as_a_dip_in_the_pull_in_current() {
    // Under a held voltage the current rises, dips while the plunger moves
    // (the motional voltage i L' x' opposes it as the gap closes and L
    // rises), then rises again to V / R: the classic pull-in current trace.
    let mut s = Solenoid::new(actuator()).unwrap();
    let mut trace = Vec::new();
    let mut closed = None;
    for k in 0..12_000 {
        trace.push(s.step(&drive(24.0), 50e-6));
        if closed.is_none() && s.gap_m() <= 1e-4 {
            closed = Some(k);
        }
    }
    // The first fall of the current, before the plunger lands.
    let k_fall = trace
        .windows(2)
        .position(|w| w[1] < w[0])
        .expect("the current never falls");
    let closed = closed.expect("the plunger closes");
    assert!(
        k_fall < closed,
        "the dip at {k_fall} comes after the landing at {closed}"
    );
    let dip = trace[k_fall..=closed]
        .iter()
        .cloned()
        .fold(f64::INFINITY, f64::min);
    assert!(dip < trace[k_fall], "{dip} against {}", trace[k_fall]);
    assert!(
        (trace.last().unwrap() - 2.0).abs() < 1e-3,
        "settles at 24 / 12 A: {}",
        trace.last().unwrap()
    );
}

#[test]
fn the_loop_pulls_in_holds_and_releases_the_invented_actuator() {
    // host-sim/scenarios/solenoid_stroke.toml: each step within its spec,
    // and the pull-in's dip visible in the true current (the plunger moved).
    let s = host_sim::Scenario::load(std::path::Path::new(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../host-sim/scenarios/solenoid_stroke.toml"
    )))
    .unwrap();
    let (trace, report) = host_sim::results::report::run(&s, None, &mut |_| {}).unwrap();
    assert_eq!(report.pass, Some(true));
    let pull_in: Vec<f64> = trace
        .points
        .iter()
        .filter(|p| p.t_s > 0.005 && p.t_s < 0.08)
        .map(|p| p.current_a)
        .collect();
    let k_fall = pull_in
        .windows(2)
        .position(|w| w[1] < w[0] - 1e-3)
        .expect("a dip");
    let dip = pull_in[k_fall..].iter().cloned().fold(f64::INFINITY, f64::min);
    assert!(dip < 0.5 * pull_in[k_fall], "{dip} against {}", pull_in[k_fall]);
    assert!(trace.points.iter().all(|p| p.current_a >= 0.0));
}
