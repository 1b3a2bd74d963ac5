//! The scenario file and the `ampwright simulate` command: the demo runs and
//! writes its files, a malformed scenario is one clear error and exit code 2,
//! and no value put into the demo scenario makes the parser or the run panic.

use std::path::PathBuf;

use host_sim::{Scenario, ScenarioError, demo};
use proptest::prelude::*;

fn demo_with(from: &str, to: &str) -> String {
    assert!(
        demo::SCENARIO_TOML.contains(from),
        "the demo scenario has `{from}`"
    );
    demo::SCENARIO_TOML.replacen(from, to, 1)
}

fn error_of(text: &str) -> String {
    match Scenario::parse(text, "t") {
        Ok(_) => panic!("accepted: {text}"),
        Err(e) => e.to_string(),
    }
}

#[test]
fn demo_scenario_parses_and_meets_its_spec() {
    let s = demo::scenario().unwrap();
    let (_, report) = host_sim::results::report::run(&s, None, &mut |_| {}).unwrap();
    assert_eq!(report.steps.len(), 2);
    assert_eq!(report.pass, Some(true), "{}", report.table());
    assert!(report.first_fault.is_none());
}

#[test]
fn every_shipped_scenario_is_valid() {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../host-sim/scenarios");
    let mut n = 0;
    for entry in std::fs::read_dir(dir).unwrap() {
        let path = entry.unwrap().path();
        if path.extension().is_some_and(|e| e == "toml") {
            Scenario::load(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
            n += 1;
        }
    }
    assert!(n >= 2);
}

#[test]
fn readme_shows_the_demo_table_as_it_is() {
    let readme = include_str!("../README.md");
    let s = demo::scenario().unwrap();
    let (_, report) = host_sim::results::report::run(&s, None, &mut |_| {}).unwrap();
    let table = report.table();
    let rows: Vec<&str> = table
        .lines()
        .filter(|l| l.trim_start().starts_with(['0', '1']))
        .collect();
    assert_eq!(rows.len(), 2);
    for row in rows {
        assert!(
            readme.contains(row),
            "README's demo table is out of date; put in:\n{row}"
        );
    }
    assert!(
        readme.contains(demo::SCENARIO_PATH),
        "README names the demo scenario"
    );
}

#[test]
fn malformed_scenarios_name_the_field_in_one_sentence() {
    let cases = [
        (
            demo_with("resistance_ohm = 1.9 ", "resistence_ohm = 1.9 "),
            "unknown field `resistence_ohm`",
        ),
        (
            demo_with("inductance_h = 2.4e-3", "inductance_h = -2.4e-3"),
            "motor.inductance_h = -0.0024",
        ),
        (
            demo_with("mode = \"switching\"", "mode = \"switched\""),
            "unknown choice `switched`",
        ),
        (
            demo_with("overcurrent_a = 6.0", "overcurrent_a = 3.0"),
            "controller.setpoint.max_a = 4 must be less than controller.protection.overcurrent_a",
        ),
        (
            demo_with("control_period_s = 50e-6 ", "control_period_s = 70e-6 "),
            "timing.control_period_s",
        ),
        (
            demo_with("max_duty = 0.95", "max_duty = 1.5"),
            "controller.max_duty = 1.5",
        ),
        (
            demo_with("adc_bits = 12 ", "adc_bits = 20 "),
            "sense.adc_bits = 20",
        ),
        (
            demo_with("dead_time_s = 300e-9", "dead_time_s = 30e-6"),
            "bridge.dead_time_s",
        ),
        (
            demo_with("duration_s = 0.02", "duration_s = nan"),
            "duration_s = NaN",
        ),
        (
            demo_with("current_a = 1.5", "currant_a = 1.5"),
            "unknown field `currant_a`",
        ),
        ("duration_s = 1\n".to_string(), "missing field `bridge`"),
        (
            format!(
                "{}\n[winding]\nresistance_ohm = 1.0\ninductance_h = 1e-3\n",
                demo_with("", "")
            ),
            "winding = (given) must be one of [motor], [winding], [led], [solenoid] and [battery]",
        ),
        ("this is not toml".to_string(), "scenario line 1"),
    ];
    for (text, expected) in cases {
        let msg = error_of(&text);
        assert!(msg.contains(expected), "expected `{expected}` in: {msg}");
        assert!(!msg.contains('\n'), "one line: {msg}");
        // One sentence: a single clause separator before the advice, no trailing stop.
        assert_eq!(msg.matches("; ").count(), 1, "one piece of advice: {msg}");
    }
}

#[test]
fn syntax_errors_point_at_the_line() {
    let text = demo_with("pwm_frequency_hz = 20000.0", "pwm_frequency_hz = \"fast\"");
    match Scenario::parse(&text, "t") {
        Err(ScenarioError::Syntax { line, .. }) => {
            let expected = text.lines().position(|l| l.contains("\"fast\"")).unwrap() + 1;
            assert_eq!(line, expected);
        }
        other => panic!("{other:?}"),
    }
}

#[test]
fn simulate_command_writes_csv_and_svg_and_exits_0() {
    let dir = ampwright_tests::temp_dir("ok");
    let scenario = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../host-sim/scenarios/carousel_step.toml");
    let out = dir.join("out");
    let args = [
        "ampwright",
        "simulate",
        scenario.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--quiet",
    ];
    assert_eq!(host_sim::cli::main(args.map(Into::into)), 0);
    let csv = std::fs::read_to_string(out.join("carousel-step.csv")).unwrap();
    assert!(csv.starts_with(host_sim::sim::trace::CSV_HEADER));
    assert_eq!(csv.lines().count(), 1 + 400, "a header and one row per tick");
    let svg = std::fs::read_to_string(out.join("carousel-step.svg")).unwrap();
    assert!(svg.starts_with("<svg") && svg.trim_end().ends_with("</svg>"));
    assert!(svg.contains("2 % settling band") && svg.contains("polyline"));
}

#[test]
fn simulate_command_exits_2_on_a_malformed_scenario() {
    let dir = ampwright_tests::temp_dir("bad");
    let bad = dir.join("bad.toml");
    std::fs::write(&bad, demo_with("shunt_ohm = 0.010", "shunt_ohm = 0.0")).unwrap();
    let args = [
        "ampwright",
        "simulate",
        bad.to_str().unwrap(),
        "--out",
        dir.to_str().unwrap(),
    ];
    assert_eq!(host_sim::cli::main(args.map(Into::into)), 2);
    assert!(!dir.join("carousel-step.csv").exists(), "nothing written");
    let missing = ["ampwright", "simulate", "/no/such/scenario.toml"];
    assert_eq!(host_sim::cli::main(missing.map(Into::into)), 2);
    assert_eq!(host_sim::cli::main(["ampwright", "simulate"].map(Into::into)), 2);
}

/// Numeric fields of the demo scenario, as `name = value` prefixes.
const NUMERIC_FIELDS: [&str; 16] = [
    "resistance_ohm = ",
    "inductance_h = ",
    "inertia_kg_m2 = ",
    "coulomb_n_m = ",
    "supply_v = ",
    "pwm_frequency_hz = ",
    "dead_time_s = ",
    "shunt_ohm = ",
    "noise_rms_v = ",
    "cutoff_hz = ",
    "sample_phase = ",
    "computation_delay_s = ",
    "kp_v_per_a = ",
    "ti_s = ",
    "slew_a_per_s = ",
    "current_a = ",
];

fn any_value() -> impl Strategy<Value = String> {
    prop_oneof![
        Just("nan".to_string()),
        Just("inf".to_string()),
        Just("-inf".to_string()),
        Just("0".to_string()),
        Just("-1".to_string()),
        Just("1e300".to_string()),
        (-1.0e6f64..1.0e6).prop_map(|v| format!("{v:e}")),
        (0.0f64..1.0).prop_map(|v| format!("{v}")),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig { cases: ampwright_tests::cases(48), ..ProptestConfig::default() })]

    /// Whatever number goes into a field, parsing gives a scenario or an error,
    /// and a scenario that parses runs without panicking or producing NaN.
    #[test]
    fn no_value_makes_the_parser_or_the_run_panic(field in 0..NUMERIC_FIELDS.len(), value in any_value()) {
        let key = NUMERIC_FIELDS[field];
        let start = demo::SCENARIO_TOML.find(key).unwrap() + key.len();
        let end = start + demo::SCENARIO_TOML[start..].find(|c: char| c.is_whitespace()).unwrap();
        let text = format!("{}{}{}", &demo::SCENARIO_TOML[..start], value, &demo::SCENARIO_TOML[end..]);
        if let Ok(mut s) = Scenario::parse(&text, "t") {
            s.duration_s = s.duration_s.min(2e-3);
            let (trace, _) = host_sim::results::report::run(&s, None, &mut |_| {}).unwrap();
            for p in &trace.points {
                prop_assert!(p.current_a.is_finite() && p.duty.is_finite(), "{key}{value}: {p:?}");
            }
        }
    }
}

