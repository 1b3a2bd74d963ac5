//! The battery (host-sim/src/plant/battery.rs): its R-C pair against the
//! analytic step response, its charge against the analytic charge of a
//! constant current, and a charge through the loop on an INVENTED small
//! cell: constant current, then constant voltage, ended on the taper.

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

/// The time at which a cell charged at `i` A from `start_s` on (relaxed at
/// the start) reaches `v` V at its terminals, by the equivalent circuit's
/// closed form: `OCV(soc0 + i t / Q) + R0 i + R1 i (1 - exp(-t / (R1 C1)))`
/// (bisection on that expression, not on the simulation).
fn reaches_s(p: &BatteryParams, i: f64, v: f64) -> f64 {
    let terminal = |t: f64| {
        let soc = p.initial_soc + i * t / (3600.0 * p.capacity_ah);
        let tau = p.polarisation_ohm * p.polarisation_f;
        p.ocv_v(soc) + p.series_resistance_ohm * i + p.polarisation_ohm * i * (1.0 - (-t / tau).exp())
    };
    let (mut lo, mut hi) = (0.0, 1e5);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if terminal(mid) < v { lo = mid } else { hi = mid }
    }
    lo
}

#[test]
fn the_charger_holds_the_current_then_the_voltage_and_stops_on_the_taper() {
    let s = host_sim::Scenario::load(std::path::Path::new(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../host-sim/scenarios/battery_charge.toml"
    )))
    .unwrap();
    let (trace, report) = host_sim::results::report::run(&s, None, &mut |_| {}).unwrap();
    assert_eq!(report.pass, Some(true));
    let charge = report.charge.clone().expect("a charge report");
    let p = BatteryParams {
        initial_soc: 0.75,
        ..cell()
    };
    // Constant voltage from where the circuit says (the demo starts the
    // charge at 1 ms): within 50 ms, the time the terminal voltage, rising
    // at about 25 mV/s, takes to cross the 1.25 mA rms of sensor noise
    // times R0 and the 1 ms of the limit's period.
    let cv = charge.constant_voltage_from_s.expect("a constant-voltage phase");
    let predicted = 1e-3 + reaches_s(&p, 2.0, 4.2);
    assert!(
        (cv - predicted).abs() < 0.05,
        "constant voltage from {cv} s, the circuit says {predicted} s"
    );
    // Held at 4.2 V (the trace keeps one point in 10 ms) within 5 mV from
    // 0.1 s after the handover to the end, never above it by more.
    let (end_t, why) = charge.ended.clone().expect("the charge ended");
    assert_eq!(why, "the current tapered to its end level");
    let cell_v = trace.readouts.iter().position(|r| r.column == "cell_v").unwrap();
    let soc = trace.readouts.iter().position(|r| r.column == "soc_pct").unwrap();
    for q in trace.points.iter().filter(|q| q.t_s > cv + 0.1 && q.t_s < end_t) {
        assert!(
            (q.load[cell_v] - 4.2).abs() < 5e-3,
            "{} V at {} s",
            q.load[cell_v],
            q.t_s
        );
    }
    assert!(charge.peak_v < 4.2 + 5e-3, "{} V", charge.peak_v);
    // It ends where the circuit says: at the taper current It the open-circuit
    // voltage is V - R0 It - v1, the pair's voltage v1 between R1 It (relaxed
    // to the taper) and R1 I (still holding the constant current's).
    let at_end = trace.points.iter().find(|q| q.t_s >= end_t).unwrap();
    let ocv = p.ocv_v(at_end.load[soc] / 100.0);
    let (it, i) = (0.1, 2.0);
    let (lo, hi) = (4.2 - 0.06 * it - 0.04 * i, 4.2 - 0.06 * it - 0.04 * it);
    assert!(
        ocv > lo - 2e-3 && ocv < hi + 2e-3,
        "OCV {ocv} V at the end, not in [{lo}, {hi}]"
    );
    // And the switch stays off after it.
    assert!(
        trace
            .points
            .iter()
            .filter(|q| q.t_s > end_t + 0.01)
            .all(|q| !q.enabled && q.current_a == 0.0)
    );
}

