//! `ampwright compare`: a capture against the simulation of a scenario, on the
//! invented valve bench test (host-sim/captures), with differences put in on
//! purpose (an offset, a delay, another winding) and read back.

use host_sim::bench::capture::{self, Columns};
use host_sim::prepare;
use host_sim::results::compare::{Drive, compare};

const VALVE_CSV: &str = include_str!("../host-sim/captures/valve_coil_bench.csv");

fn captures_dir() -> std::path::PathBuf {
    std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../host-sim/captures")
}

/// The valve capture with its `current_a` column rewritten by `f(k, column)`.
fn with_current(f: impl Fn(usize, &[f64]) -> f64) -> String {
    let mut lines = VALVE_CSV.lines();
    let header = lines.next().unwrap();
    let col = header.split(',').position(|h| h == "current_a").unwrap();
    let rows: Vec<Vec<String>> = lines
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect();
    let current: Vec<f64> = rows.iter().map(|r| r[col].parse().unwrap()).collect();
    let mut out = format!("{header}\n");
    for (k, mut r) in rows.into_iter().enumerate() {
        r[col] = format!("{:.9e}", f(k, &current));
        out.push_str(&r.join(","));
        out.push('\n');
    }
    out
}

fn compared(text: &str, scenario: &str, open_loop: bool) -> host_sim::results::compare::Comparison {
    let cap = capture::read(text.as_bytes(), "capture.csv", &Columns::default()).unwrap();
    let prepared = prepare::load(&captures_dir().join(scenario)).unwrap();
    let setpoint = if open_loop {
        None
    } else {
        cap.setpoint_a.as_deref()
    };
    compare(&cap, setpoint, &prepared.scenario).unwrap()
}

#[test]
fn a_capture_against_the_scenario_that_made_it_agrees_to_its_rounding() {
    for open_loop in [false, true] {
        let c = compared(VALVE_CSV, "valve_coil_bench.toml", open_loop);
        assert_eq!(
            c.drive,
            if open_loop {
                Drive::Voltage
            } else {
                Drive::Setpoint
            }
        );
        // The CSV keeps 7 significant digits of each current.
        assert!(c.nrmse < 1e-5, "open loop {open_loop}: {}", c.nrmse);
        assert_eq!(c.findings.len(), 1, "{:?}", c.findings);
        assert!(
            c.findings[0].text.contains("looks like noise"),
            "{:?}",
            c.findings
        );
        if !open_loop {
            assert_eq!(c.steps.len(), 3);
            for p in &c.steps {
                assert_eq!(
                    p.capture.settling_time_s.is_some(),
                    p.simulated.settling_time_s.is_some()
                );
                assert!((p.capture.overshoot_pct - p.simulated.overshoot_pct).abs() < 1e-3);
            }
        }
    }
}

#[test]
fn an_offset_put_into_the_capture_is_named_and_measured() {
    let text = with_current(|k, i| i[k] + 0.05);
    let c = compared(&text, "valve_coil_bench.toml", false);
    assert!((c.offset_a - 0.05).abs() < 5e-4, "{}", c.offset_a);
    assert!(c.findings[0].text.starts_with("an offset"), "{:?}", c.findings);
    assert!(c.findings[0].share > 0.95, "{:?}", c.findings[0]);
    assert_eq!(c.lag_s, 0.0);
}

#[test]
fn a_delay_put_into_the_capture_is_named_and_measured() {
    // The current three samples (150 us) late.
    let text = with_current(|k, i| i[k.saturating_sub(3)]);
    let c = compared(&text, "valve_coil_bench.toml", false);
    assert!((c.lag_s - 150e-6).abs() < 0.2 * 50e-6, "{}", c.lag_s);
    assert!(
        c.findings[0].text.starts_with("a delay: the capture lags"),
        "{:?}",
        c.findings
    );
    assert!(c.offset_a.abs() < 1e-3, "{}", c.offset_a);
}

#[test]
fn another_winding_shows_as_different_transients_not_as_offset_or_delay() {
    // The datasheet's winding (16.9 ohm, 0.26 H) against the bench's coil
    // (18.5 ohm, 0.22 H) under the same gains: only the transients differ.
    let c = compared(VALVE_CSV, "valve_coil_datasheet.toml", false);
    assert!(c.nrmse > 0.02, "{}", c.nrmse);
    assert!(
        c.findings[0].text.starts_with("the transients differ"),
        "{:?}",
        c.findings
    );
    assert!(
        c.findings
            .iter()
            .all(|f| !f.text.starts_with("an offset") && !f.text.starts_with("a delay"))
    );
    assert!(
        c.findings.iter().any(|f| f.text.contains("settles slower")),
        "{:?}",
        c.findings
    );
}

#[test]
fn the_command_prints_writes_the_picture_and_exits_by_the_tolerance() {
    let dir = ampwright_tests::temp_dir("compare-cli");
    let cap = captures_dir().join("valve_coil_bench.csv");
    let run = |scenario: &str, extra: &[&str]| {
        let mut args = vec![
            "ampwright".to_string(),
            "compare".into(),
            cap.display().to_string(),
            captures_dir().join(scenario).display().to_string(),
            "--out".into(),
            dir.display().to_string(),
        ];
        args.extend(extra.iter().map(|s| s.to_string()));
        host_sim::cli::main(args.into_iter().map(Into::into))
    };
    assert_eq!(run("valve_coil_bench.toml", &["--max-error-pct", "0.1"]), 0);
    assert_eq!(run("valve_coil_datasheet.toml", &["--max-error-pct", "2"]), 1);
    assert_eq!(run("valve_coil_datasheet.toml", &["--max-error-pct", "10"]), 0);
    assert_eq!(run("valve_coil_datasheet.toml", &[]), 0);
    assert_eq!(run("valve_coil_datasheet.toml", &["--max-error-pct=-1"]), 2);
    assert_eq!(run("no_such.toml", &[]), 2);
    let svg = std::fs::read_to_string(dir.join("valve_coil_bench-compare.svg")).unwrap();
    assert!(svg.contains("captured current") && svg.contains("simulated current"));
    // The JSON for scripts.
    let c = compared(VALVE_CSV, "valve_coil_datasheet.toml", false);
    let json: serde_json::Value = serde_json::from_str(&c.json(Some(2.0))).unwrap();
    assert_eq!(json["drive"], "setpoint");
    assert_eq!(json["within_tolerance"], false);
    assert_eq!(json["steps"].as_array().unwrap().len(), 3);
    assert!(
        json["findings"][0]["text"]
            .as_str()
            .unwrap()
            .starts_with("the transients differ")
    );
}