#[test]
fn the_demo_scenario_has_every_protection_that_applies_on() {
    let s = demo::scenario().unwrap();
    let (_, report) = host_sim::results::report::run(&s, None, &mut |_| {}).unwrap();
    let on: Vec<&str> = report
        .protections
        .iter()
        .filter(|p| p.on)
        .map(|p| p.name)
        .collect();
    for wanted in [
        "I^2t winding overload",
        "stuck current sensor",
        "overcurrent trip",
    ] {
        assert!(on.contains(&wanted), "{wanted} is off in the demo: {on:?}");
    }
    assert!(
        report.protections.iter().all(|p| p.warning.is_none()),
        "{}",
        report.table()
    );
    assert!(!report.table().contains("warning:"), "{}", report.table());
}

#[test]
fn a_protection_that_is_off_is_said_with_the_fields_that_turn_it_on() {
    // The demo without its I^2t and stuck-sensor lines: both listed as OFF and
    // warned about, naming the TOML fields.
    let text: String = demo::SCENARIO_TOML
        .lines()
        .filter(|l| {
            ![
                "rated_a",
                "trip_class",
                "stuck_band_counts",
                "stuck_ticks",
                "stuck_min_duty",
            ]
            .iter()
            .any(|f| l.starts_with(f))
        })
        .collect::<Vec<_>>()
        .join("\n");
    let s = Scenario::parse(&text, "t").unwrap();
    let (_, report) = host_sim::results::report::run(&s, None, &mut |_| {}).unwrap();
    let table = report.table();
    let warnings: Vec<&str> = table.lines().filter(|l| l.starts_with("warning:")).collect();
    assert_eq!(warnings.len(), 2, "{table}");
    assert!(
        warnings[0].contains("I^2t winding overload is off")
            && warnings[0].contains("controller.protection.rated_a")
    );
    assert!(warnings[1].contains("stuck current sensor is off") && warnings[1].contains("stuck_band_counts"));
    assert!(table.contains("OFF I^2t winding overload"), "{table}");
    // The same in the JSON for scripts.
    let json: serde_json::Value = serde_json::from_str(&report.json()).unwrap();
    let off = json["protections"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|p| p["on"] == false)
        .count();
    assert_eq!(off, 3, "I^2t, stuck sensor, speed (no speed reading)");
}

#[test]
fn speed_feedforward_without_a_speed_limit_names_the_field() {
    let text = demo_with(
        "feedforward_back_emf_v_s_per_rad = 0.0",
        "feedforward_back_emf_v_s_per_rad = 0.031",
    )
    .replacen("speed_feedback = false", "speed_feedback = true", 1);
    let e = error_of(&text);
    assert!(e.contains("controller.protection.max_speed_rad_s"), "{e}");
    let ok = text.replacen("# max_speed_rad_s = 1500.0", "max_speed_rad_s = 1500.0", 1);
    let s = Scenario::parse(&ok, "t").unwrap();
    let (_, report) = host_sim::results::report::run(&s, None, &mut |_| {}).unwrap();
    assert!(
        report.table().contains("on  speed plausibility"),
        "{}",
        report.table()
    );
}
