//! A one-direction drive (`[bridge] topology = "low_side"`): one low-side
//! switch and a freewheel diode, the invented valve of
//! `host-sim/scenarios/valve_low_side.toml`.

use ampwright_tests::edited;
use host_sim::{Scenario, TracePoint};

const VALVE: &str = include_str!("../host-sim/scenarios/valve_low_side.toml");

fn run(text: &str) -> Vec<TracePoint> {
    let s = Scenario::parse(text, "test").unwrap();
    let (trace, report) = host_sim::results::report::run(&s, None, &mut |_| {}).unwrap();
    assert!(report.first_fault.is_none(), "{:?}", report.first_fault);
    trace.points
}

#[test]
fn the_current_never_flows_backward_and_the_demo_meets_its_spec() {
    let s = Scenario::parse(VALVE, "test").unwrap();
    let (trace, report) = host_sim::results::report::run(&s, None, &mut |_| {}).unwrap();
    assert_eq!(report.pass, Some(true));
    let lowest = trace
        .points
        .iter()
        .map(|p| p.current_a)
        .fold(f64::INFINITY, f64::min);
    assert!(lowest >= 0.0, "{lowest} A");
    // The firmware never asks for a reverse drive or a negative voltage.
    assert!(trace.points.iter().all(|p| p.duty >= 0.0 && p.commanded_v >= 0.0));
}

#[test]
fn with_the_switch_off_the_current_decays_through_the_diode_as_the_rl_circuit_says() {
    // Disabled at 45 ms from 0.5 A: the coil discharges into the 0.7 V
    // diode, L di/dt = -Vd - R i, so i(t) = (i0 + Vd/R) exp(-t/tau) - Vd/R,
    // zero at t0 = tau ln(1 + i0 R / Vd) (the first-order RL circuit with a
    // constant source, in any circuits text; from memory), and it stays
    // there: the diode blocks. Noise off, so the switch goes off on one
    // tick's command.
    let text = edited(VALVE, &[("noise_rms_v =", "noise_rms_v = 0.0")]).replace(
        "at_s = 45e-3\naction = \"set_current\"\ncurrent_a = 0.2",
        "at_s = 45e-3\naction = \"disable\"",
    );
    assert!(text.contains("action = \"disable\""));
    let points = run(&text);
    let off = points
        .iter()
        .position(|p| p.t_s > 0.044 && !p.enabled)
        .expect("disabled");
    let i0 = points[off].current_a;
    let zero = points[off..]
        .iter()
        .position(|p| p.current_a == 0.0)
        .map(|k| off + k)
        .expect("reaches zero");
    let (r, l, vd) = (18.5, 0.22, 0.7);
    let tau = l / r;
    let expected = tau * (1.0 + i0 * r / vd).ln();
    let took = points[zero].t_s - points[off].t_s;
    // The switch opens at the next PWM period after the tick that disabled
    // it, and the trace samples once a period: two periods of slack.
    assert!(
        (took - expected).abs() <= 2.0 * 50e-6,
        "{took} s against {expected} s from {i0} A"
    );
    assert!(points[zero..].iter().all(|p| p.current_a == 0.0));
}

#[test]
fn a_negative_setpoint_range_is_refused_in_the_users_terms() {
    let text = edited(VALVE, &[("min_a =", "min_a = -0.5")]);
    let e = Scenario::parse(&text, "test").unwrap_err().to_string();
    assert!(
        e.contains("controller.setpoint.min_a") && e.contains("low_side"),
        "{e}"
    );
    let text = edited(
        VALVE,
        &[("diode_drop_v =", "diode_drop_v = 0.7\ndecay = \"fast\"")],
    );
    let e = Scenario::parse(&text, "test").unwrap_err().to_string();
    assert!(e.contains("bridge.decay"), "{e}");
}

#[test]
fn the_fixed_point_loop_drives_the_valve_one_way_too() {
    let text = edited(
        VALVE,
        &[(
            "min_bus_v =",
            "min_bus_v = 12.0\narithmetic = \"fixed\"\nbus_full_scale_v = 40.0",
        )],
    );
    let points = run(&text);
    assert!(points.iter().all(|p| p.current_a >= 0.0 && p.duty >= 0.0));
    let last = points.last().unwrap();
    assert!(last.current_a < 0.01, "{} A at the end", last.current_a);
}