#[test]
fn a_charge_is_refused_by_its_path_in_words() {
    let demo = include_str!("../host-sim/scenarios/battery_charge.toml");
    let err = |from: &str, to: &str| {
        assert!(demo.contains(from), "{from}");
        host_sim::Scenario::parse(&demo.replace(from, to), "t")
            .unwrap_err()
            .to_string()
    };
    let e = err("taper_current_a = 0.1 ", "taper_current_a = 2.5 ");
    assert!(
        e.starts_with("charge.taper_current_a = 2.5 must be less than charge.current_a"),
        "{e}"
    );
    let e = err("period_s = 1e-3", "period_s = 1.5e-5");
    assert!(
        e.starts_with("charge.period_s = 1.5e-5 must be a whole number of control periods"),
        "{e}"
    );
    let e = err("kp_a_per_v = 2.0 ", "kp_a_per_v = -2.0 ");
    assert!(e.starts_with("charge.kp_a_per_v = -2"), "{e}");
    let e = err("current_a = 2.0\n", "current_a = 5.0\n");
    assert!(
        e.starts_with("charge.current_a = 5 must be at most controller.setpoint.max_a = 3 A"),
        "{e}"
    );
    let e = err(
        "[charge]",
        "[[events]]\nat_s = 0.5\naction = \"set_current\"\ncurrent_a = 1.0\n\n[charge]",
    );
    assert!(
        e.contains(".action = set_current must be left out when [charge] is given"),
        "{e}"
    );
    // A charge needs a cell: the same section on a plain winding.
    let winding = demo.split("[battery]").next().unwrap().to_string()
        + "[winding]\nresistance_ohm = 1.0\ninductance_h = 1e-4\n"
        + demo
            .split("inductance_h = 100e-6           # the charger's inductor")
            .nth(1)
            .unwrap();
    let e = host_sim::Scenario::parse(&winding, "t").unwrap_err().to_string();
    assert!(
        e.starts_with("charge = (given) must be left out unless the load is a [battery]"),
        "{e}"
    );
}

#[test]
fn the_design_takes_the_cell_as_its_series_resistance_and_says_what_the_integral_carries() {
    let text = include_str!("../host-sim/scenarios/battery_charge.toml");
    let params = host_sim::scenario::params::Params::from_toml(text, "cell").unwrap();
    // At the current loop's frequencies the pair's 500 F is a short: the
    // loop sees R0 and the inductor.
    assert_eq!(params.motor.resistance_ohm, 0.06);
    assert_eq!(params.motor.inductance_h, 100e-6);
    let design = host_sim::prepare::design(&params, &Default::default()).unwrap();
    let table = design.table();
    assert!(
        table.contains("winding R = 0.06 ohm, L = 0.0001 H, behind a counter-voltage of 3 to 4.2 V that the integral carries"),
        "{table}"
    );
}

#[test]
fn the_virtual_board_refuses_a_charge_in_words() {
    let s =
        host_sim::Scenario::parse(include_str!("../host-sim/scenarios/battery_charge.toml"), "cell").unwrap();
    let Err(e) = host_sim::bench::virtual_board::VirtualBoard::new(&s, 1e-3) else {
        panic!("a virtual board with a charge");
    };
    let e = e.to_string();
    assert!(
        e.starts_with("charge = (given) must be left out for the virtual board"),
        "{e}"
    );
}

#[test]
fn a_charge_that_starts_with_the_enable_is_taken_on_the_same_tick() {
    // A charge from 0 s beside the enable at 0 s: nothing is refused and
    // the first tick already asks for the charge current.
    let text = include_str!("../host-sim/scenarios/battery_charge.toml")
        .replace("start_s = 1e-3", "start_s = 0.0")
        .replace("duration_s = 60.0", "duration_s = 0.01");
    let s = host_sim::Scenario::parse(&text, "cell").unwrap();
    let (trace, report) = host_sim::results::report::run(&s, None, &mut |_| {}).unwrap();
    assert!(report.log.is_empty(), "{:?}", report.log);
    assert_eq!(trace.points[0].request_a, 2.0);
}
