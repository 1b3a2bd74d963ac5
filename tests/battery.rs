//! The battery (host-sim/src/plant/battery.rs): its R-C pair against the
//! analytic step response, its charge against the analytic charge of a
//! constant current, and a constant-current charge through the loop on an
//! INVENTED small cell.

use host_sim::plant::battery::{Battery, BatteryParams};
use host_sim::plant::load::Load;
use host_sim::plant::motor::MotorDrive;

/// An invented small lithium-ion cell: 0.05 Ah, 60 mohm, a 40 mohm / 500 F
/// pair (20 s), an open-circuit voltage from 3.0 V empty to 4.2 V full.
fn cell() -> BatteryParams {
    BatteryParams {
        ocv_table: vec![(0.0, 3.0), (0.1, 3.45), (0.5, 3.7), (0.9, 4.0), (1.0, 4.2)],
        capacity_ah: 0.05,
        series_resistance_ohm: 0.06,
        polarisation_ohm: 0.04,
        polarisation_f: 500.0,
        initial_soc: 0.2,
        inductance_h: 100e-6,
    }
}

#[test]
fn the_rc_pair_follows_its_analytic_step_response() {
    // v1(t) = I R1 (1 - exp(-t / (R1 C1))) for a current step I from rest
    // (the first-order RC circuit; any circuits text, from memory).
    let mut b = Battery::new(cell()).unwrap();
    let (i, r1, tau) = (1.5, 0.04, 0.04 * 500.0);
    for k in 1..=600 {
        b.take_current(i, 0.1);
        let t = k as f64 * 0.1;
        let exact = i * r1 * (1.0 - (-t / tau).exp());
        assert!((b.polarisation_v() - exact).abs() < 1e-12, "{t} s");
    }
}

#[test]
fn the_charge_is_the_current_times_the_time() {
    // A constant current I for T: the state of charge rises by I T / Q.
    let mut b = Battery::new(cell()).unwrap();
    for _ in 0..1000 {
        b.take_current(0.5, 0.01);
    }
    let expected = 0.2 + 0.5 * 10.0 / (3600.0 * 0.05);
    assert!(
        (b.soc() - expected).abs() < 1e-12,
        "{} against {expected}",
        b.soc()
    );
}

#[test]
fn under_a_held_voltage_the_current_settles_where_the_circuit_says() {
    // At 3.6 V on a cell at 3.5125 V open (soc 0.2), the current follows
    // (v - ocv - v1) / R0 as the pair charges, lagging it by the inductor's
    // L / R0 (1.7 ms) times its slow drift (about 1e-4 A here).
    let mut b = Battery::new(cell()).unwrap();
    let drive = MotorDrive {
        terminal_v: 3.6,
        load_torque_n_m: 0.0,
        held: false,
    };
    for _ in 0..20_000 {
        b.step(&drive, 50e-6);
    }
    let p = b.params();
    let expected = (3.6 - p.ocv_v(b.soc()) - b.polarisation_v()) / p.series_resistance_ohm;
    assert!(
        (b.current_a() - expected).abs() < 1e-3 * expected.abs(),
        "{} against {expected}",
        b.current_a()
    );
    assert!(b.soc() > 0.2);
}

#[test]
fn the_loop_charges_the_invented_cell_at_constant_current() {
    let s = host_sim::Scenario::load(std::path::Path::new(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../host-sim/scenarios/battery_charge.toml"
    )))
    .unwrap();
    let (trace, report) = host_sim::results::report::run(&s, None, &mut |_| {}).unwrap();
    assert_eq!(report.pass, Some(true));
    // Held at 2 A after the step, the duty rising as the cell's voltage does.
    let late: Vec<_> = trace.points.iter().filter(|p| p.t_s > 0.5).collect();
    let mean = late.iter().map(|p| p.current_a).sum::<f64>() / late.len() as f64;
    assert!((mean - 2.0).abs() < 0.01, "{mean} A");
    let (first, last) = (late.first().unwrap(), late.last().unwrap());
    assert!(last.duty > first.duty, "{} -> {}", first.duty, last.duty);
}