#[test]
fn a_winding_that_pushes_back_is_held_at_its_setpoint_with_the_counter_voltage_in_the_output() {
    // The valve's drive with its coil replaced by an invented 0.5 ohm,
    // 1 mH winding behind a steady 12 V: the loop must supply E + R i,
    // plus what the switch and the diode lose, and hold 2 A.
    let demo = VALVE.replace(
        "[motor]\nresistance_ohm = 18.5\ninductance_h = 0.22\nlocked_rotor = true",
        "[winding]\nresistance_ohm = 0.5\ninductance_h = 1.0e-3\ncounter_v = 12.0",
    );
    assert!(demo.contains("[winding]"));
    let text = edited(
        &demo,
        &[
            ("noise_rms_v =", "noise_rms_v = 0.0"),
            ("amplifier_gain =", "amplifier_gain = 1.0"),
            ("kp_v_per_a =", "kp_v_per_a = 3.0"),
            ("ti_s =", "ti_s = 2.0e-3"),
            ("max_a =", "max_a = 4.0"),
            ("overcurrent_a =", "overcurrent_a = 6.0"),
            ("current_a = 0.5", "current_a = 2.0"),
        ],
    );
    let points = run(&text);
    // Before the next request at 45 ms: settled at 2 A.
    let held: Vec<&TracePoint> = points.iter().filter(|p| p.t_s > 0.035 && p.t_s < 0.045).collect();
    let mean_a = held.iter().map(|p| p.current_a).sum::<f64>() / held.len() as f64;
    assert!((mean_a - 2.0).abs() < 0.02, "{mean_a} A");
    let mean_v = held.iter().map(|p| p.commanded_v).sum::<f64>() / held.len() as f64;
    let ideal = 12.0 + 0.5 * 2.0;
    // The losses: one switch (0.05 ohm at 2 A) while on, the diode's 0.7 V
    // while off (duty about 13 / 24).
    assert!(
        mean_v > ideal && mean_v < ideal + 0.1 + 0.7,
        "{mean_v} V against {ideal} V"
    );
}

#[test]
fn a_step_down_falls_as_the_diode_lets_it_with_clamping_and_with_the_integral_time_with_back_calculation() {
    // 0.5 A -> 0.2 A at 45 ms. At the output's 0 V floor the switch stays
    // off and the coil discharges into the 0.7 V diode: i + Vd/R decays
    // with L/R, so it is 90 % of the way down, at 0.23 A, after
    // tau ln((0.5 + Vd/R) / (0.23 + Vd/R))
    // (the RL circuit with a constant source; from memory). Clamping
    // anti-windup (integration stops at the floor) keeps the output there
    // until the proportional part no longer outweighs the integral, at
    // 0.2 A + R 0.5 A / Kp = 0.223 A: 90 % of the way down within the
    // setpoint's 0.3 ms slew and two periods of the diode's time. Back-calculation instead holds the integral at
    // Kp times the error while the output is floored, so the output leaves
    // the floor while the error is still large, and from there the current
    // comes down only as fast as the integral unwinds, e / Ti: more than a
    // millisecond later (12.1 ms against 8.3 ms when this was written).
    let (r, l, vd): (f64, f64, f64) = (18.5, 0.22, 0.7);
    // Ninety per cent of the way: 0.23 A.
    let expected = l / r * ((0.5 + vd / r) / (0.23 + vd / r)).ln();
    let reach = |anti_windup: &str| {
        let text = edited(
            VALVE,
            &[
                ("noise_rms_v =", "noise_rms_v = 0.0"),
                ("anti_windup =", &format!("anti_windup = \"{anti_windup}\"")),
            ],
        );
        let points = run(&text);
        points
            .iter()
            .find(|p| p.t_s > 0.045 && p.current_a <= 0.23)
            .map(|p| p.t_s - 0.045)
            .expect("reaches 0.2 A")
    };
    let clamped = reach("clamping");
    assert!(
        clamped > expected - 2.0 * 50e-6 && clamped < expected + 0.3e-3 + 2.0 * 50e-6,
        "clamping: {clamped} s against the diode's {expected} s"
    );
    let tracked = reach("back_calculation");
    assert!(
        tracked > expected + 1e-3,
        "back-calculation: {tracked} s against the diode's {expected} s"
    );
}
