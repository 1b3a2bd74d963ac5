//! The `[expect]` section: checks a CI job can assert on a run (a trip with
//! its cause and window, no trip, the winding's temperature, the true current,
//! saturation), each failing the verdict and the exit code when it does not
//! hold; and the safety notes every run makes.

use ampwright_tests::edited;
use host_sim::results::report;
use host_sim::scenario::Params;

const JAM: &str = include_str!("../host-sim/scenarios/carousel_jam.toml");
const DEMO: &str = include_str!("../host-sim/scenarios/carousel_step.toml");

fn run(text: &str) -> report::Report {
    let s = Params::from_toml(text, "t").unwrap().build().unwrap();
    report::run(&s, None, &mut |_| {}).unwrap().1
}

/// The jam shortened to 2 s with a 1 s I^2t time constant: it trips near 0.45 s.
fn short_jam(expect: &str) -> String {
    let base = edited(
        JAM,
        &[
            ("duration_s", "duration_s = 2.0"),
            ("trip_class", "thermal_time_constant_s = 1.0"),
            ("trip_after_s", ""),
            ("trip_before_s", ""),
            ("trip =", ""),
        ],
    );
    base.replace("[expect]", &format!("[expect]\n{expect}"))
}

#[test]
fn a_trip_in_its_window_passes_and_out_of_it_fails() {
    let r = run(&short_jam(
        "trip = \"overload\"\ntrip_after_s = 0.2\ntrip_before_s = 1.0",
    ));
    let t = r.first_fault.as_ref().unwrap().1;
    assert!(r.pass == Some(true), "{}", r.table());
    let late = run(&short_jam(&format!(
        "trip = \"overload\"\ntrip_after_s = {}",
        t + 0.01
    )));
    assert_eq!(late.pass, Some(false));
    let wrong = run(&short_jam("trip = \"overcurrent\""));
    assert_eq!(wrong.pass, Some(false));
    assert!(
        wrong
            .table()
            .contains("FAIL trips on over-current: winding overload (I^2t) latched first"),
        "{}",
        wrong.table()
    );
    let none = run(&short_jam("no_trip = true"));
    assert_eq!(none.pass, Some(false));
}

#[test]
fn the_command_exits_1_when_an_expectation_fails() {
    let dir = ampwright_tests::temp_dir("expect-exit");
    let path = dir.join("jam.toml");
    std::fs::write(&path, short_jam("no_trip = true")).unwrap();
    let args = [
        "ampwright",
        "simulate",
        path.to_str().unwrap(),
        "--out",
        dir.to_str().unwrap(),
        "--quiet",
    ];
    assert_eq!(host_sim::cli::main(args.map(Into::into)), 1);
}

#[test]
fn the_winding_temperature_and_the_saturation_are_checked() {
    let hot = run(&short_jam("max_winding_c = 25.5"));
    assert_eq!(hot.pass, Some(false), "{}", hot.table());
    // The demo's steps stay inside the duty range...
    let demo = DEMO.replace(
        "[[events]]\nat_s = 0.0",
        "[expect]\nunsaturated_after_s = 5e-3\n\n[[events]]\nat_s = 0.0",
    );
    assert!(run(&demo).expectations.last().unwrap().pass);
    // ... but held at 1.5 A for 0.3 s the rotor spins up until its back-EMF
    // takes the whole bus, and the duty sits at its limit to the end.
    let spin =
        edited(&demo, &[("duration_s", "duration_s = 0.3")]).replace("current_a = -1.0", "current_a = 1.5");
    let r = run(&spin);
    let c = r.expectations.last().unwrap();
    assert!(
        !c.pass && c.happened.starts_with("it sat at its limit as late as 0.29")
            || c.happened.starts_with("it sat at its limit as late as 0.3"),
        "{c:?}"
    );
}

#[test]
fn a_stuck_sensor_without_a_detector_is_unprotected_and_the_current_runs_away() {
    // The demo without its stuck-reading detector and the reading frozen at
    // 5 ms (at about 1.5 A): when the request reverses at 10 ms the PI winds
    // the duty to its limit, and the true current passes the overcurrent
    // threshold the controller cannot see.
    let text = edited(
        DEMO,
        &[
            ("stuck_band_counts", ""),
            ("stuck_ticks", ""),
            ("stuck_min_duty", ""),
        ],
    ) + "\n[[faults]]\nkind = \"sensor_stuck\"\nstart_s = 5e-3\n";
    let r = run(&text);
    assert!(
        r.unprotected
            .iter()
            .any(|u| u.contains("sensor_stuck fault is unprotected")),
        "{:?}",
        r.unprotected
    );
    let c = r
        .expectations
        .iter()
        .find(|c| c.expected.contains("overcurrent threshold"))
        .unwrap();
    assert!(!c.pass);
    assert!(c.happened.starts_with("true current reached "), "{}", c.happened);
    assert!(
        c.happened.contains("% of 6 A") && c.happened.contains("while the controller read"),
        "{}",
        c.happened
    );
    assert_eq!(r.pass, Some(false));
}

#[test]
fn expectations_are_checked_where_they_are_written() {
    for (bad, field) in [
        ("trip_after_s = 1.0", "expect.trip_after_s"),
        ("trip = \"overload\"\ntrip_after_s = 5.0", "expect.trip_after_s"),
        ("trip = \"overload\"\nno_trip = true", "expect.no_trip"),
        ("max_current_a = -1.0", "expect.max_current_a"),
    ] {
        let e = Params::from_toml(&short_jam(bad), "t").unwrap_err().to_string();
        assert!(e.starts_with(field), "{bad}: {e}");
    }
}
